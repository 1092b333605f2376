//! Where a case's fields come from, whatever the file format: the engine asks a [`Source`] for
//! the ground-attached fields once and for step k's [`StepFields`], and never sees a file.
//!
//! Formats: GeoTIFF (a terrain file and one multi-band file per step, see [`super::fields`]) and
//! GRIB2 files in any number and order ([`super::grib`]). A model-file member is read as GRIB2
//! when every file starts with a GRIB edition 2 message; other formats are named in the error.

use super::fields::{read_static, read_step, FieldError, StaticFields, StepFields};
use super::grib::{GribError, GribSource};
use crate::case::{InputFormat, Member};
use crate::geotiff::read_geotiff;
use chrono::{DateTime, Utc};
use std::io::Read;
use std::path::{Path, PathBuf};

/// Why a source cannot give its fields.
#[derive(Debug, thiserror::Error)]
pub enum SourceError {
    /// GeoTIFF input.
    #[error(transparent)]
    Field(#[from] FieldError),
    /// GRIB2 input.
    #[error(transparent)]
    Grib(#[from] GribError),
    /// A file of a format this build does not read.
    #[error("{path}: {what}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What it is and what would read it.
        what: String,
    },
}

/// A case's model fields.
pub trait Source: Sync {
    /// Ground-attached fields and the grid.
    fn statics(&self) -> &StaticFields;
    /// Number of time steps.
    fn step_count(&self) -> usize;
    /// Valid time of step `k` when known before reading it.
    fn valid_time(&self, k: usize) -> Option<DateTime<Utc>>;
    /// The storm-attached fields of step `k` (0-based).
    fn step(&self, k: usize) -> Result<StepFields, SourceError>;
    /// Sea-level pressure (Pa, row-major, row 0 north) at step `k`, when the source has it.
    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError>;
    /// Every file read, for the manifest.
    fn inputs(&self) -> Vec<PathBuf>;
}

/// GeoTIFF files: one terrain file and one file per step.
pub struct GeoTiffSource {
    statics: StaticFields,
    steps: Vec<PathBuf>,
}

impl GeoTiffSource {
    /// Reads the terrain file; step files are read when asked for.
    pub fn open(terrain: &Path, steps: &[PathBuf]) -> Result<Self, FieldError> {
        Ok(Self {
            statics: read_static(terrain)?,
            steps: steps.to_vec(),
        })
    }
}

impl Source for GeoTiffSource {
    fn statics(&self) -> &StaticFields {
        &self.statics
    }
    fn step_count(&self) -> usize {
        self.steps.len()
    }
    fn valid_time(&self, _k: usize) -> Option<DateTime<Utc>> {
        None
    }
    fn step(&self, k: usize) -> Result<StepFields, SourceError> {
        Ok(read_step(&self.steps[k], &self.statics)?)
    }
    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError> {
        let r = read_geotiff(&self.steps[k]).map_err(FieldError::from)?;
        Ok(r.descriptions
            .iter()
            .position(|d| d.trim() == "air_pressure_at_mean_sea_level")
            .map(|i| r.bands[i].clone()))
    }
    fn inputs(&self) -> Vec<PathBuf> {
        std::iter::once(self.statics.path.clone())
            .chain(self.steps.iter().cloned())
            .collect()
    }
}

/// What the first octets of a file say it is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Magic {
    /// "GRIB" with edition 2.
    Grib2,
    /// "GRIB" with edition 1.
    Grib1,
    /// A TIFF header.
    Tiff,
    /// Anything else.
    Other,
}

/// Reads the first octets of `path`.
pub fn magic(path: &Path) -> Result<Magic, SourceError> {
    let mut head = [0u8; 8];
    let mut f = std::fs::File::open(path).map_err(|source| GribError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let n = f.read(&mut head).map_err(|source| GribError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    Ok(match &head[..n] {
        [b'G', b'R', b'I', b'B', _, _, _, 2, ..] => Magic::Grib2,
        [b'G', b'R', b'I', b'B', _, _, _, 1, ..] => Magic::Grib1,
        [b'I', b'I', 42, 0, ..] | [b'M', b'M', 0, 42, ..] | [b'I', b'I', 43, 0, ..] => Magic::Tiff,
        _ => Magic::Other,
    })
}

/// Opens a member's fields. `warn` receives one summary line of what was not used.
pub fn open(member: &Member, warn: &dyn Fn(&str)) -> Result<Box<dyn Source>, SourceError> {
    match member.format {
        InputFormat::GeoTiff => Ok(Box::new(GeoTiffSource::open(
            &member.terrain,
            &member.steps,
        )?)),
        InputFormat::Model => open_model(&member.steps, warn),
    }
}

/// Opens model files (GRIB2).
pub fn open_model(files: &[PathBuf], warn: &dyn Fn(&str)) -> Result<Box<dyn Source>, SourceError> {
    for f in files {
        let what = match magic(f)? {
            Magic::Grib2 => continue,
            Magic::Grib1 => "GRIB edition 1; trackswing reads GRIB2",
            Magic::Tiff => "a TIFF file among model files; GeoTIFF cases name a terrain file and step files in a case file",
            Magic::Other => "not a GRIB file (it does not start with \"GRIB\"); trackswing reads GRIB2 model output",
        };
        return Err(SourceError::Format {
            path: f.clone(),
            what: what.into(),
        });
    }
    Ok(Box::new(GribSource::open(files, warn)?))
}
