//! GeoTIFF reader: the first image of a TIFF (strips or tiles, chunky or planar, any predictor and
//! compression the `tiff` crate decodes), its GeoKeys and GDAL metadata.
//!
//! Known gap, in tiff 0.11.3: LZW tiles *without* a predictor whose tile extends past the image
//! edge fail to decode ("no lzw end code found"), reported as a truncated tile. GDAL files with
//! LZW + predictor 2/3, LZW strips, Deflate or no compression read fine (tests/gdal_reference.rs).

use std::fs::File;
use std::io::BufReader;
use std::path::Path;

use tiff::decoder::ifd::Value;
use tiff::decoder::{ChunkType, Decoder, DecodingResult};
use tiff::tags::Tag;

use super::geokeys::{GeoKeys, GEO_ASCII_PARAMS, GEO_DOUBLE_PARAMS, GEO_KEY_DIRECTORY};
use super::metadata::{parse_number, split_items, SplitMetadata};
use super::xml::parse_xml;
use super::{tag, Crs, GeoTiffError, Georef, Raster};

type Dec = Decoder<BufReader<File>>;

/// Reads a GeoTIFF: values come back as physical values (raw * scale + offset where GDAL
/// metadata gives a band scale/offset), NaN where the raw sample equals the GDAL nodata value.
///
/// Only the first image directory is read (overviews and masks are ignored). Accepted samples:
/// unsigned/signed 8/16/32-bit integers and 32/64-bit floats.
pub fn read_geotiff(path: &Path) -> Result<Raster, GeoTiffError> {
    let file = File::open(path).map_err(|source| GeoTiffError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let mut dec = Decoder::new(BufReader::new(file))
        .map_err(|e| GeoTiffError::from_tiff(path, "the TIFF header or first directory", e))?;
    let t = |e| GeoTiffError::from_tiff(path, "the image directory", e);
    let (w, h) = dec.dimensions().map_err(t)?;
    let (width, height) = (w as usize, h as usize);
    let spp: usize = dec
        .find_tag_unsigned(Tag::SamplesPerPixel)
        .map_err(t)?
        .unwrap_or(1);
    let planar = dec
        .find_tag_unsigned::<u16>(Tag::PlanarConfiguration)
        .map_err(t)?
        .unwrap_or(1)
        == 2;
    check_sample_type(path, &mut dec)?;
    if spp == 0 || width == 0 || height == 0 {
        return Err(GeoTiffError::InvalidSize {
            path: path.to_path_buf(),
            width,
            height,
            bands: spp,
        });
    }

    check_plausible_size(path, width, height, spp)?;

    let georef = read_georef(path, &mut dec)?;
    let nodata = match ascii_tag(path, &mut dec, tag::GDAL_NODATA, "GDAL_NODATA")? {
        None => None,
        Some(s) => Some(parse_number(&s).ok_or_else(|| GeoTiffError::BadTag {
            path: path.to_path_buf(),
            tag: tag::GDAL_NODATA,
            name: "GDAL_NODATA",
            what: format!("{s:?} is not a number"),
        })?),
    };
    let meta = match ascii_tag(path, &mut dec, tag::GDAL_METADATA, "GDAL_METADATA")? {
        None => split_items(Vec::new(), spp),
        Some(xml) => {
            let items = parse_xml(&xml).map_err(|e| GeoTiffError::MetadataXml {
                path: path.to_path_buf(),
                offset: e.offset,
                what: e.what,
            })?;
            split_items(items, spp)
        }
    }
    .map_err(|what| GeoTiffError::BandCount {
        path: path.to_path_buf(),
        what: format!("tag 42112 (GDAL_METADATA): {what}"),
    })?;

    let bands = read_samples(path, &mut dec, width, height, spp, planar, nodata, &meta)?;
    Ok(Raster {
        width,
        height,
        georef,
        nodata,
        bands,
        descriptions: meta.descriptions,
        band_metadata: meta.band_metadata,
        dataset_metadata: meta.dataset,
    })
}

fn check_sample_type(path: &Path, dec: &mut Dec) -> Result<(), GeoTiffError> {
    let t = |e| GeoTiffError::from_tiff(path, "the image directory", e);
    let formats: Vec<u16> = dec
        .find_tag_unsigned_vec(Tag::SampleFormat)
        .map_err(t)?
        .unwrap_or_else(|| vec![1]);
    let bits: Vec<u16> = dec
        .find_tag_unsigned_vec(Tag::BitsPerSample)
        .map_err(t)?
        .unwrap_or_else(|| vec![1]);
    let uniform = |v: &[u16]| v.windows(2).all(|p| p[0] == p[1]);
    let unsupported = |what: String| GeoTiffError::Unsupported {
        path: path.to_path_buf(),
        what,
    };
    if !uniform(&formats) || !uniform(&bits) {
        return Err(unsupported(format!(
            "bands with different sample types (SampleFormat {formats:?}, BitsPerSample {bits:?})"
        )));
    }
    match (
        formats.first().copied().unwrap_or(1),
        bits.first().copied().unwrap_or(1),
    ) {
        (1 | 2, 8 | 16 | 32) | (3, 32 | 64) => Ok(()),
        (f, b) => Err(unsupported(format!(
            "sample format {f} with {b} bits per sample"
        ))),
    }
}

/// Reads an ASCII tag, `None` if absent.
fn ascii_tag(
    path: &Path,
    dec: &mut Dec,
    tag: u16,
    name: &'static str,
) -> Result<Option<String>, GeoTiffError> {
    let bad = |what: String| GeoTiffError::BadTag {
        path: path.to_path_buf(),
        tag,
        name,
        what,
    };
    match dec.find_tag(Tag::Unknown(tag)) {
        Ok(None) => Ok(None),
        Ok(Some(Value::Ascii(s))) => Ok(Some(s)),
        Ok(Some(v)) => Err(bad(format!("expected ASCII text, found {v:?}"))),
        Err(e) => Err(bad(e.to_string())),
    }
}

/// Reads a DOUBLE-array tag, `None` if absent.
fn doubles_tag(
    path: &Path,
    dec: &mut Dec,
    tag: u16,
    name: &'static str,
) -> Result<Option<Vec<f64>>, GeoTiffError> {
    let found = dec
        .find_tag(Tag::Unknown(tag))
        .and_then(|v| v.map(|v| v.into_f64_vec()).transpose());
    found.map_err(|e| GeoTiffError::BadTag {
        path: path.to_path_buf(),
        tag,
        name,
        what: e.to_string(),
    })
}

/// Geotransform from ModelTransformation, or from ModelPixelScale + a single ModelTiepoint
/// (OGC 19-008r4 §7.2), converted to pixel-is-area as GDAL does.
fn read_georef(path: &Path, dec: &mut Dec) -> Result<Georef, GeoTiffError> {
    let bad = |tag: u16, name: &'static str, what: String| GeoTiffError::BadTag {
        path: path.to_path_buf(),
        tag,
        name,
        what,
    };
    let dir: Vec<u16> = dec
        .find_tag_unsigned_vec(Tag::Unknown(GEO_KEY_DIRECTORY))
        .map_err(|e| bad(GEO_KEY_DIRECTORY, "GeoKeyDirectoryTag", e.to_string()))?
        .ok_or_else(|| {
            bad(
                GEO_KEY_DIRECTORY,
                "GeoKeyDirectoryTag",
                "missing: not a GeoTIFF".into(),
            )
        })?;
    let doubles =
        doubles_tag(path, dec, GEO_DOUBLE_PARAMS, "GeoDoubleParamsTag")?.unwrap_or_default();
    let ascii = ascii_tag(path, dec, GEO_ASCII_PARAMS, "GeoAsciiParamsTag")?.unwrap_or_default();
    let (crs, is_point): (Crs, bool) = GeoKeys::decode(path, &dir, &doubles, &ascii)?.crs(path)?;

    let transform = doubles_tag(path, dec, 34264, "ModelTransformationTag")?;
    let scale = doubles_tag(path, dec, 33550, "ModelPixelScaleTag")?;
    let tiepoint = doubles_tag(path, dec, 33922, "ModelTiepointTag")?;
    let mut gt = match (transform, scale, tiepoint) {
        (Some(m), _, _) => {
            if m.len() != 16 {
                return Err(bad(
                    34264,
                    "ModelTransformationTag",
                    format!("{} values, expected 16", m.len()),
                ));
            }
            [m[3], m[0], m[1], m[7], m[4], m[5]]
        }
        (None, Some(s), Some(tp)) => {
            if s.len() < 2 {
                return Err(bad(
                    33550,
                    "ModelPixelScaleTag",
                    format!("{} values, expected 3", s.len()),
                ));
            }
            if tp.len() != 6 {
                return Err(bad(
                    33922,
                    "ModelTiepointTag",
                    format!(
                        "{} values: only a single tiepoint is supported (no ground control points)",
                        tp.len()
                    ),
                ));
            }
            [
                tp[3] - tp[0] * s[0],
                s[0],
                0.0,
                tp[4] + tp[1] * s[1],
                0.0,
                -s[1],
            ]
        }
        _ => {
            return Err(bad(
                33550,
                "ModelPixelScaleTag",
                "no ModelTransformation and no ModelPixelScale + ModelTiepoint".into(),
            ))
        }
    };
    if is_point {
        gt[0] -= 0.5 * (gt[1] + gt[2]);
        gt[3] -= 0.5 * (gt[4] + gt[5]);
    }
    Ok(Georef {
        crs,
        geotransform: gt,
    })
}

/// The most decoded bytes one byte of a TIFF file can stand for. Deflate tops out near 1032:1 and
/// 12-bit LZW codes can stand for strings of up to 4096 bytes, so 4096 bounds every compression
/// the `tiff` crate decodes (zlib's own documentation for Deflate; TIFF 6.0 §13 for LZW).
const MAX_DECODED_PER_FILE_BYTE: u128 = 4096;

/// Refuses a directory whose declared size no file of this length could hold, before anything is
/// allocated: a corrupted width or height must give an error, not an attempt to allocate
/// hundreds of gigabytes.
fn check_plausible_size(
    path: &Path,
    width: usize,
    height: usize,
    spp: usize,
) -> Result<(), GeoTiffError> {
    let file_len = std::fs::metadata(path)
        .map_err(|source| GeoTiffError::Io {
            path: path.to_path_buf(),
            source,
        })?
        .len();
    let samples = width as u128 * height as u128 * spp as u128;
    if samples > file_len as u128 * MAX_DECODED_PER_FILE_BYTE {
        return Err(GeoTiffError::ImplausibleSize {
            path: path.to_path_buf(),
            width,
            height,
            bands: spp,
            file_len,
        });
    }
    Ok(())
}

/// Decodes every strip or tile into per-band rows, applying nodata and scale/offset.
#[allow(clippy::too_many_arguments)]
fn read_samples(
    path: &Path,
    dec: &mut Dec,
    width: usize,
    height: usize,
    spp: usize,
    planar: bool,
    nodata: Option<f64>,
    meta: &SplitMetadata,
) -> Result<Vec<Vec<f32>>, GeoTiffError> {
    let kind = match dec.get_chunk_type() {
        ChunkType::Strip => "strip",
        ChunkType::Tile => "tile",
    };
    let (cw, ch) = dec.chunk_dimensions();
    let (cw, ch) = (cw as usize, ch as usize);
    if cw == 0 || ch == 0 {
        return Err(GeoTiffError::Unsupported {
            path: path.to_path_buf(),
            what: format!("{kind} size {cw} x {ch}"),
        });
    }
    let (across, down) = (width.div_ceil(cw), height.div_ceil(ch));
    let planes = if planar { spp } else { 1 };
    let per_chunk = if planar { 1 } else { spp };
    let cells = width * height;
    let mut bands = Vec::with_capacity(spp);
    for _ in 0..spp {
        let mut band = Vec::new();
        band.try_reserve_exact(cells)
            .map_err(|_| GeoTiffError::Unsupported {
                path: path.to_path_buf(),
                what: format!("{width} x {height} x {spp} samples do not fit in memory"),
            })?;
        band.resize(cells, 0f32);
        bands.push(band);
    }
    let scale: Vec<f64> = meta.scale.iter().map(|s| s.unwrap_or(1.0)).collect();
    let offset: Vec<f64> = meta.offset.iter().map(|o| o.unwrap_or(0.0)).collect();

    for idx in 0..across * down * planes {
        let plane = idx / (across * down);
        let (cr, cc) = ((idx % (across * down)) / across, idx % across);
        let what = format!("{kind} {idx}");
        let chunk = dec
            .read_chunk(idx as u32)
            .map_err(|e| GeoTiffError::from_tiff(path, &what, e))?;
        let (raw, typed_nodata) =
            to_f64(&chunk, nodata).ok_or_else(|| GeoTiffError::Unsupported {
                path: path.to_path_buf(),
                what: format!("sample type of {what}"),
            })?;
        let (dw, dh) = dec.chunk_data_dimensions(idx as u32);
        let stride = dw as usize * per_chunk;
        if raw.len() < stride * dh as usize {
            return Err(GeoTiffError::Truncated {
                path: path.to_path_buf(),
                what,
            });
        }
        for (r, line) in raw.chunks(stride).take(dh as usize).enumerate() {
            let row = cr * ch + r;
            if row >= height {
                break;
            }
            for (c, px) in line.chunks(per_chunk).enumerate() {
                let col = cc * cw + c;
                if col >= width {
                    break;
                }
                for (s, &v) in px.iter().enumerate() {
                    let band = if planar { plane } else { s };
                    bands[band][row * width + col] = if Some(v) == typed_nodata || v.is_nan() {
                        f32::NAN
                    } else {
                        (v * scale[band] + offset[band]) as f32
                    };
                }
            }
        }
    }
    Ok(bands)
}

/// Samples as f64 (exact for every accepted type) and the nodata value as the sample type holds
/// it (a Float32 file stores nodata rounded to f32, as GDAL compares it).
fn to_f64(chunk: &DecodingResult, nodata: Option<f64>) -> Option<(Vec<f64>, Option<f64>)> {
    fn conv<T: Copy + Into<f64>>(v: &[T]) -> Vec<f64> {
        v.iter().map(|&x| x.into()).collect()
    }
    let (vals, f32_file) = match chunk {
        DecodingResult::U8(v) => (conv(v), false),
        DecodingResult::I8(v) => (conv(v), false),
        DecodingResult::U16(v) => (conv(v), false),
        DecodingResult::I16(v) => (conv(v), false),
        DecodingResult::U32(v) => (conv(v), false),
        DecodingResult::I32(v) => (conv(v), false),
        DecodingResult::F32(v) => (conv(v), true),
        DecodingResult::F64(v) => (v.clone(), false),
        _ => return None,
    };
    let typed = nodata.map(|n| if f32_file { f64::from(n as f32) } else { n });
    Some((vals, typed))
}
