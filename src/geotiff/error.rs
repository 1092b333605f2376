//! Errors of the GeoTIFF writer and reader; every variant names the file.

use std::path::PathBuf;

/// What went wrong writing or reading a GeoTIFF, with the file and the offending item.
#[derive(Debug, thiserror::Error)]
pub enum GeoTiffError {
    #[error("{path}: {source}", path = path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("{path}: not a TIFF file (no TIFF signature)", path = path.display())]
    NotTiff { path: PathBuf },
    #[error("{path}: file is truncated (ends inside {what})", path = path.display())]
    Truncated { path: PathBuf, what: String },
    #[error("{path}: TIFF structure error: {source}", path = path.display())]
    Tiff {
        path: PathBuf,
        #[source]
        source: tiff::TiffError,
    },
    #[error("{path}: unsupported: {what}", path = path.display())]
    Unsupported { path: PathBuf, what: String },
    #[error("{path}: invalid raster size {width} x {height} with {bands} band(s)", path = path.display())]
    InvalidSize {
        path: PathBuf,
        width: usize,
        height: usize,
        bands: usize,
    },
    #[error(
        "{path}: the directory declares {width} x {height} x {bands} samples, more than a \
         {file_len}-byte file can hold at any TIFF compression ratio",
        path = path.display()
    )]
    ImplausibleSize {
        path: PathBuf,
        width: usize,
        height: usize,
        bands: usize,
        file_len: u64,
    },
    #[error(
        "{path}: band {band} has {got} values, expected width x height = {expected}",
        path = path.display()
    )]
    BandLength {
        path: PathBuf,
        band: usize,
        got: usize,
        expected: usize,
    },
    #[error("{path}: band count mismatch: {what}", path = path.display())]
    BandCount { path: PathBuf, what: String },
    #[error("{path}: geotransform {geotransform:?}: {what}", path = path.display())]
    Geotransform {
        path: PathBuf,
        geotransform: [f64; 6],
        what: String,
    },
    #[error("{path}: invalid write option: {what}", path = path.display())]
    InvalidOption { path: PathBuf, what: String },
    #[error(
        "{path}: band {band}, row {row}, column {col}: value {value} does not fit Int16 with \
         scale {scale} and offset {offset} (raw must be in -32767..=32767)",
        path = path.display()
    )]
    OutOfRange {
        path: PathBuf,
        band: usize,
        row: usize,
        col: usize,
        value: f32,
        scale: f64,
        offset: f64,
    },
    #[error("{path}: invalid metadata item {key:?}: {what}", path = path.display())]
    MetadataKey {
        path: PathBuf,
        key: String,
        what: String,
    },
    #[error("{path}: tag {tag} ({name}): {what}", path = path.display())]
    BadTag {
        path: PathBuf,
        tag: u16,
        name: &'static str,
        what: String,
    },
    #[error("{path}: GeoKey {key} ({name}): {what}", path = path.display())]
    GeoKey {
        path: PathBuf,
        key: u16,
        name: &'static str,
        what: String,
    },
    #[error(
        "{path}: tag 42112 (GDAL_METADATA): bad metadata XML at byte {offset}: {what}",
        path = path.display()
    )]
    MetadataXml {
        path: PathBuf,
        offset: usize,
        what: String,
    },
}

impl GeoTiffError {
    /// Classifies a `tiff` crate error: a missing signature means "not a TIFF", an early end of
    /// file means truncation; everything else keeps the crate's own description.
    pub(crate) fn from_tiff(path: &std::path::Path, what: &str, err: tiff::TiffError) -> Self {
        use tiff::{TiffError, TiffFormatError};
        let path = path.to_path_buf();
        match err {
            TiffError::FormatError(
                TiffFormatError::TiffSignatureNotFound | TiffFormatError::TiffSignatureInvalid,
            ) => GeoTiffError::NotTiff { path },
            TiffError::IoError(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => {
                GeoTiffError::Truncated {
                    path,
                    what: what.to_string(),
                }
            }
            TiffError::IoError(source) => GeoTiffError::Io { path, source },
            TiffError::UnsupportedError(e) => GeoTiffError::Unsupported {
                path,
                what: format!("{what}: {e}"),
            },
            source => GeoTiffError::Tiff { path, source },
        }
    }
}
