//! Prior coverage ([trust] item 3): on the demo, where far offsets sample beyond the grid edge,
//! the weighted summaries and min/max/range are computed over the scenarios with data wherever
//! they carry at least the minimum share of the prior, `prior_coverage.tif` says how much, and
//! the warning counts the map's cells.

use super::support::bin;
use std::path::Path;
use trackswing::geotiff::read_geotiff;

fn demo(out: &Path, extra: &[&str]) -> std::process::Output {
    bin()
        .arg("demo")
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap()
}

fn meta(r: &trackswing::geotiff::Raster, band: usize, key: &str) -> f64 {
    r.band_metadata[band]
        .iter()
        .find(|(k, _)| k == key)
        .unwrap_or_else(|| panic!("band {band} has no {key}"))
        .1
        .parse()
        .unwrap()
}

/// Coverage recomputed from the stack: the Gaussian prior of the README,
/// w ∝ exp(−½((c/σc)² + (a/σa)²)) with σ 50 km both ways (the demo's offsets are evenly spaced
/// on each axis, so every scenario stands for the same width), summed over the bands with a
/// value.
fn coverage_from_stack(stack: &trackswing::geotiff::Raster) -> Vec<f64> {
    let w: Vec<f64> = (0..stack.bands.len())
        .map(|b| {
            let (c, a) = (meta(stack, b, "cross_km"), meta(stack, b, "along_km"));
            (-0.5 * ((c / 50.0).powi(2) + (a / 50.0).powi(2))).exp()
        })
        .collect();
    let all: f64 = w.iter().sum();
    (0..stack.bands[0].len())
        .map(|i| {
            stack
                .bands
                .iter()
                .zip(&w)
                .filter(|(b, _)| !b[i].is_nan())
                .map(|(_, w)| w)
                .sum::<f64>()
                / all
        })
        .collect()
}

#[test]
fn demo_summaries_follow_the_prior_coverage_rule() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let o = demo(&out, &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let read = |f: &str| read_geotiff(&out.join(f)).unwrap();
    let stack = read("snowfall_by_scenario.tif");
    let cov = coverage_from_stack(&stack);
    let layer = read("prior_coverage.tif");
    assert_eq!(meta(&layer, 0, "min_coverage"), 0.9);
    for (i, (got, want)) in layer.bands[0].iter().zip(&cov).enumerate() {
        assert!(
            (*got as f64 - want).abs() < 1e-6,
            "cell {i}: {got} vs {want}"
        );
    }
    // Geometry: a cell farther from every edge than the largest shift (√(100² + 60²) ≈ 117 km;
    // columns 0.15° ≥ 10.2 km apart at 52° N, rows 0.1° = 11.1 km) cannot sample beyond it.
    let (nx, ny) = (stack.width, stack.height);
    for (i, c) in cov.iter().enumerate() {
        let (col, row) = (i % nx, i / nx);
        if col >= 12 && col < nx - 12 && row >= 11 && row < ny - 11 {
            assert_eq!(*c, 1.0, "inland cell {col},{row}");
        }
    }
    assert!(
        cov.iter().any(|c| *c < 0.9),
        "the demo's far offsets leave the grid"
    );
    // The rule, on every summary: present exactly where the coverage reaches 0.9 (cells within
    // float rounding of it left out); min/max over the bands with data.
    let p90 = read("snowfall_p90.tif").bands.swap_remove(0);
    let mean = read("snowfall_mean.tif").bands.swap_remove(0);
    let exceed = read("snowfall_exceedance.tif");
    let (min, max) = (read("snowfall_min.tif"), read("snowfall_max.tif"));
    let (mut partial, mut short) = (0, 0);
    for i in 0..cov.len() {
        if (cov[i] - 0.9).abs() < 1e-9 {
            continue;
        }
        let covered = cov[i] >= 0.9;
        if covered && cov[i] < 1.0 {
            partial += 1;
        }
        if !covered && cov[i] > 0.0 {
            short += 1;
        }
        assert_eq!(
            !p90[i].is_nan(),
            covered,
            "P90 at cell {i}, coverage {}",
            cov[i]
        );
        assert_eq!(!mean[i].is_nan(), covered, "mean at cell {i}");
        assert!(exceed.bands.iter().all(|b| b[i].is_nan() != covered));
        let values: Vec<f32> = stack
            .bands
            .iter()
            .map(|b| b[i])
            .filter(|v| !v.is_nan())
            .collect();
        if covered {
            let lo = values.iter().copied().fold(f32::INFINITY, f32::min);
            let hi = values.iter().copied().fold(f32::NEG_INFINITY, f32::max);
            assert!((min.bands[0][i] - lo).abs() < 1e-4 && (max.bands[0][i] - hi).abs() < 1e-4);
        } else {
            assert!(min.bands[0][i].is_nan() && max.bands[0][i].is_nan());
        }
    }
    assert!(partial > 0 && short > 0);
    // The warning counts the map's cells, as the layers show them, in the manifest's list.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(m["decisions"]["min_coverage"], 0.9);
    let w = m["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .find(|w| w.contains("prior_coverage.tif"))
        .expect("a coverage warning");
    let pct = |k: usize| format!("{:.1} %", 100.0 * k as f64 / cov.len() as f64);
    assert!(
        w.contains(&format!("{} of the map's cells ({partial})", pct(partial))),
        "{w}"
    );
    assert!(
        w.contains(&format!("{} ({short}) are nodata", pct(short))),
        "{w}"
    );
    assert!(!w.contains("cell-steps"), "{w}");
}

#[test]
fn a_lower_minimum_summarises_more_cells_from_the_flag_and_the_case_file() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let o = demo(&out, &["--min-coverage", "0.5"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let stack = read_geotiff(&out.join("snowfall_by_scenario.tif")).unwrap();
    let cov = coverage_from_stack(&stack);
    let p90 = read_geotiff(&out.join("snowfall_p90.tif"))
        .unwrap()
        .bands
        .swap_remove(0);
    for i in (0..cov.len()).filter(|i| (cov[*i] - 0.5).abs() > 1e-9) {
        assert_eq!(
            !p90[i].is_nan(),
            cov[i] >= 0.5,
            "cell {i}, coverage {}",
            cov[i]
        );
    }
    // The same from [weights] in a case file.
    let grid = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid");
    let case = d.path().join("case.toml");
    let text = std::fs::read_to_string(grid.join("case.toml"))
        .unwrap()
        .replace("\"towns.csv\"", &format!("{:?}", grid.join("towns.csv")))
        .replace(
            "\"terrain.tif\"",
            &format!("{:?}", grid.join("terrain.tif")),
        )
        .replace("\"track.csv\"", &format!("{:?}", grid.join("track.csv")))
        .replace(
            "\"fields/step_*.tif\"",
            &format!("{:?}", grid.join("fields/step_*.tif")),
        );
    std::fs::write(&case, format!("{text}\n[weights]\nmin_coverage = 0.5\n")).unwrap();
    let o = bin()
        .args(["run", "-q", "--out"])
        .arg(d.path().join("c"))
        .arg(&case)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let p90_case = read_geotiff(&d.path().join("c/snowfall_p90.tif"))
        .unwrap()
        .bands
        .swap_remove(0);
    assert!(p90
        .iter()
        .zip(&p90_case)
        .all(|(a, b)| a.to_bits() == b.to_bits()));
    // Out of range: the flag is a bad command line (2), the case file a bad input (3).
    for bad in ["0", "1.5", "-0.2", "nan"] {
        let o = bin()
            .args(["run", "--min-coverage", bad, "--out"])
            .arg(d.path().join("bad"))
            .arg(&case)
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(2), "{bad}");
        let e = String::from_utf8_lossy(&o.stderr);
        assert!(e.contains("--min-coverage"), "{e}");
    }
    std::fs::write(&case, format!("{text}\n[weights]\nmin_coverage = 0\n")).unwrap();
    let o = bin()
        .args(["run", "--out"])
        .arg(d.path().join("bad"))
        .arg(&case)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(3));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("weights.min_coverage"), "{e}");
    assert!(!d.path().join("bad").exists());
}
