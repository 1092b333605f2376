//! The sub-cloud moisture of the model's isobaric levels, worked out once per grid point.
//!
//! The dry-air kernel ([`SubCloud`](crate::diagnose::subcloud::SubCloud)) needs, at every
//! sub-cloud point of a column, the isobaric wet-bulb, the water that saturates the air at it
//! and the air's specific humidity: a Halley solve with two or three exponentials. At an isobaric
//! level these depend only on the level's temperature (plus the scenario's warm bias) and
//! humidity at the model's grid points, not on the offset. So the engine works them out per
//! grid point, per step and per warm bias, and a shifted column takes them by bilinear
//! interpolation between the four grid points around its source point, like every other
//! storm-attached value. Only the surface point, which depends on the target cell's ground, is
//! solved per cell and scenario.
//!
//! Interpolating the derived values rather than deriving from interpolated temperature and
//! humidity differs at second order in the grid-point differences; an unshifted column takes
//! one grid point's values and is unchanged. docs/SCIENCE.md §3 gives the measured effect.
//!
//! The values are kept in a memo ([`LevelMoisture`]) filled in parallel before a step's
//! scenarios run, once per step and bias, at the grid points within one cell of precipitation
//! (the only ones a wet column's source point can read), and only read while they run: plain
//! loads, no flags to check. A point not kept (a column wet in the next step only) is solved on
//! the spot. Each value is a pure function of the step's fields, so kept and solved values are
//! the same bits, and without a memo (the sounding view) the grid points are solved on the spot
//! to the same bits too. A column interpolates all its levels in one pass ([`AtSource`]) the
//! first time its sub-cloud layer asks for one.

use crate::diagnose::profile::PROFILE_TOP_PA;
use crate::diagnose::thermo::isobaric_wet_bulb_deficit_humidity;
use crate::read::StepLayout;
use rayon::prelude::*;

/// Bilinear weights of a source point: lower-left grid point (column, row) and fractions.
pub type Weights = (usize, usize, f32, f32);

/// Values per level and grid point: wet-bulb (K), moistening and specific humidity (kg/kg).
const PER_LEVEL: usize = 3;

/// Most levels the memo holds (from the lowest up); a sub-cloud level above them is solved at
/// the four grid points around each source point every time, without a memo. Sixteen covers
/// 1000–500 hPa at 33 hPa spacing.
pub const MAX_MEMO_LEVELS: usize = 16;

/// Levels of `layout` the memo holds: the leading ones at or below 500 hPa, at most
/// [`MAX_MEMO_LEVELS`].
fn memo_levels(layout: &StepLayout) -> usize {
    layout
        .levels_pa
        .iter()
        .take_while(|p| **p >= PROFILE_TOP_PA)
        .count()
        .min(MAX_MEMO_LEVELS)
}

/// One step's memo for one warm bias: wet-bulb, moistening and humidity of each memo level at
/// every grid point a wet source point can take them from, worked out in parallel before the
/// step's scenarios run and then only read (plain loads the compiler can vectorise).
pub struct LevelMoisture {
    /// The warm bias the values include, K.
    pub warm_bias_k: f64,
    levels: usize,
    /// Per grid point, `levels × PER_LEVEL` values (meaningful where `kept`).
    values: Vec<f32>,
    /// 1 where the grid point's values are kept.
    kept: Vec<u8>,
}

impl LevelMoisture {
    /// The memo of one step's interleaved `columns` (a grid `nx` cells wide) with the warm bias
    /// added, kept at the grid points within one cell of a point with precipitation
    /// (`wet(i, j)`): a column sampled where precipitation falls has a wet grid point among the
    /// four around its source point, so it reads only kept points. A source point with
    /// precipitation from the next step only may read a point not kept, which is then solved
    /// on the spot, to the same bits. Filled in parallel on the current rayon pool.
    pub fn new(
        columns: &[f32],
        layout: &StepLayout,
        nx: usize,
        warm_bias_k: f64,
        wet: impl Fn(usize, usize) -> bool + Sync,
    ) -> Self {
        let mut m = Self {
            warm_bias_k,
            levels: memo_levels(layout),
            values: Vec::new(),
            kept: Vec::new(),
        };
        m.fill(columns, layout, nx, warm_bias_k, wet);
        m
    }

    /// [`LevelMoisture::new`] into this memo's memory (another step and bias of the same grid
    /// and levels: reusing it saves a continental grid's page faults every step).
    pub fn fill(
        &mut self,
        columns: &[f32],
        layout: &StepLayout,
        nx: usize,
        warm_bias_k: f64,
        wet: impl Fn(usize, usize) -> bool + Sync,
    ) {
        let cells = columns.len() / layout.nvar();
        let stride = self.levels * PER_LEVEL;
        self.warm_bias_k = warm_bias_k;
        self.values.resize(cells * stride, 0.0);
        self.kept.resize(cells, 0);
        if cells == 0 || stride == 0 {
            return;
        }
        let ny = cells / nx;
        self.values
            .par_chunks_mut(stride * nx)
            .zip(self.kept.par_chunks_mut(nx))
            .enumerate()
            .for_each(|(j, (values, kept))| {
                let rows = j.saturating_sub(1)..=(j + 1).min(ny - 1);
                for (i, (v, k)) in values.chunks_exact_mut(stride).zip(kept).enumerate() {
                    let cols = i.saturating_sub(1)..=(i + 1).min(nx - 1);
                    let near = rows.clone().any(|jj| cols.clone().any(|ii| wet(ii, jj)));
                    *k = u8::from(near);
                    if near {
                        solve_point(columns, layout, j * nx + i, warm_bias_k, v);
                    }
                }
            });
    }

    /// True when this memo's memory fits a grid of `cells` points with `layout`'s levels.
    pub fn fits(&self, cells: usize, layout: &StepLayout) -> bool {
        self.levels == memo_levels(layout) && self.kept.len() == cells
    }

    /// Grid point `cell`'s memo levels into `out` (3 values per level), kept or solved.
    #[inline(always)]
    fn get(&self, columns: &[f32], layout: &StepLayout, cell: usize, out: &mut [f32]) {
        if self.kept[cell] != 0 {
            let stride = self.levels * PER_LEVEL;
            out.copy_from_slice(&self.values[cell * stride..(cell + 1) * stride]);
        } else {
            solve_point(columns, layout, cell, self.warm_bias_k, out);
        }
    }
}

impl std::fmt::Debug for LevelMoisture {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("LevelMoisture")
            .field("warm_bias_k", &self.warm_bias_k)
            .field("levels", &self.levels)
            .finish_non_exhaustive()
    }
}

/// Level `k`'s wet-bulb, moistening and humidity at grid point `cell`, with the warm bias added
/// as [`crate::diagnose::profile::Profile::build`] adds it; NaN out of the kernel's domain.
fn solve(
    columns: &[f32],
    layout: &StepLayout,
    cell: usize,
    k: usize,
    warm_bias_k: f64,
) -> [f32; 3] {
    let base = cell * layout.nvar();
    let p = layout.levels_pa[k];
    let mut t = columns[base + layout.t(k)] as f64;
    if warm_bias_k != 0.0 && p >= PROFILE_TOP_PA {
        t += warm_bias_k;
    }
    let rh = columns[base + layout.rh(k)] as f64;
    let (tw, d, q) = isobaric_wet_bulb_deficit_humidity(p, t, rh);
    [tw as f32, d as f32, q as f32]
}

/// Every memo level of grid point `cell` into `out`.
#[cold]
fn solve_point(
    columns: &[f32],
    layout: &StepLayout,
    cell: usize,
    warm_bias_k: f64,
    out: &mut [f32],
) {
    for (k, o) in out.chunks_exact_mut(PER_LEVEL).enumerate() {
        o.copy_from_slice(&solve(columns, layout, cell, k, warm_bias_k));
    }
}

/// Bilinear interpolation, in the order and arithmetic of [`crate::shift::sample_one`] (grid
/// points with zero weight are not read), of the values `at(cell, out)` gives.
#[inline(always)]
fn bilinear<const N: usize>(
    nx: usize,
    (i0, j0, fx, fy): Weights,
    n: usize,
    mut at: impl FnMut(usize, &mut [f32]),
) -> [f32; N] {
    let mut a = [0.0f32; N];
    let mut b = [0.0f32; N];
    at(j0 * nx + i0, &mut a[..n]);
    if fx > 0.0 {
        at(j0 * nx + i0 + 1, &mut b[..n]);
        for v in 0..n {
            a[v] += fx * (b[v] - a[v]);
        }
    }
    if fy > 0.0 {
        let mut c = [0.0f32; N];
        at((j0 + 1) * nx + i0, &mut c[..n]);
        if fx > 0.0 {
            at((j0 + 1) * nx + i0 + 1, &mut b[..n]);
            for v in 0..n {
                c[v] += fx * (b[v] - c[v]);
            }
        }
        for v in 0..n {
            a[v] += fy * (c[v] - a[v]);
        }
    }
    a
}

/// All memo levels of one step at the source point.
#[inline(always)]
fn step_levels(
    columns: &[f32],
    memo: Option<&LevelMoisture>,
    layout: &StepLayout,
    nx: usize,
    w: Weights,
    levels: usize,
    warm_bias_k: f64,
) -> [f32; PER_LEVEL * MAX_MEMO_LEVELS] {
    bilinear(nx, w, levels * PER_LEVEL, |cell, out| match memo {
        Some(m) => m.get(columns, layout, cell, out),
        None => solve_point(columns, layout, cell, warm_bias_k, out),
    })
}

/// The model columns one scenario step samples.
#[derive(Clone, Copy)]
pub struct Columns<'a> {
    /// The step at or before the sampled time.
    pub now: &'a [f32],
    /// The next step and its weight (0–1), when the sampled time lies between steps.
    pub next: Option<(&'a [f32], f32)>,
    /// The memos of `now` and `next` at this warm bias, when the window holds them.
    pub memo: [Option<&'a LevelMoisture>; 2],
    /// Warm-layer bias, K.
    pub warm_bias_k: f64,
}

/// The isobaric levels' sub-cloud moisture at one column's source point, worked out on first
/// use.
pub struct AtSource<'a> {
    input: Columns<'a>,
    layout: &'a StepLayout,
    nx: usize,
    w: Weights,
    levels: usize,
    values: Option<[f32; PER_LEVEL * MAX_MEMO_LEVELS]>,
}

impl<'a> AtSource<'a> {
    /// For the column sampled at `w` in `input`.
    pub fn new(input: Columns<'a>, layout: &'a StepLayout, nx: usize, w: Weights) -> Self {
        Self {
            input,
            layout,
            nx,
            w,
            levels: memo_levels(layout),
            values: None,
        }
    }

    /// Isobaric level `k`'s wet-bulb (K), moistening and specific humidity (kg/kg) at the
    /// source point, between two steps as the column itself is; `None` when any is missing
    /// (the kernel then works them out from the column).
    #[inline]
    pub fn level(&mut self, k: usize) -> Option<[f64; 3]> {
        let input = self.input;
        let bias = input.warm_bias_k;
        let v: [f32; 3] = if k < self.levels {
            let (layout, nx, w, levels) = (self.layout, self.nx, self.w, self.levels);
            let all = self.values.get_or_insert_with(|| {
                let mut v = step_levels(input.now, input.memo[0], layout, nx, w, levels, bias);
                if let Some((next, wt)) = input.next {
                    let later = step_levels(next, input.memo[1], layout, nx, w, levels, bias);
                    for i in 0..levels * PER_LEVEL {
                        v[i] += wt * (later[i] - v[i]);
                    }
                }
                v
            });
            [
                all[PER_LEVEL * k],
                all[PER_LEVEL * k + 1],
                all[PER_LEVEL * k + 2],
            ]
        } else {
            let one = |cols: &[f32]| {
                bilinear::<3>(self.nx, self.w, 3, |cell, out| {
                    out.copy_from_slice(&solve(cols, self.layout, cell, k, bias))
                })
            };
            let mut v = one(input.now);
            if let Some((next, wt)) = input.next {
                let later = one(next);
                for i in 0..3 {
                    v[i] += wt * (later[i] - v[i]);
                }
            }
            v
        };
        v.iter().all(|x| x.is_finite()).then(|| v.map(f64::from))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::ScenarioStep;
    use crate::shift::StepShift;

    fn layout() -> StepLayout {
        StepLayout::new(vec![100_000.0, 85_000.0, 70_000.0, 50_000.0, 30_000.0])
    }

    /// A 3×2 grid of columns with temperatures and humidities varying by grid point.
    fn columns(l: &StepLayout) -> Vec<f32> {
        let nvar = l.nvar();
        let mut c = vec![0.0f32; 6 * nvar];
        for cell in 0..6 {
            for k in 0..l.levels_pa.len() {
                c[cell * nvar + l.t(k)] = 265.0 + cell as f32 - 3.0 * k as f32;
                c[cell * nvar + l.rh(k)] = 40.0 + 9.0 * cell as f32;
            }
        }
        c
    }

    fn input<'a>(
        now: &'a [f32],
        next: Option<(&'a [f32], f32)>,
        memo: [Option<&'a LevelMoisture>; 2],
        bias: f64,
    ) -> ScenarioStep<'a> {
        ScenarioStep {
            shift: StepShift::none(),
            now,
            now_scale: 1.0,
            next: next.map(|(c, w)| (c, w, 1.0)),
            warm_bias_k: bias,
            wet: [None, None],
            moisture: memo,
        }
    }

    fn level(step: &ScenarioStep<'_>, l: &StepLayout, w: Weights, k: usize) -> Option<[f64; 3]> {
        AtSource::new(step.columns(), l, 3, w).level(k)
    }

    #[test]
    fn memo_and_direct_solve_give_the_same_bits() {
        let l = layout();
        let cols = columns(&l);
        let later: Vec<f32> = cols.iter().map(|v| v + 0.5).collect();
        // Kept everywhere (every grid point wet) and nowhere (all dry: solved on the spot).
        let memo = LevelMoisture::new(&cols, &l, 3, 1.5, |_, _| true);
        let memo_later = LevelMoisture::new(&later, &l, 3, 1.5, |_, _| false);
        assert_eq!(
            memo.levels, 4,
            "300 hPa is above the sub-cloud kernel's top"
        );
        let direct = input(&cols, Some((&later, 0.3)), [None, None], 1.5);
        let kept = input(
            &cols,
            Some((&later, 0.3)),
            [Some(&memo), Some(&memo_later)],
            1.5,
        );
        for w in [(0, 0, 0.0, 0.0), (1, 0, 0.25, 0.5), (0, 0, 0.7, 0.0)] {
            for k in 0..5 {
                let a = level(&direct, &l, w, k).unwrap();
                let b = level(&kept, &l, w, k).unwrap();
                let c = level(&kept, &l, w, k).unwrap();
                assert_eq!(a.map(f64::to_bits), b.map(f64::to_bits), "{w:?} {k}");
                assert_eq!(b.map(f64::to_bits), c.map(f64::to_bits), "{w:?} {k}");
            }
        }
        // A refilled memo forgets the old step's values.
        let mut m = LevelMoisture::new(&cols, &l, 3, 1.5, |_, _| true);
        let first = level(
            &input(&cols, None, [Some(&m), None], 1.5),
            &l,
            (1, 0, 0.0, 0.0),
            0,
        );
        m.fill(&later, &l, 3, 0.0, |_, _| true);
        let after = level(
            &input(&later, None, [Some(&m), None], 0.0),
            &l,
            (1, 0, 0.0, 0.0),
            0,
        );
        let fresh = level(
            &input(&later, None, [None, None], 0.0),
            &l,
            (1, 0, 0.0, 0.0),
            0,
        );
        assert_eq!(after, fresh);
        assert_ne!(first, after);
    }

    #[test]
    fn points_within_one_cell_of_precipitation_are_kept() {
        // A 5×4 grid, precipitation at (3, 2) only: kept at columns 2–4 of rows 1–3.
        let l = layout();
        let nvar = l.nvar();
        let mut cols = vec![0.0f32; 20 * nvar];
        for cell in 0..20 {
            for k in 0..l.levels_pa.len() {
                cols[cell * nvar + l.t(k)] = 262.0 + 0.5 * cell as f32 - 3.0 * k as f32;
                cols[cell * nvar + l.rh(k)] = 40.0 + 2.5 * cell as f32;
            }
        }
        let m = LevelMoisture::new(&cols, &l, 5, 0.0, |i, j| (i, j) == (3, 2));
        let kept: Vec<usize> = (0..20).filter(|&c| m.kept[c] != 0).collect();
        assert_eq!(kept, [7, 8, 9, 12, 13, 14, 17, 18, 19]);
        // A kept point holds its own solve.
        let mut direct = [0.0f32; 12];
        solve_point(&cols, &l, 13, 0.0, &mut direct);
        assert!(direct.iter().all(|v| v.is_finite()));
        assert_eq!(m.values[13 * 12..14 * 12], direct);
    }

    #[test]
    fn a_grid_point_takes_its_own_solve_with_the_bias() {
        let l = layout();
        let cols = columns(&l);
        let nvar = l.nvar();
        let step = input(&cols, None, [None, None], 1.5);
        // Grid point 4 = (1, 1), level 1 (850 hPa): T + 1.5 K bias, as Profile::build adds it.
        let v = level(&step, &l, (1, 1, 0.0, 0.0), 1).unwrap();
        let t = cols[4 * nvar + l.t(1)] as f64 + 1.5;
        let rh = cols[4 * nvar + l.rh(1)] as f64;
        let (tw, d, q) = isobaric_wet_bulb_deficit_humidity(85_000.0, t, rh);
        assert_eq!(v, [tw as f32, d as f32, q as f32].map(f64::from));
        // 300 hPa (outside the memo) takes no bias: it is above 500 hPa.
        let v = level(&step, &l, (1, 1, 0.0, 0.0), 4).unwrap();
        let t = cols[4 * nvar + l.t(4)] as f64;
        let (tw, _, _) = isobaric_wet_bulb_deficit_humidity(30_000.0, t, rh);
        assert_eq!(v[0], tw as f32 as f64);
    }

    #[test]
    fn interpolation_lies_between_the_grid_points() {
        let l = layout();
        let cols = columns(&l);
        let step = input(&cols, None, [None, None], 0.0);
        let a = level(&step, &l, (0, 0, 0.0, 0.0), 0).unwrap();
        let b = level(&step, &l, (1, 0, 0.0, 0.0), 0).unwrap();
        let mid = level(&step, &l, (0, 0, 0.5, 0.0), 0).unwrap();
        for i in 0..3 {
            assert!((mid[i] - 0.5 * (a[i] + b[i])).abs() <= 1e-6 * a[i].abs().max(1.0));
        }
        // The wet-bulb of the mean air differs from the mean wet-bulb at second order only:
        // 1 K and 9 % RH apart, under 0.01 K.
        let (tw_mid, _, _) = isobaric_wet_bulb_deficit_humidity(100_000.0, 265.5, 44.5);
        assert!((mid[0] - tw_mid).abs() < 0.01, "{} {tw_mid}", mid[0]);
        // Out of the kernel's domain at a grid point with weight: missing.
        let mut bad = cols.clone();
        bad[l.rh(0)] = 150.0;
        let step = input(&bad, None, [None, None], 0.0);
        assert!(level(&step, &l, (0, 0, 0.5, 0.0), 0).is_none());
        assert!(level(&step, &l, (1, 0, 0.0, 0.0), 0).is_some());
    }
}
