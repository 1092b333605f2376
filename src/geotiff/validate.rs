//! What every GeoTIFF written must satisfy, checked before a byte is written: sizes that TIFF
//! can hold, bands of the right length, a north-up geotransform, encodable nodata and scaling,
//! and metadata keys GDAL can read back.

use std::path::Path;

use super::metadata::check_key;
use super::{BandSpec, GeoTiffError, Georef, SampleEncoding, WriteOptions};

/// Checks the arguments of [`super::write_cog`]; the error names the file and what is wrong.
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
