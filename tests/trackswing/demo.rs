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
    // Regression, [trust] item 9: the terminal lists the towns in the order of towns_bust.csv
    // (the report's ranking), not by a rule of its own.
    assert!(text.contains("ranked by bust score"), "{text}");
    let first_ranked = csv::Reader::from_path(a.join("towns_bust.csv"))
        .unwrap()
        .records()
        .next()
        .unwrap()
        .unwrap()[1]
        .to_string();
    let listed = text
        .lines()
        .skip_while(|l| !l.starts_with("bust-prone towns, ranked by bust score"))
        .nth(2)
        .unwrap_or_default();
    assert!(listed.trim_start().starts_with(&first_ranked), "{text}");
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
        "ice_pellet_depth_baseline.tif",
        "dry_air_loss_baseline.tif",
        "ice_accretion_baseline.tif",
        "rain_snow_lines.geojson",
        "transition_zones.geojson",
        "flip_zone.geojson",
        "snowfall_bands_baseline.geojson",
        "snowfall_bands_max.geojson",
        "towns.csv",
        "towns.geojson",
        "snowfall_mean.tif",
        "snowfall_p10.tif",
        "snowfall_p50.tif",
        "snowfall_p90.tif",
        "snowfall_exceedance.tif",
        "ice_accretion_mean.tif",
        "ice_accretion_p10.tif",
        "ice_accretion_p50.tif",
        "ice_accretion_p90.tif",
        "ice_accretion_exceedance.tif",
        "snowfall_sensitivity_cross.tif",
        "snowfall_sensitivity_along.tif",
        "flip_distance.tif",
        "prior_coverage.tif",
        "towns_bust.csv",
        "towns_bust.geojson",
        "map_baseline.png",
        "map_p90.png",
        "map_range.png",
        "map_flip_distance.png",
    ] {
        let x = std::fs::read(a.join(f)).unwrap();
        let y = std::fs::read(b.join(f)).unwrap();
        assert!(x == y, "{f} differs between 1 and 2 threads");
    }
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(a.join("manifest.json")).unwrap()).unwrap();
    let files = m["files"].as_array().unwrap();
    // 42 layers, tables, maps and the report, and a QGIS and an SLD style per raster.
    let kind = |k: &str| files.iter().filter(|f| f["kind"] == k).count();
    assert_eq!(files.len() - kind("style"), 42);
    assert_eq!(kind("style"), 2 * kind("raster"));
    // Every town of the towns table is ranked in the bust table, once.
    let (h, rows) = towns_csv(&a);
    let name = h.iter().position(|c| c == "name").unwrap();
    let mut bust = csv::Reader::from_path(a.join("towns_bust.csv")).unwrap();
    let mut ranked: Vec<String> = bust
        .records()
        .map(|r| r.unwrap().get(1).unwrap().to_string())
        .collect();
    let mut names: Vec<String> = rows.iter().map(|r| r[name].clone()).collect();
    ranked.sort();
    names.sort();
    assert_eq!(ranked, names);
    // The ice distribution per town: percentiles ordered, the mean not negative, exceedance probabilities in [0, 1] and never rising with the threshold, and some town
    // of the demo (which has freezing rain under its warm nose) with ice to speak of.
    let mut bust = csv::Reader::from_path(a.join("towns_bust.csv")).unwrap();
    let head = bust.headers().unwrap().clone();
    let col = |n: &str| head.iter().position(|c| c == n).unwrap();
    let (p10, p50, p90, mean) = (
        col("ice_p10_mm"),
        col("ice_p50_mm"),
        col("ice_p90_mm"),
        col("ice_mean_mm"),
    );
    let p_ice: Vec<usize> = (0..head.len())
        .filter(|&i| head[i].starts_with("p_ice_ge_"))
        .collect();
    assert_eq!(p_ice.len(), 5, "five default ice thresholds, 1…25 mm");
    let mut icy = 0;
    for r in bust.records() {
        let r = r.unwrap();
        let v = |i: usize| r[i].parse::<f64>().unwrap();
        assert!(v(p10) <= v(p50) && v(p50) <= v(p90), "{:?}", r);
        // At least a tenth of the weight has ≥ 1 mm when P90 does, so the mean has ≥ 0.1 mm.
        assert!(v(mean) >= 0.0, "{:?}", r);
        assert!(v(p90) < 1.0 || v(mean) >= 0.1, "{:?}", r);
        let probs: Vec<f64> = p_ice.iter().map(|&i| v(i)).collect();
        assert!(probs.iter().all(|p| (0.0..=1.0).contains(p)), "{:?}", r);
        assert!(probs.windows(2).all(|w| w[1] <= w[0]), "{:?}", r);
        if v(p90) > 0.5 {
            icy += 1;
        }
    }
    assert!(icy > 0, "no demo town has ice");
    // The demo also writes the report, listed in the manifest it is built from.
    assert!(files
        .iter()
        .any(|f| f["file"] == "report.html" && f["kind"] == "report"));
    let html = std::fs::read_to_string(a.join("report.html")).unwrap();
    assert!(html.contains("<table id=\"towns\""));
    for f in files {
        assert!(a.join(f["file"].as_str().unwrap()).is_file());
    }
    assert!(m["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .all(|i| i["sha256"].as_str().unwrap().len() == 64));
    let (header, rows) = towns_csv(&a);
    let scenarios = m["scenarios"].as_array().unwrap().len();
    assert_eq!(
        scenarios, 63,
        "the demo case runs 21 cross × 3 along offsets"
    );
    // Ten fixed columns, snowfall per scenario, three onset times, onset step per scenario.
    assert_eq!(header.len(), 10 + scenarios + 3 + scenarios);
    assert_eq!(header[10 + scenarios], "baseline_onset_utc");
    assert_eq!(rows.len(), 14, "every demo town has a row");
    // The range column is max − min of the per-scenario columns, to the printed rounding.
    for row in &rows {
        let vals: Vec<f64> = row[10..10 + scenarios]
            .iter()
            .filter_map(|v| v.parse().ok())
            .collect();
        if vals.len() == scenarios {
            let (lo, hi) = vals
                .iter()
                .fold((f64::MAX, f64::MIN), |(a, b), v| (a.min(*v), b.max(*v)));
            let range: f64 = row[6].parse().unwrap();
            assert!(
                (range - (hi - lo)).abs() <= 0.11,
                "{}: {range} vs {}",
                row[0],
                hi - lo
            );
        }
    }
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

#[test]
fn gdal_reads_the_demo_layers_where_trackswing_put_them() {
    // Reference: GDAL (gdalinfo -json, gdallocationinfo), reading our GeoTIFFs independently.
    if !crate::reference::gdal::gdal_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    run_demo(d.path(), &["--cross", "-20:20:20", "--along", "0"]);
    let terrain = trackswing::geotiff::read_geotiff(&demo_grid().join("terrain.tif")).unwrap();
    for f in [
        "snowfall_baseline.tif",
        "snowfall_by_scenario.tif",
        "snowfall_range.tif",
    ] {
        let p = d.path().join(f);
        let out = std::process::Command::new("gdalinfo")
            .arg("-json")
            .arg(&p)
            .output()
            .unwrap();
        assert!(out.status.success());
        let info: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let wkt = info["coordinateSystem"]["wkt"].as_str().unwrap();
        assert!(wkt.contains("ID[\"EPSG\",4326]"), "{f}: {wkt}");
        let gt: Vec<f64> = info["geoTransform"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        for (a, b) in gt.iter().zip(terrain.georef.geotransform) {
            assert!((a - b).abs() < 1e-9, "{f}: geotransform {gt:?}");
        }
        assert_eq!(info["size"][0].as_u64(), Some(terrain.width as u64));
        assert_eq!(info["size"][1].as_u64(), Some(terrain.height as u64));
        // The corners GDAL reports are the grid's outer edges (pixel-is-area).
        let ul = &info["cornerCoordinates"]["upperLeft"];
        assert!(
            (ul[0].as_f64().unwrap() - gt[0]).abs() < 1e-9
                && (ul[1].as_f64().unwrap() - gt[3]).abs() < 1e-9
        );
        let band = &info["bands"][0];
        assert_eq!(band["noDataValue"].as_f64(), Some(-9999.0), "{f}");
        assert_eq!(band["type"].as_str(), Some("Float32"));
    }
    // A town's baseline value through GDAL equals trackswing's at the same pixel.
    let ours = trackswing::geotiff::read_geotiff(&d.path().join("snowfall_baseline.tif")).unwrap();
    let (col, row) = (40usize, 60usize);
    let out = std::process::Command::new("gdallocationinfo")
        .args(["-valonly"])
        .arg(d.path().join("snowfall_baseline.tif"))
        .args([col.to_string(), row.to_string()])
        .output()
        .unwrap();
    let gdal: f32 = String::from_utf8_lossy(&out.stdout).trim().parse().unwrap();
    let mine = ours.bands[0][row * ours.width + col];
    assert!(
        (gdal - mine).abs() <= 1e-6 * mine.abs().max(1.0),
        "GDAL {gdal} vs trackswing {mine}"
    );
    let bands =
        trackswing::geotiff::read_geotiff(&d.path().join("snowfall_by_scenario.tif")).unwrap();
    assert_eq!(bands.descriptions.len(), 3);
    assert!(bands
        .descriptions
        .iter()
        .any(|x| x == "snowfall, cross -20 km, along 0 km"));
}

#[test]
fn demo_towns_table_carries_every_axis_and_the_onset() {
    let d = tempfile::tempdir().unwrap();
    run_demo(
        d.path(),
        &[
            "--cross",
            "0",
            "--along",
            "0",
            "--timing",
            "0,2",
            "--warm-bias",
            "0,1",
        ],
    );
    let (h, rows) = towns_csv(d.path());
    for c in [
        "baseline_onset_utc",
        "earliest_onset_utc",
        "latest_onset_utc",
        "snow_cm_c0_a0",
        "snow_cm_c0_a0_t+2_w+1",
        "onset_step_c0_a0",
        "onset_step_c0_a0_t+2",
    ] {
        assert!(h.iter().any(|x| x == c), "no column {c} in {h:?}");
    }
    let col = |name: &str| h.iter().position(|x| x == name).unwrap();
    let (base, later) = (col("onset_step_c0_a0"), col("onset_step_c0_a0_t+2"));
    let mut compared = 0;
    for r in &rows {
        // A storm 2 h later (one demo step) begins exactly one step later, or not at all
        // within the window.
        if let (Ok(a), Ok(b)) = (r[base].parse::<u32>(), r[later].parse::<u32>()) {
            assert_eq!(b, a + 1, "{}", r[0]);
            compared += 1;
        }
        assert!(
            r[col("baseline_onset_utc")].is_empty() || r[col("baseline_onset_utc")].ends_with('Z')
        );
    }
    assert!(compared >= 5, "{compared} towns compared");
    // The manifest's per-scenario bands carry every axis too, in the stack's band order.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.path().join("manifest.json")).unwrap()).unwrap();
    let stack = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["file"] == "snowfall_by_scenario.tif")
        .unwrap();
    let axes: Vec<(f64, f64)> = stack["bands"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| {
            assert_eq!(b["cross_km"], 0.0);
            assert_eq!(b["intensity"], 1.0);
            (
                b["timing_h"].as_f64().unwrap(),
                b["warm_bias_k"].as_f64().unwrap(),
            )
        })
        .collect();
    let mut sorted = axes.clone();
    sorted.sort_by(|a, b| a.partial_cmp(b).unwrap());
    assert_eq!(sorted, vec![(0.0, 0.0), (0.0, 1.0), (2.0, 0.0), (2.0, 1.0)]);
}

#[test]
fn bust_table_onset_shift_agrees_with_the_towns_table_onset_times() {
    let d = tempfile::tempdir().unwrap();
    run_demo(d.path(), &["--cross", "-60:60:30", "--along", "0"]);
    let hours = |a: &str, b: &str| {
        let a = chrono::DateTime::parse_from_rfc3339(a).unwrap();
        let b = chrono::DateTime::parse_from_rfc3339(b).unwrap();
        (a - b).num_minutes() as f64 / 60.0
    };
    let mut towns = csv::Reader::from_path(d.path().join("towns.csv")).unwrap();
    let th = towns.headers().unwrap().clone();
    let col = |h: &csv::StringRecord, n: &str| h.iter().position(|c| c == n).unwrap();
    let (tn, tb, te, tl) = (
        col(&th, "name"),
        col(&th, "baseline_onset_utc"),
        col(&th, "earliest_onset_utc"),
        col(&th, "latest_onset_utc"),
    );
    let mut expected = std::collections::HashMap::new();
    for r in towns.records() {
        let r = r.unwrap();
        if !r[tb].is_empty() {
            expected.insert(
                r[tn].to_string(),
                (hours(&r[te], &r[tb]), hours(&r[tl], &r[tb])),
            );
        }
    }
    assert!(
        !expected.is_empty(),
        "some demo town has a measurable snow onset"
    );
    let mut bust = csv::Reader::from_path(d.path().join("towns_bust.csv")).unwrap();
    let bh = bust.headers().unwrap().clone();
    let (bn, be, bl) = (
        col(&bh, "name"),
        col(&bh, "onset_earliest_shift_h"),
        col(&bh, "onset_latest_shift_h"),
    );
    let mut checked = 0;
    for r in bust.records() {
        let r = r.unwrap();
        match expected.get(&r[bn]) {
            Some((e, l)) => {
                assert_eq!(r[be].parse::<f64>().unwrap(), *e, "{}", &r[bn]);
                assert_eq!(r[bl].parse::<f64>().unwrap(), *l, "{}", &r[bn]);
                assert!(
                    e <= &0.0 && l >= &0.0,
                    "the baseline lies within its own range"
                );
                checked += 1;
            }
            None => assert!(r[be].is_empty() && r[bl].is_empty()),
        }
    }
    assert_eq!(checked, expected.len());
}
