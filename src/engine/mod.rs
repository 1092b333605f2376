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
//! The rooms: this file orchestrates (prepare, run); [`result`] what a run computed; [`error`]
//! why one failed; [`warnings`] what it warns about once the totals are in; [`window`]
//! the held steps and the read-ahead; [`wet`] the wet-cell index and the dry screen; [`kernel`]
//! the per-cell physics; [`moisture`] the dry air below the cloud; [`track`] the storm's track
//! and each scenario's displacement (or the case's explicit displacement per step, when
//! [`crate::case::Physics::explicit_shifts`] is set); [`align`] the members' weighted mean track
//! and each member's run aligned on it; [`budget`] whether a run fits in memory and in
//! reasonable time.
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
use crate::read::open_member as open_source;
use crate::read::source::Source;
use crate::read::{read_towns, Town, Track};
use crate::scenario::{scenario_product, Scenario, TimeSample};
use crate::shard::select::Shard;
use chrono::Duration;

pub mod align;
pub mod budget;
pub mod error;
pub mod groups;
pub mod kernel;
pub mod moisture;
pub mod regrid;
pub mod result;
pub mod track;
pub mod warnings;
pub mod wet;
pub mod window;
pub use budget::{fits_in_memory, memory_estimate, scenario_budget, Budget};
pub use error::EngineError;
pub use groups::{ensemble_of, run_groups, Ensemble, GroupRun};
pub use kernel::{
    accumulate_cell, cell_column, sample_column, step_all_scenarios, BlockCounts, CellStep,
    Sampled, ScenarioStep, SourceAt,
};
pub use result::{Computed, RunResult, ShardUsed, Timings};
pub use track::{case_track, scenario_shift};
pub use warnings::{step_gap_warning, warn_about_totals};
pub use wet::{GridReach, WetRows};
pub use window::{fetch, StepWindow};

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
    if let Some(w) = crate::case::skipped_summary(&case.member().skipped) {
        progress.warn(&w);
    }
    let source = open_source(case.member(), case.inputs.region.as_ref(), &|m: &str| {
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
    let towns = match &case.inputs.towns {
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
    let scenarios = scenario_product(&case.axes);
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
    let budget = scenario_budget(&case.axes, n, source.step_count(), threads);
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
            if case.physics.methods.dry_air {
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
                let shift = match &case.physics.explicit_shifts {
                    Some(x) => x.at(at),
                    None => scenario_shift(track.as_ref(), s, at, k, &path)?,
                };
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
                    &case.physics.taper,
                    &case.physics.methods,
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
    let prepared = Prepared {
        source,
        track,
        towns,
        scenarios,
        baseline,
    };
    let computed = Computed {
        totals,
        valid_times,
        centres,
        layout,
        timings,
        shards: Vec::new(),
    };
    Ok(RunResult::assemble(case, prepared, computed, progress))
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
