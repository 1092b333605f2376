//! The case file: what to read, which offsets to try, which methods to use, where to write.
//!
//! TOML, documented in README.md ("The case file"). Unknown keys are errors, so a misspelt
//! setting never silently falls back to a default. Paths are relative to the case file's folder.
//! A case lists its model runs as `[[member]]` tables; this version runs one member per case.

use crate::diagnose::{Methods, PtypeMethod, SlrMethod};
use crate::read::region::{Region, RegionError};
use crate::scenario::{parse_offsets, Axes, OffsetError};
use crate::shift::Taper;
use crate::summarise::coverage::{check_min_coverage, DEFAULT_MIN_COVERAGE};
use crate::summarise::weights::{read_weights_csv, scenario_weights, ExplicitWeight, TrackPrior};
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// Why a case cannot be run.
#[derive(Debug, thiserror::Error)]
pub enum CaseError {
    /// The case file could not be read.
    #[error("{path}: cannot read the case file: {source}")]
    Io {
        /// The case file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// TOML syntax, an unknown key or a value of the wrong type.
    #[error("{path}: {message}")]
    Syntax {
        /// The case file.
        path: PathBuf,
        /// The parser's message, with line and column.
        message: String,
    },
    /// A command-line option has a value that cannot work (exit code 2, a bad command line,
    /// not a bad case file).
    #[error("option '{flag}': {what}")]
    Flag {
        /// The option, e.g. `--units`.
        flag: String,
        /// What is wrong and what was expected.
        what: String,
    },
    /// A setting has a value that cannot work.
    #[error("{path}: '{field}': {what}")]
    Invalid {
        /// The case file (or `command line`).
        path: PathBuf,
        /// The setting, e.g. `offsets.cross_km` or `member[0].steps[3]`.
        field: String,
        /// What is wrong and what was expected.
        what: String,
    },
}

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
    /// `energy-area`, `partial-thickness` or `surface-logistic`.
    pub precip_type: Option<String>,
    /// `fixed`, `max-column-temperature` or `growth-zone`.
    pub snow_ratio: Option<String>,
    /// The ratio for `fixed`.
    pub fixed_ratio: Option<f64>,
    /// Dry air below the cloud takes its share first (default true).
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

/// Output units.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Units {
    /// Snowfall in cm, liquid in mm.
    Metric,
    /// Snowfall and liquid in inches.
    Us,
}

impl Units {
    /// Parses `metric` or `us`.
    pub fn parse(s: &str) -> Option<Self> {
        match s.trim().to_ascii_lowercase().as_str() {
            "metric" => Some(Self::Metric),
            "us" => Some(Self::Us),
            _ => None,
        }
    }
    /// Converts snow depth from mm to the output unit.
    pub fn snow(&self, mm: f32) -> f32 {
        match self {
            Self::Metric => mm / 10.0,
            Self::Us => mm / 25.4,
        }
    }
    /// Converts liquid depth from mm (kg m⁻²) to the output unit.
    pub fn liquid(&self, mm: f32) -> f32 {
        match self {
            Self::Metric => mm,
            Self::Us => mm / 25.4,
        }
    }
    /// Unit of snow depth.
    pub fn snow_unit(&self) -> &'static str {
        match self {
            Self::Metric => "cm",
            Self::Us => "in",
        }
    }
    /// Unit of liquid depth.
    pub fn liquid_unit(&self) -> &'static str {
        match self {
            Self::Metric => "mm",
            Self::Us => "in",
        }
    }
    /// A distance as the outputs write it: km in metric; in US units the miles follow in
    /// brackets, since offsets are set in km (1 mi = 1.609344 km, the international mile).
    ///
    /// ```
    /// use trackswing::case::Units;
    /// assert_eq!(Units::Metric.distance(40.0), "40 km");
    /// assert_eq!(Units::Us.distance(40.0), "40 km (25 mi)");
    /// assert_eq!(Units::Us.distance(7.5), "7.5 km (4.7 mi)");
    /// ```
    pub fn distance(&self, km: f64) -> String {
        let text = |v: f64, digits: usize| {
            let s = format!("{v:.digits$}");
            if s.contains('.') {
                s.trim_end_matches('0').trim_end_matches('.').to_string()
            } else {
                s
            }
        };
        let k = text(km, 3);
        match self {
            Self::Metric => format!("{k} km"),
            Self::Us => {
                let mi = km / 1.609_344;
                let digits = if mi.abs() < 10.0 { 1 } else { 0 };
                format!("{k} km ({} mi)", text(mi, digits))
            }
        }
    }
    /// Converts a snow depth in the output unit to mm.
    pub fn snow_to_mm(&self, v: f64) -> f64 {
        match self {
            Self::Metric => v * 10.0,
            Self::Us => v * 25.4,
        }
    }
    /// Converts a liquid (or ice) depth in the output unit to mm.
    pub fn liquid_to_mm(&self, v: f64) -> f64 {
        match self {
            Self::Metric => v,
            Self::Us => v * 25.4,
        }
    }
}

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

/// Sample type of the GeoTIFF layers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RasterType {
    /// IEEE Float32 with nodata −9999.
    Float32,
    /// Int16 with a per-layer scale factor (GDAL scale/offset), nodata −32768.
    Int16,
}

impl RasterType {
    /// Parses `float32` or `int16`.
    pub fn parse(s: &str) -> Option<Self> {
        match s.trim().to_ascii_lowercase().as_str() {
            "float32" => Some(Self::Float32),
            "int16" => Some(Self::Int16),
            _ => None,
        }
    }
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
}

/// Settings given on the command line, which win over the case file.
#[derive(Clone, Debug, Default)]
pub struct Overrides {
    /// `--cross`.
    pub cross: Option<String>,
    /// `--along`.
    pub along: Option<String>,
    /// `--out`.
    pub out: Option<PathBuf>,
    /// `--units`.
    pub units: Option<String>,
    /// `--snow-ratio`.
    pub snow_ratio: Option<String>,
    /// `--force`: write into a non-empty output folder trackswing did not write, and run more
    /// scenarios than [`crate::engine::budget::SCENARIOS_REFUSE`].
    pub force: bool,
    /// `--precip-type`.
    pub precip_type: Option<String>,
    /// `--no-dry-air`.
    pub no_dry_air: bool,
    /// `--timing`.
    pub timing: Option<String>,
    /// `--intensity`.
    pub intensity: Option<String>,
    /// `--warm-bias`.
    pub warm_bias: Option<String>,
    /// `--raster-type`.
    pub raster_type: Option<String>,
    /// `--cross-sigma`, km.
    pub cross_sigma: Option<f64>,
    /// `--along-sigma`, km.
    pub along_sigma: Option<f64>,
    /// `--min-coverage`: least share of the prior's weight with data to summarise a cell.
    pub min_coverage: Option<f64>,
    /// `--report` (and `demo`): write report.html with the set.
    pub report: bool,
    /// `--region W,S,E,N`.
    pub region: Option<String>,
}

/// A case ready to run.
#[derive(Clone, Debug)]
pub struct Case {
    /// The case file.
    pub path: PathBuf,
    /// Title.
    pub title: String,
    /// The member to run.
    pub member: Member,
    /// Towns CSV.
    pub towns: Option<PathBuf>,
    /// Cross-track offsets, km.
    pub cross_km: Vec<f64>,
    /// Along-track offsets, km.
    pub along_km: Vec<f64>,
    /// Time offsets, hours (positive: the storm comes later).
    pub timing_h: Vec<f64>,
    /// Precipitation factors.
    pub intensity: Vec<f64>,
    /// Warm-layer biases, K.
    pub warm_bias_k: Vec<f64>,
    /// Displacement taper.
    pub taper: Taper,
    /// Methods.
    pub methods: Methods,
    /// The ratio the `fixed` snow-ratio method uses (also when another method runs, for
    /// comparisons such as the sounding view).
    pub fixed_ratio: f64,
    /// Output folder.
    pub out_dir: PathBuf,
    /// Output units.
    pub units: Units,
    /// Write into a non-empty output folder trackswing did not write, and run more scenarios
    /// than [`crate::engine::budget::SCENARIOS_REFUSE`].
    pub force: bool,
    /// Sample type of the GeoTIFF layers.
    pub raster_type: RasterType,
    /// Snowfall isoband thresholds in the output units, increasing (the snowfall thresholds unless
    /// the case gives its own).
    pub snowfall_bands: Vec<f64>,
    /// The prior over track offsets.
    pub prior: TrackPrior,
    /// Least share of the prior's weight with data for a cell to be summarised
    /// ([`crate::summarise::coverage`]).
    pub min_coverage: f64,
    /// Snowfall thresholds, output snow units, increasing.
    pub snow_thresholds: Vec<f64>,
    /// Ice-accretion thresholds, output liquid units, increasing.
    pub ice_thresholds: Vec<f64>,
    /// Write report.html with the set.
    pub report: bool,
    /// The lon/lat box of the model grid to read, and where it was given (`--region`, or the
    /// case file and `region`), for messages.
    pub region: Option<(Region, String)>,
}

/// Default core radius, km: the displacement is complete over the low's circulation and
/// precipitation shield close to the centre (a synoptic low's cloud shield spans several hundred
/// km, common practice).
pub const DEFAULT_CORE_KM: f64 = 500.0;
/// Default outer radius, km: beyond this the far field stays as modelled.
pub const DEFAULT_OUTER_KM: f64 = 1500.0;

impl Case {
    /// Reads, checks and resolves a case file with command-line overrides.
    pub fn load(path: &Path, over: &Overrides) -> Result<Self, CaseError> {
        let text = std::fs::read_to_string(path).map_err(|source| CaseError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        let file: CaseFile = toml::from_str(&text).map_err(|e| CaseError::Syntax {
            path: path.to_path_buf(),
            // The parser's message is a snippet over several lines (the line, then a caret under
            // the column): kept as it is, so the caret stays under the column it points at.
            message: format!("\n{}", e.to_string().trim_end()),
        })?;
        Self::resolve(path, file, over)
    }

    fn resolve(path: &Path, file: CaseFile, over: &Overrides) -> Result<Self, CaseError> {
        let dir = path.parent().unwrap_or(Path::new("."));
        let invalid = |field: &str, what: String| {
            if field.starts_with("--") {
                CaseError::Flag {
                    flag: field.to_string(),
                    what,
                }
            } else {
                CaseError::Invalid {
                    path: path.to_path_buf(),
                    field: field.to_string(),
                    what,
                }
            }
        };
        let existing = |field: &str, rel: &str| -> Result<PathBuf, CaseError> {
            let p = dir.join(rel);
            if p.is_file() {
                Ok(p)
            } else {
                Err(invalid(
                    field,
                    format!("file '{}' does not exist", p.display()),
                ))
            }
        };
        let m = match file.member.as_slice() {
            [] => return Err(invalid("member", "the case lists no [[member]]".into())),
            [m] => m.clone(),
            more => {
                return Err(invalid(
                    "member",
                    format!(
                        "the case lists {} members; this version runs one member per case (split them into one case each)",
                        more.len()
                    ),
                ))
            }
        };
        let find_track = m.track.as_deref() == Some("find");
        let track = match m.track.as_deref() {
            Some("find") | None => None,
            Some(t) => Some(existing("member[0].track", t)?),
        };
        let model_format = match m.format.as_deref() {
            None | Some("grib2") => InputFormat::Model,
            Some("gdal") if cfg!(feature = "gdal") => InputFormat::Gdal,
            Some("gdal") => return Err(invalid(
                "member[0].format",
                "\"gdal\" needs a build with GDAL: rebuild with `cargo build --release --features gdal` (needs the system GDAL library, Debian: libgdal-dev)".into(),
            )),
            Some(other) => return Err(invalid(
                "member[0].format",
                format!("'{other}': expected \"grib2\" or \"gdal\""),
            )),
        };
        if m.format.is_some() && m.model.is_none() {
            return Err(invalid(
                "member[0].format",
                "applies to model files; give model = ... (GeoTIFF terrain and steps are read without it)".into(),
            ));
        }
        let member = match (&m.terrain, &m.steps, &m.model) {
            (Some(terrain), Some(steps), None) => {
                let steps = match steps {
                    StepFiles::List(list) => list
                        .iter()
                        .enumerate()
                        .map(|(i, s)| existing(&format!("member[0].steps[{i}]"), s))
                        .collect::<Result<Vec<_>, _>>()?,
                    StepFiles::Pattern(p) => expand_pattern(dir, p)
                        .map_err(|what| invalid("member[0].steps", what))?,
                };
                if steps.is_empty() {
                    return Err(invalid("member[0].steps", "no step files listed".into()));
                }
                Member {
                    name: m.name.clone(),
                    terrain: existing("member[0].terrain", terrain)?,
                    steps,
                    skipped: Vec::new(),
                    track,
                    format: InputFormat::GeoTiff,
                    find_track,
                }
            }
            (None, None, Some(model)) => {
                let items: Vec<String> = match model {
                    StepFiles::Pattern(p) => vec![p.clone()],
                    StepFiles::List(l) => l.clone(),
                };
                let mut found = ModelFiles::default();
                for (i, item) in items.iter().enumerate() {
                    let field = if items.len() == 1 {
                        "member[0].model".to_string()
                    } else {
                        format!("member[0].model[{i}]")
                    };
                    found.extend(expand_model(dir, item).map_err(|what| invalid(&field, what))?);
                }
                Member {
                    name: m.name.clone(),
                    terrain: found.files[0].clone(),
                    steps: found.files,
                    skipped: found.skipped,
                    track,
                    format: model_format,
                    find_track,
                }
            }
            _ => {
                return Err(invalid(
                    "member[0]",
                    "give either terrain and steps (GeoTIFF files) or model (GRIB2 files: a folder, a pattern or a list), not both".into(),
                ))
            }
        };
        let towns = file
            .towns
            .as_deref()
            .map(|t| existing("towns", t))
            .transpose()?;
        let bad_region = |e: RegionError| match e {
            RegionError::Bad {
                field, text, what, ..
            } => invalid(&field, format!("{text}: {what}")),
            other => invalid("region", other.to_string()),
        };
        let region = match (&over.region, &file.region) {
            (Some(text), _) => Some((
                Region::parse(text, "--region").map_err(bad_region)?,
                "--region".to_string(),
            )),
            (None, Some(edges)) => Some((
                Region::new(*edges, "region").map_err(bad_region)?,
                format!("{}: region", path.display()),
            )),
            (None, None) => None,
        };

        let axis = |field: &str,
                    flag: &str,
                    neutral: &str,
                    cli: &Option<String>,
                    case: &Option<OffsetList>| {
            let cli_field = flag.to_string();
            let (text, source) = match (cli, case) {
                (Some(c), _) => (c.clone(), cli_field),
                (None, Some(OffsetList::Text(t))) => (t.clone(), format!("offsets.{field}")),
                (None, Some(OffsetList::Numbers(v))) => (
                    v.iter()
                        .map(|x| x.to_string())
                        .collect::<Vec<_>>()
                        .join(","),
                    format!("offsets.{field}"),
                ),
                (None, None) => (neutral.to_string(), format!("offsets.{field}")),
            };
            parse_offsets(&text)
                .map_err(|e: OffsetError| invalid(&source, e.to_string()))
                .map(|v| (v, source))
        };
        let o = &file.offsets;
        let (cross_km, cross_src) = axis("cross_km", "--cross", "0", &over.cross, &o.cross_km)?;
        let (along_km, along_src) = axis("along_km", "--along", "0", &over.along, &o.along_km)?;
        let (timing_h, timing_src) = axis("timing_h", "--timing", "0", &over.timing, &o.timing_h)?;
        let (intensity, intensity_src) = axis(
            "intensity",
            "--intensity",
            "1",
            &over.intensity,
            &o.intensity,
        )?;
        let (warm_bias_k, warm_src) = axis(
            "warm_bias_k",
            "--warm-bias",
            "0",
            &over.warm_bias,
            &o.warm_bias_k,
        )?;
        for (values, source, lo, hi, what) in [
            (&timing_h, &timing_src, -48.0, 48.0, "hours (−48…48)"),
            (
                &intensity,
                &intensity_src,
                0.05,
                5.0,
                "a factor on the precipitation (0.05…5; 1 is as modelled)",
            ),
            (&warm_bias_k, &warm_src, -10.0, 10.0, "kelvin (−10…10)"),
        ] {
            if let Some(v) = values.iter().find(|v| !(lo..=hi).contains(*v)) {
                return Err(invalid(
                    source,
                    format!("{v} is outside the accepted range: expected {what}"),
                ));
            }
        }
        let only_zero = cross_km.iter().chain(&along_km).all(|v| *v == 0.0);
        if member.track.is_none() && !member.find_track && !only_zero {
            return Err(invalid(
                "member[0].track",
                "offsets other than 0 need the storm track (a CSV or GeoJSON file, or \"find\" to follow the low in the model's sea-level pressure)".into(),
            ));
        }

        let core = file.shift.core_radius_km.unwrap_or(DEFAULT_CORE_KM);
        let outer = file.shift.outer_radius_km.unwrap_or(DEFAULT_OUTER_KM);
        if !(core >= 0.0 && outer > core && outer.is_finite()) {
            return Err(invalid(
                "shift",
                format!("need 0 ≤ core_radius_km < outer_radius_km, got {core} and {outer}"),
            ));
        }
        // The shift is centred on the displaced low and fades out at the outer radius, so an
        // offset beyond that radius moves nothing near the modelled storm: such a scenario would
        // quietly repeat the model as issued.
        for (values, source) in [(&cross_km, &cross_src), (&along_km, &along_src)] {
            if let Some(v) = values.iter().find(|v| v.abs() >= outer) {
                return Err(invalid(
                    source,
                    format!("an offset of {v} km reaches the shift's outer radius ({outer} km, shift.outer_radius_km): the displaced storm would no longer overlap the modelled one; use offsets well inside it (track errors are tens to a few hundred km)"),
                ));
            }
        }
        let lapse = file.shift.lapse_rate_k_per_km.unwrap_or(6.5);
        if !(0.0..=12.0).contains(&lapse) {
            return Err(invalid(
                "shift.lapse_rate_k_per_km",
                format!("{lapse} K/km is outside 0…12 K/km (the standard atmosphere uses 6.5)"),
            ));
        }

        let (ptype_text, ptype_field) = match (&over.precip_type, &file.methods.precip_type) {
            (Some(s), _) => (s.clone(), "--precip-type"),
            (None, Some(s)) => (s.clone(), "methods.precip_type"),
            (None, None) => ("energy-area".to_string(), "methods.precip_type"),
        };
        let ptype = PtypeMethod::parse(&ptype_text).ok_or_else(|| {
            invalid(
                ptype_field,
                format!(
                    "'{ptype_text}' is not a method; expected {}",
                    PtypeMethod::ALL.map(|m| m.name()).join(", ")
                ),
            )
        })?;
        let ratio = file.methods.fixed_ratio.unwrap_or(10.0);
        if !(1.0..=50.0).contains(&ratio) {
            return Err(invalid(
                "methods.fixed_ratio",
                format!("{ratio} is outside 1…50 (10 is the usual ratio)"),
            ));
        }
        let (slr_text, slr_field) = match (&over.snow_ratio, &file.methods.snow_ratio) {
            (Some(s), _) => (s.clone(), "--snow-ratio"),
            (None, Some(s)) => (s.clone(), "methods.snow_ratio"),
            (None, None) => ("fixed".to_string(), "methods.snow_ratio"),
        };
        let slr = SlrMethod::parse(&slr_text, ratio).ok_or_else(|| {
            invalid(
                slr_field,
                format!(
                    "'{slr_text}' is not a method; expected {}",
                    SlrMethod::NAMES.join(", ")
                ),
            )
        })?;
        let dry_air = !over.no_dry_air && file.methods.dry_air.unwrap_or(true);

        let (units_text, units_field) = match (&over.units, &file.output.units) {
            (Some(u), _) => (u.clone(), "--units"),
            (None, Some(u)) => (u.clone(), "output.units"),
            (None, None) => ("metric".to_string(), "output.units"),
        };
        let units = Units::parse(&units_text).ok_or_else(|| {
            invalid(
                units_field,
                format!("'{units_text}': expected metric or us"),
            )
        })?;
        let (type_text, type_field) = match (&over.raster_type, &file.output.raster_type) {
            (Some(t), _) => (t.clone(), "--raster-type"),
            (None, Some(t)) => (t.clone(), "output.raster_type"),
            (None, None) => ("float32".to_string(), "output.raster_type"),
        };
        let raster_type = RasterType::parse(&type_text).ok_or_else(|| {
            invalid(
                type_field,
                format!("'{type_text}': expected float32 or int16"),
            )
        })?;
        // The isobands follow the decision thresholds unless the case asks for other bands.
        let snowfall_bands = match &file.output.snowfall_bands {
            None => None,
            Some(b) => {
                let increasing = b.windows(2).all(|w| w[0] < w[1]);
                if b.is_empty() || !increasing || b.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
                    return Err(invalid(
                        "output.snowfall_bands",
                        format!("{b:?}: expected positive, finite, strictly increasing thresholds in {}", units.snow_unit()),
                    ));
                }
                Some(b.clone())
            }
        };
        let thresholds = |field: &str, given: &Option<Vec<f64>>, default: Vec<f64>| {
            let t = given.clone().unwrap_or(default);
            let ok = !t.is_empty()
                && t.len() <= 16
                && t.iter().all(|v| v.is_finite() && *v > 0.0)
                && t.windows(2).all(|w| w[0] < w[1]);
            if ok {
                Ok(t)
            } else {
                Err(invalid(
                    field,
                    format!("{t:?}: expected 1 to 16 positive amounts in increasing order, in the output units ({})", match field {
                        "output.thresholds" => units.snow_unit(),
                        _ => units.liquid_unit(),
                    }),
                ))
            }
        };
        let snow_thresholds = thresholds(
            "output.thresholds",
            &file.output.thresholds,
            crate::render::legend::default_snow_thresholds(units),
        )?;
        let snowfall_bands = snowfall_bands.unwrap_or_else(|| snow_thresholds.clone());
        let ice_thresholds = thresholds(
            "output.ice_thresholds",
            &file.output.ice_thresholds,
            crate::render::legend::default_ice_thresholds(units),
        )?;
        let prior = resolve_prior(dir, &file.weights, over)
            .map_err(|(field, what)| invalid(&field, what))?;
        scenario_weights(&prior, &crate::scenario::scenario_set(&cross_km, &along_km)).map_err(
            |e| {
                let field = match (&prior, over.cross_sigma.or(over.along_sigma)) {
                    (_, Some(_)) => "--cross-sigma/--along-sigma",
                    (TrackPrior::Explicit { .. }, _) if file.weights.explicit_file.is_some() => {
                        "weights.explicit_file"
                    }
                    (TrackPrior::Explicit { .. }, _) => "weights.explicit",
                    _ => "weights",
                };
                invalid(field, e.to_string())
            },
        )?;
        let min_coverage = match (over.min_coverage, file.weights.min_coverage) {
            (Some(v), _) => check_min_coverage(v).map_err(|e| invalid("--min-coverage", e))?,
            (None, Some(v)) => {
                check_min_coverage(v).map_err(|e| invalid("weights.min_coverage", e))?
            }
            (None, None) => DEFAULT_MIN_COVERAGE,
        };
        let out_dir = match (&over.out, &file.output.folder) {
            (Some(o), _) => o.clone(),
            (None, Some(f)) => dir.join(f),
            (None, None) => dir.join("trackswing-out"),
        };
        Ok(Self {
            path: path.to_path_buf(),
            title: file.title,
            member,
            towns,
            cross_km,
            along_km,
            timing_h,
            intensity,
            warm_bias_k,
            taper: Taper {
                core_radius_km: core,
                outer_radius_km: outer,
            },
            methods: Methods {
                ptype,
                slr,
                lapse_rate_k_per_m: lapse / 1000.0,
                dry_air,
            },
            fixed_ratio: ratio,
            out_dir,
            units,
            force: over.force,
            raster_type,
            snowfall_bands,
            prior,
            min_coverage,
            snow_thresholds,
            ice_thresholds,
            report: over.report,
            region,
        })
    }

    /// Every input file of the run: the case, terrain, steps, track and towns.
    pub fn inputs(&self) -> Vec<PathBuf> {
        let mut v = vec![self.path.clone(), self.member.terrain.clone()];
        v.extend(self.member.steps.iter().cloned());
        v.extend(self.member.track.iter().cloned());
        v.extend(self.towns.iter().cloned());
        v
    }
}

impl Case {
    /// Every scenario axis of the case.
    pub fn axes(&self) -> Axes {
        Axes {
            cross_km: self.cross_km.clone(),
            along_km: self.along_km.clone(),
            timing_h: self.timing_h.clone(),
            intensity: self.intensity.clone(),
            warm_bias_k: self.warm_bias_k.clone(),
        }
    }
}

/// The prior from `[weights]` and the σ flags (which win, and select the Gaussian). Errors name
/// the field.
fn resolve_prior(
    dir: &Path,
    w: &WeightsFile,
    over: &Overrides,
) -> Result<TrackPrior, (String, String)> {
    let sigma_flags = over.cross_sigma.is_some() || over.along_sigma.is_some();
    let explicit = match (&w.explicit, &w.explicit_file) {
        (Some(_), Some(_)) => {
            return Err((
                "weights".into(),
                "give either explicit or explicit_file, not both".into(),
            ))
        }
        (Some(list), None) => Some(TrackPrior::Explicit {
            source: "case file".into(),
            weights: list.clone(),
        }),
        (None, Some(f)) => {
            let p = dir.join(f);
            let weights = read_weights_csv(&p).map_err(|e| {
                (
                    "weights.explicit_file".to_string(),
                    format!("{}: {e}", p.display()),
                )
            })?;
            Some(TrackPrior::Explicit {
                source: p.display().to_string(),
                weights,
            })
        }
        (None, None) => None,
    };
    if explicit.is_some() && (w.cross_sigma_km.is_some() || w.along_sigma_km.is_some()) {
        return Err((
            "weights".into(),
            "give either σ (cross_sigma_km, along_sigma_km) or explicit weights, not both".into(),
        ));
    }
    match explicit {
        Some(e) if !sigma_flags => Ok(e),
        _ => Ok(TrackPrior::Gaussian {
            cross_sigma_km: over
                .cross_sigma
                .or(w.cross_sigma_km)
                .unwrap_or(crate::summarise::weights::EXAMPLE_CROSS_SIGMA_KM),
            along_sigma_km: over
                .along_sigma
                .or(w.along_sigma_km)
                .unwrap_or(crate::summarise::weights::EXAMPLE_ALONG_SIGMA_KM),
        }),
    }
}

/// Expands `folder/prefix*suffix` to the matching files, sorted by name.
fn expand_pattern(dir: &Path, pattern: &str) -> Result<Vec<PathBuf>, String> {
    let full = dir.join(pattern);
    let name = full
        .file_name()
        .and_then(|n| n.to_str())
        .ok_or_else(|| format!("'{pattern}' has no file name"))?
        .to_string();
    let parent = full.parent().unwrap_or(Path::new(".")).to_path_buf();
    let Some((prefix, suffix)) = name.split_once('*') else {
        let p = parent.join(&name);
        return if p.is_file() {
            Ok(vec![p])
        } else {
            Err(format!("file '{}' does not exist", p.display()))
        };
    };
    if suffix.contains('*') || parent.to_string_lossy().contains('*') {
        return Err(format!(
            "'{pattern}': only one '*', in the file name, is supported"
        ));
    }
    let entries = std::fs::read_dir(&parent)
        .map_err(|e| format!("cannot list '{}': {e}", parent.display()))?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.is_file())
        .filter(|p| {
            p.file_name().and_then(|n| n.to_str()).is_some_and(|n| {
                n.len() >= prefix.len() + suffix.len()
                    && n.starts_with(prefix)
                    && n.ends_with(suffix)
            })
        })
        .collect();
    files.sort();
    if files.is_empty() {
        return Err(format!(
            "no file in '{}' matches '{name}'",
            parent.display()
        ));
    }
    Ok(files)
}

/// Expands one `model` item: a folder (every regular file in it not starting with '.'), a
/// pattern with one `*`, or a file; sorted by name.
fn expand_model(dir: &Path, item: &str) -> Result<ModelFiles, String> {
    let p = dir.join(item);
    if p.is_dir() {
        let entries =
            std::fs::read_dir(&p).map_err(|e| format!("cannot list '{}': {e}", p.display()))?;
        let mut all: Vec<PathBuf> = entries
            .filter_map(|e| e.ok())
            .map(|e| e.path())
            .filter(|f| {
                f.file_name()
                    .and_then(|n| n.to_str())
                    .is_some_and(|n| !n.starts_with('.'))
            })
            .collect();
        all.sort();
        // A file is left out only when neither its first octets nor its name say it is model
        // output: a damaged `step_002.grib2` must be named by the reader, not skipped.
        let (files, rest): (Vec<PathBuf>, Vec<PathBuf>) = all.into_iter().partition(|f| {
            f.is_file()
                && (named_as_model_output(f)
                    || !matches!(
                        crate::read::source::magic(f),
                        Ok(crate::read::source::Magic::Other) | Err(_)
                    ))
        });
        let (folders, skipped): (Vec<PathBuf>, Vec<PathBuf>) =
            rest.into_iter().partition(|f| f.is_dir());
        // A case folder (the case file beside one folder of model files, as `make-demo --grib2`
        // writes it): the one subfolder that holds model output is the model folder.
        if files.is_empty() {
            let inner: Vec<ModelFiles> = folders
                .iter()
                .filter_map(|f| expand_model(Path::new(""), &f.to_string_lossy()).ok())
                .collect();
            if let [one] = inner.as_slice() {
                let mut found = one.clone();
                found.skipped.splice(0..0, skipped);
                return Ok(found);
            }
        }
        if files.is_empty() {
            let names = |v: &[PathBuf], slash: &str| -> String {
                v.iter()
                    .filter_map(|f| f.file_name())
                    .map(|n| format!("{}{slash}", n.to_string_lossy()))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let mut what = format!(
                "the folder '{}' holds no model output (GRIB, NetCDF or TIFF files)",
                p.display()
            );
            if !skipped.is_empty() {
                what += &format!("; its other files: {}", names(&skipped, ""));
            }
            if !folders.is_empty() {
                what += &format!(
                    "; its folders: {} (name the one that holds the model files)",
                    names(&folders, "/")
                );
            }
            return Err(what);
        }
        return Ok(ModelFiles { files, skipped });
    }
    Ok(ModelFiles {
        files: expand_pattern(dir, item)?,
        skipped: Vec::new(),
    })
}

/// Whether a file's extension is one model output comes with (GRIB, NetCDF, TIFF).
fn named_as_model_output(f: &Path) -> bool {
    const EXTENSIONS: [&str; 10] = [
        "grib2", "grb2", "gb2", "grib", "grb", "nc", "nc4", "netcdf", "tif", "tiff",
    ];
    f.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| EXTENSIONS.iter().any(|x| x.eq_ignore_ascii_case(e)))
}

/// Model files found in folders, patterns and lists, and the files of those folders that are
/// not model output (a case file, a track, notes), which are left out.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ModelFiles {
    /// The model files, in the order given (each folder's sorted by name).
    pub files: Vec<PathBuf>,
    /// Files in the folders that are not GRIB, NetCDF or TIFF, left out.
    pub skipped: Vec<PathBuf>,
}

impl ModelFiles {
    fn extend(&mut self, other: ModelFiles) {
        self.files.extend(other.files);
        self.skipped.extend(other.skipped);
    }
}

/// One line saying which files of the model folders were left out; `None` when none were.
pub fn skipped_summary(skipped: &[PathBuf]) -> Option<String> {
    if skipped.is_empty() {
        return None;
    }
    let names: Vec<String> = skipped
        .iter()
        .take(5)
        .map(|f| {
            f.file_name()
                .unwrap_or(f.as_os_str())
                .to_string_lossy()
                .into_owned()
        })
        .collect();
    Some(format!(
        "skipped {} file{} in the model folder{} that {} not model output (not GRIB, NetCDF or TIFF by name or content): {}{}",
        skipped.len(),
        if skipped.len() == 1 { "" } else { "s" },
        if skipped.iter().filter_map(|f| f.parent()).collect::<std::collections::BTreeSet<_>>().len() == 1 { "" } else { "s" },
        if skipped.len() == 1 { "is" } else { "are" },
        names.join(", "),
        if skipped.len() > 5 { format!(" and {} more", skipped.len() - 5) } else { String::new() }
    ))
}

/// Model files named on the command line (`trackswing run FILES...`): each a file, a folder or
/// a pattern, relative to the current folder.
pub fn expand_model_args(items: &[PathBuf]) -> Result<ModelFiles, CaseError> {
    let mut found = ModelFiles::default();
    for item in items {
        let text = item.to_string_lossy();
        found.extend(
            expand_model(Path::new(""), &text).map_err(|what| CaseError::Invalid {
                path: PathBuf::from("command line"),
                field: text.to_string(),
                what,
            })?,
        );
    }
    Ok(found)
}

impl Case {
    /// A case for model files given on the command line, with the default methods: `track` is
    /// a track file or `find`; offsets default to 0; outputs go to `--out` or
    /// `./trackswing-out`.
    pub fn from_model_files(
        files: &[PathBuf],
        track: Option<&str>,
        towns: Option<&Path>,
        over: &Overrides,
    ) -> Result<Self, CaseError> {
        let ModelFiles { files, skipped } = expand_model_args(files)?;
        let abs = |p: &Path| -> String {
            std::path::absolute(p)
                .unwrap_or_else(|_| p.to_path_buf())
                .to_string_lossy()
                .into_owned()
        };
        let name = files[0]
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("model")
            .to_string();
        let file = CaseFile {
            title: format!(
                "model files {}{}",
                files[0].display(),
                if files.len() > 1 {
                    format!(" and {} more", files.len() - 1)
                } else {
                    String::new()
                }
            ),
            towns: towns.map(abs),
            region: None,
            member: vec![MemberFile {
                name,
                terrain: None,
                steps: None,
                model: Some(StepFiles::List(files.iter().map(|f| abs(f)).collect())),
                format: None,
                track: track.map(|t| {
                    if t == "find" {
                        t.to_string()
                    } else {
                        abs(Path::new(t))
                    }
                }),
            }],
            offsets: OffsetsFile::default(),
            shift: ShiftFile::default(),
            methods: MethodsFile::default(),
            output: OutputFile {
                folder: Some(abs(Path::new("trackswing-out"))),
                units: None,
                raster_type: None,
                snowfall_bands: None,
                ..OutputFile::default()
            },
            weights: WeightsFile::default(),
        };
        let mut case = Self::resolve(Path::new("command line"), file, over)?;
        // No case file exists; the manifest hashes `path`, so it names the first model file.
        case.path = files[0].clone();
        case.member.skipped = skipped;
        Ok(case)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn setup(case: &str) -> (tempfile::TempDir, PathBuf) {
        let d = tempfile::tempdir().unwrap();
        std::fs::create_dir(d.path().join("f")).unwrap();
        for f in [
            "terrain.tif",
            "f/s_01.tif",
            "f/s_00.tif",
            "track.csv",
            "towns.csv",
        ] {
            std::fs::write(d.path().join(f), b"x").unwrap();
        }
        let p = d.path().join("case.toml");
        std::fs::write(&p, case).unwrap();
        (d, p)
    }

    const GOOD: &str = r#"
title = "unit test"
towns = "towns.csv"
[[member]]
name = "m"
terrain = "terrain.tif"
steps = "f/s_*.tif"
track = "track.csv"
[offsets]
cross_km = "-20:20:10"
along_km = [0, 50]
[methods]
snow_ratio = "max-column-temperature"
"#;

    #[test]
    fn methods_and_axes_from_the_file_and_the_flags() {
        let (_d, p) = setup(
            &GOOD
                .replace(
                    "[methods]",
                    "[methods]\nprecip_type = \"partial-thickness\"\ndry_air = false",
                )
                .replace(
                    "along_km = [0, 50]",
                    "along_km = [0, 50]\ntiming_h = \"-3:3:3\"\nintensity = [0.8, 1.2]",
                ),
        );
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.methods.ptype, PtypeMethod::PartialThickness);
        assert!(!c.methods.dry_air);
        assert_eq!(c.timing_h, vec![-3.0, 0.0, 3.0]);
        assert_eq!(c.intensity, vec![0.8, 1.2]);
        assert_eq!(c.warm_bias_k, vec![0.0]);
        assert_eq!(c.axes().product_len(), 5 * 2 * 3 * 2);
        let over = Overrides {
            precip_type: Some("surface-logistic".into()),
            snow_ratio: Some("growth-zone".into()),
            warm_bias: Some("-1,0,1".into()),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.methods.ptype, PtypeMethod::SurfaceLogistic);
        assert_eq!(c.methods.slr, SlrMethod::GrowthZone);
        assert_eq!(c.warm_bias_k, vec![-1.0, 0.0, 1.0]);
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert!(c.methods.dry_air, "dry air is on by default");
        let c = Case::load(
            &p,
            &Overrides {
                no_dry_air: true,
                ..Default::default()
            },
        )
        .unwrap();
        assert!(!c.methods.dry_air);
        for (over, expect) in [
            (
                Overrides {
                    precip_type: Some("thickness".into()),
                    ..Default::default()
                },
                "--precip-type",
            ),
            (
                Overrides {
                    intensity: Some("0".into()),
                    ..Default::default()
                },
                "--intensity",
            ),
            (
                Overrides {
                    timing: Some("-100".into()),
                    ..Default::default()
                },
                "--timing",
            ),
        ] {
            let e = Case::load(&p, &over).unwrap_err().to_string();
            assert!(e.contains(expect), "{e}");
        }
    }

    #[test]
    fn resolves_a_good_case() {
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.cross_km, vec![-20.0, -10.0, 0.0, 10.0, 20.0]);
        assert_eq!(c.along_km, vec![0.0, 50.0]);
        assert_eq!(c.member.steps.len(), 2);
        assert!(c.member.steps[0].ends_with("f/s_00.tif"));
        assert_eq!(c.methods.slr, SlrMethod::MaxColumnTemperature);
        assert_eq!(c.taper.core_radius_km, DEFAULT_CORE_KM);
        let over = Overrides {
            cross: Some("0".into()),
            units: Some("us".into()),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.cross_km, vec![0.0]);
        assert_eq!(c.units, Units::Us);
    }

    #[test]
    fn weights_and_thresholds() {
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.prior, TrackPrior::default());
        assert_eq!(c.snow_thresholds, vec![1.0, 2.0, 5.0, 10.0, 20.0, 50.0]);
        assert_eq!(c.snowfall_bands, c.snow_thresholds);
        let over = Overrides {
            units: Some("us".into()),
            cross_sigma: Some(30.0),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.snow_thresholds, vec![0.5, 1.0, 2.0, 5.0, 10.0, 20.0]);
        assert_eq!(
            c.prior,
            TrackPrior::Gaussian {
                cross_sigma_km: 30.0,
                along_sigma_km: crate::summarise::weights::EXAMPLE_ALONG_SIGMA_KM
            }
        );
        let load_err = |extra: &str| {
            let (_d, p) = setup(&format!("{GOOD}{extra}"));
            Case::load(&p, &Overrides::default())
                .unwrap_err()
                .to_string()
        };
        let e = load_err("[weights]\ncross_sigma_km = -5\n");
        assert!(e.contains("'weights'") && e.contains("positive"), "{e}");
        let e = load_err("[weights]\nexplicit = [{ cross_km = 0, along_km = 0, weight = 1 }]\n");
        assert!(
            e.contains("weights.explicit") && e.contains("cross -20 km, along 0 km"),
            "{e}"
        );
        let e = load_err("[output]\nthresholds = [5, 2.5]\n").replace('\n', " ");
        assert!(
            e.contains("output.thresholds") && e.contains("increasing"),
            "{e}"
        );
    }

    #[test]
    fn unknown_keys_and_bad_values_are_errors() {
        let (_d, p) = setup(&GOOD.replace("[offsets]", "[offsets]\ncross = 3"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("unknown field") && e.contains("cross"), "{e}");
        let (_d, p) = setup(&GOOD.replace("\"-20:20:10\"", "\"20:-20:10\""));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("offsets.cross_km") && e.contains("end is before"),
            "{e}"
        );
        let (_d, p) = setup(&GOOD.replace("track.csv", "nowhere.csv"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("member[0].track") && e.contains("does not exist"),
            "{e}"
        );
        let (_d, p) = setup(&GOOD.replace("title = \"unit test\"", "title = 3"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("case.toml") && e.contains("title"), "{e}");
        let (_d, p) = setup(GOOD);
        let over = Overrides {
            along: Some("0:10:0".into()),
            ..Default::default()
        };
        let e = Case::load(&p, &over).unwrap_err().to_string();
        assert!(
            e.contains("--along") && e.contains("step must be positive"),
            "{e}"
        );
    }
}
