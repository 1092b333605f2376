//! The engine: streams the time steps through shift → diagnose → accumulate for every scenario.
//!
//! Time is the outer loop: each step's fields are read once and every scenario is computed on
//! them. Only a window of steps is held — the steps the current output step's scenarios sample
//! (one step without timing offsets; with them, the steps that bracket t − max(timing) …
//! t − min(timing), at most (max − min)/step + 2 while the next is read) — and the per-scenario
//! totals, so memory does not grow with the number of steps. This is the one place where work runs in parallel: the
//! tasks are (scenario, block of cells) pairs, each writing only its own cells of its own
//! scenario's totals, so the result is identical, bit for bit, whatever the number of threads.
//!
//! A scenario's step k has the model's step k's length and valid time t_k; its fields are the
//! model's at t_k − timing_h, linear in time between the two steps that bracket it (the
//! precipitation as a rate, so steps of different lengths mix correctly). A step whose sampled
//! time lies before the model's first step or after its last is skipped for that scenario and
//! counted ([`Totals::uncovered_steps`]): the model says nothing about those hours.

use crate::accumulate::Totals;
use crate::case::Case;
use crate::diagnose::{step_column, ColumnMissing, ColumnStep, Methods, Profile};
use crate::grid::Grid;
use crate::progress::Progress;
use crate::read::fields::StepFields;
use crate::read::source::{open as open_source, Source};
use crate::read::track_finder::{find_track, to_track, FinderError};
use crate::read::{
    read_towns, read_track, FieldError, SourceError, StepLayout, Town, TownsError, Track,
    TrackError,
};
use crate::scenario::{bracket, scenario_product, Scenario, TimeSample};
use crate::shift::{bilinear_weights, sample_at, sample_one, source_index, StepShift, Taper};
use chrono::{DateTime, Duration, Utc};
use rayon::prelude::*;
use std::collections::VecDeque;
use std::path::{Path, PathBuf};

pub mod moisture;
use crate::diagnose::subcloud::SubCloud;
use moisture::{LevelMoisture, Weights};

/// Why a run failed. Nothing is written when a run fails.
#[derive(Debug, thiserror::Error)]
pub enum EngineError {
    /// Model fields.
    #[error(transparent)]
    Field(#[from] FieldError),
    /// Model fields from any source.
    #[error(transparent)]
    Source(#[from] SourceError),
    /// Model fields of one time step.
    #[error("step {step}: {source}")]
    StepField {
        /// Step number (1-based).
        step: usize,
        /// What is wrong with its file (boxed: it is large and rare).
        source: Box<SourceError>,
    },
    /// The track could not be found from sea-level pressure.
    #[error("{path}: finding the track: {source}")]
    Finder {
        /// The first model file.
        path: PathBuf,
        /// The cause.
        source: FinderError,
    },
    /// The track.
    #[error(transparent)]
    Track(#[from] TrackError),
    /// The towns.
    #[error(transparent)]
    Towns(#[from] TownsError),
    /// The track does not cover a step.
    #[error("{path}: {what}; the track must cover every step when offsets other than 0 are run")]
    TrackTooShort {
        /// Track file.
        path: PathBuf,
        /// Which step it misses.
        what: String,
    },
    /// The track never enters the grid.
    #[error(
        "{path}: no track position lies inside the grid ({extent}); is the track for this case?"
    )]
    TrackOutsideGrid {
        /// Track file.
        path: PathBuf,
        /// The grid's extent.
        extent: String,
    },
    /// A town outside the grid.
    #[error("{path}: town '{name}' at {lat},{lon} lies outside the grid ({extent})")]
    TownOutside {
        /// Towns file.
        path: PathBuf,
        /// Town.
        name: String,
        /// Latitude.
        lat: f64,
        /// Longitude.
        lon: f64,
        /// The grid's extent.
        extent: String,
    },
    /// Steps out of order or with different levels.
    #[error("{path}: {what}")]
    Steps {
        /// Step file.
        path: PathBuf,
        /// What is wrong.
        what: String,
    },
    /// The run would not fit in memory.
    #[error("the run needs about {need_mib} MiB ({scenarios} scenarios × {cells} cells) but only {avail_mib} MiB of memory is available; run fewer offsets, a coarser range, or run the case in shards (`run --shard K/N` for K = 1…N, each holding an N-th of the scenarios, then `merge`)")]
    TooBig {
        /// Estimated need, MiB.
        need_mib: u64,
        /// Available, MiB.
        avail_mib: u64,
        /// Scenarios.
        scenarios: usize,
        /// Cells.
        cells: usize,
    },
    /// The thread pool could not be built.
    #[error("cannot start {0} worker threads")]
    Threads(usize),
}

/// Everything a run computed, ready to summarise and write.
pub struct RunResult {
    /// The grid.
    pub grid: Grid,
    /// Terrain, m.
    pub terrain: Vec<f32>,
    /// Scenarios, in band order; index 0..n.
    pub scenarios: Vec<Scenario>,
    /// Index of the baseline (0, 0) in `scenarios`.
    pub baseline: usize,
    /// Totals per scenario.
    pub totals: Vec<Totals>,
    /// Valid time of every step.
    pub valid_times: Vec<DateTime<Utc>>,
    /// The modelled low centre (lon, lat) at every step, where the track covers it.
    pub centres: Vec<Option<(f64, f64)>>,
    /// Towns.
    pub towns: Vec<Town>,
    /// The track, if the case has one.
    pub track: Option<Track>,
    /// The layout of the step fields (levels found).
    pub layout: StepLayout,
    /// Where the time went.
    pub timings: Timings,
    /// The shard files the totals were merged from (none for a run in one piece).
    pub shards: Vec<ShardUsed>,
    /// What the run warned about, in order: the layers' manifest and report carry them.
    pub warnings: Vec<String>,
}

/// A shard file a run's totals came from, for the manifest.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ShardUsed {
    /// The file as given.
    pub file: String,
    /// Which shard, `K/N`.
    pub shard: String,
    /// CRC-32 of the file's totals, hex.
    pub body_crc32: String,
}

/// Wall time of the engine's stages, seconds.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Timings {
    /// Waiting for the inputs to be read and checked: the first step, any step read ahead of
    /// time for a timing offset, and whatever part of the next step's read the previous step's
    /// scenarios did not cover (steps are read beside the engine).
    pub read_s: f64,
    /// Shifting, diagnosing and accumulating every scenario.
    pub compute_s: f64,
}

fn extent(g: &Grid) -> String {
    let (w, n) = g.lonlat_of(-0.5, -0.5);
    let (e, s) = g.lonlat_of(g.nx as f64 - 0.5, g.ny as f64 - 0.5);
    format!("lon {w:.3}…{e:.3}, lat {s:.3}…{n:.3}")
}

/// Cells per parallel task: large enough to amortise scheduling, small enough to balance two
/// cores when only one scenario runs.
const CELLS_PER_TASK: usize = 4096;

/// Which scenarios a run computes: shard `index` (0-based) of `count` takes the scenarios whose
/// position in [`scenario_product`]'s order leaves remainder `index` when divided by `count`.
/// Interleaved rather than in blocks, so shards get offsets from across the whole range and take
/// about the same time. Scenarios share nothing, so the shards' totals put side by side are the
/// totals of one run, bit for bit ([`crate::shard`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// 0-based.
    pub index: usize,
    /// Number of shards, at least 1.
    pub count: usize,
}

impl Shard {
    /// Parses `K/N` (1 ≤ K ≤ N, as a batch scheduler's array index counts).
    ///
    /// ```
    /// use trackswing::engine::Shard;
    /// assert_eq!(Shard::parse("2/3"), Some(Shard { index: 1, count: 3 }));
    /// assert_eq!(Shard::parse("0/3"), None);
    /// assert_eq!(Shard::parse("4/3"), None);
    /// ```
    pub fn parse(text: &str) -> Option<Shard> {
        let (k, n) = text.trim().split_once('/')?;
        let (k, n): (usize, usize) = (k.trim().parse().ok()?, n.trim().parse().ok()?);
        (1..=n).contains(&k).then_some(Shard {
            index: k - 1,
            count: n,
        })
    }

    /// True when scenario `i` belongs to this shard.
    pub fn holds(&self, i: usize) -> bool {
        i % self.count == self.index
    }

    /// `K/N`, 1-based.
    pub fn label(&self) -> String {
        format!("{}/{}", self.index + 1, self.count)
    }
}

/// What a run needs before its first step: the model's source, the track, the towns and the
/// scenarios, checked against the grid.
pub struct Prepared {
    /// The model's fields.
    pub source: Box<dyn Source>,
    /// The track, if the case has one.
    pub track: Option<Track>,
    /// Towns.
    pub towns: Vec<Town>,
    /// Every scenario of the case, in band order.
    pub scenarios: Vec<Scenario>,
    /// Index of the baseline (0, 0) in `scenarios`.
    pub baseline: usize,
}

/// Opens the case's model fields, reads the track and towns, checks them against the grid and
/// lists the scenarios.
pub fn prepare(case: &Case, progress: &dyn Progress) -> Result<Prepared, EngineError> {
    let source = open_source(&case.member, &|m: &str| progress.warn(m))?;
    let grid = source.statics().grid.clone();
    let track = case_track(case, source.as_ref(), progress)?;
    if let Some(t) = &track {
        if !t
            .points
            .iter()
            .any(|p| grid.index_of(p.lon, p.lat).is_some())
        {
            return Err(EngineError::TrackOutsideGrid {
                path: t.source.clone(),
                extent: extent(&grid),
            });
        }
    }
    let towns = match &case.towns {
        Some(p) => {
            let towns = read_towns(p)?;
            if let Some(t) = towns.iter().find(|t| grid.index_of(t.lon, t.lat).is_none()) {
                return Err(EngineError::TownOutside {
                    path: p.clone(),
                    name: t.name.clone(),
                    lat: t.lat,
                    lon: t.lon,
                    extent: extent(&grid),
                });
            }
            towns
        }
        None => Vec::new(),
    };
    let scenarios = scenario_product(&case.axes());
    let baseline = scenarios
        .iter()
        .position(Scenario::is_baseline)
        .expect("scenario_product always includes the baseline");
    Ok(Prepared {
        source,
        track,
        towns,
        scenarios,
        baseline,
    })
}

/// Runs a case on `threads` worker threads.
pub fn run(case: &Case, threads: usize, progress: &dyn Progress) -> Result<RunResult, EngineError> {
    run_shard(case, threads, progress, None)
}

/// Runs the scenarios of one shard of a case (all of them for `None`) on `threads` worker
/// threads. The scenarios outside the shard keep empty totals (no cells).
pub fn run_shard(
    case: &Case,
    threads: usize,
    progress: &dyn Progress,
    shard: Option<Shard>,
) -> Result<RunResult, EngineError> {
    let record = crate::progress::Record::new(progress);
    let mut r = run_prepared(case, prepare(case, &record)?, threads, &record, shard)?;
    r.warnings = record.into_warnings();
    Ok(r)
}

/// [`run_shard`] on a case already prepared.
pub fn run_prepared(
    case: &Case,
    prepared: Prepared,
    threads: usize,
    progress: &dyn Progress,
    shard: Option<Shard>,
) -> Result<RunResult, EngineError> {
    let Prepared {
        source,
        track,
        towns,
        scenarios,
        baseline,
    } = prepared;
    let statics = source.statics();
    let grid = statics.grid.clone();
    let computed: Vec<bool> = (0..scenarios.len())
        .map(|i| shard.is_none_or(|s| s.holds(i)))
        .collect();
    let n = grid.len();
    let run = computed.iter().filter(|c| **c).count();
    if let Err((need, avail)) = fits_in_memory(n, run) {
        return Err(EngineError::TooBig {
            need_mib: need >> 20,
            avail_mib: avail >> 20,
            scenarios: run,
            cells: n,
        });
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|_| EngineError::Threads(threads))?;

    let mut totals: Vec<Totals> = computed
        .iter()
        .map(|&c| Totals::new(if c { n } else { 0 }))
        .collect();
    // A cell without terrain is missing in every scenario from the start: the engine passes
    // over a screened cell without looking at it (see step_all_scenarios).
    for (c, _) in statics
        .terrain
        .iter()
        .enumerate()
        .filter(|(_, z)| z.is_nan())
    {
        for t in totals.iter_mut().filter(|t| !t.is_empty()) {
            t.rows_mut(c, c + 1).set_missing(0);
        }
    }
    let mut centres = Vec::new();
    let mut timings = Timings::default();
    let mut window = StepWindow::new(source.as_ref());
    let reach = GridReach::of(&grid);
    let timing_offsets = distinct(scenarios.iter().map(|s| s.timing_h));
    // Steps are read beside the engine, on threads of their own: a step's read (decoding,
    // checks) overlaps the previous step's scenarios and fills the cores the engine leaves idle.
    let read_pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|_| EngineError::Threads(threads))?;
    progress.start("time steps", source.step_count() as u64);
    std::thread::scope(|scope| -> Result<(), EngineError> {
        for k in 0..source.step_count() {
            let clock = std::time::Instant::now();
            // Sources decode a step's fields in parallel: on the run's threads too.
            let samples: Vec<Option<TimeSample>> = pool.install(|| {
                window.load_through(k)?;
                let t_k = window.times[k];
                timing_offsets
                    .iter()
                    .map(|&h| window.sample(t_k - hours(h)))
                    .collect::<Result<_, EngineError>>()
            })?;
            let t_k = window.times[k];
            // The earliest step any later output step can still sample: for each timing
            // offset, the last step at or before this step's sampled time, or the first step
            // when that time lies before the model's start (a storm coming later samples the
            // start again at the next output steps, so it must not be forgotten).
            let first_needed = timing_offsets
                .iter()
                .map(|&h| {
                    let at = t_k - hours(h);
                    window.times.iter().rposition(|t| *t <= at).unwrap_or(0)
                })
                .min()
                .unwrap_or(k)
                .min(k);
            window.forget_before(first_needed);
            let ahead = window.next_to_read().map(|(m, buf)| {
                let (src, read_pool) = (source.as_ref(), &read_pool);
                (
                    m,
                    scope.spawn(move || read_pool.install(|| fetch(src, m, buf))),
                )
            });
            timings.read_s += clock.elapsed().as_secs_f64();
            let clock = std::time::Instant::now();
            let path = window.fields(k).path.clone();
            if case.methods.dry_air {
                // Memos are filled in parallel: on the run's threads.
                pool.install(|| {
                    for (_, s) in scenarios.iter().enumerate().filter(|(i, _)| computed[*i]) {
                        let ti = timing_offsets
                            .iter()
                            .position(|h| *h == s.timing_h)
                            .expect("every timing is listed");
                        if let Some(sample) = samples[ti] {
                            window.prepare_moisture(sample.index, s.warm_bias_k);
                            if sample.next > 0.0 {
                                window.prepare_moisture(sample.index + 1, s.warm_bias_k);
                            }
                        }
                    }
                });
            }
            let mut inputs = Vec::with_capacity(scenarios.len());
            for (si, s) in scenarios.iter().enumerate() {
                if !computed[si] {
                    inputs.push(None);
                    continue;
                }
                let ti = timing_offsets
                    .iter()
                    .position(|h| *h == s.timing_h)
                    .expect("every timing is listed");
                let Some(sample) = samples[ti] else {
                    totals[si].uncovered_steps += 1;
                    inputs.push(None);
                    continue;
                };
                let at = t_k - hours(s.timing_h);
                let shift = scenario_shift(track.as_ref(), s, at, k, &path)?;
                inputs.push(Some(window.scenario_step(k, sample, shift, s)));
            }
            centres.push(track.as_ref().and_then(|t| t.position_at(t_k)));
            let layout = window.layout().clone();
            let counts = pool.install(|| {
                step_all_scenarios(
                    &grid,
                    &reach,
                    &statics.terrain,
                    &layout,
                    &inputs,
                    &case.taper,
                    &case.methods,
                    (k + 1) as u32,
                    &mut totals,
                )
            });
            for (t, o) in totals.iter_mut().zip(counts) {
                t.outside += o.outside;
                t.undefined += o.undefined;
            }
            timings.compute_s += clock.elapsed().as_secs_f64();
            if let Some((m, reading)) = ahead {
                let clock = std::time::Instant::now();
                let read = reading
                    .join()
                    .unwrap_or_else(|panic| std::panic::resume_unwind(panic));
                window.push(m, read)?;
                timings.read_s += clock.elapsed().as_secs_f64();
            }
            progress.advance(1);
        }
        Ok(())
    })?;
    progress.finish();
    let valid_times = std::mem::take(&mut window.times);
    let layout = window.layout.take().expect("a case has at least one step");
    drop(window);
    if let Some(w) = step_gap_warning(&valid_times) {
        progress.warn(&w);
    }
    warn_about_totals(case, &scenarios, &totals, valid_times.len(), n, progress);
    Ok(RunResult {
        grid,
        terrain: statics.terrain.clone(),
        scenarios,
        baseline,
        totals,
        valid_times,
        centres,
        towns,
        track,
        layout,
        timings,
        shards: Vec::new(),
        warnings: Vec::new(),
    })
}

/// Warns about cells sampled beyond the grid edge, cells a method could not diagnose and steps
/// a timing offset left uncovered (scenarios with empty totals, outside a shard, are left out).
pub fn warn_about_totals(
    case: &Case,
    scenarios: &[Scenario],
    totals: &[Totals],
    steps: usize,
    n: usize,
    progress: &dyn Progress,
) {
    let run = totals.iter().filter(|t| !t.is_empty()).count();
    let cell_steps = (n * steps) as f64;
    let edge: Vec<(usize, f64)> = totals
        .iter()
        .enumerate()
        .filter(|(_, t)| t.outside > 0)
        .map(|(i, t)| (i, 100.0 * t.outside as f64 / cell_steps))
        .collect();
    if let Some(&(worst, share)) = edge.iter().max_by(|a, b| a.1.total_cmp(&b.1)) {
        progress.warn(&format!(
            "{} of {} scenarios took some values from beyond the grid edge (up to {share:.1} % of cell-steps, at {}); those cells are nodata in those scenarios and in the min/max/range layers",
            edge.len(),
            run,
            scenarios[worst].label()
        ));
    }
    let undefined: u64 = totals.iter().map(|t| t.undefined).sum();
    if undefined > 0 {
        progress.warn(&format!(
            "the {} method is undefined at {undefined} cell-steps over all scenarios ({:.2} %; e.g. ground above 850 hPa for partial thickness, where no 850–700 or 1000–500 hPa thickness exists); those cells are nodata in those scenarios",
            case.methods.ptype.name(),
            100.0 * undefined as f64 / (cell_steps * run as f64)
        ));
    }
    for h in distinct(scenarios.iter().map(|s| s.timing_h)) {
        if let Some(t) = scenarios
            .iter()
            .zip(totals)
            .find(|(s, t)| s.timing_h == h && !t.is_empty())
            .map(|(_, t)| t)
            .filter(|t| t.uncovered_steps > 0)
        {
            progress.warn(&format!(
                "timing {h:+} h: {} of {} steps sample a time {} the model's steps; nothing is counted for them, so those scenarios' totals cover a shorter window",
                t.uncovered_steps,
                steps,
                if h > 0.0 { "before" } else { "after" }
            ));
        }
    }
}

/// A warning when a step is longer than the one before it: a step file left out of the case
/// (or a glob that missed one) loses that file's precipitation from every total without any
/// other sign, so a forecaster should look. Models that change their output interval (hourly,
/// then three-hourly) also trigger it, once, which is worth a glance too.
pub fn step_gap_warning(times: &[DateTime<Utc>]) -> Option<String> {
    let gaps: Vec<String> = times
        .windows(3)
        .enumerate()
        .filter(|(_, w)| w[2] - w[1] > w[1] - w[0])
        .map(|(i, w)| {
            format!(
                "step {} ({}) comes {} h after the step before it, the steps before it {} h apart",
                i + 3,
                w[2].format("%Y-%m-%dT%H:%MZ"),
                (w[2] - w[1]).num_minutes() as f64 / 60.0,
                (w[1] - w[0]).num_minutes() as f64 / 60.0
            )
        })
        .collect();
    (!gaps.is_empty()).then(|| {
        format!(
            "{}; if a step file is missing, its precipitation is missing from every total",
            gaps.join("; ")
        )
    })
}

/// Bytes a run holds at its peak: the per-scenario totals (five f32 sums, the carried dry-air
/// water and the onset step per cell) plus one output band per scenario while the stack is
/// written. The held steps' fields and their sub-cloud memos (three f32 per level below
/// 500 hPa, step and warm bias) add a few bands' worth per level each, small beside the totals
/// once there are more than a handful of scenarios.
pub fn memory_estimate(cells: usize, scenarios: usize) -> u64 {
    (cells as u64) * (scenarios as u64) * (7 + 1) * 4
}

/// Whether the totals of `scenarios` scenarios on `cells` cells fit in nine tenths of the
/// memory available; otherwise the estimate and what is available, bytes. Fits where the
/// available memory is unknown.
pub fn fits_in_memory(cells: usize, scenarios: usize) -> Result<(), (u64, u64)> {
    let need = memory_estimate(cells, scenarios);
    match available_memory() {
        Some(avail) if need > avail / 10 * 9 => Err((need, avail)),
        _ => Ok(()),
    }
}

/// Memory available to new allocations, bytes (Linux `MemAvailable`); `None` where unknown.
fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// The case's track: read from its file, found in the model's sea-level pressure
/// (`track = "find"`), or none.
pub fn case_track(
    case: &Case,
    source: &dyn Source,
    progress: &dyn Progress,
) -> Result<Option<Track>, EngineError> {
    Ok(match &case.member.track {
        Some(p) => Some(read_track(p)?),
        None if case.member.find_track => {
            Some(found_track(source, &case.member.terrain, progress)?)
        }
        None => None,
    })
}

/// The track followed in the model's sea-level pressure (`track = "find"`).
fn found_track(
    source: &dyn Source,
    first_file: &std::path::Path,
    progress: &dyn Progress,
) -> Result<Track, EngineError> {
    let grid = &source.statics().grid;
    let mut steps = Vec::with_capacity(source.step_count());
    for k in 0..source.step_count() {
        let valid = match source.valid_time(k) {
            Some(v) => v,
            None => source.step(k)?.valid,
        };
        let p = source.mslp(k)?.ok_or_else(|| EngineError::Finder {
            path: first_file.to_path_buf(),
            source: FinderError::NoPressure {
                step: k + 1,
                valid: valid.to_rfc3339(),
            },
        })?;
        steps.push((valid, p));
    }
    let (found, lost) = find_track(grid, &steps, None).map_err(|source| EngineError::Finder {
        path: first_file.to_path_buf(),
        source,
    })?;
    if let Some(k) = lost {
        progress.warn(&format!(
            "the track finder lost the low after step {k} of {}",
            steps.len()
        ));
    }
    if found.len() < 2 {
        return Err(EngineError::Finder {
            path: first_file.to_path_buf(),
            source: FinderError::NoStart(
                "the low was found at one step only; a track needs two positions".into(),
            ),
        });
    }
    Ok(to_track(&found, first_file.to_path_buf()))
}

/// The displacement of scenario `s` when its fields are the model's at `at` (output step `k`,
/// 0-based, read from `file`).
pub fn scenario_shift(
    track: Option<&Track>,
    s: &Scenario,
    at: DateTime<Utc>,
    k: usize,
    file: &Path,
) -> Result<StepShift, EngineError> {
    if !s.is_displaced() {
        return Ok(StepShift::none());
    }
    let t = track.expect("case checks a track exists for offsets");
    let ((lon, lat), (e, nn)) = t
        .shifted_centre(at, s.cross_km, s.along_km)
        .ok_or_else(|| {
            let (a, b) = t.span();
            EngineError::TrackTooShort {
                path: t.source.clone(),
                what: format!(
                    "the track runs {}…{} but step {} ({}) needs it at {} (its valid time less any timing offset)",
                    a.to_rfc3339(),
                    b.to_rfc3339(),
                    k + 1,
                    file.display(),
                    at.to_rfc3339()
                ),
            }
        })?;
    Ok(StepShift {
        centre_lon: lon,
        centre_lat: lat,
        east_km: e,
        north_km: nn,
    })
}

/// A duration of `h` hours, to the millisecond.
pub fn hours(h: f64) -> Duration {
    Duration::milliseconds((h * 3_600_000.0).round() as i64)
}

/// The distinct values, in first-seen order.
fn distinct(values: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut out: Vec<f64> = Vec::new();
    for v in values {
        if !out.contains(&v) {
            out.push(v);
        }
    }
    out
}

/// One held step.
struct Held {
    index: usize,
    fields: StepFields,
    wet: WetRows,
    /// Sub-cloud moisture memos, one per warm bias asked for.
    moisture: Vec<LevelMoisture>,
}

/// The model steps currently held: read in order (each step once), checked for the same levels
/// and increasing valid times, and forgotten once no later output step can sample them.
pub struct StepWindow<'a> {
    source: &'a dyn Source,
    /// Valid time of every step read so far.
    pub times: Vec<DateTime<Utc>>,
    /// Held steps, with their indices and where they have precipitation.
    held: VecDeque<Held>,
    layout: Option<StepLayout>,
    /// Memos of forgotten steps, kept for reuse.
    spare: Vec<LevelMoisture>,
    /// Columns of a forgotten step, for the next step read to write into.
    spare_columns: Vec<f32>,
}

impl<'a> StepWindow<'a> {
    /// A window over the steps of `source`.
    pub fn new(source: &'a dyn Source) -> Self {
        Self {
            source,
            times: Vec::new(),
            held: VecDeque::new(),
            layout: None,
            spare: Vec::new(),
            spare_columns: Vec::new(),
        }
    }

    /// The step layout (levels) every step shares.
    pub fn layout(&self) -> &StepLayout {
        self.layout
            .as_ref()
            .expect("the layout is known once a step is read")
    }

    fn read_next(&mut self) -> Result<bool, EngineError> {
        let k = self.times.len();
        if k >= self.source.step_count() {
            return Ok(false);
        }
        let reuse = std::mem::take(&mut self.spare_columns);
        let read = fetch(self.source, k, reuse);
        self.push(k, read)?;
        Ok(true)
    }

    /// The next step to read and a buffer for its columns, when there is one: for a read run
    /// beside the engine ([`fetch`], then [`StepWindow::push`]).
    pub fn next_to_read(&mut self) -> Option<(usize, Vec<f32>)> {
        let k = self.times.len();
        (k < self.source.step_count()).then(|| (k, std::mem::take(&mut self.spare_columns)))
    }

    /// Takes step `k`, read by [`fetch`], as the next step: checked against the steps before
    /// it and held.
    pub fn push(
        &mut self,
        k: usize,
        read: Result<(StepFields, WetRows), EngineError>,
    ) -> Result<(), EngineError> {
        debug_assert_eq!(k, self.times.len(), "steps are taken in order");
        let (step, wet) = read?;
        check_step(&step.path, &step, self.layout.as_ref(), self.times.last())?;
        self.times.push(step.valid);
        self.layout.get_or_insert_with(|| step.layout.clone());
        self.held.push_back(Held {
            index: k,
            fields: step,
            wet,
            moisture: Vec::new(),
        });
        Ok(())
    }

    /// Reads up to and including step `k`.
    pub fn load_through(&mut self, k: usize) -> Result<(), EngineError> {
        while self.times.len() <= k {
            if !self.read_next()? {
                break;
            }
        }
        Ok(())
    }

    /// Where time `t` falls among the model's steps, reading ahead as far as needed; `None`
    /// when it lies outside them.
    pub fn sample(&mut self, t: DateTime<Utc>) -> Result<Option<TimeSample>, EngineError> {
        while self.times.last().is_none_or(|last| *last < t) {
            if !self.read_next()? {
                break;
            }
        }
        Ok(bracket(&self.times, t))
    }

    /// Steps held in memory now.
    pub fn held(&self) -> usize {
        self.held.len()
    }

    /// Drops every step before `k`.
    pub fn forget_before(&mut self, k: usize) {
        while self.held.front().is_some_and(|h| h.index < k) {
            if let Some(h) = self.held.pop_front() {
                self.spare.extend(h.moisture);
                self.spare_columns = h.fields.columns;
            }
        }
        // The next steps need at most as many memos as were just freed; a few spares cover that
        // for one or two warm biases, and more would only hold memory.
        self.spare.truncate(4);
    }

    /// The fields of held step `k`.
    pub fn fields(&self, k: usize) -> &StepFields {
        &self.held_step(k).fields
    }

    fn held_step(&self, k: usize) -> &Held {
        let first = self.held.front().expect("a held step").index;
        &self.held[k - first]
    }

    /// Makes sure held step `k` has a sub-cloud moisture memo for `warm_bias_k` (filled in
    /// parallel on the current rayon pool).
    pub fn prepare_moisture(&mut self, k: usize, warm_bias_k: f64) {
        let first = self.held.front().expect("a held step").index;
        let h = &mut self.held[k - first];
        if !h.moisture.iter().any(|m| m.warm_bias_k == warm_bias_k) {
            let (columns, layout, nx) = (&h.fields.columns, &h.fields.layout, h.wet.nx);
            let (nvar, ip) = (layout.nvar(), layout.precip());
            let wet = |i: usize, j: usize| columns[(j * nx + i) * nvar + ip] != 0.0;
            let cells = columns.len() / nvar;
            let memo = match self.spare.iter().position(|m| m.fits(cells, layout)) {
                Some(i) => {
                    let mut m = self.spare.swap_remove(i);
                    m.fill(columns, layout, nx, warm_bias_k, wet);
                    m
                }
                None => LevelMoisture::new(columns, layout, nx, warm_bias_k, wet),
            };
            h.moisture.push(memo);
        }
    }

    /// Length of step `k` (from the previous valid time; the first step is taken to be as long
    /// as the second).
    fn length(&self, k: usize) -> Option<Duration> {
        match k {
            0 => self.times.get(1).map(|t1| *t1 - self.times[0]),
            _ => Some(self.times[k] - self.times[k - 1]),
        }
    }

    /// What scenario `s` needs at output step `k` when its fields are sampled at `sample`.
    pub fn scenario_step(
        &self,
        k: usize,
        sample: TimeSample,
        shift: StepShift,
        s: &Scenario,
    ) -> ScenarioStep<'_> {
        // Precipitation is an amount per step: as a rate, times this step's length.
        let ratio = |j: usize| {
            if j == k {
                return 1.0;
            }
            match (self.length(k), self.length(j)) {
                (Some(a), Some(b)) => a.num_milliseconds() as f64 / b.num_milliseconds() as f64,
                _ => 1.0,
            }
        };
        let j = sample.index;
        let next = (sample.next > 0.0).then(|| {
            (
                self.fields(j + 1).columns.as_slice(),
                sample.next as f32,
                s.intensity * ratio(j + 1),
            )
        });
        let held = self.held_step(j);
        let bias = s.warm_bias_k;
        fn memo(h: &Held, bias: f64) -> Option<&LevelMoisture> {
            h.moisture.iter().find(|m| m.warm_bias_k == bias)
        }
        let later = (sample.next > 0.0).then(|| self.held_step(j + 1));
        ScenarioStep {
            shift,
            now: &held.fields.columns,
            now_scale: s.intensity * ratio(j),
            next,
            warm_bias_k: s.warm_bias_k,
            wet: [Some(&held.wet), later.map(|h| &h.wet)],
            moisture: [memo(held, bias), later.and_then(|h| memo(h, bias))],
        }
    }
}

/// Reads step `k` of `source` (its columns into `reuse`) and finds its wet cells: the part of
/// taking a step that can run beside the engine.
pub fn fetch(
    source: &dyn Source,
    k: usize,
    reuse: Vec<f32>,
) -> Result<(StepFields, WetRows), EngineError> {
    let step = source
        .step_reusing(k, reuse)
        .map_err(|e| EngineError::StepField {
            step: k + 1,
            source: Box::new(e),
        })?;
    let nx = source.statics().grid.nx;
    let wet = WetRows::of(&step.columns, step.layout.nvar(), step.layout.precip(), nx);
    Ok((step, wet))
}

fn check_step(
    path: &Path,
    step: &StepFields,
    layout: Option<&StepLayout>,
    previous: Option<&DateTime<Utc>>,
) -> Result<(), EngineError> {
    if let Some(l) = layout {
        if *l != step.layout {
            return Err(EngineError::Steps {
                path: path.to_path_buf(),
                what: format!(
                    "its isobaric levels ({}) differ from the first step's ({}); every step needs the same levels",
                    levels_text(&step.layout),
                    levels_text(l)
                ),
            });
        }
    }
    if let Some(prev) = previous {
        if step.valid <= *prev {
            return Err(EngineError::Steps {
                path: path.to_path_buf(),
                what: format!(
                    "valid_time {} does not come after the previous step's {}; list steps in time order, each once",
                    step.valid.to_rfc3339(),
                    prev.to_rfc3339()
                ),
            });
        }
    }
    Ok(())
}

/// One scenario's inputs at one output step.
#[derive(Clone, Copy, Debug)]
pub struct ScenarioStep<'a> {
    /// The displacement.
    pub shift: StepShift,
    /// Columns of the model step at or before the sampled time.
    pub now: &'a [f32],
    /// Factor on `now`'s precipitation: intensity × this step's length / that step's.
    pub now_scale: f64,
    /// When the sampled time lies between steps: the next step's columns, its weight (0–1) and
    /// the factor on its precipitation.
    pub next: Option<(&'a [f32], f32, f64)>,
    /// Warm-layer bias, K.
    pub warm_bias_k: f64,
    /// Where `now` (and `next`, when sampled) have precipitation.
    pub wet: [Option<&'a WetRows>; 2],
    /// Memos of the isobaric levels' sub-cloud moisture for `now` and `next` at this
    /// scenario's warm bias, when the window holds them ([`moisture`]).
    pub moisture: [Option<&'a LevelMoisture>; 2],
}

/// Where a step's precipitation is not zero (or is missing): the engine passes over a cell
/// without sampling it when no source point the shift can give it comes near any such cell,
/// which is exact (such a cell is dry in that scenario) and saves the sampling of the dry
/// majority of cell-steps.
#[derive(Clone, Debug)]
pub struct WetRows {
    /// First and last column with precipitation of each row; `(u32::MAX, 0)` when none.
    spans: Vec<(u32, u32)>,
    /// Summed-area table of the wet cells, (nx + 1) × (ny + 1): entry (r, c) counts the wet
    /// cells in rows above r and columns left of c, so any rectangle's count takes four reads.
    sat: Vec<u32>,
    /// Per cell (column i, row j): 1 when any of the bilinear neighbours (i, j), (i + 1, j),
    /// (i, j + 1), (i + 1, j + 1) is wet, so a source point whose top-left neighbour is a 0
    /// samples exactly zero precipitation.
    near: Vec<u8>,
    nx: usize,
}

impl WetRows {
    /// The wet cells of interleaved `columns` (`nvar` values per cell, precipitation at
    /// `precip`) on a grid `nx` cells wide.
    pub fn of(columns: &[f32], nvar: usize, precip: usize, nx: usize) -> Self {
        let ny = columns.len() / (nx * nvar);
        let w = nx + 1;
        let wet = |i: usize, j: usize| columns[(j * nx + i) * nvar + precip] != 0.0;
        // Rows in parallel: each row's running count (into the table's next row), its span and
        // its cells' neighbourhood flags; then the rows' counts are summed down the columns.
        let mut sat = vec![0u32; w * (ny + 1)];
        let mut near = vec![0u8; nx * ny];
        let spans: Vec<(u32, u32)> = sat[w..]
            .par_chunks_mut(w)
            .zip(near.par_chunks_mut(nx))
            .enumerate()
            .map(|(j, (counts, near))| {
                let mut run = 0u32;
                let (mut first, mut last) = (u32::MAX, 0u32);
                let j1 = (j + 1).min(ny - 1);
                for i in 0..nx {
                    if wet(i, j) {
                        run += 1;
                        first = first.min(i as u32);
                        last = i as u32;
                    }
                    counts[i + 1] = run;
                    let i1 = (i + 1).min(nx - 1);
                    near[i] = u8::from(wet(i, j) || wet(i1, j) || wet(i, j1) || wet(i1, j1));
                }
                (first, last)
            })
            .collect();
        for r in 1..=ny {
            let (above, here) = sat.split_at_mut(r * w);
            for (h, a) in here[..w].iter_mut().zip(&above[(r - 1) * w..]) {
                *h += *a;
            }
        }
        Self {
            spans,
            sat,
            near,
            nx,
        }
    }

    /// False when every bilinear neighbour of a source point with top-left neighbour (`i`, `j`)
    /// is dry.
    #[inline]
    fn near(&self, i: usize, j: usize) -> bool {
        self.near[j * self.nx + i] != 0
    }

    /// Wet cells in rows `r0..=r1` and columns `c0..=c1`.
    #[inline]
    fn count(&self, r0: usize, r1: usize, c0: usize, c1: usize) -> u32 {
        let w = self.nx + 1;
        let s = &self.sat;
        s[(r1 + 1) * w + c1 + 1]
            .wrapping_sub(s[r0 * w + c1 + 1])
            .wrapping_sub(s[(r1 + 1) * w + c0])
            .wrapping_add(s[r0 * w + c0])
    }

    /// The hull of the wet spans of rows `rows`, widened by `widen` columns; `None` when all
    /// those rows are dry.
    fn hull(&self, rows: std::ops::RangeInclusive<usize>, widen: usize) -> Option<(usize, usize)> {
        let (lo, hi) = self.spans[rows]
            .iter()
            .fold((u32::MAX, 0), |(lo, hi), &(a, b)| (lo.min(a), hi.max(b)));
        (lo <= hi).then(|| ((lo as usize).saturating_sub(widen), hi as usize + widen))
    }
}

/// How far, in columns and rows, a source point can lie from its cell under `shift`: the
/// displacement's components times the largest columns and rows per km anywhere on the grid
/// (the taper weight is at most 1), plus one for the bilinear neighbour and rounding.
fn reach(grid_reach: &GridReach, shift: &StepShift) -> (usize, usize) {
    let (e, n) = (shift.east_km.abs(), shift.north_km.abs());
    let cols = e * grid_reach.cols_per_km_east + n * grid_reach.cols_per_km_north;
    let rows = e * grid_reach.rows_per_km_east + n * grid_reach.rows_per_km_north;
    (cols.ceil() as usize + 1, rows.ceil() as usize + 1)
}

/// Where, relative to its cell, a source point can lie under `shift`: (columns to the left,
/// columns to the right, rows above, rows below) of the cell, the bilinear neighbour and a
/// margin for rounding included. The source lies at x − w·D with the taper weight w in 0–1, so
/// it stays on the side of the cell the displacement points away from: a box one-sided along
/// the shift, where [`reach`] is symmetric. The metric terms range over the grid's intervals.
fn reach_box(grid_reach: &GridReach, shift: &StepShift) -> (usize, usize, usize, usize) {
    let (e, n) = (shift.east_km, shift.north_km);
    // The interval of a·e + b·n over a ∈ [a0, a1], b ∈ [b0, b1], times w in 0–1 (so zero is
    // always in it).
    let span = |(a0, a1): (f64, f64), (b0, b1): (f64, f64)| {
        let (x0, x1) = if e >= 0.0 {
            (a0 * e, a1 * e)
        } else {
            (a1 * e, a0 * e)
        };
        let (y0, y1) = if n >= 0.0 {
            (b0 * n, b1 * n)
        } else {
            (b1 * n, b0 * n)
        };
        ((x0 + y0).min(0.0), (x1 + y1).max(0.0))
    };
    let (c_lo, c_hi) = span(grid_reach.col_east, grid_reach.col_north);
    let (r_lo, r_hi) = span(grid_reach.row_east, grid_reach.row_north);
    // The source column is c − d with d in [c_lo, c_hi]; it reads its column and the next.
    (
        c_hi.ceil() as usize + 1,
        (-c_lo).ceil() as usize + 2,
        r_hi.ceil() as usize + 1,
        (-r_lo).ceil() as usize + 2,
    )
}

/// A grid's metric terms, once per run: the largest magnitudes and the signed ranges.
#[derive(Clone, Copy, Debug)]
pub struct GridReach {
    cols_per_km_east: f64,
    cols_per_km_north: f64,
    rows_per_km_east: f64,
    rows_per_km_north: f64,
    col_east: (f64, f64),
    col_north: (f64, f64),
    row_east: (f64, f64),
    row_north: (f64, f64),
}

impl GridReach {
    /// Of `grid`.
    pub fn of(grid: &Grid) -> Self {
        let widen = |(lo, hi): (f64, f64), v: f32| (lo.min(f64::from(v)), hi.max(f64::from(v)));
        let empty = (f64::INFINITY, f64::NEG_INFINITY);
        grid.metric().iter().fold(
            GridReach {
                cols_per_km_east: 0.0,
                cols_per_km_north: 0.0,
                rows_per_km_east: 0.0,
                rows_per_km_north: 0.0,
                col_east: empty,
                col_north: empty,
                row_east: empty,
                row_north: empty,
            },
            |r, m| GridReach {
                cols_per_km_east: r.cols_per_km_east.max(f64::from(m.col_per_km_east.abs())),
                cols_per_km_north: r.cols_per_km_north.max(f64::from(m.col_per_km_north.abs())),
                rows_per_km_east: r.rows_per_km_east.max(f64::from(m.row_per_km_east.abs())),
                rows_per_km_north: r.rows_per_km_north.max(f64::from(m.row_per_km_north.abs())),
                col_east: widen(r.col_east, m.col_per_km_east),
                col_north: widen(r.col_north, m.col_per_km_north),
                row_east: widen(r.row_east, m.row_per_km_east),
                row_north: widen(r.row_north, m.row_per_km_north),
            },
        )
    }
}

/// For one scenario step: per row, the columns that must be sampled; any other cell is certainly
/// dry in this scenario step and its source point lies inside the grid.
struct DryScreen<'a> {
    wet: [Option<&'a WetRows>; 2],
    reach: (usize, usize),
    /// [`reach_box`] of the shift.
    boxed: (usize, usize, usize, usize),
    nx: usize,
    ny: usize,
    row: usize,
    /// For `row`: every column must be sampled (`None`), or those of the wet hull.
    hull: Option<Option<(usize, usize)>>,
}

impl<'a> DryScreen<'a> {
    fn new(grid: &Grid, grid_reach: &GridReach, input: &ScenarioStep<'a>) -> Self {
        Self {
            wet: input.wet,
            reach: reach(grid_reach, &input.shift),
            boxed: reach_box(grid_reach, &input.shift),
            nx: grid.nx,
            ny: grid.ny,
            row: usize::MAX,
            hull: None,
        }
    }

    /// True when cell (`col`, `row`) is certainly dry in this scenario step: every source
    /// point the shift can give it lies inside the grid and away from all precipitation.
    #[cfg(test)]
    fn is_dry(&mut self, col: usize, row: usize) -> bool {
        let (spans, n) = self.open_spans(row);
        !spans[..n].iter().any(|&(a, b)| (a..b).contains(&col)) || self.boxed_dry(col, row)
    }

    /// The columns of `row` that the first stage (the rows' wet hull widened by the reach)
    /// cannot pass over, as up to three sorted, disjoint ranges `[a, b)`: the west margin, the
    /// hull, the east margin. Every other cell of the row is certainly dry.
    #[inline]
    fn open_spans(&mut self, row: usize) -> ([(usize, usize); 3], usize) {
        let (rc, rr) = self.reach;
        let nx = self.nx;
        if row != self.row {
            self.row = row;
            self.hull = (row >= rr && row + rr < self.ny).then(|| {
                let rows = row - rr..=row + rr;
                self.wet
                    .iter()
                    .flatten()
                    .filter_map(|w| w.hull(rows.clone(), rc))
                    .reduce(|(a, b), (c, d)| (a.min(c), b.max(d)))
            });
        }
        let mut parts = match self.hull {
            // Rows within reach of the north or south edge: always sampled.
            None => [(0, nx), (nx, nx), (nx, nx)],
            Some(hull) => [
                (0, rc.min(nx)),
                hull.map_or((nx, nx), |(lo, hi)| (lo.min(nx), (hi + 1).min(nx))),
                (nx.saturating_sub(rc), nx),
            ],
        };
        parts.sort_unstable();
        let mut out = [(0, 0); 3];
        let mut n = 0;
        for (a, b) in parts {
            if a >= b {
                continue;
            }
            if n > 0 && a <= out[n - 1].1 {
                out[n - 1].1 = out[n - 1].1.max(b);
            } else {
                out[n] = (a, b);
                n += 1;
            }
        }
        (out, n)
    }

    /// The second stage, for a cell the first could not pass over: true when no wet cell lies
    /// in the box its source point can reach, and that box lies inside the grid.
    #[inline]
    fn boxed_dry(&self, col: usize, row: usize) -> bool {
        let (left, right, up, down) = self.boxed;
        col >= left
            && col + right < self.nx
            && row >= up
            && row + down < self.ny
            && self
                .wet
                .iter()
                .flatten()
                .all(|w| w.count(row - up, row + down, col - left, col + right) == 0)
    }
}

fn levels_text(l: &StepLayout) -> String {
    l.levels_pa
        .iter()
        .map(|p| format!("{}", p / 100.0))
        .collect::<Vec<_>>()
        .join("/")
        + " hPa"
}

/// One step for every scenario: the parallel seam. `inputs[s]` is `None` for a scenario that
/// skips this step. A cell whose `terrain` is missing must already be missing in `totals`
/// ([`run`] marks them): a cell the dry screen passes over is not looked at. `step` is the 1-based output step, recorded as the onset of snow. Returns,
/// per scenario, how many cells took their values from outside the grid and how many the
/// methods could not diagnose.
#[allow(clippy::too_many_arguments)]
pub fn step_all_scenarios(
    grid: &Grid,
    reach: &GridReach,
    terrain: &[f32],
    layout: &StepLayout,
    inputs: &[Option<ScenarioStep<'_>>],
    taper: &Taper,
    methods: &Methods,
    step: u32,
    totals: &mut [Totals],
) -> Vec<BlockCounts> {
    let mut tasks: Vec<(usize, usize, crate::accumulate::TotalsRows<'_>)> = totals
        .iter_mut()
        .enumerate()
        .filter(|(s, _)| inputs[*s].is_some())
        .flat_map(|(s, t)| {
            t.blocks_mut(CELLS_PER_TASK)
                .into_iter()
                .map(move |(start, rows)| (s, start, rows))
        })
        .collect();
    // Block by block, every scenario of a block together: the step's columns and sub-cloud memo
    // around a block stay in cache while all the scenarios read them.
    tasks.sort_by_key(|&(s, start, _)| (start, s));
    let counts: Vec<(usize, BlockCounts)> = tasks
        .into_par_iter()
        .map(|(s, start, mut rows)| {
            let input = inputs[s].as_ref().expect("tasks exist only for inputs");
            let o = step_block(
                grid, reach, terrain, layout, input, taper, methods, step, start, &mut rows,
            );
            (s, o)
        })
        .collect();
    let mut out = vec![BlockCounts::default(); inputs.len()];
    for (s, o) in counts {
        out[s].outside += o.outside;
        out[s].undefined += o.undefined;
    }
    out
}

/// Cells of one block (or scenario) that could not be computed, by cause.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct BlockCounts {
    /// The source point lay outside the grid.
    pub outside: u64,
    /// A method's input was out of its domain (the method is undefined there).
    pub undefined: u64,
}

/// Where a cell's source point lies, as bilinear weights (exactly on the cell when unshifted).
#[inline]
fn source_weights(grid: &Grid, c: usize, shift: &StepShift, taper: &Taper) -> Option<Weights> {
    if shift.is_none() {
        return Some((c % grid.nx, c / grid.nx, 0.0, 0.0));
    }
    let (lon, lat, metric) = (grid.lon(), grid.lat(), grid.metric());
    let (sc, sr) = source_index(
        c % grid.nx,
        c / grid.nx,
        lon[c],
        lat[c],
        &metric[c],
        shift,
        taper,
    );
    bilinear_weights(grid, sc, sr)
}

/// What sampling one cell gave.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Sampled {
    /// The source point lies outside the grid.
    Outside,
    /// Nothing leaves the cloud this step (the column was not sampled: a dry step changes
    /// nothing, not even the dry-air state).
    Dry,
    /// The column was sampled at these weights; this much precipitation leaves the cloud,
    /// kg m⁻².
    Falling(f64, Weights),
}

/// Cell `c`'s column for one scenario step, sampled into `col` (and `later` as scratch for the
/// next step when the scenario's time lies between two), and the precipitation leaving the
/// cloud. The precipitation is looked at first: most cells are dry at most steps.
#[inline]
#[allow(clippy::too_many_arguments)]
pub fn cell_column(
    grid: &Grid,
    input: &ScenarioStep<'_>,
    nvar: usize,
    precip: usize,
    c: usize,
    taper: &Taper,
    col: &mut [f32],
    later: &mut [f32],
) -> Sampled {
    let Some(w) = source_weights(grid, c, &input.shift, taper) else {
        return Sampled::Outside;
    };
    let nx = grid.nx;
    // Where the step's wet cells are known: all four neighbours dry samples exactly zero.
    if input.wet[0].is_some() && !input.wet.iter().flatten().any(|r| r.near(w.0, w.1)) {
        return Sampled::Dry;
    }
    let falling = match input.next {
        None => {
            // The column's precipitation is the one sample_one takes, bit for bit.
            sample_at(input.now, nvar, nx, w, col);
            col[precip] as f64 * input.now_scale
        }
        Some((next, wt, scale)) => {
            let p_now = sample_one(input.now, nvar, nx, w, precip) as f64 * input.now_scale;
            let p_next = sample_one(next, nvar, nx, w, precip) as f64 * scale;
            let falling = (1.0 - wt as f64) * p_now + wt as f64 * p_next;
            if falling != 0.0 {
                blend_at(input, nvar, nx, w, col, later);
            }
            falling
        }
    };
    if falling == 0.0 {
        return Sampled::Dry;
    }
    Sampled::Falling(falling, w)
}

/// Samples the whole column at weights `w`, between two steps when the scenario's time lies
/// between them.
#[inline]
fn blend_at(
    input: &ScenarioStep<'_>,
    nvar: usize,
    nx: usize,
    w: Weights,
    col: &mut [f32],
    later: &mut [f32],
) {
    sample_at(input.now, nvar, nx, w, col);
    if let Some((next, wt, _)) = input.next {
        sample_at(next, nvar, nx, w, later);
        for (a, b) in col.iter_mut().zip(later.iter()) {
            *a += wt * (*b - *a);
        }
    }
}

/// Cell `c`'s whole column for one scenario step, dry or not (for the sounding view); false
/// when the source point lies outside the grid.
pub fn sample_column(
    grid: &Grid,
    input: &ScenarioStep<'_>,
    nvar: usize,
    c: usize,
    taper: &Taper,
    col: &mut [f32],
    later: &mut [f32],
) -> bool {
    match source_weights(grid, c, &input.shift, taper) {
        Some(w) => {
            blend_at(input, nvar, grid.nx, w, col, later);
            true
        }
        None => false,
    }
}

/// The per-block kernel: for each cell, sample the displaced column (between two steps when the
/// scenario's time falls between them), diagnose it with dry air below the cloud
/// ([`step_column`]), and add what reaches the ground to the totals. Returns the cells sampled
/// outside the grid and those the methods could not diagnose.
#[allow(clippy::too_many_arguments)]
fn step_block(
    grid: &Grid,
    reach: &GridReach,
    terrain: &[f32],
    layout: &StepLayout,
    input: &ScenarioStep<'_>,
    taper: &Taper,
    methods: &Methods,
    step: u32,
    start: usize,
    rows: &mut crate::accumulate::TotalsRows<'_>,
) -> BlockCounts {
    let nvar = layout.nvar();
    let mut buf = [0.0f32; 3 * crate::diagnose::ptype::MAX_LEVELS + 4];
    let mut later = [0.0f32; 3 * crate::diagnose::ptype::MAX_LEVELS + 4];
    let mut profile = Profile::empty();
    let mut sub = SubCloud::empty();
    let ip = layout.precip();
    let mut counts = BlockCounts::default();
    let mut screen = DryScreen::new(grid, reach, input);
    let nx = grid.nx;
    let end = start + rows.liquid.len();
    // Row by row, only the columns the screen's first stage cannot pass over: a dry cell-step
    // costs nothing, and reads nothing of the scenario's totals.
    let mut row_start = start;
    while row_start < end {
        let row = row_start / nx;
        let row_end = ((row + 1) * nx).min(end);
        let (spans, n) = screen.open_spans(row);
        for &(a, b) in &spans[..n] {
            let (from, to) = ((row * nx + a).max(row_start), (row * nx + b).min(row_end));
            for (c, &ground_m) in terrain.iter().enumerate().take(to).skip(from) {
                let i = c - start;
                if rows.liquid[i].is_nan() || screen.boxed_dry(c - row * nx, row) {
                    continue;
                }
                if ground_m.is_nan() {
                    rows.set_missing(i);
                    continue;
                }
                let col = &mut buf[..nvar];
                let (falling, at) =
                    match cell_column(grid, input, nvar, ip, c, taper, col, &mut later[..nvar]) {
                        Sampled::Outside => {
                            counts.outside += 1;
                            rows.set_missing(i);
                            continue;
                        }
                        Sampled::Dry => continue,
                        Sampled::Falling(f, w) => (f, w),
                    };
                let cell = CellStep {
                    col,
                    falling,
                    ground_m,
                    warm_bias_k: input.warm_bias_k,
                    step,
                    source: Some(SourceAt {
                        input,
                        w: at,
                        nx: grid.nx,
                    }),
                };
                if accumulate_cell(&cell, layout, methods, rows, i, &mut profile, &mut sub)
                    == Err(ColumnMissing::Method)
                {
                    counts.undefined += 1;
                }
            }
        }
        row_start = row_end;
    }
    counts
}

/// One cell's sampled column at one step.
pub struct CellStep<'a> {
    /// The sampled column, in layout order.
    pub col: &'a [f32],
    /// Precipitation leaving the cloud, kg m⁻².
    pub falling: f64,
    /// Terrain height of the cell, m.
    pub ground_m: f32,
    /// Warm-layer bias, K.
    pub warm_bias_k: f64,
    /// 1-based output step.
    pub step: u32,
    /// Where the column was sampled, for the isobaric levels' sub-cloud moisture
    /// ([`moisture`]); `None` works it out from the column itself.
    pub source: Option<SourceAt<'a>>,
}

/// A column's source point in one scenario step.
#[derive(Clone, Copy)]
pub struct SourceAt<'a> {
    /// The scenario step.
    pub input: &'a ScenarioStep<'a>,
    /// Bilinear weights of the source point.
    pub w: Weights,
    /// Grid width.
    pub nx: usize,
}

/// Adds one cell's step to row `i` of `rows`: dry air below the cloud, type, ratio, onset.
/// Missing input marks the cell missing (and is the error). Returns the column step when the
/// column was diagnosed (`None` when nothing fell), with `profile` holding the profile used.
#[inline]
pub fn accumulate_cell(
    cell: &CellStep<'_>,
    layout: &StepLayout,
    methods: &Methods,
    rows: &mut crate::accumulate::TotalsRows<'_>,
    i: usize,
    profile: &mut Profile,
    sub: &mut SubCloud,
) -> Result<Option<ColumnStep>, ColumnMissing> {
    if cell.col.iter().any(|v| v.is_nan()) || cell.falling.is_nan() {
        rows.set_missing(i);
        return Err(ColumnMissing::Profile);
    }
    // Nothing falling changes nothing, the carried dry-air water included.
    if cell.falling <= 0.0 {
        return Ok(None);
    }
    let carried = rows.carried[i] as f64;
    let mut source = cell
        .source
        .map(|a| moisture::AtSource::new(a.input, layout, a.nx, a.w));
    match step_column(
        cell.col,
        layout,
        cell.ground_m,
        methods,
        cell.warm_bias_k,
        cell.falling,
        carried,
        profile,
        sub,
        |k| source.as_mut().and_then(|a| a.level(k)),
    ) {
        Ok(s) => {
            rows.carried[i] = s.carried as f32;
            if let Some(r) = s.result {
                rows.add(
                    i,
                    s.reaching_ground as f32,
                    &r.fractions,
                    r.snow_ratio,
                    cell.step,
                );
            }
            Ok(Some(s))
        }
        Err(e) => {
            rows.set_missing(i);
            Err(e)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Georef};

    #[test]
    fn a_longer_step_is_reported() {
        let t = |h: i64| DateTime::<Utc>::from_timestamp(h * 3600, 0).unwrap();
        assert_eq!(step_gap_warning(&[t(0), t(2), t(4), t(6)]), None);
        // Steps that get shorter are fine; a longer one is named with its lengths.
        assert_eq!(step_gap_warning(&[t(0), t(3), t(4), t(5)]), None);
        let w = step_gap_warning(&[t(0), t(2), t(4), t(8), t(10)]).unwrap();
        assert!(
            w.starts_with("step 4 (1970-01-01T08:00Z) comes 4 h after the step before it, the steps before it 2 h apart"),
            "{w}"
        );
    }

    /// The dry screen is exact: wherever it passes a cell over, sampling the cell would have
    /// found it dry and inside the grid, for shifts in every direction and a step with
    /// precipitation in a blob, a missing cell and nothing elsewhere, alone and between two
    /// steps. And sampling itself, which skips the neighbours of a point whose four grid
    /// points are all dry, finds what a plain bilinear sample of the precipitation finds.
    #[test]
    fn the_dry_screen_only_skips_cells_sampling_finds_dry() {
        let (nx, ny) = (60, 40);
        let grid = Grid::new(
            nx,
            ny,
            Georef {
                crs: Crs::Wgs84Geographic,
                geotransform: [-90.0, 0.1, 0.0, 45.0, 0.0, -0.1],
            },
        )
        .unwrap();
        let layout = StepLayout::new(vec![100_000.0, 85_000.0, 70_000.0, 50_000.0]);
        let nvar = layout.nvar();
        let mut columns = vec![1.0f32; nx * ny * nvar];
        for c in 0..nx * ny {
            let (col, row) = ((c % nx) as f64, (c / nx) as f64);
            let r2 = (col - 35.0).powi(2) + (row - 22.0).powi(2);
            columns[c * nvar + layout.precip()] = if r2 < 30.0 { 1.5 } else { 0.0 };
        }
        columns[(5 * nx + 8) * nvar + layout.precip()] = f32::NAN;
        let wet = WetRows::of(&columns, nvar, layout.precip(), nx);
        // The next step: the blob moved 6 columns west, a single wet cell far from it.
        let mut later_columns = vec![1.0f32; nx * ny * nvar];
        for c in 0..nx * ny {
            let (col, row) = ((c % nx) as f64, (c / nx) as f64);
            let r2 = (col - 29.0).powi(2) + (row - 22.0).powi(2);
            later_columns[c * nvar + layout.precip()] = if r2 < 30.0 { 0.8 } else { 0.0 };
        }
        later_columns[(30 * nx + 10) * nvar + layout.precip()] = 0.2;
        let later_wet = WetRows::of(&later_columns, nvar, layout.precip(), nx);
        let reach_of = GridReach::of(&grid);
        let taper = Taper {
            core_radius_km: 150.0,
            outer_radius_km: 400.0,
        };
        let (mut col, mut later) = (vec![0f32; nvar], vec![0f32; nvar]);
        let (mut skipped, mut checked, mut wet_cells) = (0, 0, 0);
        let shifts = [(0.0, 0.0), (60.0, 0.0), (-45.0, 30.0), (20.0, -90.0)];
        for ((east_km, north_km), between) in
            shifts.into_iter().flat_map(|s| [(s, false), (s, true)])
        {
            let input = ScenarioStep {
                shift: StepShift {
                    centre_lon: -86.5,
                    centre_lat: 42.8,
                    east_km,
                    north_km,
                },
                now: &columns,
                now_scale: 1.0,
                next: between.then_some((later_columns.as_slice(), 0.25, 2.0)),
                warm_bias_k: 0.0,
                wet: [Some(&wet), between.then_some(&later_wet)],
                moisture: [None, None],
            };
            let mut screen = DryScreen::new(&grid, &reach_of, &input);
            for c in 0..grid.len() {
                checked += 1;
                // A plain sample of the precipitation at the source point.
                let plain = source_weights(&grid, c, &input.shift, &taper).map(|w| {
                    let p = sample_one(&columns, nvar, nx, w, layout.precip()) as f64;
                    match input.next {
                        Some((next, wt, scale)) => {
                            let q = sample_one(next, nvar, nx, w, layout.precip()) as f64 * scale;
                            (1.0 - wt as f64) * p + wt as f64 * q
                        }
                        None => p,
                    }
                });
                let sampled = cell_column(
                    &grid,
                    &input,
                    nvar,
                    layout.precip(),
                    c,
                    &taper,
                    &mut col,
                    &mut later,
                );
                match (plain, sampled) {
                    (None, Sampled::Outside) => {}
                    (Some(p), Sampled::Dry) => assert_eq!(p, 0.0, "cell {c}"),
                    (Some(p), Sampled::Falling(f, _)) => {
                        wet_cells += 1;
                        assert!(p.to_bits() == f.to_bits() || p.is_nan() && f.is_nan());
                    }
                    (p, s) => panic!("cell {c}: plain sample {p:?}, kernel {s:?}"),
                }
                if screen.is_dry(c % nx, c / nx) {
                    skipped += 1;
                    assert_eq!(
                        sampled,
                        Sampled::Dry,
                        "cell {c}, shift {east_km},{north_km}"
                    );
                }
            }
        }
        // The screen must also do its job: the blobs cover 4 % of the grid, and with the reach
        // of the shifts and the edge margins some 50 % is passed over.
        assert!(skipped * 5 > checked * 2, "{skipped} of {checked}");
        assert!(wet_cells * 100 > checked * 3, "{wet_cells} of {checked}");
    }
}
