//! Shards: a run split with `run --shard K/N` and put together with `merge` gives the layers of
//! the run in one piece, file for file; a merge refuses shards that do not belong together and
//! writes nothing then.

use super::support::bin;
use std::path::{Path, PathBuf};

fn demo_case() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

/// Offsets that exercise every axis the engine treats per scenario: the timing offsets sample
/// between steps, the warm biases take their own sub-cloud memo.
const AXES: [&str; 4] = [
    "--cross=-60:60:30",
    "--along=-40,0",
    "--timing=-1,0,1",
    "--warm-bias=0,1",
];

/// Runs the binary with `args` then `paths`.
fn run_with(args: &[String], paths: &[&Path]) -> std::process::Output {
    bin().args(args).args(paths).output().unwrap()
}

fn run_ok(args: &[String], paths: &[&Path]) -> String {
    let o = run_with(args, paths);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{args:?}: {err}");
    String::from_utf8(o.stdout).unwrap()
}

fn run_fails(args: &[String], paths: &[&Path], code: i32) -> String {
    let o = run_with(args, paths);
    let err = String::from_utf8(o.stderr).unwrap();
    assert_eq!(o.status.code(), Some(code), "{args:?}: {err}");
    err
}

/// `VERB CASE --out OUT` with the axes, then `more`.
fn with_out(verb: &str, out: &Path, more: &[&str]) -> Vec<String> {
    let mut v = vec![
        verb.to_string(),
        demo_case().display().to_string(),
        "--out".into(),
        out.display().to_string(),
    ];
    v.extend(AXES.iter().chain(more).map(|a| a.to_string()));
    v
}

fn manifest_without_run_facts(p: &Path) -> serde_json::Value {
    let mut m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let o = m.as_object_mut().unwrap();
    o.remove("written_utc");
    o.remove("merged_from_shards");
    m
}

#[test]
fn shards_merge_into_the_layers_of_one_run() {
    let d = tempfile::tempdir().unwrap();
    let whole = d.path().join("whole");
    let split = d.path().join("split");
    run_ok(&with_out("run", &whole, &["--quiet"]), &[]);
    // 4 shards of 60 scenarios (5 cross × 2 along × 3 timing × 2 biases): 15 each; the shards' files go beside the output folder.
    for k in 1..=4 {
        let shard = format!("{k}/4");
        run_ok(
            &with_out("run", &split, &["--shard", &shard, "--quiet"]),
            &[],
        );
    }
    let folder = d.path().join("split.shards");
    let mut names: Vec<String> = std::fs::read_dir(&folder)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "shard-1-of-4.bin",
            "shard-2-of-4.bin",
            "shard-3-of-4.bin",
            "shard-4-of-4.bin"
        ]
    );
    assert!(!split.exists(), "a shard run writes no layers");
    let said = run_ok(&with_out("merge", &split, &[]), &[]);
    assert!(
        said.contains("60 scenarios") && said.contains("merged from 4 shard files"),
        "{said}"
    );
    let mut compared = 0;
    for e in std::fs::read_dir(&whole).unwrap() {
        let name = e.unwrap().file_name();
        let (a, b) = (whole.join(&name), split.join(&name));
        if name == "manifest.json" {
            assert_eq!(
                manifest_without_run_facts(&a),
                manifest_without_run_facts(&b)
            );
            let m: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(&b).unwrap()).unwrap();
            let listed = m["merged_from_shards"].as_array().unwrap();
            assert_eq!(listed.len(), 4);
            assert_eq!(listed[1]["shard"], "2/4");
        } else {
            assert!(
                std::fs::read(&a).unwrap() == std::fs::read(&b).unwrap(),
                "{} differs between the run in one piece and the merged shards",
                name.to_string_lossy()
            );
        }
        compared += 1;
    }
    assert!(compared > 20, "{compared} files");
}

#[test]
fn merge_refuses_shards_that_do_not_belong_together() {
    let d = tempfile::tempdir().unwrap();
    let split = d.path().join("split");
    for k in 1..=3 {
        let shard = format!("{k}/3");
        run_ok(
            &with_out("run", &split, &["--shard", &shard, "--quiet"]),
            &[],
        );
    }
    let folder = d.path().join("split.shards");
    let part = |k: usize| folder.join(format!("shard-{k}-of-3.bin"));
    let out = d.path().join("merged");
    let merge = with_out("merge", &out, &["--shards"]);

    // One shard missing: the scenarios not held are named.
    let e = run_fails(&merge, &[&part(1), &part(3)], 3);
    assert!(
        e.contains("hold 40 of 60 scenarios") && e.contains("missing: cross"),
        "{e}"
    );
    // One shard twice.
    let e = run_fails(&merge, &[&part(1), &part(2), &part(2), &part(3)], 3);
    assert!(
        e.contains("is in both") && e.contains("shard-2-of-3.bin"),
        "{e}"
    );
    // Shards of other settings: the part of the key that differs is named.
    let mut other = merge.clone();
    other.insert(4, "--dry-air".into());
    let e = run_fails(&other, &[&part(1), &part(2), &part(3)], 3);
    assert!(
        e.contains("shard-1-of-3.bin")
            && e.contains("methods differ")
            && e.contains("dry_air: shard false, case true"),
        "{e}"
    );
    let mut fewer = merge.clone();
    fewer[4] = "--cross=-60:60:60".into();
    let e = run_fails(&fewer, &[&part(1), &part(2), &part(3)], 3);
    assert!(
        e.contains("scenarios differ") && e.contains("the shard lists 60 and the case 36"),
        "{e}"
    );
    // Damaged: one byte of the body changed; cut short; not a shard file at all.
    let bad = d.path().join("bad.bin");
    let mut bytes = std::fs::read(part(2)).unwrap();
    bytes[5000] ^= 1;
    std::fs::write(&bad, &bytes).unwrap();
    let e = run_fails(&merge, &[&part(1), &bad, &part(3)], 3);
    assert!(e.contains("bad.bin") && e.contains("CRC-32"), "{e}");
    let cut = d.path().join("cut.bin");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    let e = run_fails(&merge, &[&part(1), &cut, &part(3)], 3);
    assert!(e.contains("cut.bin") && e.contains("cut short"), "{e}");
    let e = run_fails(&merge, &[&part(1), &demo_case(), &part(3)], 3);
    assert!(
        e.contains("case.toml") && e.contains("not a trackswing shard file"),
        "{e}"
    );
    // A model input changed since the shards ran.
    let copy = d.path().join("copy");
    std::fs::create_dir(&copy).unwrap();
    let grid = demo_case().parent().unwrap().to_path_buf();
    copy_tree(&grid, &copy);
    let steps = copy.join("fields");
    let first = std::fs::read_dir(&steps)
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    let mut b = std::fs::read(&first).unwrap();
    let last = b.len() - 1;
    b[last] ^= 0x55;
    std::fs::write(&first, b).unwrap();
    let case = copy.join("case.toml");
    let mut c: Vec<String> = [
        "merge",
        case.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]
    .iter()
    .chain(&AXES)
    .map(|a| a.to_string())
    .collect();
    c.push("--shards".into());
    let e = run_fails(&c, &[&part(1), &part(2), &part(3)], 3);
    assert!(e.contains("model inputs differ"), "{e}");
    assert!(!out.exists(), "a refused merge writes nothing");
    // A bad shard argument.
    // A bad option value is a bad command line (README: exit code 2).
    let e = run_fails(&with_out("run", &split, &["--shard", "4/3"]), &[], 2);
    assert!(
        e.contains("--shard '4/3'") && e.contains("1 ≤ K ≤ N"),
        "{e}"
    );
    // A shard beyond the number of scenarios would hold none.
    let e = run_fails(&with_out("run", &split, &["--shard", "61/64"]), &[], 3);
    assert!(
        e.contains("shard 61/64 holds no scenario") && e.contains("at most 60 shards"),
        "{e}"
    );
    // A merge with no shard files names the folder it looked in.
    let e = run_fails(&with_out("merge", &d.path().join("none"), &[]), &[], 3);
    assert!(e.contains("none.shards"), "{e}");
}

fn copy_tree(from: &Path, to: &Path) {
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        let dest = to.join(p.file_name().unwrap());
        if p.is_dir() {
            std::fs::create_dir(&dest).unwrap();
            copy_tree(&p, &dest);
        } else {
            std::fs::copy(&p, &dest).unwrap();
        }
    }
}

#[test]
fn a_shard_never_replaces_a_file_it_did_not_write() {
    let d = tempfile::tempdir().unwrap();
    let folder = d.path().join("split.shards");
    std::fs::create_dir(&folder).unwrap();
    let mine = folder.join("shard-1-of-2.bin");
    std::fs::write(&mine, "someone's notes\n").unwrap();
    let split = d.path().join("split");
    let e = run_fails(
        &with_out("run", &split, &["--shard", "1/2", "--quiet"]),
        &[],
        4,
    );
    assert!(
        e.contains("shard-1-of-2.bin") && e.contains("not a shard file"),
        "{e}"
    );
    assert_eq!(std::fs::read_to_string(&mine).unwrap(), "someone's notes\n");
    let left: Vec<_> = std::fs::read_dir(&folder).unwrap().collect();
    assert_eq!(left.len(), 1, "no partial file left behind");
}

/// A case of two members (the demo's files under two names, the second's weight 3) with two
/// snow-ratio methods: 4 member × method parts of 5 offsets each.
fn members_case(dir: &Path) -> PathBuf {
    let g = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid");
    let mut text = format!(
        "title = \"two names for one model run (invented demo storm)\"\ntowns = \"{}\"\n",
        g.join("towns.csv").display()
    );
    for (name, weight) in [("a", 1), ("b", 3)] {
        text.push_str(&format!(
            "[[member]]\nname = \"{name}\"\nweight = {weight}\nterrain = \"{}\"\nsteps = \"{}\"\ntrack = \"{}\"\n",
            g.join("terrain.tif").display(),
            g.join("fields/step_*.tif").display(),
            g.join("track.csv").display()
        ));
    }
    text.push_str("[offsets]\ncross_km = \"-40:40:20\"\nalong_km = \"0\"\n[methods]\nsnow_ratio = \"max-column-temperature,growth-zone\"\n");
    let p = dir.join("members.toml");
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn a_several_member_case_merges_from_shards_by_member_and_method() {
    let d = tempfile::tempdir().unwrap();
    let case = members_case(d.path());
    let args = |verb: &str, out: &Path, more: &[&str]| -> Vec<String> {
        let mut v = vec![
            verb.to_string(),
            case.display().to_string(),
            "--out".into(),
            out.display().to_string(),
            "--quiet".into(),
        ];
        v.extend(more.iter().map(|a| a.to_string()));
        v
    };
    let whole = d.path().join("whole");
    run_ok(&args("run", &whole, &[]), &[]);
    // 3 shards for 4 parts: whole parts (1 and 4, 2, 3); 7 shards: parts 1–3 split in two,
    // part 4 alone.
    for (n, files) in [(3, 4), (7, 7)] {
        let split = d.path().join(format!("split{n}"));
        for k in 1..=n {
            run_ok(&args("run", &split, &["--shard", &format!("{k}/{n}")]), &[]);
        }
        let folder = d.path().join(format!("split{n}.shards"));
        let mut names: Vec<String> = std::fs::read_dir(&folder)
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(names.len(), files, "{names:?}");
        if n == 3 {
            assert_eq!(
                names,
                [
                    "shard-1-of-3-group-1.bin",
                    "shard-1-of-3-group-4.bin",
                    "shard-2-of-3-group-2.bin",
                    "shard-3-of-3-group-3.bin"
                ]
            );
        }
        run_ok(&args("merge", &split, &[]), &[]);
        let mut compared = 0;
        for e in std::fs::read_dir(&whole).unwrap() {
            let name = e.unwrap().file_name();
            let (a, b) = (whole.join(&name), split.join(&name));
            if name == "manifest.json" {
                assert_eq!(
                    manifest_without_run_facts(&a),
                    manifest_without_run_facts(&b)
                );
                let m: serde_json::Value =
                    serde_json::from_str(&std::fs::read_to_string(&b).unwrap()).unwrap();
                assert_eq!(m["merged_from_shards"].as_array().unwrap().len(), files);
            } else {
                assert!(
                    std::fs::read(&a).unwrap() == std::fs::read(&b).unwrap(),
                    "{} differs between the run in one piece and {n} merged shards",
                    name.to_string_lossy()
                );
            }
            compared += 1;
        }
        assert!(compared > 30, "{compared} files");
    }
    // A merge missing one part's files says which member and methods are missing.
    let folder = d.path().join("split3.shards");
    let err = run_fails(
        &args("merge", &d.path().join("partial"), &["--shards"]),
        &[
            &folder.join("shard-1-of-3-group-1.bin"),
            &folder.join("shard-1-of-3-group-4.bin"),
            &folder.join("shard-3-of-3-group-3.bin"),
        ],
        3,
    );
    assert!(
        err.contains("member 'a'") && err.contains("growth-zone"),
        "{err}"
    );
}
