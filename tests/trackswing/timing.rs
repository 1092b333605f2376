//! The timing axis over several model steps, both ways, on the demo: it runs, and a storm that
//! comes a whole number of steps later or earlier gives exactly what the model's own steps give
//! when run shifted by hand. Regression for [trust] item 1 (`--timing 3` panicked with "Out of
//! bounds access": the first step was forgotten while later output steps still needed it).

use super::support::bin;
use std::path::{Path, PathBuf};
use trackswing::geotiff::read_geotiff;

fn demo_grid() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid")
}

/// A copy of the demo case keeping only the model steps `keep` (indices of `fields/step_NNN.tif`).
fn demo_with_steps(dir: &Path, keep: std::ops::Range<usize>) -> PathBuf {
    let src = demo_grid();
    std::fs::create_dir_all(dir.join("fields")).unwrap();
    for f in ["case.toml", "terrain.tif", "towns.csv", "track.csv"] {
        std::fs::copy(src.join(f), dir.join(f)).unwrap();
    }
    for k in keep {
        let name = format!("step_{k:03}.tif");
        std::fs::copy(
            src.join("fields").join(&name),
            dir.join("fields").join(&name),
        )
        .unwrap();
    }
    dir.join("case.toml")
}

fn run(case: &Path, out: &Path, args: &[&str]) -> serde_json::Value {
    let o = bin()
        .arg("run")
        .arg(case)
        .arg("--out")
        .arg(out)
        .args(["--quiet", "--cross=0", "--along=0"])
        .args(args)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{args:?}: exit {:?}: {}",
        o.status.code(),
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap()
}

/// Band (0-based) of the scenario with timing `h` in the per-scenario stack.
fn band_of(m: &serde_json::Value, h: f64) -> usize {
    m["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["timing_h"].as_f64() == Some(h))
        .and_then(|s| s["band"].as_u64())
        .unwrap_or_else(|| panic!("no scenario with timing {h} h")) as usize
        - 1
}

#[test]
fn whole_step_timing_offsets_equal_the_model_steps_run_shifted() {
    let d = tempfile::tempdir().unwrap();
    let n = std::fs::read_dir(demo_grid().join("fields"))
        .unwrap()
        .count();
    assert_eq!(n, 25, "the demo has 25 steps of 2 h");
    // Both directions, one and more than one model step (2 h), and offsets between steps.
    let m = run(
        &demo_grid().join("case.toml"),
        &d.path().join("all"),
        &["--timing=-7,-4,-2,0,2,3,4,7"],
    );
    let stack = read_geotiff(&d.path().join("all/snowfall_by_scenario.tif")).unwrap();
    // Later by 4 h (two steps): output step k takes model step k − 2, and the first two output
    // steps sample before the model starts and count nothing (README, "Running your own case").
    // That is the model's steps 0…22 run as they are.
    let later = run(
        &demo_with_steps(&d.path().join("first23"), 0..23),
        &d.path().join("first23-out"),
        &[],
    );
    let earlier = run(
        &demo_with_steps(&d.path().join("last23"), 2..25),
        &d.path().join("last23-out"),
        &[],
    );
    for (h, case_m, dir) in [(4.0, &later, "first23-out"), (-4.0, &earlier, "last23-out")] {
        assert_eq!(case_m["scenarios"].as_array().unwrap().len(), 1);
        let by_hand = read_geotiff(&d.path().join(dir).join("snowfall_baseline.tif")).unwrap();
        let shifted = &stack.bands[band_of(&m, h)];
        let mut compared = 0;
        for (a, b) in shifted.iter().zip(&by_hand.bands[0]) {
            assert!(
                a == b || (a.is_nan() && b.is_nan()),
                "timing {h}: {a} vs {b}"
            );
            compared += usize::from(*a > 0.0);
        }
        assert!(
            compared > 1000,
            "timing {h}: only {compared} cells with snow"
        );
    }
    // Offsets between whole steps interpolate between the two around: each runs and stays
    // within what the whole-step neighbours bracket somewhere, never all-missing.
    for h in [-7.0, 3.0, 7.0] {
        let v = &stack.bands[band_of(&m, h)];
        let finite = v.iter().filter(|x| x.is_finite()).count();
        assert!(
            finite * 10 > v.len() * 9,
            "timing {h}: {finite} of {} cells",
            v.len()
        );
        assert!(v.iter().any(|x| *x > 0.0), "timing {h}: no snow anywhere");
    }
}

/// Every timing value the case accepts (±48 h, more than the whole 48 h demo period) runs; steps
/// outside the model count nothing and say so.
#[test]
fn timing_offsets_beyond_the_model_period_run_and_warn() {
    let d = tempfile::tempdir().unwrap();
    let o = bin()
        .arg("run")
        .arg(demo_grid().join("case.toml"))
        .arg("--out")
        .arg(d.path().join("out"))
        .args(["--cross=0", "--along=0", "--timing=-48,-47.5,0,47.5,48"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout).to_string() + &String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{text}");
    assert!(
        text.contains("timing +48 h: 24 of 25 steps sample a time before the model's steps"),
        "{text}"
    );
    assert!(
        text.contains("timing -48 h: 24 of 25 steps sample a time after the model's steps"),
        "{text}"
    );
}
