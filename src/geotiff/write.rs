//! GeoTIFF writer: validates inputs, encodes every strip independently, then lays out one TIFF
//! directory with the GeoTIFF and GDAL tags.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::Path;

use tiff::encoder::TiffEncoder;
use tiff::tags::{Tag, Type};
use tiff::Directory;

use super::geokeys::GeoKeys;
use super::metadata::{build_xml, check_key, format_number, BandItems};
use super::strip::{encode_strip, StripError, INT16_NODATA};
use super::{tag, BandSpec, GeoTiffError, Georef, SampleEncoding, WriteOptions, STRIP_ROWS};

/// TIFF 6.0 Compression 8: Deflate (zlib stream), as registered by Adobe and written by GDAL.
const COMPRESSION_DEFLATE: u16 = 8;
/// TIFF 6.0 PhotometricInterpretation 1: BlackIsZero ("MinIsBlack").
const PHOTOMETRIC_MIN_IS_BLACK: u16 = 1;
/// TIFF 6.0 PlanarConfiguration 2: each sample in its own plane.
const PLANAR_SEPARATE: u16 = 2;
/// TIFF 6.0 SampleFormat: 2 signed integer, 3 IEEE floating point.
const SAMPLE_FORMAT_INT: u16 = 2;
const SAMPLE_FORMAT_IEEEFP: u16 = 3;
/// Predictor 2 horizontal differencing (TIFF 6.0 §14), 3 floating point (TIFF TN3).
const PREDICTOR_HORIZONTAL: u16 = 2;
const PREDICTOR_FLOATING_POINT: u16 = 3;

/// Writes `bands` (each `width * height` values, row 0 north) as one multi-band GeoTIFF.
///
/// The file is byte-for-byte reproducible: the same arguments always give the same bytes. Only
/// north-up geotransforms (`gt[2] = gt[4] = 0`, `gt[1] > 0`, `gt[5] < 0`) are accepted, since
/// they are what ModelPixelScale + ModelTiepoint can express.
///
/// ```
/// use trackswing::geotiff::*;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("swing.tif");
/// let data = [1.0, 2.0, f32::NAN, 4.0];
/// let georef = Georef { crs: Crs::Wgs84Geographic, geotransform: [-100.0, 0.5, 0.0, 45.0, 0.0, -0.5] };
/// let band = BandSpec { data: &data, description: "snowfall_m".into(), metadata: vec![] };
/// let opts = WriteOptions { encoding: SampleEncoding::Float32, nodata: -9999.0, dataset_metadata: vec![], band_scaling: vec![] };
/// write_geotiff(&path, 2, 2, &georef, &[band], &opts).unwrap();
/// let r = read_geotiff(&path).unwrap();
/// assert_eq!(r.georef.geotransform, georef.geotransform);
/// assert_eq!(r.nodata, Some(-9999.0));
/// assert_eq!(&r.bands[0][..2], &[1.0, 2.0]);
/// assert!(r.bands[0][2].is_nan());
/// ```
pub fn write_geotiff(
    path: &Path,
    width: usize,
    height: usize,
    georef: &Georef,
    bands: &[BandSpec],
    opts: &WriteOptions,
) -> Result<(), GeoTiffError> {
    validate(path, width, height, georef, bands, opts)?;
    let strips = encode_strips(path, width, height, bands, opts)?;

    let (sample_format, bits, predictor, nodata_text) = match opts.encoding {
        SampleEncoding::Float32 => (
            SAMPLE_FORMAT_IEEEFP,
            32u16,
            PREDICTOR_FLOATING_POINT,
            format_number(f64::from(opts.nodata as f32)),
        ),
        SampleEncoding::Int16Scaled { .. } => (
            SAMPLE_FORMAT_INT,
            16,
            PREDICTOR_HORIZONTAL,
            INT16_NODATA.to_string(),
        ),
    };
    let items: Vec<BandItems> = bands
        .iter()
        .enumerate()
        .map(|(i, b)| BandItems {
            description: &b.description,
            metadata: &b.metadata,
            scale_offset: match opts.band_encoding(i) {
                SampleEncoding::Float32 => None,
                SampleEncoding::Int16Scaled { scale, offset } => Some((scale, offset)),
            },
        })
        .collect();
    let xml = build_xml(&opts.dataset_metadata, &items);
    let geokeys = GeoKeys::for_crs(georef.crs).encode();
    let gt = georef.geotransform;
    let n = bands.len();

    let io = |source| GeoTiffError::Io {
        path: path.to_path_buf(),
        source,
    };
    let tiff_err = |e| GeoTiffError::from_tiff(path, "writing", e);
    let file = File::create(path).map_err(io)?;
    let mut out = BufWriter::new(file);
    {
        let mut encoder = TiffEncoder::new(&mut out).map_err(tiff_err)?;
        let mut dir = encoder.image_directory().map_err(tiff_err)?;
        let mut offsets = Vec::with_capacity(strips.len());
        for s in &strips {
            let at = dir.write_data(&s[..]).map_err(tiff_err)?;
            offsets.push(u32::try_from(at).map_err(|_| GeoTiffError::Unsupported {
                path: path.to_path_buf(),
                what: "output over 4 GiB (classic TIFF offsets are 32-bit)".into(),
            })?);
        }
        let counts: Vec<u32> = strips.iter().map(|s| s.len() as u32).collect();

        dir.write_tag(Tag::ImageWidth, width as u32)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::ImageLength, height as u32)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::BitsPerSample, &vec![bits; n][..])
            .map_err(tiff_err)?;
        dir.write_tag(Tag::Compression, COMPRESSION_DEFLATE)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::PhotometricInterpretation, PHOTOMETRIC_MIN_IS_BLACK)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::StripOffsets, &offsets[..])
            .map_err(tiff_err)?;
        dir.write_tag(Tag::SamplesPerPixel, n as u16)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::RowsPerStrip, STRIP_ROWS.min(height) as u32)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::StripByteCounts, &counts[..])
            .map_err(tiff_err)?;
        dir.write_tag(Tag::PlanarConfiguration, PLANAR_SEPARATE)
            .map_err(tiff_err)?;
        dir.write_tag(Tag::Predictor, predictor).map_err(tiff_err)?;
        if n > 1 {
            // ExtraSamples 0 = unspecified data, as GDAL marks bands beyond the first.
            dir.write_tag(Tag::ExtraSamples, &vec![0u16; n - 1][..])
                .map_err(tiff_err)?;
        }
        dir.write_tag(Tag::SampleFormat, &vec![sample_format; n][..])
            .map_err(tiff_err)?;
        // OGC 19-008r4 §7.2: ModelPixelScale (ScaleX, ScaleY, ScaleZ) with ScaleY positive for
        // north-up; ModelTiepoint (I, J, K, X, Y, Z) ties raster (0, 0) to the outer corner.
        dir.write_tag(Tag::ModelPixelScaleTag, &[gt[1], -gt[5], 0.0][..])
            .map_err(tiff_err)?;
        dir.write_tag(
            Tag::ModelTiepointTag,
            &[0.0, 0.0, 0.0, gt[0], gt[3], 0.0][..],
        )
        .map_err(tiff_err)?;
        dir.write_tag(Tag::GeoKeyDirectoryTag, &geokeys.directory[..])
            .map_err(tiff_err)?;
        if !geokeys.doubles.is_empty() {
            dir.write_tag(Tag::GeoDoubleParamsTag, &geokeys.doubles[..])
                .map_err(tiff_err)?;
        }
        let mut text_tags = Vec::new();
        if !geokeys.ascii.is_empty() {
            text_tags.push((Tag::GeoAsciiParamsTag, geokeys.ascii));
        }
        if let Some(xml) = xml {
            text_tags.push((Tag::Unknown(tag::GDAL_METADATA), xml));
        }
        text_tags.push((Tag::GdalNodata, nodata_text));
        for (t, text) in text_tags {
            // Written as raw bytes: GDAL stores UTF-8 in these ASCII tags, which the `tiff`
            // crate's `str` value would reject.
            let mut bytes = text.into_bytes();
            bytes.push(0);
            let entry = dir
                .write_entry_bytes(Type::ASCII, &bytes)
                .map_err(tiff_err)?;
            dir.extend_from(&[(t, entry)].into_iter().collect::<Directory>());
        }
        dir.finish().map_err(tiff_err)?;
    }
    out.flush().map_err(io)
}

/// Encodes all strips, plane by plane (the order PlanarConfiguration 2 stores them in).
///
/// This is the seam for parallel compression: every strip depends only on its slice of one band,
/// so a parallel map over `(band, strip)` collected in this order gives identical bytes.
fn encode_strips(
    path: &Path,
    width: usize,
    height: usize,
    bands: &[BandSpec],
    opts: &WriteOptions,
) -> Result<Vec<Vec<u8>>, GeoTiffError> {
    let strips_per_band = height.div_ceil(STRIP_ROWS);
    let mut strips = Vec::with_capacity(bands.len() * strips_per_band);
    for (b, band) in bands.iter().enumerate() {
        for s in 0..strips_per_band {
            let first_row = s * STRIP_ROWS;
            let rows = &band.data[first_row * width..(first_row + STRIP_ROWS).min(height) * width];
            let strip = encode_strip(rows, width, opts.band_encoding(b), opts.nodata).map_err(
                |e| match e {
                    StripError::OutOfRange { index, value } => {
                        let (scale, offset) = match opts.band_encoding(b) {
                            SampleEncoding::Int16Scaled { scale, offset } => (scale, offset),
                            SampleEncoding::Float32 => (1.0, 0.0),
                        };
                        GeoTiffError::OutOfRange {
                            path: path.to_path_buf(),
                            band: b,
                            row: first_row + index / width,
                            col: index % width,
                            value,
                            scale,
                            offset,
                        }
                    }
                    StripError::Io(source) => GeoTiffError::Io {
                        path: path.to_path_buf(),
                        source,
                    },
                },
            )?;
            strips.push(strip);
        }
    }
    Ok(strips)
}

pub(crate) fn validate(
    path: &Path,
    width: usize,
    height: usize,
    georef: &Georef,
    bands: &[BandSpec],
    opts: &WriteOptions,
) -> Result<(), GeoTiffError> {
    let p = || path.to_path_buf();
    let cells = width.checked_mul(height);
    if width == 0
        || height == 0
        || bands.is_empty()
        || u32::try_from(width).is_err()
        || u32::try_from(height).is_err()
        || u16::try_from(bands.len()).is_err()
        || cells.is_none()
    {
        return Err(GeoTiffError::InvalidSize {
            path: p(),
            width,
            height,
            bands: bands.len(),
        });
    }
    let expected = cells.unwrap_or_default();
    for (band, b) in bands.iter().enumerate() {
        if b.data.len() != expected {
            return Err(GeoTiffError::BandLength {
                path: p(),
                band,
                got: b.data.len(),
                expected,
            });
        }
    }
    let gt = georef.geotransform;
    let gt_err = |what: &str| GeoTiffError::Geotransform {
        path: p(),
        geotransform: gt,
        what: what.into(),
    };
    if gt.iter().any(|v| !v.is_finite()) {
        return Err(gt_err("all six terms must be finite"));
    }
    if gt[2] != 0.0 || gt[4] != 0.0 {
        return Err(gt_err(
            "rotated or sheared grids (gt[2] or gt[4] non-zero) are not supported; only north-up",
        ));
    }
    if gt[1] <= 0.0 || gt[5] >= 0.0 {
        return Err(gt_err(
            "pixel width gt[1] must be > 0 and pixel height gt[5] < 0 (row 0 is north)",
        ));
    }
    let opt_err = |what: String| GeoTiffError::InvalidOption { path: p(), what };
    match opts.encoding {
        SampleEncoding::Float32 => {
            if opts.nodata.is_finite() && opts.nodata.abs() > f64::from(f32::MAX) {
                return Err(opt_err(format!(
                    "nodata {} is outside the Float32 range",
                    opts.nodata
                )));
            }
        }
        SampleEncoding::Int16Scaled { .. } => {
            if !opts.band_scaling.is_empty() && opts.band_scaling.len() != bands.len() {
                return Err(opt_err(format!(
                    "{} per-band scalings given for {} bands",
                    opts.band_scaling.len(),
                    bands.len()
                )));
            }
            for b in 0..bands.len() {
                if let SampleEncoding::Int16Scaled { scale, offset } = opts.band_encoding(b) {
                    if !scale.is_finite() || scale == 0.0 || !offset.is_finite() {
                        return Err(opt_err(format!(
                            "band {b}: Int16 scale {scale} must be finite and non-zero, offset {offset} finite"
                        )));
                    }
                }
            }
        }
    }
    let keys = opts
        .dataset_metadata
        .iter()
        .chain(bands.iter().flat_map(|b| b.metadata.iter()))
        .map(|(k, _)| k);
    for key in keys {
        if let Some(what) = check_key(key) {
            return Err(GeoTiffError::MetadataKey {
                path: p(),
                key: key.clone(),
                what: what.into(),
            });
        }
    }
    Ok(())
}
