//! The cloud-optimised writer against GDAL 3.6:
//! - `gdalinfo -json`: `LAYOUT=COG` (GDAL recognises its structural metadata and IFD order),
//!   256×256 blocks, the overview sizes, nodata, scale/offset;
//! - GDAL's `validate_cloud_optimized_geotiff.py --full-check=yes` (Debian `python3-gdal`):
//!   IFDs before data, smallest overview's tiles first, tile leaders and trailers;
//! - `gdallocationinfo` on the full image and on overview IFDs (`GTIFF_DIR:n:file`): values equal
//!   what we wrote, overview cells the 2×2 mean of valid cells (computed here independently);
//! - BigTIFF (forced) read by GDAL and by the `tiff` crate;
//! - bytes identical for 1 and 2 rayon threads (no GDAL needed).

use std::path::{Path, PathBuf};
use std::process::Command;

use super::super::reference::gdal::{assert_close, gdal_available, run};
use trackswing::geotiff::*;

const W: usize = 600;
const H: usize = 400;
const GT: [f64; 6] = [-110.0, 0.05, 0.0, 52.0, 0.0, -0.05];

/// Smooth field with a missing block and scattered missing cells.
fn field(band: usize) -> Vec<f32> {
    (0..W * H)
        .map(|i| {
            let (c, r) = (i % W, i / W);
            if (100..140).contains(&c) && (50..90).contains(&r)
                || (i * 31 + band).is_multiple_of(97)
            {
                f32::NAN
            } else {
                ((c as f32 * 0.013).sin() * 20.0 + r as f32 * 0.05 + band as f32 * 3.0).max(0.0)
            }
        })
        .collect()
}

fn write(
    dir: &Path,
    name: &str,
    data: &[Vec<f32>],
    encoding: SampleEncoding,
    band_scaling: Vec<(f64, f64)>,
    bigtiff: BigTiff,
) -> (PathBuf, CogReport) {
    let path = dir.join(name);
    let bands: Vec<BandSpec> = data
        .iter()
        .enumerate()
        .map(|(b, d)| BandSpec {
            data: d,
            description: format!("band {b}"),
            metadata: vec![("units".into(), "cm".into())],
        })
        .collect();
    let opts = WriteOptions {
        encoding,
        nodata: -9999.0,
        dataset_metadata: vec![("layer".into(), "test".into())],
        band_scaling,
    };
    let cog = CogOptions {
        bigtiff,
        ..CogOptions::default()
    };
    let georef = Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: GT,
    };
    let report = write_cog(&path, W, H, &georef, &bands, &opts, &cog).unwrap();
    (path, report)
}

fn values_at(file: &str, col: usize, row: usize) -> Vec<f64> {
    run(
        "gdallocationinfo",
        &["-valonly", file, &col.to_string(), &row.to_string()],
    )
    .lines()
    .map(|s| s.trim().parse().unwrap())
    .collect()
}

/// Overview cell (c, r) of a factor-`f` overview: mean of the valid full-resolution cells it
/// covers, reduced level by level as the writer does (each level halves the previous one).
fn expected_overview(data: &[f32], levels: usize, col: usize, row: usize) -> f32 {
    let mut cur = data.to_vec();
    let (mut w, mut h) = (W, H);
    for _ in 0..levels {
        let (w2, h2) = (w.div_ceil(2), h.div_ceil(2));
        let mut next = vec![f32::NAN; w2 * h2];
        for r in 0..h2 {
            for c in 0..w2 {
                let vals: Vec<f64> = [(0, 0), (1, 0), (0, 1), (1, 1)]
                    .iter()
                    .filter(|(dc, dr)| 2 * c + dc < w && 2 * r + dr < h)
                    .map(|(dc, dr)| cur[(2 * r + dr) * w + 2 * c + dc])
                    .filter(|v| !v.is_nan())
                    .map(f64::from)
                    .collect();
                if !vals.is_empty() {
                    next[r * w2 + c] = (vals.iter().sum::<f64>() / vals.len() as f64) as f32;
                }
            }
        }
        cur = next;
        (w, h) = (w2, h2);
    }
    cur[row * w + col]
}

fn cog_validator() -> Option<&'static str> {
    const SCRIPT: &str =
        "/usr/lib/python3/dist-packages/osgeo_utils/samples/validate_cloud_optimized_geotiff.py";
    let ok = Path::new(SCRIPT).is_file()
        && Command::new("/usr/bin/python3")
            .args(["-c", "from osgeo import gdal"])
            .output()
            .is_ok_and(|o| o.status.success());
    if !ok {
        if std::env::var("TRACKSWING_REQUIRE_REFERENCES").as_deref() == Ok("1") {
            panic!("GDAL's COG validator ({SCRIPT}, Debian python3-gdal) is missing but TRACKSWING_REQUIRE_REFERENCES=1");
        }
        eprintln!("note: GDAL's COG validator not installed (python3-gdal); skipping that check");
        return None;
    }
    Some(SCRIPT)
}

#[test]
fn gdal_reads_cog_layout_overviews_and_values() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..3).map(field).collect();
    let (path, report) = write(
        dir.path(),
        "cog.tif",
        &data,
        SampleEncoding::Float32,
        vec![],
        BigTiff::Auto,
    );
    assert_eq!(report.overviews, vec![(300, 200), (150, 100)]);
    assert!(!report.bigtiff);
    assert_eq!(
        report.bytes,
        std::fs::metadata(&path).unwrap().len(),
        "reported size is the file's"
    );
    let file = path.to_str().unwrap();
    let info: serde_json::Value = serde_json::from_str(&run("gdalinfo", &["-json", file])).unwrap();
    let structure = &info["metadata"]["IMAGE_STRUCTURE"];
    assert_eq!(structure["LAYOUT"], "COG", "{structure}");
    assert_eq!(structure["COMPRESSION"], "DEFLATE");
    assert_eq!(structure["INTERLEAVE"], "BAND");
    assert_eq!(structure["PREDICTOR"], "3");
    for band in info["bands"].as_array().unwrap() {
        assert_eq!(band["block"], serde_json::json!([256, 256]));
        assert_eq!(band["noDataValue"], -9999.0);
        let ovr: Vec<_> = band["overviews"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| o["size"].clone())
            .collect();
        assert_eq!(
            ovr,
            [serde_json::json!([300, 200]), serde_json::json!([150, 100])]
        );
    }
    if let Some(script) = cog_validator() {
        let out = Command::new("/usr/bin/python3")
            .args([script, "--full-check=yes", file])
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            out.status.success() && text.contains("is a valid cloud optimized GeoTIFF"),
            "{text}{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    // Full resolution in the first and a later tile, and a missing cell.
    for (c, r) in [(5, 3), (300, 270), (599, 399), (120, 60)] {
        let got = values_at(file, c, r);
        for b in 0..3 {
            // gdallocationinfo prints 15 significant digits: compare as Float32.
            let want = data[b][r * W + c];
            let want = if want.is_nan() { -9999.0 } else { want };
            assert_eq!(got[b] as f32, want, "band {b} cell {c},{r}");
        }
    }
    // Overviews: GTIFF_DIR:2 is the first overview (factor 2), GTIFF_DIR:3 the second.
    for (dir_index, levels, cells) in [
        (2, 1, [(0usize, 0usize), (60, 30), (299, 199)]),
        (3, 2, [(0, 0), (30, 17), (149, 99)]),
    ] {
        let name = format!("GTIFF_DIR:{dir_index}:{file}");
        for (c, r) in cells {
            let got = values_at(&name, c, r);
            for b in 0..3 {
                let want = expected_overview(&data[b], levels, c, r);
                let want = if want.is_nan() {
                    -9999.0
                } else {
                    f64::from(want)
                };
                assert!(
                    (got[b] - want).abs() <= 1e-6 * want.abs().max(1.0),
                    "overview {levels} band {b} cell {c},{r}: GDAL {} vs mean {want}",
                    got[b]
                );
            }
        }
    }
    // Our reader reads the full-resolution image back exactly.
    let r = read_geotiff(&path).unwrap();
    assert_eq!(r.bands.len(), 3);
    for (b, (got, want)) in r.bands.iter().zip(&data).enumerate() {
        assert_close(got, want, 0.0, &format!("band {b}"));
    }
}

#[test]
fn gdal_reads_int16_cog_with_per_band_scaling() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..2).map(field).collect();
    let scaling = vec![(0.01, 0.0), (0.005, -10.0)];
    let (path, _) = write(
        dir.path(),
        "int16.tif",
        &data,
        SampleEncoding::Int16Scaled {
            scale: 0.01,
            offset: 0.0,
        },
        scaling.clone(),
        BigTiff::Auto,
    );
    let file = path.to_str().unwrap();
    let info: serde_json::Value = serde_json::from_str(&run("gdalinfo", &["-json", file])).unwrap();
    assert_eq!(info["metadata"]["IMAGE_STRUCTURE"]["LAYOUT"], "COG");
    assert_eq!(info["metadata"]["IMAGE_STRUCTURE"]["PREDICTOR"], "2");
    for (b, band) in info["bands"].as_array().unwrap().iter().enumerate() {
        assert_eq!(band["type"], "Int16");
        assert_eq!(band["noDataValue"], -32768.0);
        assert_eq!(band["scale"], scaling[b].0);
        assert_eq!(band["offset"], scaling[b].1);
    }
    // GDAL returns raw values; raw = round((v - offset) / scale).
    for (c, r) in [(7, 9), (400, 300), (120, 60)] {
        let got = values_at(file, c, r);
        for b in 0..2 {
            let v = data[b][r * W + c];
            let (s, o) = scaling[b];
            let want = if v.is_nan() {
                -32768.0
            } else {
                ((f64::from(v) - o) / s).round()
            };
            assert_eq!(got[b], want, "band {b} cell {c},{r}");
        }
    }
    let r = read_geotiff(&path).unwrap();
    for b in 0..2 {
        assert_close(
            &r.bands[b],
            &data[b],
            (scaling[b].0 / 2.0) as f32 + 1e-4,
            &format!("band {b}"),
        );
    }
}

#[test]
fn forced_bigtiff_reads_in_gdal_and_in_the_tiff_crate() {
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..2).map(field).collect();
    let (path, report) = write(
        dir.path(),
        "big.tif",
        &data,
        SampleEncoding::Float32,
        vec![],
        BigTiff::Always,
    );
    assert!(report.bigtiff);
    let head = std::fs::read(&path).unwrap();
    // BigTIFF header (BigTIFF specification, 2004): version 43, offset size 8, reserved 0.
    assert_eq!(u16::from_le_bytes([head[2], head[3]]), 43);
    assert_eq!(u16::from_le_bytes([head[4], head[5]]), 8);
    let r = read_geotiff(&path).unwrap();
    assert_eq!(r.bands.len(), 2);
    for (b, (got, want)) in r.bands.iter().zip(&data).enumerate() {
        assert_close(got, want, 0.0, &format!("band {b}"));
    }
    if !gdal_available() {
        return;
    }
    let file = path.to_str().unwrap();
    let info: serde_json::Value = serde_json::from_str(&run("gdalinfo", &["-json", file])).unwrap();
    assert_eq!(info["metadata"]["IMAGE_STRUCTURE"]["LAYOUT"], "COG");
    let got = values_at(file, 333, 222);
    assert_eq!(got[1] as f32, data[1][222 * W + 333]);
}

#[test]
fn cog_bytes_do_not_depend_on_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..4).map(field).collect();
    let mut files = Vec::new();
    for threads in [1, 2, 3] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        let (path, _) = pool.install(|| {
            write(
                dir.path(),
                &format!("t{threads}.tif"),
                &data,
                SampleEncoding::Float32,
                vec![],
                BigTiff::Auto,
            )
        });
        files.push(std::fs::read(path).unwrap());
    }
    assert!(files[0] == files[1] && files[1] == files[2]);
}
