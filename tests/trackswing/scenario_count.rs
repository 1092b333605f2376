//! How many scenarios a request makes. Regression for [trust] item 8: `--cross -900:900:1` made
//! 5,403 scenarios, 3 GB and a 10,000-column CSV without a word.

use super::support::bin;

fn demo_case() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

#[test]
fn thousands_of_scenarios_are_refused_with_their_cost_and_a_coarser_step() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    // The demo's along axis is -60:60:60: 1801 × 3 = 5403 scenarios.
    let o = bin()
        .arg("run")
        .arg(demo_case())
        .arg("--cross=-900:900:1")
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    // Exit 2: the remedy is on the command line (README "Exit codes").
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("5403 scenarios requested"), "{err}");
    assert!(err.contains("--force"), "{err}");
    // 128 × 104 cells × 25 steps × 5403 scenarios at 2e7 per s on two threads: 90 s; the
    // totals 13312 × 5403 × 32 bytes = 2.1 GiB. The thread count is the machine's, so only the
    // memory is fixed here.
    assert!(err.contains("and 2.1 GiB"), "{err}");
    // 1800 km in steps of 15 km: 121 × 3 = 363 scenarios.
    assert!(
        err.contains("--cross=-900:900:15 would give 363 scenarios"),
        "{err}"
    );
    assert!(!out.exists(), "nothing may be written");
}

#[test]
fn hundreds_of_scenarios_run_and_warn_in_the_manifest() {
    let d = tempfile::tempdir().unwrap();
    let case_dir = d.path().join("case");
    let o = bin()
        .args([
            "make-demo",
            "--nx",
            "24",
            "--ny",
            "18",
            "--steps",
            "3",
            "--out",
        ])
        .arg(&case_dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = d.path().join("out");
    // 401 scenarios: above the warning, below the refusal.
    let o = bin()
        .arg("run")
        .arg(case_dir.join("case.toml"))
        .args(["--cross=-200:200:1", "--along=0", "--quiet", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let warnings: Vec<&str> = m["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .collect();
    let w = warnings
        .iter()
        .find(|w| w.starts_with("401 scenarios requested (more than 400)"))
        .unwrap_or_else(|| panic!("{warnings:?}"));
    // 400 km in steps of 2 km: 201 scenarios.
    assert!(
        w.contains("--cross=-200:200:2 would give 201 scenarios"),
        "{w}"
    );
    assert_eq!(m["scenarios"].as_array().unwrap().len(), 401);
}

#[test]
fn force_runs_more_than_the_limit() {
    let d = tempfile::tempdir().unwrap();
    let case_dir = d.path().join("case");
    let o = bin()
        .args([
            "make-demo",
            "--nx",
            "12",
            "--ny",
            "10",
            "--steps",
            "2",
            "--out",
        ])
        .arg(&case_dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = d.path().join("out");
    let run = |force: bool| {
        let mut c = bin();
        c.arg("run")
            .arg(case_dir.join("case.toml"))
            .args(["--cross=-500:500:0.5", "--along=0", "--quiet", "--out"])
            .arg(&out);
        if force {
            c.arg("--force");
        }
        c.output().unwrap()
    };
    let refused = run(false);
    let err = String::from_utf8_lossy(&refused.stderr);
    assert_eq!(refused.status.code(), Some(2), "{err}");
    assert!(err.contains("2001 scenarios requested"), "{err}");
    let forced = run(true);
    assert!(
        forced.status.success(),
        "{}",
        String::from_utf8_lossy(&forced.stderr)
    );
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(m["scenarios"].as_array().unwrap().len(), 2001);
}
