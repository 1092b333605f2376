//! The binary as a user meets it: exit codes of bad option values, parser messages that point at
//! the right column, where `demo` finds its case, and what the vector layers and map captions
//! say. Regression tests for [trust] item 9 (each fails on the code before its fix).

use super::support::{bin, copy_dir};
use std::path::Path;

fn demo_case() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

/// Regression, [trust] item 9: a bad option value is a bad command line, exit code 2 as README
/// documents ("2 bad command line; 3 bad input"), not 3; a bad value in the case file stays 3
/// and names the file and the field.
#[test]
fn bad_option_values_exit_2_and_bad_case_values_exit_3() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    let case = demo_case();
    for (flag, value) in [
        ("--units", "furlongs"),
        ("--precip-type", "guesswork"),
        ("--snow-ratio", "guesswork"),
        ("--raster-type", "int7"),
        ("--cross", "abc"),
        ("--timing", "1:"),
        ("--cross-sigma", "-5"),
        ("--shard", "5/2"),
    ] {
        let o = bin()
            .arg("run")
            .arg(&case)
            .arg("--out")
            .arg(&out)
            .arg(format!("{flag}={value}"))
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{flag}={value}: {err}");
        assert!(err.contains(flag.trim_start_matches('-')), "{flag}: {err}");
        assert!(!out.exists(), "{flag}: nothing may be written");
    }
    let grid = d.path().join("grid");
    copy_dir(case.parent().unwrap(), &grid);
    let bad = grid.join("bad.toml");
    let text = std::fs::read_to_string(&case)
        .unwrap()
        .replace("units = \"metric\"", "units = \"furlongs\"");
    std::fs::write(&bad, text).unwrap();
    let o = bin().arg("run").arg(&bad).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("bad.toml") && err.contains("output.units"),
        "{err}"
    );
}

/// Regression, [trust] item 9: the TOML parser's message is a snippet over several lines whose
/// caret sits under the offending column; joined onto one line the caret pointed elsewhere.
#[test]
fn toml_errors_keep_their_lines_and_the_caret_under_the_column() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("case.toml");
    let bad_line = "cross_km = 5 5";
    std::fs::write(&p, format!("title = \"x\"\n[offsets]\n{bad_line}\n")).unwrap();
    let o = bin().arg("run").arg(&p).output().unwrap();
    assert_eq!(o.status.code(), Some(3));
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    let lines: Vec<&str> = err.lines().collect();
    let at = lines
        .iter()
        .position(|l| l.ends_with(bad_line))
        .unwrap_or_else(|| panic!("the offending line is not on a line of its own: {err}"));
    let src_col = lines[at].len() - bad_line.len();
    let caret = lines[at + 1]
        .find('^')
        .unwrap_or_else(|| panic!("no caret under the line: {err}"));
    // The parser reports line 3, column 12 (1-based): the second `5`, which starts a value it
    // cannot read.
    assert!(err.contains("line 3, column 12"), "{err}");
    assert_eq!(caret - src_col, 11, "{err}");
}

/// Regression, [trust] item 9: `demo` outside a checkout must not read the source tree the
/// binary was built from; it looks in the current folder and beside the binary and says where it
/// looked when the case is in neither.
#[test]
fn demo_is_found_beside_the_binary_or_named_where_it_was_looked_for() {
    let d = tempfile::tempdir().unwrap();
    let bin_dir = d.path().join("tool").join("bin");
    std::fs::create_dir_all(&bin_dir).unwrap();
    let exe = bin_dir.join("trackswing");
    std::fs::copy(env!("CARGO_BIN_EXE_trackswing"), &exe).unwrap();
    let elsewhere = d.path().join("elsewhere");
    std::fs::create_dir_all(&elsewhere).unwrap();
    let o = std::process::Command::new(&exe)
        .arg("demo")
        .arg("--quiet")
        .current_dir(&elsewhere)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(err.contains("demo case was not found"), "{err}");
    assert!(err.contains(&*bin_dir.to_string_lossy()), "{err}");
    assert!(
        !elsewhere.join("demo-out").exists(),
        "nothing is written without a case"
    );
    // An installed layout: the demo folder beside the binary's folder.
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid");
    copy_dir(&src, &d.path().join("tool").join("demo-grid"));
    let o = std::process::Command::new(&exe)
        .args(["demo", "--quiet", "--cross=0,20", "--along=0"])
        .current_dir(&elsewhere)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(elsewhere.join("demo-out/manifest.json").is_file());
}

/// Regression, [trust] item 9: every scenario axis is a numeric property of the vector layers
/// (before, timing, intensity and warm bias were only inside the `label` string), equal to the
/// manifest's entry for the same scenario. RFC 7946 §3.2: `properties` is a JSON object; numbers
/// stay JSON numbers so a GIS can filter on them.
#[test]
fn vector_layers_carry_every_axis_as_a_numeric_property() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    let o = bin()
        .arg("run")
        .arg(demo_case())
        .args([
            "--quiet",
            "--cross=-20,0,20",
            "--along=0",
            "--timing=-2,0",
            "--warm-bias=0,1",
            "--intensity=1,1.2",
        ])
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let read = |f: &str| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(out.join(f)).unwrap()).unwrap()
    };
    let m = read("manifest.json");
    let scenarios = m["scenarios"].as_array().unwrap();
    assert_eq!(scenarios.len(), 3 * 2 * 2 * 2);
    for layer in ["rain_snow_lines.geojson", "transition_zones.geojson"] {
        let g = read(layer);
        let features = g["features"].as_array().unwrap();
        assert_eq!(features.len(), scenarios.len(), "{layer}");
        for f in features {
            let p = &f["properties"];
            let s = &scenarios[p["scenario"].as_u64().unwrap() as usize];
            for axis in [
                "cross_km",
                "along_km",
                "timing_h",
                "intensity",
                "warm_bias_k",
            ] {
                assert!(p[axis].is_number(), "{layer}: {axis} is not a number: {p}");
                assert_eq!(p[axis], s[axis], "{layer}: {axis}");
            }
            assert_eq!(p["baseline"], s["baseline"], "{layer}");
        }
    }
    // The map captions name each map's own unit: the flip-distance map is in km of track
    // shift, not in snowfall units.
    let files = m["files"].as_array().unwrap();
    let desc = |name: &str| {
        files
            .iter()
            .find(|f| f["file"] == name)
            .and_then(|f| f["description"].as_str())
            .unwrap_or_else(|| panic!("{name} not in the manifest"))
            .to_string()
    };
    let flip = desc("map_flip_distance.png");
    assert!(
        flip.contains("track shift in km") && !flip.contains("snowfall in"),
        "{flip}"
    );
    assert!(desc("map_baseline.png").contains("snowfall in cm"));
}
