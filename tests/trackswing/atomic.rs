//! Outputs are replaced as a whole: a run killed with SIGKILL at any moment leaves the previous
//! complete set or the new complete set, never a mix or a half-written file.

use super::support::bin;
use std::path::Path;
use std::time::{Duration, Instant};

/// The files a complete set holds, from its manifest; checks they are all there and nothing else.
fn complete_set(out: &Path) -> Vec<String> {
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).expect("a manifest"))
            .unwrap();
    let mut listed: Vec<String> = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["file"].as_str().unwrap().to_string())
        .collect();
    listed.push("manifest.json".into());
    listed.sort();
    let mut present: Vec<String> = std::fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    present.sort();
    assert_eq!(
        listed, present,
        "the folder holds exactly the files its manifest lists"
    );
    listed
}

fn scenarios_of(out: &Path) -> usize {
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    m["scenarios"].as_array().unwrap().len()
}

#[test]
fn a_killed_run_leaves_the_previous_or_the_new_complete_set() {
    let d = tempfile::tempdir().unwrap();
    let case_dir = d.path().join("case");
    let o = bin()
        .args([
            "make-demo",
            "--nx",
            "160",
            "--ny",
            "120",
            "--steps",
            "16",
            "--out",
        ])
        .arg(&case_dir)
        .output()
        .unwrap();
    assert!(o.status.success());
    let case = case_dir.join("case.toml");
    let out = d.path().join("out");
    let run = |cross: &str| {
        let mut c = bin();
        c.arg("run")
            .arg(&case)
            .arg("--out")
            .arg(&out)
            .arg(format!("--cross={cross}"))
            .args(["--along", "0", "-q"]);
        c
    };
    // The previous set: 3 scenarios.
    assert!(run("-10:10:10").status().unwrap().success());
    complete_set(&out);
    assert_eq!(scenarios_of(&out), 3);
    // How long a full replacement run (41 scenarios) takes here.
    let t = Instant::now();
    assert!(run("-100:100:5").status().unwrap().success());
    let full = t.elapsed();
    assert_eq!(scenarios_of(&out), 41);
    assert!(run("-10:10:10").status().unwrap().success());
    let mut seen = std::collections::BTreeSet::new();
    for frac in [0.1, 0.4, 0.7, 0.85, 0.95, 0.99] {
        let mut child = run("-100:100:5").spawn().unwrap();
        std::thread::sleep(Duration::from_secs_f64(full.as_secs_f64() * frac));
        child.kill().unwrap(); // SIGKILL
        child.wait().unwrap();
        complete_set(&out);
        let n = scenarios_of(&out);
        assert!(n == 3 || n == 41, "after a kill at {frac}: {n} scenarios");
        seen.insert(n);
        // Put the previous set back for the next attempt.
        if n == 41 {
            assert!(run("-10:10:10").status().unwrap().success());
        }
    }
    assert!(seen.contains(&3), "some kill must land before the swap");
    // A later run cleans up whatever staging a killed run left.
    assert!(run("-10:10:10").status().unwrap().success());
    let left: Vec<_> = std::fs::read_dir(d.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(left.len(), 2, "only case/ and out/ remain: {left:?}");
}

#[test]
fn refuses_a_foreign_folder_and_an_input_folder() {
    let d = tempfile::tempdir().unwrap();
    let case_dir = d.path().join("case");
    assert!(bin()
        .args([
            "make-demo",
            "--nx",
            "40",
            "--ny",
            "30",
            "--steps",
            "3",
            "--out"
        ])
        .arg(&case_dir)
        .status()
        .unwrap()
        .success());
    let case = case_dir.join("case.toml");
    let foreign = d.path().join("roads");
    std::fs::create_dir(&foreign).unwrap();
    std::fs::write(foreign.join("roads.shp"), b"x").unwrap();
    let o = bin()
        .arg("run")
        .arg(&case)
        .arg("--out")
        .arg(&foreign)
        .args(["--cross", "0"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(4));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("roads") && err.contains("--force"), "{err}");
    assert_eq!(
        std::fs::read(foreign.join("roads.shp")).unwrap(),
        b"x",
        "a refused folder is untouched"
    );
    let o = bin()
        .arg("run")
        .arg(&case)
        .arg("--out")
        .arg(&case_dir)
        .args(["--cross", "0", "--force"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(4));
    assert!(String::from_utf8_lossy(&o.stderr).contains("holds an input"));
    assert!(
        case_dir.join("terrain.tif").is_file(),
        "inputs are never touched"
    );
}

#[test]
fn a_run_too_big_for_memory_is_refused_up_front() {
    let d = tempfile::tempdir().unwrap();
    let case_dir = d.path().join("case");
    assert!(bin()
        .args([
            "make-demo",
            "--nx",
            "300",
            "--ny",
            "200",
            "--steps",
            "2",
            "--out"
        ])
        .arg(&case_dir)
        .status()
        .unwrap()
        .success());
    let t = Instant::now();
    let o = bin()
        .arg("run")
        .arg(case_dir.join("case.toml"))
        .arg("--out")
        .arg(d.path().join("out"))
        // --force: past the scenario-count limit, to the memory check.
        .args(["--cross=-900:900:1", "--along=-500:500:1", "--force"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(3));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("MiB") && err.contains("shards"), "{err}");
    assert!(
        t.elapsed() < Duration::from_secs(30),
        "refused before any work"
    );
    assert!(!d.path().join("out").exists());
}
