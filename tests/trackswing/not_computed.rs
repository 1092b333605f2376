//! [trust] item 5: a run without track offsets must not read as reassurance. What an axis not
//! run cannot say is left out and listed (manifest `not_computed`, report, terminal), and the
//! period the totals cover is named from the case's valid times.

use super::support::bin;
use chrono::{DateTime, Utc};
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use trackswing::geotiff::read_geotiff;

fn demo_case() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

fn run(out: &Path, args: &[&str]) -> String {
    let o = bin()
        .arg("run")
        .arg(demo_case())
        .args(["--report", "--out"])
        .arg(out)
        .args(args)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

fn manifest(out: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap()
}

/// The layers listed as not computed, with their reasons.
fn not_computed(m: &serde_json::Value) -> Vec<(String, String)> {
    m["not_computed"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| {
            (
                e["layer"].as_str().unwrap().to_string(),
                e["reason"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

/// The demo's valid times, read from its step files' `valid_time` metadata (what the case
/// states, not what the engine kept).
fn demo_valid_times() -> Vec<DateTime<Utc>> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/fields");
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    files
        .iter()
        .map(|f| {
            let r = read_geotiff(f).unwrap();
            let (_, t) = r
                .dataset_metadata
                .iter()
                .find(|(k, _)| k == "valid_time")
                .unwrap();
            DateTime::parse_from_rfc3339(t).unwrap().with_timezone(&Utc)
        })
        .collect()
}

const TRACK_RISK: [&str; 18] = [
    "prior_coverage.tif",
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
    "towns_bust.csv",
    "towns_bust.geojson",
    "map_p90.png",
    "map_flip_distance.png",
];

const COMPARISONS: [&str; 6] = [
    "snowfall_min.tif",
    "snowfall_max.tif",
    "snowfall_range.tif",
    "flip_zone.geojson",
    "snowfall_bands_max.geojson",
    "map_range.png",
];

#[test]
fn a_run_without_offsets_writes_no_track_risk_and_says_so() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let text = run(&out, &["--cross", "0", "--along", "0"]);
    // The files: what the model as issued says, nothing that compares scenarios.
    let on_disk: BTreeSet<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    // Every raster has its QGIS and SLD styles beside it, and only the rasters.
    let styles: BTreeSet<String> = on_disk
        .iter()
        .filter(|f| f.ends_with(".qml") || f.ends_with(".sld"))
        .cloned()
        .collect();
    let on_disk: BTreeSet<String> = on_disk.difference(&styles).cloned().collect();
    let styled: BTreeSet<String> = on_disk
        .iter()
        .filter_map(|f| f.strip_suffix(".tif"))
        .flat_map(|stem| [format!("{stem}.qml"), format!("{stem}.sld")])
        .collect();
    assert_eq!(styles, styled);
    let want: BTreeSet<String> = [
        "snowfall_by_scenario.tif",
        "snowfall_baseline.tif",
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
        "snowfall_bands_baseline.geojson",
        "towns.csv",
        "towns.geojson",
        "map_baseline.png",
        "report.html",
        "manifest.json",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    assert_eq!(on_disk, want);
    let m = manifest(&out);
    // The manifest lists every file but itself.
    let mut listed: BTreeSet<String> = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["file"].as_str().unwrap().to_string())
        .collect();
    listed.insert("manifest.json".into());
    assert_eq!(
        listed.difference(&styles).cloned().collect::<BTreeSet<_>>(),
        want
    );
    assert!(styles.is_subset(&listed));
    // Every layer left out is listed once, with its reason; the track-risk reason first.
    let nc = not_computed(&m);
    let names: BTreeSet<&str> = nc.iter().map(|(l, _)| l.as_str()).collect();
    assert_eq!(nc.len(), TRACK_RISK.len() + COMPARISONS.len());
    assert!(TRACK_RISK
        .iter()
        .chain(&COMPARISONS)
        .all(|l| names.contains(l)));
    assert!(nc[0].1.contains("no track offsets were run"), "{nc:?}");
    for (layer, reason) in &nc {
        let want = if TRACK_RISK.contains(&layer.as_str()) {
            "say nothing about track risk"
        } else {
            "only the model as issued was run"
        };
        assert!(reason.contains(want), "{layer}: {reason}");
    }
    // The terminal and the report say it in the same words, and show no track-risk number.
    assert!(
        text.contains("not computed: no track offsets were run"),
        "{text}"
    );
    assert!(!text.contains("bust-prone towns, ranked"), "{text}");
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("id=\"not-computed\""));
    assert!(html.contains("No track offsets were run"));
    assert!(html.contains("<p>Not computed: no track offsets were run"));
    for reassuring in ["Largest swing", "flips the forecast", "P90 snowfall"] {
        assert!(!html.contains(reassuring), "report shows '{reassuring}'");
    }
}

#[test]
fn one_axis_not_run_leaves_only_its_sensitivity_out() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let text = run(&out, &["--cross=-20:20:10", "--along", "0"]);
    let nc = not_computed(&manifest(&out));
    assert_eq!(nc.len(), 1, "{nc:?}");
    assert_eq!(nc[0].0, "snowfall_sensitivity_along.tif");
    assert!(nc[0].1.contains("no along-track offsets were run"));
    assert!(!out.join("snowfall_sensitivity_along.tif").exists());
    for f in [
        "snowfall_sensitivity_cross.tif",
        "snowfall_p90.tif",
        "flip_distance.tif",
        "towns_bust.csv",
    ] {
        assert!(out.join(f).is_file(), "{f}");
    }
    assert!(
        text.contains("not computed: no along-track offsets were run"),
        "{text}"
    );
    // The full demo leaves nothing out.
    let full = d.path().join("full");
    run(&full, &[]);
    assert!(not_computed(&manifest(&full)).is_empty());
}

#[test]
fn the_period_of_the_totals_is_named_from_the_valid_times() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let text = run(&out, &["--cross=-10:10:10", "--along", "0"]);
    let times = demo_valid_times();
    assert_eq!(times.len(), 25, "the demo has 25 steps");
    // Each step holds what fell in the hours before its valid time; the first step is as long
    // as the second.
    let start = times[0] - (times[1] - times[0]);
    let end = *times.last().unwrap();
    let iso = |t: &DateTime<Utc>| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let m = manifest(&out);
    let p = &m["accumulation_period"];
    assert_eq!(p["start"], iso(&start));
    assert_eq!(p["end"], iso(&end));
    assert_eq!(p["steps"], 25);
    assert_eq!(p["iso8601"], format!("{}/{}", iso(&start), iso(&end)));
    let words = format!(
        "{} to {} UTC ({} h, 25 steps)",
        start.format("%Y-%m-%d %H:%M"),
        end.format("%Y-%m-%d %H:%M"),
        (end - start).num_hours()
    );
    assert_eq!(p["text"], words);
    // In the GeoTIFFs (dataset metadata and band description), the manifest's descriptions,
    // the map captions, the report and the terminal.
    for f in [
        "snowfall_baseline.tif",
        "snowfall_p90.tif",
        "snowfall_range.tif",
    ] {
        let r = read_geotiff(&out.join(f)).unwrap();
        assert!(r
            .dataset_metadata
            .iter()
            .any(|(k, v)| k == "accumulation_period" && *v == p["iso8601"]));
        assert!(
            r.descriptions[0].contains(&words),
            "{f}: {:?}",
            r.descriptions
        );
    }
    for f in m["files"].as_array().unwrap() {
        if f["kind"] == "image" {
            assert!(f["description"].as_str().unwrap().contains(&words), "{f}");
        }
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains(&format!("Totals over {words}.")));
    assert!(text.contains(&format!("totals over {words}")), "{text}");
    assert!(!text.contains("Storm-total") && !html.contains("Storm-total"));
}
