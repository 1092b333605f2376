//! Write → read round trips and file-structure checks for the whole module. Structure is checked
//! with the `tiff` crate's decoder (an implementation independent of this writer) against the tag
//! values TIFF 6.0 / OGC 19-008r4 / GDAL's conventions prescribe.

use std::path::{Path, PathBuf};

use tiff::decoder::Decoder;
use tiff::tags::Tag;

use super::*;

const GT: [f64; 6] = [-104.0, 0.25, 0.0, 49.5, 0.0, -0.125];

fn georef() -> Georef {
    Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: GT,
    }
}

fn kv(k: &str, v: &str) -> (String, String) {
    (k.to_string(), v.to_string())
}

/// Deterministic test field spanning negative and positive values, with NaN holes.
fn field(width: usize, height: usize, band: usize) -> Vec<f32> {
    (0..width * height)
        .map(|i| {
            if (i + band) % 11 == 3 {
                f32::NAN
            } else {
                (i as f32 * 0.37 + band as f32 * 10.0).sin() * 50.0 + band as f32
            }
        })
        .collect()
}

fn specs(data: &[Vec<f32>]) -> Vec<BandSpec<'_>> {
    data.iter()
        .enumerate()
        .map(|(i, d)| BandSpec {
            data: d,
            description: format!("cross_track_shift_{i} km & \"more\""),
            metadata: vec![
                kv("shift_km", &format!("{}", i as i32 * 50 - 50)),
                kv("units", "m <snow>"),
            ],
        })
        .collect()
}

fn float_opts() -> WriteOptions {
    WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: -9999.0,
        dataset_metadata: vec![
            kv("layer", "snowfall vs track shift"),
            kv("note", "invented test data"),
        ],
        band_scaling: vec![],
    }
}

fn write(
    dir: &Path,
    name: &str,
    w: usize,
    h: usize,
    data: &[Vec<f32>],
    opts: &WriteOptions,
) -> PathBuf {
    let path = dir.join(name);
    write_cog(
        &path,
        w,
        h,
        &georef(),
        &specs(data),
        opts,
        &CogOptions::default(),
    )
    .unwrap();
    path
}

fn same_with_nan(a: &[f32], b: &[f32]) -> bool {
    a.len() == b.len()
        && a.iter()
            .zip(b)
            .all(|(x, y)| (x.is_nan() && y.is_nan()) || x == y)
}

#[test]
fn float32_round_trip_keeps_values_nodata_and_metadata() {
    let dir = tempfile::tempdir().unwrap();
    // 37 rows = 2 full strips + a partial one; 7 columns.
    let (w, h) = (7, 37);
    let data: Vec<Vec<f32>> = (0..3).map(|b| field(w, h, b)).collect();
    let opts = float_opts();
    let r = read_geotiff(&write(dir.path(), "f.tif", w, h, &data, &opts)).unwrap();
    assert_eq!((r.width, r.height), (w, h));
    assert_eq!(r.georef, georef());
    assert_eq!(r.nodata, Some(-9999.0));
    for (b, d) in data.iter().enumerate() {
        assert!(same_with_nan(&r.bands[b], d), "band {b}");
    }
    let sp = specs(&data);
    assert_eq!(
        r.descriptions,
        sp.iter().map(|s| s.description.clone()).collect::<Vec<_>>()
    );
    assert_eq!(
        r.band_metadata,
        sp.iter().map(|s| s.metadata.clone()).collect::<Vec<_>>()
    );
    assert_eq!(r.dataset_metadata, opts.dataset_metadata);
}

#[test]
fn int16_scaled_round_trip_is_within_half_a_step() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (19, 5);
    let data: Vec<Vec<f32>> = (0..2).map(|b| field(w, h, b)).collect();
    let (scale, offset) = (0.01, 2.5);
    let opts = WriteOptions {
        encoding: SampleEncoding::Int16Scaled { scale, offset },
        ..float_opts()
    };
    let r = read_geotiff(&write(dir.path(), "i.tif", w, h, &data, &opts)).unwrap();
    assert_eq!(r.nodata, Some(-32768.0));
    for (b, d) in data.iter().enumerate() {
        for (got, want) in r.bands[b].iter().zip(d) {
            if want.is_nan() {
                assert!(got.is_nan());
            } else {
                assert!(
                    (got - want).abs() <= 0.5 * scale as f32 + 1e-4,
                    "{got} vs {want}"
                );
            }
        }
    }
    // Scale/offset are consumed, not reported as ordinary metadata.
    assert_eq!(r.band_metadata[0], specs(&data)[0].metadata);
}

#[test]
fn output_is_deterministic() {
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..4).map(|b| field(33, 40, b)).collect();
    let a = std::fs::read(write(dir.path(), "a.tif", 33, 40, &data, &float_opts())).unwrap();
    let b = std::fs::read(write(dir.path(), "b.tif", 33, 40, &data, &float_opts())).unwrap();
    assert_eq!(a, b);
}

#[test]
fn tags_follow_tiff_geotiff_and_gdal_conventions() {
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..3).map(|b| field(5, 40, b)).collect();
    let path = write(dir.path(), "t.tif", 5, 40, &data, &float_opts());
    let mut d = Decoder::new(std::fs::File::open(&path).unwrap()).unwrap();
    let u16s = |d: &mut Decoder<_>, t| d.get_tag_u16_vec(t).unwrap();
    assert_eq!(u16s(&mut d, Tag::SamplesPerPixel), [3]);
    assert_eq!(u16s(&mut d, Tag::PlanarConfiguration), [2]); // TIFF 6.0: 2 = planar
    assert_eq!(u16s(&mut d, Tag::Compression), [8]); // Deflate
    assert_eq!(u16s(&mut d, Tag::Predictor), [3]); // TIFF TN3 floating point
    assert_eq!(u16s(&mut d, Tag::PhotometricInterpretation), [1]); // BlackIsZero
    assert_eq!(u16s(&mut d, Tag::SampleFormat), [3, 3, 3]); // IEEE float
    assert_eq!(u16s(&mut d, Tag::BitsPerSample), [32, 32, 32]);
    assert_eq!(u16s(&mut d, Tag::ExtraSamples), [0, 0]); // unspecified, as GDAL writes
                                                         // TIFF 6.0 §15: tiles a multiple of 16 (256, as GDAL's COG driver); 3 planes × 1 tile.
    assert_eq!(d.get_tag_u32(Tag::TileWidth).unwrap(), 256);
    assert_eq!(d.get_tag_u32(Tag::TileLength).unwrap(), 256);
    assert_eq!(d.get_tag_u32_vec(Tag::TileOffsets).unwrap().len(), 3);
    assert_eq!(
        d.get_tag_f64_vec(Tag::ModelPixelScaleTag).unwrap(),
        [0.25, 0.125, 0.0]
    );
    assert_eq!(
        d.get_tag_f64_vec(Tag::ModelTiepointTag).unwrap(),
        [0.0, 0.0, 0.0, -104.0, 49.5, 0.0]
    );
    assert_eq!(d.get_tag_ascii_string(Tag::GdalNodata).unwrap(), "-9999");
    // The tiff crate's own planar decoding (predictor 3 + deflate) agrees with what we wrote.
    let first = d.read_chunk(0).unwrap();
    let tiff::decoder::DecodingResult::F32(v) = first else {
        panic!("expected f32")
    };
    // The decoder crops the edge tile to the image: 5 × 40 values.
    let want: Vec<f32> = data[0]
        .iter()
        .map(|x| if x.is_nan() { -9999.0 } else { *x })
        .collect();
    assert_eq!(v, want);
}

#[test]
fn invalid_inputs_are_rejected_with_context() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.tif");
    let data = vec![0.0f32; 6];
    let band = |d: &'static [f32]| BandSpec {
        data: d,
        description: String::new(),
        metadata: vec![],
    };
    let opts = float_opts();

    let rotated = Georef {
        geotransform: [0.0, 1.0, 0.1, 0.0, 0.0, -1.0],
        ..georef()
    };
    let e = write_cog(
        &path,
        3,
        2,
        &rotated,
        &[BandSpec {
            data: &data,
            ..band(&[])
        }],
        &opts,
        &CogOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(e, GeoTiffError::Geotransform { .. }) && e.to_string().contains("x.tif"),
        "{e}"
    );

    let e = write_cog(
        &path,
        3,
        3,
        &georef(),
        &[BandSpec {
            data: &data,
            ..band(&[])
        }],
        &opts,
        &CogOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(
            e,
            GeoTiffError::BandLength {
                band: 0,
                got: 6,
                expected: 9,
                ..
            }
        ),
        "{e}"
    );

    let bad_key = BandSpec {
        data: &data,
        description: String::new(),
        metadata: vec![kv("a=b", "1")],
    };
    let e = write_cog(
        &path,
        3,
        2,
        &georef(),
        &[bad_key],
        &opts,
        &CogOptions::default(),
    )
    .unwrap_err();
    assert!(matches!(e, GeoTiffError::MetadataKey { .. }), "{e}");

    let big = [0.0, 1.0, 2.0, 3.0, 4.0, 400.0];
    let int = WriteOptions {
        encoding: SampleEncoding::Int16Scaled {
            scale: 0.01,
            offset: 0.0,
        },
        ..float_opts()
    };
    let e = write_cog(
        &path,
        3,
        2,
        &georef(),
        &[BandSpec {
            data: &big,
            ..band(&[])
        }],
        &int,
        &CogOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(
            e,
            GeoTiffError::OutOfRange {
                band: 0,
                row: 1,
                col: 2,
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn damaged_files_give_named_errors() {
    let dir = tempfile::tempdir().unwrap();
    let not_tiff = dir.path().join("not.tif");
    std::fs::write(&not_tiff, b"GRIB this is not a tiff").unwrap();
    let e = read_geotiff(&not_tiff).unwrap_err();
    assert!(
        matches!(e, GeoTiffError::NotTiff { .. }) && e.to_string().contains("not.tif"),
        "{e}"
    );

    let data: Vec<Vec<f32>> = (0..2).map(|b| field(8, 20, b)).collect();
    let good = std::fs::read(write(dir.path(), "g.tif", 8, 20, &data, &float_opts())).unwrap();
    let cut = dir.path().join("cut.tif");
    std::fs::write(&cut, &good[..good.len() - 40]).unwrap();
    let e = read_geotiff(&cut).unwrap_err();
    assert!(e.to_string().contains("cut.tif"), "{e}");
    assert!(
        matches!(
            e,
            GeoTiffError::Truncated { .. } | GeoTiffError::Tiff { .. }
        ),
        "{e:?}"
    );

    // Same length, broken closing tag inside the GDAL_METADATA text.
    let at = good.windows(7).position(|w| w == b"</Item>").unwrap();
    let mut broken = good.clone();
    broken[at + 2] = b'X';
    let bad_xml = dir.path().join("xml.tif");
    std::fs::write(&bad_xml, &broken).unwrap();
    let e = read_geotiff(&bad_xml).unwrap_err();
    assert!(matches!(e, GeoTiffError::MetadataXml { .. }), "{e:?}");
    assert!(
        e.to_string().contains("xml.tif") && e.to_string().contains("42112"),
        "{e}"
    );
}

#[test]
fn per_band_int16_scaling_round_trips() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (5, 3);
    let a: Vec<f32> = (0..15).map(|i| 250.0 + i as f32 * 0.25).collect();
    let b: Vec<f32> = (0..15).map(|i| 5000.0 + i as f32 * 10.0).collect();
    let bands = [
        BandSpec {
            data: &a,
            description: "t".into(),
            metadata: vec![],
        },
        BandSpec {
            data: &b,
            description: "z".into(),
            metadata: vec![],
        },
    ];
    let opts = WriteOptions {
        encoding: SampleEncoding::Int16Scaled {
            scale: 1.0,
            offset: 0.0,
        },
        band_scaling: vec![(0.01, 273.15), (0.5, 8000.0)],
        ..float_opts()
    };
    let p = dir.path().join("s.tif");
    write_cog(&p, w, h, &georef(), &bands, &opts, &CogOptions::default()).unwrap();
    let r = read_geotiff(&p).unwrap();
    for (x, y) in r.bands[0].iter().zip(&a) {
        assert!((x - y).abs() <= 0.005 + 1e-4, "{x} {y}");
    }
    for (x, y) in r.bands[1].iter().zip(&b) {
        assert!((x - y).abs() <= 0.25 + 1e-3, "{x} {y}");
    }
    let bad = WriteOptions {
        band_scaling: vec![(0.01, 0.0)],
        ..opts
    };
    assert!(write_cog(&p, w, h, &georef(), &bands, &bad, &CogOptions::default()).is_err());
}

/// Regression (found by tests/trackswing/fuzz.rs): a corrupted ImageWidth made the reader try to
/// allocate ~200 GB and abort. It must be an error naming the file, before any allocation.
#[test]
fn a_corrupted_width_is_refused_before_allocating() {
    let dir = tempfile::tempdir().unwrap();
    let data: Vec<Vec<f32>> = (0..2).map(|b| field(8, 20, b)).collect();
    let mut bytes = std::fs::read(write(dir.path(), "g.tif", 8, 20, &data, &float_opts())).unwrap();
    // Classic little-endian TIFF (TIFF 6.0 §2): "II", 42, offset of the first directory; each
    // directory entry is tag u16, type u16, count u32, value u32.
    assert_eq!(&bytes[..4], b"II*\0");
    let ifd = u32::from_le_bytes(bytes[4..8].try_into().unwrap()) as usize;
    let n = u16::from_le_bytes(bytes[ifd..ifd + 2].try_into().unwrap()) as usize;
    let entry = (0..n)
        .map(|i| ifd + 2 + 12 * i)
        .find(|&e| u16::from_le_bytes([bytes[e], bytes[e + 1]]) == 256)
        .expect("ImageWidth entry");
    // ImageWidth may be SHORT (3) or LONG (4); write the largest value of its type.
    match u16::from_le_bytes([bytes[entry + 2], bytes[entry + 3]]) {
        3 => bytes[entry + 8..entry + 10].copy_from_slice(&u16::MAX.to_le_bytes()),
        4 => bytes[entry + 8..entry + 12].copy_from_slice(&0x7fff_ffffu32.to_le_bytes()),
        t => panic!("ImageWidth of TIFF type {t}"),
    }
    let wide = dir.path().join("wide.tif");
    std::fs::write(&wide, &bytes).unwrap();
    let e = read_geotiff(&wide).unwrap_err();
    // A tiled file's tile counts no longer match the width, which the `tiff` crate finds while
    // opening the directory; a strip file (other writers) reaches our own size check. Either
    // way the file is refused by name before the declared size is allocated.
    assert!(
        matches!(
            e,
            GeoTiffError::ImplausibleSize { .. } | GeoTiffError::Tiff { .. }
        ),
        "{e:?}"
    );
    assert!(e.to_string().contains("wide.tif"), "{e}");
}
