//! The engine: streams the time steps through shift → diagnose → accumulate for every scenario.
//!
//! Time is the outer loop: each step's fields are read once and every scenario is computed on
//! them; only one step's fields and the per-scenario totals are held, so memory does not grow
//! with the number of steps. This is the one place where work runs in parallel: the tasks are
//! (scenario, block of cells) pairs, each writing only its own cells of its own scenario's totals,
//! so the result is identical, bit for bit, whatever the number of threads.

use crate::accumulate::Totals;
use crate::case::Case;
use crate::diagnose::{diagnose_column, Methods};
use crate::grid::Grid;
use crate::progress::Progress;
use crate::read::source::{open as open_source, Source};
use crate::read::track_finder::{find_track, to_track, FinderError};
use crate::read::{
    read_towns, read_track, FieldError, SourceError, StepLayout, Town, TownsError, Track,
    TrackError,
};
use crate::scenario::{scenario_set, Scenario};
use crate::shift::{bilinear_weights, sample_at, sample_one, source_index, StepShift, Taper};
use chrono::{DateTime, Utc};
use rayon::prelude::*;
use std::path::PathBuf;

/// Why a run failed. Nothing is written when a run fails.
#[derive(Debug, thiserror::Error)]
pub enum EngineError {
    /// Model fields.
    #[error(transparent)]
    Field(#[from] FieldError),
    /// Model fields from any source.
    #[error(transparent)]
    Source(#[from] SourceError),
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
    #[error("the run needs about {need_mib} MiB ({scenarios} scenarios × {cells} cells) but only {avail_mib} MiB of memory is available; run fewer offsets, a coarser range, or split the offsets into shards (runs of part of the offsets each, whose layers merge scenario by scenario)")]
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
}

/// Wall time of the engine's stages, seconds.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Timings {
    /// Reading and checking the inputs.
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

/// Runs a case on `threads` worker threads.
pub fn run(case: &Case, threads: usize, progress: &dyn Progress) -> Result<RunResult, EngineError> {
    let source = open_source(&case.member, &|m: &str| progress.warn(m))?;
    let statics = source.statics();
    let grid = statics.grid.clone();
    let track = match &case.member.track {
        Some(p) => Some(read_track(p)?),
        None if case.member.find_track => Some(found_track(
            source.as_ref(),
            &case.member.terrain,
            progress,
        )?),
        None => None,
    };
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
    let scenarios = scenario_set(&case.cross_km, &case.along_km);
    let baseline = scenarios
        .iter()
        .position(Scenario::is_baseline)
        .expect("scenario_set always includes the baseline");
    let n = grid.len();
    if let Some(avail) = available_memory() {
        let need = memory_estimate(n, scenarios.len());
        if need > avail / 10 * 9 {
            return Err(EngineError::TooBig {
                need_mib: need >> 20,
                avail_mib: avail >> 20,
                scenarios: scenarios.len(),
                cells: n,
            });
        }
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|_| EngineError::Threads(threads))?;

    let mut totals: Vec<Totals> = scenarios.iter().map(|_| Totals::new(n)).collect();
    let mut valid_times = Vec::new();
    let mut centres = Vec::new();
    let mut layout: Option<StepLayout> = None;
    let mut timings = Timings::default();
    progress.start("time steps", source.step_count() as u64);
    for k in 0..source.step_count() {
        let clock = std::time::Instant::now();
        let step = source.step(k)?;
        let path = step.path.clone();
        timings.read_s += clock.elapsed().as_secs_f64();
        let clock = std::time::Instant::now();
        if let Some(l) = &layout {
            if *l != step.layout {
                return Err(EngineError::Steps {
                    path: path.clone(),
                    what: format!(
                        "its isobaric levels ({}) differ from the first step's ({}); every step needs the same levels",
                        levels_text(&step.layout),
                        levels_text(l)
                    ),
                });
            }
        }
        if let Some(prev) = valid_times.last() {
            if step.valid <= *prev {
                return Err(EngineError::Steps {
                    path: path.clone(),
                    what: format!(
                        "valid_time {} does not come after the previous step's {}; list steps in time order, each once",
                        step.valid.to_rfc3339(),
                        prev.to_rfc3339()
                    ),
                });
            }
        }
        let shifts: Vec<StepShift> = scenarios
            .iter()
            .map(|s| {
                if s.is_baseline() {
                    return Ok(StepShift::none());
                }
                let t = track
                    .as_ref()
                    .expect("case checks a track exists for offsets");
                let ((lon, lat), (e, nn)) = t
                    .shifted_centre(step.valid, s.cross_km, s.along_km)
                    .ok_or_else(|| {
                        let (a, b) = t.span();
                        EngineError::TrackTooShort {
                            path: t.source.clone(),
                            what: format!(
                                "the track runs {}…{} but step {} ({}) is valid at {}",
                                a.to_rfc3339(),
                                b.to_rfc3339(),
                                k + 1,
                                path.display(),
                                step.valid.to_rfc3339()
                            ),
                        }
                    })?;
                Ok(StepShift {
                    centre_lon: lon,
                    centre_lat: lat,
                    east_km: e,
                    north_km: nn,
                })
            })
            .collect::<Result<_, EngineError>>()?;
        centres.push(track.as_ref().and_then(|t| t.position_at(step.valid)));
        let outside = pool.install(|| {
            step_all_scenarios(
                &grid,
                &statics.terrain,
                &step.layout,
                &step.columns,
                &shifts,
                &case.taper,
                &case.methods,
                &mut totals,
            )
        });
        for (t, o) in totals.iter_mut().zip(outside) {
            t.outside += o;
        }
        timings.compute_s += clock.elapsed().as_secs_f64();
        valid_times.push(step.valid);
        layout = Some(step.layout);
        progress.advance(1);
    }
    progress.finish();
    let cell_steps = (n * valid_times.len()) as f64;
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
            scenarios.len(),
            scenarios[worst].label()
        ));
    }
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
        layout: layout.expect("a case has at least one step"),
        timings,
    })
}

/// Bytes a run holds at its peak: the per-scenario totals (five f32 per cell) plus one output
/// band per scenario while the stack is written. One step's fields add a few bands' worth per
/// level, small beside the totals once there are more than a handful of scenarios.
pub fn memory_estimate(cells: usize, scenarios: usize) -> u64 {
    (cells as u64) * (scenarios as u64) * (5 + 1) * 4
}

/// Memory available to new allocations, bytes (Linux `MemAvailable`); `None` where unknown.
fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
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

fn levels_text(l: &StepLayout) -> String {
    l.levels_pa
        .iter()
        .map(|p| format!("{}", p / 100.0))
        .collect::<Vec<_>>()
        .join("/")
        + " hPa"
}

/// One step for every scenario: the parallel seam. Returns, per scenario, how many cells took
/// their values from outside the grid.
#[allow(clippy::too_many_arguments)]
pub fn step_all_scenarios(
    grid: &Grid,
    terrain: &[f32],
    layout: &StepLayout,
    columns: &[f32],
    shifts: &[StepShift],
    taper: &Taper,
    methods: &Methods,
    totals: &mut [Totals],
) -> Vec<u64> {
    let tasks: Vec<(usize, usize, crate::accumulate::TotalsRows<'_>)> = totals
        .iter_mut()
        .enumerate()
        .flat_map(|(s, t)| {
            t.blocks_mut(CELLS_PER_TASK)
                .into_iter()
                .map(move |(start, rows)| (s, start, rows))
        })
        .collect();
    let counts: Vec<(usize, u64)> = tasks
        .into_par_iter()
        .map(|(s, start, mut rows)| {
            let o = step_block(
                grid, terrain, layout, columns, &shifts[s], taper, methods, start, &mut rows,
            );
            (s, o)
        })
        .collect();
    let mut out = vec![0u64; shifts.len()];
    for (s, o) in counts {
        out[s] += o;
    }
    out
}

/// The per-block kernel: for each cell, sample the displaced column, diagnose it and add the
/// step's precipitation to the totals. Returns the number of cells sampled outside the grid.
#[allow(clippy::too_many_arguments)]
fn step_block(
    grid: &Grid,
    terrain: &[f32],
    layout: &StepLayout,
    columns: &[f32],
    shift: &StepShift,
    taper: &Taper,
    methods: &Methods,
    start: usize,
    rows: &mut crate::accumulate::TotalsRows<'_>,
) -> u64 {
    let nvar = layout.nvar();
    let mut buf = [0.0f32; 3 * crate::diagnose::ptype::MAX_LEVELS + 4];
    let (lon, lat, metric) = (grid.lon(), grid.lat(), grid.metric());
    let mut outside = 0;
    for i in 0..rows.liquid.len() {
        let c = start + i;
        if rows.liquid[i].is_nan() {
            continue;
        }
        if terrain[c].is_nan() {
            rows.set_missing(i);
            continue;
        }
        let col = &mut buf[..nvar];
        // A step known to be dry adds nothing whatever the column; look at the precipitation
        // before touching the rest (most cells are dry at most steps).
        if shift.is_none() {
            if columns[c * nvar + layout.precip()] == 0.0 {
                continue;
            }
            col.copy_from_slice(&columns[c * nvar..(c + 1) * nvar]);
        } else {
            let (sc, sr) = source_index(
                c % grid.nx,
                c / grid.nx,
                lon[c],
                lat[c],
                &metric[c],
                shift,
                taper,
            );
            let Some(w) = bilinear_weights(grid, sc, sr) else {
                outside += 1;
                rows.set_missing(i);
                continue;
            };
            let p = sample_one(columns, nvar, grid.nx, w, layout.precip());
            if p == 0.0 {
                continue;
            }
            sample_at(columns, nvar, grid.nx, w, col);
        }
        if col.iter().any(|v| v.is_nan()) {
            rows.set_missing(i);
            continue;
        }
        let p = col[layout.precip()];
        match diagnose_column(col, layout, terrain[c], methods) {
            Some(r) => rows.add(i, p, &r.fractions, r.snow_ratio),
            None => rows.set_missing(i),
        }
    }
    outside
}
