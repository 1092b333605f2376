//! The case file's TOML schema as it is written: every table and key, deserialised before any
//! check. Unknown keys are errors (`deny_unknown_fields`), so a misspelt setting never silently
//! falls back to a default.

use crate::summarise::weights::ExplicitWeight;
use serde::Deserialize;

/// An offset list: a range/list string (`"-100:100:10"`) or an array of numbers.
#[derive(Debug, Deserialize, Clone)]
#[serde(untagged)]
pub enum OffsetList {
    /// `"-100:100:10"`, `"-50,0,50"`.
    Text(String),
    /// `[-50, 0, 50]`.
    Numbers(Vec<f64>),
}

/// A list of step files or a pattern with one `*` in the file name.
#[derive(Debug, Deserialize, Clone)]
#[serde(untagged)]
pub enum StepFiles {
    /// `"fields/step_*.tif"`, expanded in name order.
    Pattern(String),
    /// Explicit files in time order.
    List(Vec<String>),
}

/// One model run (a model, or one cycle of it).
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct MemberFile {
    /// A short name for tables and the manifest.
    pub name: String,
    /// GeoTIFF with `surface_altitude`, m.
    pub terrain: Option<String>,
    /// One GeoTIFF per time step.
    pub steps: Option<StepFiles>,
    /// Model output instead of `terrain` + `steps`: GRIB2 files (or, with the `gdal` feature,
    /// any raster GDAL reads) as a folder, a pattern with one `*`, a file, or a list of these;
    /// fields, levels and times are found in them.
    pub model: Option<StepFiles>,
    /// How to read `model`: `"grib2"` (the pure-Rust reader), `"gdal"` (any raster GDAL reads,
    /// in a build with the `gdal` feature) or, when absent, found from the files' first octets.
    pub format: Option<String>,
    /// Storm track (CSV or GeoJSON), or `"find"` to follow the low in the model's sea-level
    /// pressure; needed unless only the zero offset is run.
    pub track: Option<String>,
    /// How much this member counts in the blend against the others (default 1).
    pub weight: Option<f64>,
}

/// `[offsets]`.
#[derive(Debug, Deserialize, Clone, Default)]
#[serde(deny_unknown_fields)]
pub struct OffsetsFile {
    /// Cross-track offsets, km, positive to the left of the motion.
    pub cross_km: Option<OffsetList>,
    /// Along-track offsets, km, positive ahead.
    pub along_km: Option<OffsetList>,
    /// Time offsets, hours, positive when the storm comes later.
    pub timing_h: Option<OffsetList>,
    /// Factors on the precipitation.
    pub intensity: Option<OffsetList>,
    /// Warm-layer biases, K, added between the ground and 500 hPa.
    pub warm_bias_k: Option<OffsetList>,
}

/// `[shift]`.
#[derive(Debug, Deserialize, Clone, Default)]
#[serde(deny_unknown_fields)]
pub struct ShiftFile {
    /// Full displacement within this distance of the low centre, km.
    pub core_radius_km: Option<f64>,
    /// No displacement beyond this distance, km.
    pub outer_radius_km: Option<f64>,
    /// Lapse rate for moving 2 m temperature over different terrain, K/km.
    pub lapse_rate_k_per_km: Option<f64>,
}

/// `[methods]`.
#[derive(Debug, Deserialize, Clone, Default)]
#[serde(deny_unknown_fields)]
pub struct MethodsFile {
    /// `energy-area`, `partial-thickness` or `surface-logistic`, or several separated by commas
    /// (each a method scenario).
    pub precip_type: Option<String>,
    /// `fixed`, `max-column-temperature` or `growth-zone`, or several separated by commas.
    pub snow_ratio: Option<String>,
    /// One weight per precipitation-type method listed (default equal).
    pub precip_type_weights: Option<Vec<f64>>,
    /// One weight per snow-ratio method listed (default equal).
    pub snow_ratio_weights: Option<Vec<f64>>,
    /// The ratio for `fixed`.
    pub fixed_ratio: Option<f64>,
    /// Dry air below the cloud takes its share first (default false: the precipitation reaching
    /// the ground is the model's, which already lost what evaporated below its cloud).
    pub dry_air: Option<bool>,
}

/// `[output]`.
#[derive(Debug, Deserialize, Clone, Default)]
#[serde(deny_unknown_fields)]
pub struct OutputFile {
    /// Output folder.
    pub folder: Option<String>,
    /// `metric` (cm, mm) or `us` (inches).
    pub units: Option<String>,
    /// `float32` (default) or `int16` (scaled, about half the size).
    pub raster_type: Option<String>,
    /// Snowfall isoband thresholds in the output units, increasing (default: `thresholds`).
    pub snowfall_bands: Option<Vec<f64>>,
    /// Snowfall thresholds for the exceedance probabilities, in the output units.
    pub thresholds: Option<Vec<f64>>,
    /// Ice-accretion thresholds for the exceedance probabilities, in the output liquid units.
    pub ice_thresholds: Option<Vec<f64>>,
    /// The member whose grid the layers are written on (default the first); it becomes the
    /// primary member.
    pub grid: Option<String>,
}

/// `[weights]`: the prior over track offsets.
#[derive(Debug, Deserialize, Clone, Default)]
#[serde(deny_unknown_fields)]
pub struct WeightsFile {
    /// Gaussian σ across the track, km (from the user's own verification of track error).
    pub cross_sigma_km: Option<f64>,
    /// Gaussian σ along the track, km.
    pub along_sigma_km: Option<f64>,
    /// Explicit weights, one per offset of the run.
    pub explicit: Option<Vec<ExplicitWeight>>,
    /// Explicit weights from a CSV (`cross_km,along_km,weight`).
    pub explicit_file: Option<String>,
    /// σ and centre from a track-error verification (`track_error_summary.csv` of
    /// `trackswing track-error`), at the run's lead time.
    pub from_track_error: Option<String>,
    /// Least share of the prior's weight with data for a cell to be summarised (0 < x ≤ 1).
    pub min_coverage: Option<f64>,
}

/// The case file as written.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct CaseFile {
    /// What the case is.
    pub title: String,
    /// Towns CSV (`name,lat,lon`).
    pub towns: Option<String>,
    /// Read and compute only this lon/lat box of the model grid: `[W, S, E, N]`, degrees.
    pub region: Option<[f64; 4]>,
    /// The model runs.
    pub member: Vec<MemberFile>,
    /// Offsets to explore.
    #[serde(default)]
    pub offsets: OffsetsFile,
    /// How the displacement is spread.
    #[serde(default)]
    pub shift: ShiftFile,
    /// Methods.
    #[serde(default)]
    pub methods: MethodsFile,
    /// Outputs.
    #[serde(default)]
    pub output: OutputFile,
    /// The prior over track offsets.
    #[serde(default)]
    pub weights: WeightsFile,
}
