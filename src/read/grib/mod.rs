//! GRIB2 as forecast centres deliver it, read in pure Rust: fields found by WMO code tables,
//! decoded with the `grib` crate's pure-Rust unpackers, put on the crate's grid orientation.
//!
//! - [`scan`]: messages and fields of a file, without decoding;
//! - [`product`]: parameter, level and times of a field (Sections 1 and 4);
//! - [`gridspec`]: the grid (Section 3) as a [`crate::grid::Grid`] and the reordering from the
//!   file's scanning mode;
//! - [`decode`]: values (Sections 5–7, bit maps including 254);
//! - [`catalog`]: every usable field of a set of files;
//! - [`source`]: the case grid, the catalog as [`crate::read::choose`] sees it, and decoding
//!   the chosen fields step by step;
//! - [`inspect`]: what `trackswing inspect` prints.
//!
//! Reference: WMO, *Manual on Codes*, WMO-No. 306, Volume I.2, Part B, FM 92 GRIB edition 2.

pub mod catalog;
pub mod decode;
pub mod gridspec;
pub mod inspect;
pub mod product;
pub mod scan;
pub mod source;

pub use catalog::Catalog;
pub use source::{mslp_series, perturbations, GribSource};

use std::path::PathBuf;

/// Why GRIB2 input cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum GribError {
    /// The file could not be read.
    #[error("{path}: cannot read: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The file does not start with a GRIB message.
    #[error("{path}: not a GRIB file (it does not start with \"GRIB\")")]
    NotGrib {
        /// The file.
        path: PathBuf,
    },
    /// A message is truncated or its sections do not add up.
    #[error("{path}: message {message}: {what}")]
    Structure {
        /// The file.
        path: PathBuf,
        /// 1-based message number.
        message: usize,
        /// What is wrong.
        what: String,
    },
    /// A needed field cannot be decoded.
    #[error("{path}: message {message}, field {field}: {what}")]
    Field {
        /// The file.
        path: PathBuf,
        /// 1-based message number.
        message: usize,
        /// 1-based field number in the message.
        field: usize,
        /// What is wrong.
        what: String,
    },
    /// A field the case needs is not in the files (or cannot be used).
    #[error("{path}: {what}")]
    Missing {
        /// The file (or the first of the files).
        path: PathBuf,
        /// What is missing, and what was found instead.
        what: String,
    },
    /// Decoded values fail the plausibility checks.
    #[error(transparent)]
    Values(Box<crate::read::FieldError>),
    /// The files hold several ensemble members where one was expected: their fields must not
    /// be mixed.
    #[error("{path}: the files hold {count} ensemble members (perturbation numbers {numbers}); a case reads them as one member each (model files in a [[member]] or on the command line are split by perturbation number), and never mixes them")]
    Ensemble {
        /// The first file.
        path: PathBuf,
        /// How many perturbation numbers.
        count: usize,
        /// The perturbation numbers, in words.
        numbers: String,
    },
}

impl From<crate::read::choose::Missing> for GribError {
    fn from(m: crate::read::choose::Missing) -> Self {
        Self::Missing {
            path: m.path,
            what: m.what,
        }
    }
}
