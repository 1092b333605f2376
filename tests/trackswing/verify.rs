//! `trackswing verify` on finished runs: reports made from one scenario's own snowfall (a
//! self-consistency check, not a reference value) must make that scenario the best match with
//! an MAE of float32 rounding; reports outside the grid are listed as skipped; bad reports
//! stop with exit code 3 naming the file, line and field, and write nothing; the run's own
//! files are left as they were. CRPS and the CDF are checked against properscoring in
//! tests/ref/check_scores.py (CI) and against their definitions in src/verify/scores.rs.

use super::support::bin;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;
use trackswing::geotiff::read_geotiff;
use trackswing::grid::Grid;
use trackswing::summarise::value_at;

fn demo_grid() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid")
}

fn run(args: &[&str], out: &Path) {
    let o = bin()
        .args(args)
        .arg("--out")
        .arg(out)
        .arg("--quiet")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

/// The demo run once for the module's tests.
fn demo_run() -> &'static Path {
    static RUN: OnceLock<PathBuf> = OnceLock::new();
    RUN.get_or_init(|| {
        let base = Path::new(env!("CARGO_TARGET_TMPDIR")).join("verify-demo");
        let _ = std::fs::remove_dir_all(&base);
        std::fs::create_dir_all(&base).unwrap();
        let out = base.join("run");
        let case = demo_grid().join("case.toml");
        run(&["run", case.to_str().unwrap()], &out);
        out
    })
}

/// The demo towns (name, lat, lon).
fn towns() -> Vec<(String, f64, f64)> {
    let mut r = csv::Reader::from_path(demo_grid().join("towns.csv")).unwrap();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            (
                rec[0].to_string(),
                rec[1].parse().unwrap(),
                rec[2].parse().unwrap(),
            )
        })
        .collect()
}

/// Reports at `places` made from band `band` (0-based) of `stack`, sampled as the towns are,
/// written at full precision in cm.
fn reports_from(dir: &Path, stack: &Path, band: usize, places: &[(String, f64, f64)]) -> PathBuf {
    let r = read_geotiff(stack).unwrap();
    let grid = Grid::new(r.width, r.height, r.georef).unwrap();
    let mut text = String::from("name,lat,lon,snow_cm\n");
    for (name, lat, lon) in places {
        let v = value_at(&grid, &r.bands[band], *lon, *lat);
        assert!(!v.is_nan(), "{name}: no value");
        text.push_str(&format!("{name},{lat},{lon},{v}\n"));
    }
    let p = dir.join("reports.csv");
    std::fs::write(&p, text).unwrap();
    p
}

fn band_of(stack: &Path, want: &[(&str, &str)]) -> usize {
    let r = read_geotiff(stack).unwrap();
    r.band_metadata
        .iter()
        .position(|md| {
            want.iter()
                .all(|(k, v)| md.iter().any(|(a, b)| a == k && b == v))
        })
        .unwrap()
}

/// Every file of `dir` (not under `verification/`) with its bytes.
fn files_of(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut v: Vec<(PathBuf, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_file())
        .map(|p| {
            let b = std::fs::read(&p).unwrap();
            (p, b)
        })
        .collect();
    v.sort();
    v
}

fn verify(out: &Path, reports: &Path) -> std::process::Output {
    bin()
        .arg("verify")
        .arg(out)
        .arg("--reports")
        .arg(reports)
        .output()
        .unwrap()
}

fn summary(out: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(out.join("verification/summary.json")).unwrap())
        .unwrap()
}

#[test]
fn reports_from_one_scenario_make_it_the_best_match() {
    let out = demo_run();
    let d = tempfile::tempdir().unwrap();
    let stack = out.join("snowfall_by_scenario.tif");
    let band = band_of(&stack, &[("cross_km", "20"), ("along_km", "0")]);
    let mut places = towns();
    let reports = reports_from(d.path(), &stack, band, &places);
    // One report far outside the grid: skipped, the others scored.
    places.push(("Nowhere".into(), -40.0, 120.0));
    let mut text = std::fs::read_to_string(&reports).unwrap();
    text.push_str("Nowhere,-40,120,5\n");
    std::fs::write(&reports, text).unwrap();
    let before = files_of(out);
    let o = verify(out, &reports);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_eq!(files_of(out), before, "verify changed a file of the run");

    let s = summary(out);
    let best = &s["best_scenario"];
    assert_eq!(best["band"].as_u64(), Some(band as u64 + 1), "{best}");
    assert_eq!(best["cross_km"].as_f64(), Some(20.0));
    assert_eq!(best["along_km"].as_f64(), Some(0.0));
    // The reports are the band's own values (float32, printed in full and read back): only
    // float32 rounding is left.
    let mae = best["mae"].as_f64().unwrap();
    assert!(mae < 1e-5, "MAE {mae}");
    assert_eq!(s["reports_scored"].as_u64(), Some(places.len() as u64 - 1));
    assert_eq!(s["reports_skipped"].as_u64(), Some(1));
    let skipped = std::fs::read_to_string(out.join("verification/skipped.csv")).unwrap();
    assert!(
        skipped.contains("Nowhere") && skipped.contains("outside the run's grid"),
        "{skipped}"
    );

    // scenarios.csv: best first, every scenario once.
    let mut r = csv::Reader::from_path(out.join("verification/scenarios.csv")).unwrap();
    let head = r.headers().unwrap().clone();
    let col = |n: &str| head.iter().position(|h| h == n).unwrap();
    let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
    assert_eq!(rows.len(), 63);
    assert_eq!(&rows[0][col("cross_km")], "20");
    assert_eq!(&rows[0][col("along_km")], "0");
    let maes: Vec<f64> = rows
        .iter()
        .map(|x| x[col("mae_cm")].parse().unwrap())
        .collect();
    assert!(maes.windows(2).take(60).all(|w| w[0] <= w[1]), "{maes:?}");

    // reports.csv: the observed value is the band's; P10 ≤ P50 ≤ P90; PIT in 0…1; CRPS ≥ 0.
    let mut r = csv::Reader::from_path(out.join("verification/reports.csv")).unwrap();
    let head = r.headers().unwrap().clone();
    let col = |n: &str| head.iter().position(|h| h == n).unwrap();
    for rec in r.records() {
        let rec = rec.unwrap();
        let f = |n: &str| rec[col(n)].parse::<f64>().unwrap();
        assert!(f("p10_cm") <= f("p50_cm") && f("p50_cm") <= f("p90_cm"));
        assert!((0.0..=1.0).contains(&f("pit")));
        assert!(f("crps_cm") >= 0.0);
    }
    assert!(out.join("verification/mae_offsets.png").is_file());
    // A second verification replaces the first as a whole.
    let o = verify(out, &reports);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn bad_reports_stop_with_exit_3_naming_line_and_field_and_write_nothing() {
    let base = tempfile::tempdir().unwrap();
    let out = base.path().join("run");
    // The run's files only: the other tests may be writing a verification beside them.
    std::fs::create_dir_all(&out).unwrap();
    for (p, bytes) in files_of(demo_run()) {
        std::fs::write(out.join(p.file_name().unwrap()), bytes).unwrap();
    }
    let cases = [
        (
            "lat,lon,snow_cm\n45.5,-30.4,3\n46,abc,2\n",
            "line 3",
            "'lon'",
        ),
        ("lat,lon,snow\n45.5,-30.4,3\n", "line 1", "no unit"),
        (
            "lat,lon,snow,units\n45.5,-30.4,3,feet\n",
            "line 2",
            "'units'",
        ),
        ("name,lat,snow_cm\nA,45.5,3\n", "line 1", "'lon'"),
    ];
    for (text, line, field) in cases {
        let p = base.path().join("bad.csv");
        std::fs::write(&p, text).unwrap();
        let o = verify(&out, &p);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{err}");
        assert!(
            err.contains("bad.csv") && err.contains(line) && err.contains(field),
            "{err}"
        );
        assert!(!out.join("verification").exists());
    }
    // Every report outside the grid: nothing to score, a bad input.
    let p = base.path().join("far.csv");
    std::fs::write(&p, "lat,lon,snow_cm\n-40,120,3\n").unwrap();
    let o = verify(&out, &p);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("no report could be scored (1 outside the run's grid)"),
        "{err}"
    );
    assert!(!out.join("verification").exists());
    // A missing reports file.
    let o = verify(&out, &base.path().join("none.csv"));
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("none.csv"));
    // Not a run's folder.
    let o = verify(base.path(), &p);
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("manifest.json"));
}

#[test]
fn several_members_and_methods_are_read_from_the_member_stack() {
    let d = tempfile::tempdir().unwrap();
    let g = demo_grid();
    let mut text = format!(
        "title = \"two members of one invented demo storm\"\ntowns = \"{}\"\n",
        g.join("towns.csv").display()
    );
    for n in ["a", "b"] {
        text.push_str(&format!(
            "[[member]]\nname = \"{n}\"\nterrain = \"{}\"\nsteps = \"{}\"\ntrack = \"{}\"\n",
            g.join("terrain.tif").display(),
            g.join("fields/step_*.tif").display(),
            g.join("track.csv").display()
        ));
    }
    text.push_str("[offsets]\ncross_km = \"-40:40:20\"\nalong_km = \"0\"\n[shift]\ncore_radius_km = 400\nouter_radius_km = 1000\n[methods]\nsnow_ratio = \"fixed,growth-zone\"\n");
    let case = d.path().join("case.toml");
    std::fs::write(&case, text).unwrap();
    let out = d.path().join("out");
    run(&["run", case.to_str().unwrap()], &out);
    let stack = out.join("snowfall_by_member_scenario.tif");
    let band = band_of(
        &stack,
        &[
            ("member", "b"),
            ("snow_ratio", "growth-zone"),
            ("cross_km", "20"),
        ],
    );
    let reports = reports_from(d.path(), &stack, band, &towns());
    let o = verify(&out, &reports);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let s = summary(&out);
    let best = &s["best_scenario"];
    // Members a and b read the same files, so a's band ties with b's and comes first.
    assert_eq!(best["cross_km"].as_f64(), Some(20.0), "{best}");
    assert_eq!(best["snow_ratio"].as_str(), Some("growth-zone"), "{best}");
    assert!(best["mae"].as_f64().unwrap() < 1e-5, "{best}");
    assert_eq!(
        s["scenario_stack"].as_str(),
        Some("snowfall_by_member_scenario.tif")
    );
    let head = std::fs::read_to_string(out.join("verification/scenarios.csv")).unwrap();
    let head = head.lines().next().unwrap();
    assert!(head.contains("member,precip_type,snow_ratio"), "{head}");
    // The weights of the blend add up to 1 over the bands.
    let w: f64 = csv::Reader::from_path(out.join("verification/scenarios.csv"))
        .unwrap()
        .deserialize::<std::collections::HashMap<String, String>>()
        .map(|r| r.unwrap()["weight"].parse::<f64>().unwrap())
        .sum();
    assert!((w - 1.0).abs() < 1e-4, "{w}");
}
