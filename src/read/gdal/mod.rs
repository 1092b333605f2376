//! Model fields from any raster GDAL reads — NetCDF, GRIB1, GRIB2, GeoTIFF stacks — through
//! the system GDAL library (the `gdal` cargo feature; Debian: libgdal-dev).
//!
//! Fields are found by the band metadata each GDAL driver exposes ([`band`]); the case is then
//! chosen by the rules the GRIB2 reader uses too ([`crate::read::choose`], asked by [`source`]):
//! the steps are the valid times of the isobaric temperatures, the levels those complete at the
//! first step. GDAL's GRIB driver converts
//! temperatures to °C unless `GRIB_NORMALIZE_UNITS=NO`; trackswing sets that option before
//! opening any file, and maps whatever units a file declares to K, %, m, kg m⁻² and Pa.

pub mod band;
mod grid;
pub mod source;

pub use source::GdalSource;

use crate::read::fields::FieldError;
use std::path::PathBuf;

/// Why GDAL input cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum GdalError {
    /// GDAL could not open or read the file.
    #[error("{path}: GDAL: {what}")]
    Gdal {
        /// The file (or GDAL dataset name, e.g. `NETCDF:"f.nc":t`).
        path: PathBuf,
        /// GDAL's message.
        what: String,
    },
    /// A band the case would use cannot be understood.
    #[error("{path}: band {band} ({label}): {what}")]
    Band {
        /// The file.
        path: PathBuf,
        /// 1-based band number.
        band: usize,
        /// What the metadata says the band is.
        label: String,
        /// What is wrong and what was expected.
        what: String,
    },
    /// A needed field is absent, or the files do not fit together.
    #[error("{path}: {what}")]
    Missing {
        /// The file (or the first of the files).
        path: PathBuf,
        /// What was expected.
        what: String,
    },
    /// Values outside physical ranges, or a grid trackswing cannot use.
    #[error(transparent)]
    Values(#[from] FieldError),
}

impl From<crate::read::choose::Missing> for GdalError {
    fn from(m: crate::read::choose::Missing) -> Self {
        Self::Missing {
            path: m.path,
            what: m.what,
        }
    }
}
