//! The engine: streams the time steps through shift → diagnose → accumulate for every scenario.
//!
//! Time is the outer loop: each step's fields are read once and every scenario is computed on
//! them. Only a window of steps is held ([`window`]) — the steps the current output step's
//! scenarios sample (one step without timing offsets; with them, for every timing offset the
//! step at or before its sampled time and the next) — and the per-scenario totals, so memory
//! does not grow with the number of steps. The physics runs in parallel in one place,
//! [`kernel`]: its tasks are (scenario, block of cells) pairs, each writing only its own cells of
//! its own scenario's totals, so the result is identical, bit for bit, whatever the number of
//! threads. (Reading, hashing and writing run in parallel too, each in its own module, on data
//! that no other task writes.)
//!
//! The rooms: this file orchestrates (prepare, run, the run's result and warnings); [`window`]
//! the held steps and the read-ahead; [`wet`] the wet-cell index and the dry screen; [`kernel`]
//! the per-cell physics; [`moisture`] the dry air below the cloud; [`track`] the storm's track
//! and each scenario's displacement; [`budget`] whether a run fits in memory and in reasonable time.
//!
//! A scenario's step k has the model's step k's length and valid time t_k; its fields are the
//! model's at t_k − timing_h, linear in time between the two steps that bracket it (the
//! precipitation as a rate, so steps of different lengths mix correctly). A step whose sampled
//! time lies before the model's first step or after its last is skipped for that scenario and
//! counted ([`Totals::uncovered_steps`]): the model says nothing about those hours.

use crate::accumulate::Totals;
use crate::case::Case;
use crate::grid::Grid;
use crate::progress::Progress;
use crate::read::source::{open as open_source, Source};
use crate::read::track_finder::FinderError;
use crate::read::{
    read_towns, FieldError, SourceError, StepLayout, Town, TownsError, Track, TrackError,
};
use crate::scenario::{scenario_product, Scenario, TimeSample};
use chrono::{DateTime, Duration, Utc};
use std::path::PathBuf;

pub mod budget;
pub mod kernel;
pub mod moisture;
pub mod track;
pub mod wet;
pub mod window;
pub use budget::{fits_in_memory, memory_estimate, scenario_budget, Budget};
pub use kernel::{
    accumulate_cell, cell_column, sample_column, step_all_scenarios, BlockCounts, CellStep,
    Sampled, ScenarioStep, SourceAt,
};
pub use track::{case_track, scenario_shift};
pub use wet::{GridReach, WetRows};
pub use window::{fetch, StepWindow};

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
    /// More scenarios than a run takes without `--force`.
    #[error("{count} scenarios requested, more than the {limit} a run takes without --force: {cost}; {advice}; give --force to run them all anyway")]
    TooManyScenarios {
        /// Scenarios requested.
        count: usize,
        /// The limit.
        limit: usize,
        /// The estimated time and memory, in words.
        cost: String,
        /// What would make it smaller, in words.
        advice: String,
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
    /// The window of the model grid the run read, when the case gives a region.
    pub window: Option<crate::read::region::Window>,
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

/// Where a point must lie to have a value: the hull of the cell centres ([`Grid::index_of`]),
/// the same test the message describes, so a point it refuses never lies inside what it says.
pub fn extent(g: &Grid) -> String {
    let (w, n) = g.lonlat_of(0.0, 0.0);
    let (e, s) = g.lonlat_of(g.nx as f64 - 1.0, g.ny as f64 - 1.0);
    if g.wraps() {
        format!(
            "cell centres at every longitude (the grid wraps around the globe), lat {s:.3}…{n:.3}"
        )
    } else if g.is_projected() {
        format!("cell centres from {w:.3}°E {n:.3}°N at the top-left corner to {e:.3}°E {s:.3}°N at the bottom-right, on {}", g.describe())
    } else {
        format!("cell centres lon {w:.3}…{e:.3}, lat {s:.3}…{n:.3}")
    }
}

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
    if let Some(w) = crate::case::skipped_summary(&case.member.skipped) {
        progress.warn(&w);
    }
    let source = open_source(&case.member, case.region.as_ref(), &|m: &str| {
        progress.warn(m)
    })?;
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
            let (inside, outside): (Vec<Town>, Vec<Town>) = read_towns(p)?
                .into_iter()
                .partition(|t| grid.index_of(t.lon, t.lat).is_some());
            // One town off the grid (a list shared between cases, a typo) should not cost the
            // forecaster every other town: it is left out and named.
            for t in &outside {
                progress.warn(&format!(
                    "{}: town '{}' at {},{} lies outside the grid ({}); it is left out of the towns table and maps",
                    p.display(),
                    t.name,
                    t.lat,
                    t.lon,
                    extent(&grid)
                ));
            }
            inside
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
    let budget = scenario_budget(&case.axes(), n, source.step_count(), threads);
    if budget.scenarios > budget::SCENARIOS_REFUSE && !case.force {
        return Err(EngineError::TooManyScenarios {
            count: budget.scenarios,
            limit: budget::SCENARIOS_REFUSE,
            cost: budget.cost_words(),
            advice: budget.advice(),
        });
    }
    if budget.scenarios > budget::SCENARIOS_WARN {
        progress.warn(&format!(
            "{} scenarios requested (more than {}): {} for this run; {}",
            budget.scenarios,
            budget::SCENARIOS_WARN,
            budget.cost_words(),
            budget.advice()
        ));
    }
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
        window: source.window().cloned(),
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
    // In shares of the map's cells the scenario's band lacks (not of cell-steps): what a user
    // opening the band sees. The summaries' share is the prior-coverage warning's.
    let edge: Vec<(usize, usize)> = totals
        .iter()
        .enumerate()
        .filter(|(_, t)| t.outside > 0)
        .map(|(i, t)| (i, t.snowfall.iter().filter(|v| v.is_nan()).count()))
        .collect();
    if let Some(&(worst, cells)) = edge.iter().max_by_key(|e| e.1) {
        progress.warn(&format!(
            "{} of {} scenarios took some values from beyond the grid edge (up to {:.1} % of the map's cells, at {}); those cells are nodata in those scenarios' bands",
            edge.len(),
            run,
            100.0 * cells as f64 / n.max(1) as f64,
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

#[cfg(test)]
mod tests {
    use super::*;

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
}
