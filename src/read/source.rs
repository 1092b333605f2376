//! Where a case's fields come from, whatever the file format: the engine asks a [`Source`] for
//! the ground-attached fields once and for step k's [`StepFields`], and never sees a file.
//!
//! Formats: GeoTIFF (a terrain file and one multi-band file per step, see [`super::fields`]) and
//! GRIB2 files in any number and order ([`super::grib`]). A model-file member is read as GRIB2
//! when every file starts with a GRIB edition 2 message. With the `gdal` feature, model files
//! that are not all GRIB2 (NetCDF, GRIB1, ...), or any member with `format = "gdal"`, are read
//! through GDAL ([`super::gdal`]); without it such files are refused with the rebuild command.

use super::fields::{read_static, read_step, FieldError, StaticFields, StepFields};
use super::grib::{GribError, GribSource};
use super::region::{RegionError, Window};
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
    /// Input read through GDAL.
    #[cfg(feature = "gdal")]
    #[error(transparent)]
    Gdal(#[from] super::gdal::GdalError),
    /// The region to read does not fit the grid. Its message names the region, so the chain of
    /// causes carries it for the binary to tell a bad option from a bad case.
    #[error("{0}")]
    Region(#[from] RegionError),
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
    fn step(&self, k: usize) -> Result<StepFields, SourceError> {
        self.step_reusing(k, Vec::new())
    }
    /// [`Source::step`], interleaving the columns into `reuse` (the columns of a step no longer
    /// held): a continental step's columns take hundreds of MB, and a fresh allocation of that
    /// size costs the kernel a page fault and a cleared page every 4 KiB, every step.
    fn step_reusing(&self, k: usize, reuse: Vec<f32>) -> Result<StepFields, SourceError>;
    /// Sea-level pressure (Pa, row-major, row 0 north) at step `k`, when the source has it.
    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError>;
    /// Every file read, for the manifest.
    fn inputs(&self) -> Vec<PathBuf>;
    /// The window of the model grid this source hands out, when it reads a region of it.
    fn window(&self) -> Option<&Window> {
        None
    }
    /// The model run's reference time (its cycle), when the files say (GRIB2 Section 1).
    fn reference_time(&self) -> Option<DateTime<Utc>> {
        None
    }
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
    fn step_reusing(&self, k: usize, reuse: Vec<f32>) -> Result<StepFields, SourceError> {
        Ok(read_step(&self.steps[k], &self.statics, reuse)?)
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
    /// NetCDF: the classic formats ("CDF" and version 1, 2 or 5) or NetCDF-4's HDF5 signature.
    NetCdf,
    /// Anything else.
    Other,
}

/// Reads the first octets of `path`.
pub fn magic(path: &Path) -> Result<Magic, SourceError> {
    let mut head = [0u8; 8];
    // A short file fills only part of the buffer; `read` may also return less than is there.
    // Eight octets come in one read from a regular file, which is what model files are.
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
        // NetCDF Users Guide, "File format specifications": classic "CDF\x01", 64-bit offset
        // "CDF\x02", CDF-5 "CDF\x05"; NetCDF-4 files are HDF5 ("\x89HDF\r\n\x1a\n").
        [b'C', b'D', b'F', 1 | 2 | 5, ..] | [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'] => {
            Magic::NetCdf
        }
        _ => Magic::Other,
    })
}

/// What to tell someone whose build cannot read a file GDAL would read.
const REBUILD: &str = "this build reads GRIB2 and GeoTIFF only; rebuild with `cargo build --release --features gdal` (needs the system GDAL library, Debian: libgdal-dev) to read it through GDAL";

/// Opens any files through GDAL (the `gdal` feature).
#[cfg(feature = "gdal")]
pub fn open_gdal(files: &[PathBuf], warn: &dyn Fn(&str)) -> Result<Box<dyn Source>, SourceError> {
    Ok(Box::new(super::gdal::GdalSource::open(files, warn)?))
}

/// Without the `gdal` feature: the error saying how to get it.
#[cfg(not(feature = "gdal"))]
pub fn open_gdal(files: &[PathBuf], _warn: &dyn Fn(&str)) -> Result<Box<dyn Source>, SourceError> {
    Err(SourceError::Format {
        path: files.first().cloned().unwrap_or_default(),
        what: format!("format = \"gdal\": {REBUILD}"),
    })
}

/// Opens model files: GRIB2 in pure Rust; with the `gdal` feature, files none of which is GRIB2
/// or TIFF (NetCDF, GRIB1, ...) through GDAL. A set mixing GRIB2 with other files is refused
/// (a broken file in a GRIB2 folder should be named, not read another way); `format = "gdal"`
/// reads any mix through GDAL.
/// `perturbation` picks one ensemble member from GRIB2 files that hold several.
pub fn open_model(
    files: &[PathBuf],
    perturbation: Option<u8>,
    warn: &dyn Fn(&str),
) -> Result<Box<dyn Source>, SourceError> {
    let mut other = None;
    let mut grib2 = 0usize;
    for f in files {
        match magic(f)? {
            Magic::Grib2 => grib2 += 1,
            Magic::Tiff => {
                return Err(SourceError::Format {
                    path: f.clone(),
                    what: "a TIFF file among model files; GeoTIFF cases name a terrain file and step files in a case file (with the gdal feature, format = \"gdal\" reads GeoTIFF stacks as model files)".into(),
                })
            }
            m @ (Magic::Grib1 | Magic::NetCdf | Magic::Other) => {
                other.get_or_insert((f.clone(), m));
            }
        }
    }
    let Some((path, m)) = other else {
        return Ok(Box::new(GribSource::open_member(
            files,
            perturbation,
            warn,
        )?));
    };
    if grib2 == 0 && cfg!(feature = "gdal") {
        return open_gdal(files, warn);
    }
    let what = if m == Magic::Grib1 {
        "GRIB edition 1"
    } else if m == Magic::NetCdf {
        "NetCDF"
    } else {
        "not a GRIB file (it does not start with \"GRIB\")"
    };
    let how = if grib2 > 0 {
        format!("the other {grib2} file(s) are GRIB2; remove it, or read every file through GDAL with format = \"gdal\" (a build with `--features gdal`)")
    } else {
        REBUILD.to_string()
    };
    Err(SourceError::Format {
        path,
        what: format!("{what}; {how}"),
    })
}

/// What an opened source holds, as `trackswing inspect` prints it for files that are not GRIB2
/// (read through GDAL): the grid, the valid times, the isobaric levels, the fields of the first
/// step, and the case requirements (all met, since the source opened; each step is read and
/// checked, so a step that fails is named).
pub fn describe(src: &dyn Source) -> String {
    let mut out = String::new();
    let inputs = src.inputs();
    out.push_str(&format!(
        "{} file(s) read through the general reader\n\nGrid:\n  {}\n",
        inputs.len(),
        src.statics().grid.describe()
    ));
    let mut times = Vec::new();
    let mut first = None;
    let mut failed = None;
    for k in 0..src.step_count() {
        match src.step(k) {
            Ok(s) => {
                times.push(s.valid.format("%Y-%m-%dT%H:%MZ").to_string());
                if first.is_none() {
                    first = Some(s);
                }
            }
            Err(e) => {
                failed = Some((k, e));
                break;
            }
        }
    }
    out.push_str(&format!(
        "\nValid times ({}): {}\n",
        src.step_count(),
        times.join(", ")
    ));
    if let Some(s) = &first {
        let levels: Vec<String> = s
            .layout
            .levels_pa
            .iter()
            .map(|p| format!("{}", p / 100.0))
            .collect();
        out.push_str(&format!(
            "\nFields of every step: temperature, geopotential height and relative humidity at {} hPa; 2 m temperature and humidity; precipitation for the step. Terrain: one field.\n",
            levels.join(", ")
        ));
    }
    out.push_str("\nCase requirements:\n");
    match failed {
        None => out.push_str(&format!(
            "  met     every one of the {} steps has the levels, 2 m fields and precipitation\n  met     terrain\n",
            src.step_count()
        )),
        Some((k, e)) => out.push_str(&format!("  MISSING step {}: {e}\n", k + 1)),
    }
    out
}
