//! The shipped demo: it regenerates identically, runs end to end and shows the flip it was built
//! to show.

use super::support::bin;
use std::path::{Path, PathBuf};

fn demo_grid() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid")
}

fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(files_under(&p));
        } else {
            out.push(p);
        }
    }
    out.sort();
    out
}

#[test]
fn shipped_demo_files_regenerate_identically() {
    let d = tempfile::tempdir().unwrap();
    let o = bin()
        .args(["make-demo", "--out"])
        .arg(d.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let made = files_under(d.path());
    assert!(made.len() > 16);
    for f in made {
        let rel = f.strip_prefix(d.path()).unwrap();
        let shipped = demo_grid().join(rel);
        let a = std::fs::read(&f).unwrap();
        let b =
            std::fs::read(&shipped).unwrap_or_else(|_| panic!("{} is not shipped", rel.display()));
        assert!(a == b, "{} differs from the shipped file", rel.display());
    }
}

fn run_demo(out: &Path, extra: &[&str]) -> String {
    let o = bin()
        .arg("demo")
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

/// Reads towns.csv into (header, rows).
fn towns_csv(out: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::Reader::from_path(out.join("towns.csv")).unwrap();
    let h = r.headers().unwrap().iter().map(String::from).collect();
    let rows = r
        .records()
        .map(|x| x.unwrap().iter().map(String::from).collect())
        .collect();
    (h, rows)
}

#[test]
fn demo_writes_every_layer_and_the_same_bytes_on_one_thread() {
    let d = tempfile::tempdir().unwrap();
    let (a, b) = (d.path().join("a"), d.path().join("b"));
    let text = run_demo(&a, &["--threads", "2"]);
    run_demo(&b, &["--threads", "1"]);
    assert!(text.contains("towns whose snowfall swings most"), "{text}");
    assert!(text.contains("not an official forecast"), "{text}");
    for f in [
        "snowfall_by_scenario.tif",
        "snowfall_baseline.tif",
        "snowfall_min.tif",
        "snowfall_max.tif",
        "snowfall_range.tif",
        "liquid_baseline.tif",
        "snow_fraction_baseline.tif",
        "ice_pellets_baseline.tif",
        "freezing_rain_baseline.tif",
        "ice_pellet_fraction_baseline.tif",
        "freezing_rain_fraction_baseline.tif",
        "rain_snow_lines.geojson",
        "towns.csv",
        "towns.geojson",
    ] {
        let x = std::fs::read(a.join(f)).unwrap();
        let y = std::fs::read(b.join(f)).unwrap();
        assert!(x == y, "{f} differs between 1 and 2 threads");
    }
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(a.join("manifest.json")).unwrap()).unwrap();
    let files = m["files"].as_array().unwrap();
    assert_eq!(files.len(), 14);
    for f in files {
        assert!(a.join(f["file"].as_str().unwrap()).is_file());
    }
    assert!(m["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .all(|i| i["sha256"].as_str().unwrap().len() == 64));
    // No temporary files left behind.
    assert!(std::fs::read_dir(&a).unwrap().all(|e| !e
        .unwrap()
        .file_name()
        .to_string_lossy()
        .ends_with(".partial")));
}

#[test]
fn demo_sleet_and_freezing_rain_occur() {
    let d = tempfile::tempdir().unwrap();
    run_demo(d.path(), &["--cross", "0", "--along", "0"]);
    for f in ["ice_pellets_baseline.tif", "freezing_rain_baseline.tif"] {
        let r = trackswing::geotiff::read_geotiff(&d.path().join(f)).unwrap();
        let max = r.bands[0]
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f32, |a, b| a.max(*b));
        assert!(
            max > 1.0,
            "{f}: largest amount {max} mm; the demo's warm nose must give some"
        );
    }
}

#[test]
fn a_track_shift_of_50_to_60_km_turns_quenfield_from_snow_to_rain() {
    // The demo was built to show the main job: near the rain–snow line a few tens of km of track
    // error flip the type (common practice). Quenfield, on the south-west plain near the line,
    // is mostly snow as modelled and mostly rain with the low 50–60 km further left (inland).
    use trackswing::case::{Case, Overrides};
    let case = Case::load(
        &demo_grid().join("case.toml"),
        &Overrides {
            cross: Some("-60:60:5".into()),
            along: Some("0".into()),
            ..Default::default()
        },
    )
    .unwrap();
    let r = trackswing::engine::run(&case, 2, &trackswing::progress::Silent).unwrap();
    let towns = trackswing::summarise::towns(&r);
    let q = towns.iter().find(|t| t.name == "Quenfield").unwrap();
    let at = |cross: f64| {
        let i = r
            .scenarios
            .iter()
            .position(|s| s.cross_km == cross && s.along_km == 0.0)
            .unwrap();
        let rain = 1.0
            - q.snow_fraction[i]
            - value(&r, i, q, |t| &t.ice_pellets) / value(&r, i, q, |t| &t.liquid)
            - value(&r, i, q, |t| &t.freezing_rain) / value(&r, i, q, |t| &t.liquid);
        (q.snow_fraction[i], rain)
    };
    let (snow0, _) = at(0.0);
    assert!(snow0 > 0.6, "as modelled Quenfield is mostly snow: {snow0}");
    let (snow25, _) = at(25.0);
    assert!(snow25 > 0.5, "a 25 km shift keeps it snow: {snow25}");
    let flipped: Vec<f64> = [50.0, 55.0, 60.0]
        .into_iter()
        .filter(|c| {
            let (s, rain) = at(*c);
            s < 0.5 && rain > 0.5
        })
        .collect();
    assert!(
        !flipped.is_empty(),
        "no flip to mostly rain at 50–60 km left: {:?}",
        [50.0, 55.0, 60.0].map(at)
    );
}

fn value(
    r: &trackswing::engine::RunResult,
    scenario: usize,
    town: &trackswing::summarise::TownSummary,
    f: fn(&trackswing::accumulate::Totals) -> &Vec<f32>,
) -> f32 {
    trackswing::summarise::value_at(&r.grid, f(&r.totals[scenario]), town.lon, town.lat)
}
