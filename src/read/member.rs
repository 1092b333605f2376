//! A member's model files, resolved from the case and checked to exist: what the readers open.

use std::path::PathBuf;

/// How a member's fields are stored.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum InputFormat {
    /// A terrain GeoTIFF and one GeoTIFF per step.
    GeoTiff,
    /// Model files (GRIB2, or any GDAL raster with the `gdal` feature) in which the fields are
    /// found: `steps` lists every file and `terrain` is the first of them.
    Model,
    /// Model files read through GDAL (`format = "gdal"`), laid out as for `Model`.
    Gdal,
}

/// One member with its files resolved and checked to exist.
#[derive(Clone, Debug)]
pub struct Member {
    /// Name.
    pub name: String,
    /// Terrain GeoTIFF (for model files: the first file).
    pub terrain: PathBuf,
    /// Step GeoTIFFs in time order (for model files: every file).
    pub steps: Vec<PathBuf>,
    /// Files of the model folders that are not model output, left out (reported once).
    pub skipped: Vec<PathBuf>,
    /// Track file.
    pub track: Option<PathBuf>,
    /// How the fields are stored.
    pub format: InputFormat,
    /// Find the track from the model's sea-level pressure (`track = "find"`).
    pub find_track: bool,
    /// How much this member counts in the blend against the others (1 unless the case says).
    pub weight: f64,
    /// The ensemble member to read from GRIB2 files holding several (perturbation number of
    /// templates 4.1/4.11); `None` for files of one member.
    pub perturbation: Option<u8>,
}
