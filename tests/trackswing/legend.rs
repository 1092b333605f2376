//! The legend table: the project's own default thresholds per unit, the case's decision
//! thresholds reaching every layer, legend and report that uses them, and none of the wording
//! we retired ("snowy end of the likely outcomes", "chance of at least …") in anything a run
//! writes, in the README or in `--help`.

use super::support::{bin, decode_png, row_lat, write_front_case, FRONT_ROW};
use std::path::{Path, PathBuf};
use trackswing::case::{Case, Overrides};
use trackswing::geotiff::read_geotiff;
use trackswing::render::legend;

/// Phrases that must not come back (lower case).
const RETIRED: [&str; 6] = [
    "snowy end",
    "likely outcomes",
    "chance of at least",
    "1-in-10 chance",
    "snowy way",
    "1,2,4,6,8,12",
];

fn demo_case() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

#[test]
fn default_thresholds_are_our_own_per_unit() {
    // The defaults of this project (issue: originality): 1/2/5/10/20/50 cm and
    // 0.5/1/2/5/10/20 in, neither the retired 1/2/4/6/8/12 in set nor its centimetre rounding.
    let load = |units: &str| {
        let over = Overrides {
            units: Some(units.into()),
            ..Default::default()
        };
        Case::load(&demo_case(), &over).unwrap()
    };
    let metric = load("metric");
    assert_eq!(
        metric.summary.snow_thresholds,
        [1.0, 2.0, 5.0, 10.0, 20.0, 50.0]
    );
    let us = load("us");
    assert_eq!(us.summary.snow_thresholds, [0.5, 1.0, 2.0, 5.0, 10.0, 20.0]);
    for c in [&metric, &us] {
        // Without `snowfall_bands` the isobands follow the thresholds.
        assert_eq!(c.output.snowfall_bands, c.summary.snow_thresholds);
        assert_ne!(c.summary.snow_thresholds, [1.0, 2.0, 4.0, 6.0, 8.0, 12.0]);
        assert_ne!(
            c.summary.snow_thresholds,
            [2.5, 5.0, 10.0, 15.0, 20.0, 30.0]
        );
    }
}

#[test]
fn case_thresholds_reach_layers_bands_legends_and_report() {
    let d = tempfile::tempdir().unwrap();
    let towns = [("Ridge", row_lat(FRONT_ROW - 2), 12.0)];
    let case = write_front_case(d.path(), &towns, "thresholds = [3, 7, 40]\n");
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--cross", "-60:60:20", "--along", "0", "--report", "-q"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = d.path().join("out");

    // The layer list.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(
        m["decisions"]["snow_thresholds"],
        serde_json::json!([3.0, 7.0, 40.0])
    );
    let entry = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["file"] == "snowfall_exceedance.tif")
        .expect("the exceedance layer is listed");
    let description = entry["description"].as_str().unwrap();
    assert!(description.contains("(3, 7, 40 cm)"), "{description}");

    // The band descriptions and metadata of the GeoTIFF.
    let ex = read_geotiff(&out.join("snowfall_exceedance.tif")).unwrap();
    assert_eq!(
        ex.descriptions,
        [
            "P(snowfall ≥ 3 cm)",
            "P(snowfall ≥ 7 cm)",
            "P(snowfall ≥ 40 cm)"
        ]
    );
    for (meta, want) in ex.band_metadata.iter().zip(["3", "7", "40"]) {
        assert!(
            meta.iter().any(|(k, v)| k == "threshold" && v == want),
            "{meta:?}"
        );
    }

    // The towns table.
    let mut rdr = csv::Reader::from_path(out.join("towns_bust.csv")).unwrap();
    let p_cols: Vec<String> = rdr
        .headers()
        .unwrap()
        .iter()
        .filter(|h| h.starts_with("p_snow_ge_"))
        .map(String::from)
        .collect();
    assert_eq!(p_cols, ["p_snow_ge_3cm", "p_snow_ge_7cm", "p_snow_ge_40cm"]);

    // The GeoJSON bands: one per threshold, labelled and coloured as the maps' classes.
    let classes = legend::snow_classes(&[3.0, 7.0, 40.0], "cm");
    // Breaks: the thresholds, then 40 × 4/3, 5/3, 2 to two figures.
    assert_eq!(classes.bounds, [3.0, 7.0, 40.0, 53.0, 67.0, 80.0]);
    let g: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("snowfall_bands_max.geojson")).unwrap())
            .unwrap();
    let features = g["features"].as_array().unwrap();
    assert_eq!(features.len(), 3);
    for (k, f) in features.iter().enumerate() {
        let p = &f["properties"];
        assert_eq!(p["lower"], [3.0, 7.0, 40.0][k]);
        assert_eq!(p["fill"], legend::hex(classes.colours[k + 1]));
    }
    assert_eq!(features[0]["properties"]["label"], "3 – 7 cm");
    assert_eq!(features[2]["properties"]["label"], "40 cm or more");

    // The PNG legends: every swatch of the class table is drawn on the snowfall maps.
    for map in ["map_baseline.png", "map_p90.png"] {
        let (_, _, px, channels) = decode_png(&out.join(map));
        for c in &classes.colours {
            let found = px.chunks(channels).any(|p| p[..3] == c[..]);
            assert!(found, "{map}: legend colour {} missing", legend::hex(*c));
        }
    }
    let spread = legend::spread_classes(&[3.0, 7.0, 40.0], "cm");
    let (_, _, px, channels) = decode_png(&out.join("map_range.png"));
    for c in &spread.colours {
        assert!(px.chunks(channels).any(|p| p[..3] == c[..]), "{c:?}");
    }

    // The report names the thresholds and says what a threshold probability is.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("thresholds 3, 7, 40 cm"), "report lacks them");
    assert!(html.contains("probability of 3 cm or more of snowfall"));
    assert!(html.contains(legend::P90_MEANING));
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
    out
}

fn assert_no_retired(what: &str, text: &str) {
    let lower = text.to_lowercase();
    for phrase in RETIRED {
        assert!(!lower.contains(phrase), "{what} says \"{phrase}\"");
    }
}

#[test]
fn no_retired_wording_in_any_output_readme_or_help() {
    for units in ["metric", "us"] {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        let o = bin()
            .arg("demo")
            .arg("--out")
            .arg(&out)
            .args(["--units", units, "-q"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        assert_no_retired("the demo's console", &String::from_utf8_lossy(&o.stdout));
        let files = files_under(&out);
        assert!(files.len() > 30, "{} files", files.len());
        let mut tiffs = 0;
        for f in files {
            let name = f.display().to_string();
            match f.extension().and_then(|e| e.to_str()) {
                // GeoTIFF text lives in its tags: read them back with the tool's own reader.
                Some("tif") => {
                    let r = read_geotiff(&f).unwrap();
                    let mut text = r.descriptions.join("\n");
                    for (k, v) in r
                        .dataset_metadata
                        .iter()
                        .chain(r.band_metadata.iter().flatten())
                    {
                        text.push_str(&format!("\n{k}={v}"));
                    }
                    assert_no_retired(&name, &text);
                    tiffs += 1;
                }
                // The maps' words are pixels; their titles are in the manifest, scanned here.
                Some("png") => {}
                _ => {
                    assert_no_retired(&name, &String::from_utf8_lossy(&std::fs::read(&f).unwrap()))
                }
            }
        }
        assert!(tiffs > 10);
    }
    let readme = Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md");
    assert_no_retired("README.md", &std::fs::read_to_string(readme).unwrap());
    for args in [
        vec!["--help"],
        vec!["run", "--help"],
        vec!["demo", "--help"],
        vec!["report", "--help"],
    ] {
        let o = bin().args(&args).output().unwrap();
        assert!(o.status.success(), "{args:?}");
        assert_no_retired(
            &format!("trackswing {}", args.join(" ")),
            &String::from_utf8_lossy(&o.stdout),
        );
    }
}
