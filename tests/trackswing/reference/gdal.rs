//! Shared pieces of the GDAL reference tests: running the tools, the test layer, assertions.

use std::path::{Path, PathBuf};
use std::process::Command;

use super::JsonPath;
use serde_json::Value as Json;
use trackswing::geotiff::*;

pub const W: usize = 37;
pub const H: usize = 23;
pub const GT: [f64; 6] = [-100.0, 0.5, 0.0, 45.0, 0.0, -0.25];

/// True when GDAL's tools can be run; otherwise prints why (or panics when references are
/// required).
pub fn gdal_available() -> bool {
    let ok = Command::new("gdalinfo")
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        if std::env::var("TRACKSWING_REQUIRE_REFERENCES").as_deref() == Ok("1") {
            panic!("gdalinfo not on PATH but TRACKSWING_REQUIRE_REFERENCES=1");
        }
        eprintln!("note: gdalinfo not on PATH; skipping GDAL reference test");
    }
    ok
}

pub fn run(cmd: &str, args: &[&str]) -> String {
    let out = Command::new(cmd)
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("{cmd}: {e}"));
    assert!(
        out.status.success(),
        "{cmd} {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    // GDAL reports structural problems it tolerates as warnings on stderr.
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        !stderr.contains("Warning") && !stderr.contains("ERROR"),
        "{cmd} {args:?}: {stderr}"
    );
    String::from_utf8(out.stdout).unwrap()
}

pub fn kv(k: &str, v: &str) -> (String, String) {
    (k.to_string(), v.to_string())
}

/// Synthetic field in about -50..55 with NaN holes at scattered cells.
pub fn field(band: usize) -> Vec<f32> {
    (0..W * H)
        .map(|i| {
            if (i * 7 + band) % 13 == 5 {
                f32::NAN
            } else {
                (i as f32 * 0.29 + band as f32).cos() * 50.0 + band as f32 * 2.5
            }
        })
        .collect()
}

pub struct Layer {
    pub data: Vec<Vec<f32>>,
    pub descriptions: Vec<String>,
    pub metadata: Vec<Vec<(String, String)>>,
    pub dataset: Vec<(String, String)>,
}

pub fn layer() -> Layer {
    Layer {
        data: (0..3).map(field).collect(),
        descriptions: vec![
            "shift -100 km".into(),
            "shift 0 km".into(),
            "shift +100 km & <more>".into(),
        ],
        metadata: (0..3)
            .map(|b| {
                vec![
                    kv("cross_track_km", &format!("{}", b * 100 - 100)),
                    kv("units", "cm"),
                ]
            })
            .collect(),
        dataset: vec![
            kv("layer", "snowfall by track shift"),
            kv("scenario", "invented"),
        ],
    }
}

pub fn write(dir: &Path, name: &str, l: &Layer, encoding: SampleEncoding) -> PathBuf {
    let path = dir.join(name);
    let bands: Vec<BandSpec> = (0..3)
        .map(|b| BandSpec {
            data: &l.data[b],
            description: l.descriptions[b].clone(),
            metadata: l.metadata[b].clone(),
        })
        .collect();
    let georef = Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: GT,
    };
    let opts = WriteOptions {
        encoding,
        nodata: -9999.0,
        dataset_metadata: l.dataset.clone(),
        band_scaling: vec![],
    };
    write_cog(&path, W, H, &georef, &bands, &opts, &CogOptions::default()).unwrap();
    path
}

pub fn gdalinfo(path: &Path) -> Json {
    serde_json::from_str(&run(
        "gdalinfo",
        &["-json", "-stats", path.to_str().unwrap()],
    ))
    .unwrap()
}

pub fn assert_georeferencing(info: &Json) {
    assert_eq!(info.at("size/0").num(), Some(W as f64));
    assert_eq!(info.at("size/1").num(), Some(H as f64));
    let gt: Vec<f64> = info
        .at("geoTransform")
        .arr()
        .iter()
        .filter_map(Json::as_f64)
        .collect();
    assert_eq!(gt, GT);
    let wkt = info.at("coordinateSystem/wkt").str().unwrap();
    assert!(wkt.trim_end().ends_with("ID[\"EPSG\",4326]]"), "{wkt}");
    assert_eq!(info.at("metadata//AREA_OR_POINT").str(), Some("Area"));
}

/// Values equal, NaN matching NaN, within `tol`.
pub fn assert_close(got: &[f32], want: &[f32], tol: f32, what: &str) {
    assert_eq!(got.len(), want.len(), "{what}");
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        let ok = (g.is_nan() && w.is_nan()) || (g - w).abs() <= tol;
        assert!(ok, "{what}: cell {i}: got {g}, want {w}");
    }
}
