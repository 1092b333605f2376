//! GDAL as the independent reference for the GeoTIFF writer and reader.
//!
//! Reference commands (GDAL 3.6.2, Debian `gdal-bin`):
//! - `gdalinfo -json -stats FILE`: CRS, geotransform, size, nodata, descriptions, metadata,
//!   scale/offset and band statistics as GDAL reads them from our file;
//! - `gdallocationinfo -valonly [-geoloc] FILE X Y`: the values of all bands at one pixel;
//! - `gdal_translate -co ...`: GDAL re-encodes our file (LZW/Deflate, tiled, pixel or band
//!   interleaved, Int16 with `-scale`), and our reader must recover the same values.
//!
//! Without `gdalinfo` on PATH the tests print a note and pass, unless
//! `TRACKSWING_REQUIRE_REFERENCES=1`, in which case they fail.
//!
//! `projected.rs` checks every CRS against PROJ (through GDAL), `cog.rs` the tiled,
//! cloud-optimised layout with overviews, Int16 and BigTIFF.

mod cog;
mod projected;

use crate::reference::gdal::*;
use crate::reference::JsonPath;
use trackswing::geotiff::*;

#[test]
fn gdal_reads_float32_layer_as_written() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let l = layer();
    let path = write(dir.path(), "float.tif", &l, SampleEncoding::Float32);
    let info = gdalinfo(&path);
    assert_georeferencing(&info);
    for (k, v) in &l.dataset {
        assert_eq!(info.at(&format!("metadata//{k}")).str(), Some(v.as_str()));
    }
    let bands = info.at("bands").arr();
    assert_eq!(bands.len(), 3);
    for (b, band) in bands.iter().enumerate() {
        assert_eq!(band.at("type").str(), Some("Float32"));
        assert_eq!(band.at("noDataValue").num(), Some(-9999.0));
        assert_eq!(
            band.at("description").str(),
            Some(l.descriptions[b].as_str())
        );
        for (k, v) in &l.metadata[b] {
            assert_eq!(
                band.at(&format!("metadata//{k}")).str(),
                Some(v.as_str()),
                "band {b} {k}"
            );
        }
        let valid: Vec<f64> = l.data[b]
            .iter()
            .filter(|v| !v.is_nan())
            .map(|&v| f64::from(v))
            .collect();
        let min = valid.iter().cloned().fold(f64::INFINITY, f64::min);
        let max = valid.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        let mean = valid.iter().sum::<f64>() / valid.len() as f64;
        // GDAL's population standard deviation.
        let sd =
            (valid.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / valid.len() as f64).sqrt();
        let pct = 100.0 * valid.len() as f64 / (W * H) as f64;
        // The STATISTICS_* items carry 14 significant digits (the top-level JSON numbers only 3
        // decimals), so compare with a relative tolerance of 1e-12.
        let stat = |k: &str| {
            band.at(&format!("metadata//STATISTICS_{k}"))
                .str()
                .unwrap()
                .parse::<f64>()
                .unwrap()
        };
        for (k, want) in [
            ("MINIMUM", min),
            ("MAXIMUM", max),
            ("MEAN", mean),
            ("STDDEV", sd),
        ] {
            let got = stat(k);
            assert!(
                (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                "band {b} {k}: {got} vs {want}"
            );
        }
        assert!(
            (stat("VALID_PERCENT") - pct).abs() < 0.005,
            "band {b} valid percent"
        );
    }
    // Pixel (col 5, row 3) by pixel/line and by its centre's lon/lat, then a nodata cell.
    let (col, row) = (5usize, 3usize);
    let lon = GT[0] + (col as f64 + 0.5) * GT[1];
    let lat = GT[3] + (row as f64 + 0.5) * GT[5];
    for args in [
        vec![
            "-valonly".to_string(),
            path.display().to_string(),
            col.to_string(),
            row.to_string(),
        ],
        vec![
            "-valonly".into(),
            "-geoloc".into(),
            path.display().to_string(),
            lon.to_string(),
            lat.to_string(),
        ],
    ] {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let vals: Vec<f64> = run("gdallocationinfo", &args)
            .lines()
            .map(|s| s.trim().parse().unwrap())
            .collect();
        let want: Vec<f32> = (0..3).map(|b| l.data[b][row * W + col]).collect();
        assert_eq!(
            vals.iter().map(|&v| v as f32).collect::<Vec<_>>(),
            want,
            "{args:?}"
        );
    }
    let hole = l.data[1].iter().position(|v| v.is_nan()).unwrap();
    let (hc, hr) = ((hole % W).to_string(), (hole / W).to_string());
    let out = run(
        "gdallocationinfo",
        &["-valonly", "-b", "2", path.to_str().unwrap(), &hc, &hr],
    );
    assert_eq!(out.trim().parse::<f64>().unwrap(), -9999.0);
}

#[test]
fn gdal_reads_int16_scaling_as_written() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let l = layer();
    let (scale, offset) = (0.01, 2.5);
    let path = write(
        dir.path(),
        "int16.tif",
        &l,
        SampleEncoding::Int16Scaled { scale, offset },
    );
    let info = gdalinfo(&path);
    assert_georeferencing(&info);
    for (b, band) in info.at("bands").arr().iter().enumerate() {
        assert_eq!(band.at("type").str(), Some("Int16"));
        assert_eq!(band.at("noDataValue").num(), Some(-32768.0));
        assert_eq!(band.at("scale").num(), Some(scale));
        assert_eq!(band.at("offset").num(), Some(offset));
        assert_eq!(
            band.at("description").str(),
            Some(l.descriptions[b].as_str())
        );
        assert_eq!(band.at("metadata//units").str(), Some("cm"));
    }
    let (col, row) = (20usize, 11usize);
    let out = run(
        "gdallocationinfo",
        &[
            "-valonly",
            path.to_str().unwrap(),
            &col.to_string(),
            &row.to_string(),
        ],
    );
    let raw: Vec<f64> = out.lines().map(|s| s.trim().parse().unwrap()).collect();
    let want: Vec<f64> = (0..3)
        .map(|b| {
            let v = l.data[b][row * W + col];
            if v.is_nan() {
                -32768.0
            } else {
                ((f64::from(v) - offset) / scale).round()
            }
        })
        .collect();
    assert_eq!(raw, want);
}

#[test]
fn reader_accepts_gdal_written_variants() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let l = layer();
    let src = write(dir.path(), "src.tif", &l, SampleEncoding::Float32);
    let src_s = src.to_str().unwrap();
    let variants: [(&str, &[&str]); 5] = [
        // Predictor 2 here: tiff 0.11.3 fails on LZW *without* predictor in partial edge tiles
        // ("no lzw end code found"), see the module notes of read.rs.
        (
            "lzw_tiled_pixel_p2.tif",
            &[
                "-co",
                "COMPRESS=LZW",
                "-co",
                "PREDICTOR=2",
                "-co",
                "TILED=YES",
                "-co",
                "BLOCKXSIZE=16",
                "-co",
                "BLOCKYSIZE=16",
            ],
        ),
        (
            "lzw_strips_band.tif",
            &["-co", "COMPRESS=LZW", "-co", "INTERLEAVE=BAND"],
        ),
        (
            "deflate_tiled_band_p3.tif",
            &[
                "-co",
                "COMPRESS=DEFLATE",
                "-co",
                "PREDICTOR=3",
                "-co",
                "TILED=YES",
                "-co",
                "BLOCKXSIZE=16",
                "-co",
                "BLOCKYSIZE=16",
                "-co",
                "INTERLEAVE=BAND",
            ],
        ),
        (
            "lzw_strips_pixel_p3.tif",
            &[
                "-co",
                "COMPRESS=LZW",
                "-co",
                "PREDICTOR=3",
                "-co",
                "BLOCKYSIZE=5",
            ],
        ),
        ("none_float64.tif", &["-ot", "Float64"]),
    ];
    for (name, opts) in variants {
        let out = dir.path().join(name);
        let mut args = opts.to_vec();
        args.extend_from_slice(&["-q", src_s, out.to_str().unwrap()]);
        run("gdal_translate", &args);
        let r = read_geotiff(&out).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!((r.width, r.height), (W, H), "{name}");
        assert_eq!(r.georef.crs, Crs::Wgs84Geographic, "{name}");
        assert_eq!(r.georef.geotransform, GT, "{name}");
        assert_eq!(r.nodata, Some(-9999.0), "{name}");
        assert_eq!(r.descriptions, l.descriptions, "{name}");
        assert_eq!(r.band_metadata, l.metadata, "{name}");
        for b in 0..3 {
            assert_close(&r.bands[b], &l.data[b], 0.0, &format!("{name} band {b}"));
        }
    }

    // Int16 with GDAL's linear rescaling: dst = (src - 5) * 100 over [-60, 70] -> [-6500, 6500],
    // recorded as scale 0.01 and offset 5 so that src = dst * 0.01 + 5.
    let out = dir.path().join("int16_scaled.tif");
    run(
        "gdal_translate",
        &[
            "-q",
            "-ot",
            "Int16",
            "-scale",
            "-60",
            "70",
            "-6500",
            "6500",
            "-a_scale",
            "0.01",
            "-a_offset",
            "5",
            "-co",
            "COMPRESS=DEFLATE",
            "-co",
            "PREDICTOR=2",
            src_s,
            out.to_str().unwrap(),
        ],
    );
    let r = read_geotiff(&out).unwrap();
    for b in 0..3 {
        assert_close(
            &r.bands[b],
            &l.data[b],
            0.005 + 1e-4,
            &format!("int16 band {b}"),
        );
    }
}
