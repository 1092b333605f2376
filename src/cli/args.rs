//! Command-line arguments (stage one: raw flags, validated by clap) and their resolution into a
//! plan the library runs (stage two: case loaded, overrides applied).

use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

const ABOUT: &str = "How much does each place's snowfall depend on where the low tracks?

trackswing takes a model's gridded forecast and its storm track, moves the track by many offsets \
(left/right of the motion, ahead/behind), recomputes precipitation type and snowfall for every \
offset, and writes GeoTIFF and GeoJSON layers and a towns table showing how much each total \
depends on track error.

Decision support for trained forecasters only: not an official forecast or warning. Defer to the \
national weather service and local emergency management.";

/// Parsed command line.
#[derive(Parser, Debug)]
#[command(name = "trackswing", version, about = ABOUT, long_about = ABOUT)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Run a case file, or model files (GRIB2) with the default methods: shift the track by
    /// every offset and write the layers.
    Run(RunArgs),
    /// Write the layers of a run computed in shards (`run --shard K/N`), from the shards'
    /// files: the same layers one run gives.
    Merge(MergeArgs),
    /// List what model files hold (fields, levels, valid times, grid, projection, extent) and
    /// which case requirements they meet.
    Inspect(InspectArgs),
    /// Find the storm track from the model's sea-level pressure and write it as CSV and
    /// GeoJSON for `run --track`.
    Track(TrackArgs),
    /// Verify past forecast tracks against their analysed tracks: cross- and along-track error
    /// by lead time, and the σ and bias a case's `[weights] from_track_error` reads.
    TrackError(TrackErrorArgs),
    /// Run the shipped demo case (an invented storm over an invented region).
    Demo(DemoArgs),
    /// Write report.html (maps, bust-prone towns, settings) for a finished run's output folder.
    Report(ReportArgs),
    /// After the storm: compare observed storm totals with a finished run's scenarios and write
    /// OUT_DIR/verification/ (scores per report and per scenario, summary, heat map).
    Verify(VerifyArgs),
    /// Write the invented demo storm's input files (used to build demo-grid/ and benchmark cases).
    #[command(hide = true)]
    MakeDemo(MakeDemoArgs),
    /// Show one cell's shifted profile, what every method makes of it, and its totals to a step.
    Sounding(SoundingArgs),
    /// Evaluate the thermodynamic kernels on CSV points from stdin (p_pa,t_k,rh_pct), for the
    /// reference checks in tests/ref/.
    #[command(hide = true)]
    ThermoTable,
    /// Score weighted ensembles from stdin (`y x1 w1 x2 w2 ...` per line: CRPS, F(y-), F(y)),
    /// for the reference checks in tests/ref/.
    #[command(hide = true)]
    ScoreTable,
}

/// Settings shared by `run` and `demo`.
#[derive(Args, Debug, Clone)]
pub struct Common {
    /// Output folder (default: the case's [output] folder).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Cross-track offsets in km, positive to the left of the storm's motion: a value, a list
    /// (-50,0,50) or a range (-100:100:10).
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub cross: Option<String>,
    /// Along-track offsets in km, positive ahead of the storm: a value, a list or a range.
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub along: Option<String>,
    /// Worker threads (default: all cores); the next step is read beside them on as many
    /// again. Results are identical for any number.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Units of the outputs: metric (cm of snow, mm of liquid) or us (inches).
    #[arg(long, value_name = "metric|us")]
    pub units: Option<String>,
    /// Snow-to-liquid ratio method: fixed, max-column-temperature or growth-zone.
    #[arg(long, value_name = "METHOD")]
    pub snow_ratio: Option<String>,
    /// Write into an output folder trackswing did not write (its files are kept; one with the
    /// name of a layer is replaced), and run more than 2000 scenarios (refused otherwise; more
    /// than 400 warn with the estimated time and memory).
    #[arg(long)]
    pub force: bool,
    /// Precipitation-type method: energy-area, partial-thickness or surface-logistic.
    #[arg(long, value_name = "METHOD")]
    pub precip_type: Option<String>,
    /// Take the water that saturates dry air below the cloud from the precipitation first (for
    /// when the model looks too moist at onset; off by default: the model's precipitation
    /// already lost what evaporated below its cloud).
    #[arg(long, conflicts_with = "no_dry_air")]
    pub dry_air: bool,
    /// No dry-air treatment, even where the case file turns it on (the default).
    #[arg(long)]
    pub no_dry_air: bool,
    /// Time offsets in hours, positive when the storm comes later: a value, a list or a range.
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub timing: Option<String>,
    /// Factors on the precipitation (1 = as modelled): a value, a list or a range.
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub intensity: Option<String>,
    /// Temperature biases in K added between the ground and 500 hPa: a value, a list or a range.
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub warm_bias: Option<String>,
    /// Sample type of the GeoTIFF layers: float32 or int16 (scaled, about half the size).
    #[arg(long, value_name = "float32|int16")]
    pub raster_type: Option<String>,
    /// Track-error σ across the track, km, for the Gaussian weighting of the offsets. Take it
    /// from your own verification of track error at this lead time; the default (50 km) is an
    /// example, not a climatology.
    #[arg(long, value_name = "KM", allow_hyphen_values = true)]
    pub cross_sigma: Option<f64>,
    /// Track-error σ along the track, km (timing error as distance). Take it from your own
    /// verification; the default (50 km) is an example, not a climatology.
    #[arg(long, value_name = "KM", allow_hyphen_values = true)]
    pub along_sigma: Option<f64>,
    /// Least share (0 < x ≤ 1, default 0.9) of the track-error prior's weight that must have
    /// data at a cell for its weighted summaries and min/max/range; the scenarios with data are
    /// then renormalised (prior_coverage.tif shows the share).
    #[arg(long, value_name = "SHARE", allow_hyphen_values = true)]
    pub min_coverage: Option<f64>,
    /// Also write report.html (always written by `demo`).
    #[arg(long)]
    pub report: bool,
    /// Read and compute only this lon/lat box of the model grid, degrees west,south,east,north
    /// (e.g. -80,35,-60,50; west > east crosses the antimeridian: 170,40,-170,60). Overrides
    /// the case's `region`.
    #[arg(long, value_name = "W,S,E,N", allow_hyphen_values = true)]
    pub region: Option<String>,
    /// Print nothing but errors.
    #[arg(long, short)]
    pub quiet: bool,
}

/// `trackswing report`.
#[derive(Args, Debug)]
pub struct ReportArgs {
    /// The output folder of a finished run (with manifest.json).
    #[arg(value_name = "OUT_DIR")]
    pub out_dir: PathBuf,
}

/// `trackswing verify`.
#[derive(Args, Debug)]
pub struct VerifyArgs {
    /// The output folder of a finished run (with manifest.json), or of a merge of shards.
    #[arg(value_name = "OUT_DIR")]
    pub out_dir: PathBuf,
    /// Observed storm totals: CSV with lat, lon (degrees) and snow, its unit in a `units`
    /// column (cm, in or mm) or the header (snow_cm, snow_in, snow_mm); optional name and type.
    #[arg(long, value_name = "REPORTS.csv")]
    pub reports: PathBuf,
}

/// What a run reads: a case file, or model files with their track and towns.
#[derive(Args, Debug)]
pub struct Inputs {
    /// The case file (TOML), or model files (GRIB2 files, folders or patterns with one '*').
    #[arg(value_name = "CASE.toml|FILES", required = true, num_args = 1..)]
    pub inputs: Vec<PathBuf>,

    /// With model files: the storm track (CSV or GeoJSON), or `find` to follow the low in the
    /// model's sea-level pressure. Needed for offsets other than 0.
    #[arg(long, value_name = "FILE|find")]
    pub track: Option<String>,
    /// With model files: towns CSV (name,lat,lon).
    #[arg(long, value_name = "FILE")]
    pub towns: Option<PathBuf>,
}

/// `trackswing run`.
#[derive(Args, Debug)]
pub struct RunArgs {
    /// What to read.
    #[command(flatten)]
    pub read: Inputs,
    /// Another member of a several-model run, as NAME=FILES (a folder, a pattern with one '*',
    /// or files separated by commas); repeat for each. The files given first are the first
    /// member (named after its first file). Every member runs with every method and offset,
    /// and the layers say how much of each place's spread is which model is right.
    #[arg(long, value_name = "NAME=FILES")]
    pub member: Vec<String>,
    /// Compute only shard K of N of the scenarios (every N-th, from the K-th) and write their
    /// totals to OUT.shards/shard-K-of-N.bin instead of layers; `merge` makes the layers once
    /// every shard is done. For batch schedulers: one job per K.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// Shared settings.
    #[command(flatten)]
    pub common: Common,
}

/// `trackswing merge`.
#[derive(Args, Debug)]
pub struct MergeArgs {
    /// What to read: as given to `run --shard`.
    #[command(flatten)]
    pub read: Inputs,
    /// The shard files (default: every OUT.shards/shard-*-of-*.bin).
    #[arg(long, value_name = "FILE", num_args = 1..)]
    pub shards: Vec<PathBuf>,
    /// Shared settings: the offsets, methods and other settings that change the totals must be
    /// those the shards ran with (the merge checks); units, raster type, σ and the report may
    /// differ.
    #[command(flatten)]
    pub common: Common,
}

/// `trackswing inspect`.
#[derive(Args, Debug)]
pub struct InspectArgs {
    /// Model files, folders or patterns with one '*'.
    #[arg(value_name = "FILE|DIR", required = true, num_args = 1..)]
    pub inputs: Vec<PathBuf>,
}

/// `trackswing track`.
#[derive(Args, Debug)]
pub struct TrackArgs {
    /// Model files (GRIB2) holding mean sea-level pressure, folders or patterns.
    #[arg(value_name = "FILES", required = true, num_args = 1..)]
    pub inputs: Vec<PathBuf>,
    /// Start at the pressure minimum nearest this point (degrees north, east) instead of the
    /// deepest closed low.
    #[arg(long, value_name = "LAT,LON", allow_hyphen_values = true)]
    pub start: Option<String>,
    /// Folder for track.csv and track.geojson.
    #[arg(long, value_name = "DIR", default_value = ".")]
    pub out: PathBuf,
}

/// `trackswing track-error`.
#[derive(Args, Debug)]
pub struct TrackErrorArgs {
    /// Forecast tracks of past cases (CSV or GeoJSON, as for `run --track`).
    #[arg(long, value_name = "FILE", required = true, num_args = 1..)]
    pub forecast: Vec<PathBuf>,
    /// The analysed track of each case, in the same order as --forecast (the first analysis
    /// goes with the first forecast, and so on).
    #[arg(long, value_name = "FILE", required = true, num_args = 1..)]
    pub analysis: Vec<PathBuf>,
    /// Folder for track_error.csv and track_error_summary.csv.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Reference time of the forecasts (RFC 3339): one for all, or one per forecast in order
    /// (default: each forecast track's first time).
    #[arg(long, value_name = "TIME", num_args = 1..)]
    pub reference_time: Vec<String>,
    /// Width of the lead-time bins, hours.
    #[arg(long, value_name = "H", default_value_t = 12.0)]
    pub bin_hours: f64,
}

/// `trackswing demo`.
#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Shared settings.
    #[command(flatten)]
    pub common: Common,
}

/// `trackswing make-demo`.
#[derive(Args, Debug)]
pub struct MakeDemoArgs {
    /// Folder to write the case into.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Grid columns (default: the shipped demo's).
    #[arg(long)]
    pub nx: Option<usize>,
    /// Grid rows.
    #[arg(long)]
    pub ny: Option<usize>,
    /// Time steps.
    #[arg(long)]
    pub steps: Option<usize>,
    /// Hours per step.
    #[arg(long)]
    pub step_hours: Option<u32>,
    /// Isobaric levels.
    #[arg(long)]
    pub levels: Option<usize>,
    /// Write the case as GRIB2 model output (one file per valid time) instead of GeoTIFF.
    #[arg(long)]
    pub grib2: bool,
    /// Write an invented case of three members (the demo storm, its low further north, a
    /// warmer and wetter air mass) and two snow-ratio methods.
    #[arg(long, conflicts_with = "grib2")]
    pub members: bool,
}

/// `trackswing sounding`.
#[derive(Args, Debug)]
pub struct SoundingArgs {
    /// What to read: a case file or model files, as for `run`.
    #[command(flatten)]
    pub read: Inputs,
    /// The point, degrees: latitude,longitude (e.g. 47.76,-29.29).
    #[arg(long, value_name = "LAT,LON", allow_hyphen_values = true)]
    pub at: String,
    /// Step to show, 1-based (default: the step with the most precipitation at the point);
    /// totals run from step 1 to it.
    #[arg(long, value_name = "N")]
    pub step: Option<usize>,
    /// Cross-track offset, km, positive to the left of the motion.
    #[arg(
        long,
        value_name = "KM",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub cross: f64,
    /// Along-track offset, km, positive ahead.
    #[arg(
        long,
        value_name = "KM",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub along: f64,
    /// Time offset, hours, positive when the storm comes later.
    #[arg(
        long,
        value_name = "H",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub timing: f64,
    /// Factor on the precipitation.
    #[arg(long, value_name = "X", default_value_t = 1.0)]
    pub intensity: f64,
    /// Temperature bias, K, between the ground and 500 hPa.
    #[arg(
        long,
        value_name = "K",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub warm_bias: f64,
    /// Precipitation-type method in use (default: the case's).
    #[arg(long, value_name = "METHOD")]
    pub precip_type: Option<String>,
    /// Snow-to-liquid ratio method in use (default: the case's).
    #[arg(long, value_name = "METHOD")]
    pub snow_ratio: Option<String>,
    /// Take the water that saturates dry air below the cloud from the precipitation first.
    #[arg(long, conflicts_with = "no_dry_air")]
    pub dry_air: bool,
    /// No dry-air treatment, even where the case file turns it on (the default).
    #[arg(long)]
    pub no_dry_air: bool,
    /// Read only this lon/lat box of the model grid, W,S,E,N degrees (default: the case's
    /// `region`, else the whole grid).
    #[arg(long, value_name = "W,S,E,N", allow_hyphen_values = true)]
    pub region: Option<String>,
    /// The member of a several-member case to show (default: the first).
    #[arg(long, value_name = "NAME")]
    pub member: Option<String>,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
}
