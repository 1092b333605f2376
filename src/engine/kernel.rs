//! The per-cell kernel and the one parallel seam of the physics: every scenario's cells of one
//! step, in tasks of (scenario, block of cells) that each write only their own cells, so the
//! totals are the same bit for bit whatever the number of threads. Per cell: sample the
//! displaced column (between two steps when a timing offset falls between them), diagnose it
//! with dry air below the cloud, and add what reaches the ground.

use super::moisture::{self, LevelMoisture, Weights};
use super::wet::{DryScreen, GridReach, WetRows};
use crate::accumulate::Totals;
use crate::diagnose::subcloud::SubCloud;
use crate::diagnose::{step_column, ColumnMissing, ColumnStep, Methods, Profile};
use crate::grid::Grid;
use crate::read::StepLayout;
use crate::shift::{bilinear_weights, sample_at, sample_one, source_index, StepShift, Taper};
use rayon::prelude::*;

/// Cells per parallel task: large enough to amortise scheduling, small enough to balance two
/// cores when only one scenario runs.
const CELLS_PER_TASK: usize = 4096;

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

impl<'a> ScenarioStep<'a> {
    /// The model columns this scenario step samples, for the sub-cloud moisture.
    pub fn columns(&self) -> moisture::Columns<'a> {
        moisture::Columns {
            now: self.now,
            next: self.next.map(|(cols, w, _)| (cols, w)),
            memo: self.moisture,
            warm_bias_k: self.warm_bias_k,
        }
    }
}

/// One step for every scenario: the parallel seam. `inputs[s]` is `None` for a scenario that
/// skips this step. A cell whose `terrain` is missing must already be missing in `totals`
/// ([`super::run`] marks them): a cell the dry screen passes over is not looked at. `step` is the 1-based output step, recorded as the onset of snow. Returns,
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
    let mut screen = DryScreen::new(grid, reach, input.wet, &input.shift);
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
        .map(|a| moisture::AtSource::new(a.input.columns(), layout, a.nx, a.w));
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
            let mut screen = DryScreen::new(&grid, &reach_of, input.wet, &input.shift);
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
