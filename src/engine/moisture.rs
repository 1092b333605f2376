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
//! The values are kept in a memo filled on first use ([`LevelMoisture`]): a grid point's levels
//! are solved together, at most once per step and bias, and never where no scenario's
//! precipitation reaches. Filling races between threads are harmless: every thread writes the
//! same bits, since each value is a pure function of the step's fields. Without a memo (the
//! sounding view) the grid points are solved on the spot and give the same bits. A column
//! interpolates all its levels in one pass ([`AtSource`]) the first time its sub-cloud layer
//! asks for one.

use super::ScenarioStep;
use crate::diagnose::column::PROFILE_TOP_PA;
use crate::diagnose::thermo::isobaric_wet_bulb_deficit_humidity;
use crate::read::StepLayout;
use rayon::prelude::*;
use std::sync::atomic::{AtomicU32, Ordering};

/// Bilinear weights of a source point: lower-left grid point (column, row) and fractions.
pub type Weights = (usize, usize, f32, f32);

/// Marks a grid point not worked out yet (the first word of its memo entry).
const NOT_YET: u32 = 0;
/// Marks a grid point worked out.
const DONE: u32 = 1;

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

/// One step's memo for one warm bias: per grid point a flag word, then wet-bulb, moistening and
/// humidity of each memo level.
pub struct LevelMoisture {
    /// The warm bias the values include, K.
    pub warm_bias_k: f64,
    levels: usize,
    memo: Vec<AtomicU32>,
}

impl LevelMoisture {
    /// An empty memo for a grid of `cells` points (filled in parallel on the current rayon
    /// pool: a 1800×1060 grid with five levels below 500 hPa takes 122 MB).
    pub fn new(cells: usize, layout: &StepLayout, warm_bias_k: f64) -> Self {
        let levels = memo_levels(layout);
        Self {
            warm_bias_k,
            levels,
            memo: (0..cells * (1 + levels * PER_LEVEL))
                .into_par_iter()
                .map(|_| AtomicU32::new(NOT_YET))
                .collect(),
        }
    }

    /// Empties the memo for another step and bias of the same grid and levels (reusing the
    /// memory saves a continental grid's page faults every step).
    pub fn reuse(&mut self, warm_bias_k: f64) {
        self.warm_bias_k = warm_bias_k;
        let stride = 1 + self.levels * PER_LEVEL;
        self.memo.par_chunks_mut(stride << 12).for_each(|c| {
            c.iter_mut()
                .step_by(stride)
                .for_each(|a| *a.get_mut() = NOT_YET)
        });
    }

    /// True when this memo's memory fits a grid of `cells` points with `layout`'s levels.
    pub fn fits(&self, cells: usize, layout: &StepLayout) -> bool {
        self.memo.len() == cells * (1 + memo_levels(layout) * PER_LEVEL)
    }

    /// Grid point `cell`'s memo levels into `out` (3 values per level), from the memo or solved
    /// (and kept).
    #[inline(always)]
    fn get(&self, columns: &[f32], layout: &StepLayout, cell: usize, out: &mut [f32]) {
        let stride = 1 + self.levels * PER_LEVEL;
        let entry = &self.memo[cell * stride..(cell + 1) * stride];
        // The flag is set last (release) and read first (acquire): once it is there, so are the
        // values.
        if entry[0].load(Ordering::Acquire) == DONE {
            for (o, a) in out.iter_mut().zip(&entry[1..]) {
                *o = f32::from_bits(a.load(Ordering::Relaxed));
            }
        } else {
            solve_point(columns, layout, cell, self.warm_bias_k, out);
            for (a, o) in entry[1..].iter().zip(out.iter()) {
                a.store(o.to_bits(), Ordering::Relaxed);
            }
            entry[0].store(DONE, Ordering::Release);
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
/// as [`crate::diagnose::column::Profile::build`] adds it; NaN out of the kernel's domain.
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

/// The isobaric levels' sub-cloud moisture at one column's source point, worked out on first
/// use.
pub struct AtSource<'a> {
    input: &'a ScenarioStep<'a>,
    layout: &'a StepLayout,
    nx: usize,
    w: Weights,
    levels: usize,
    values: Option<[f32; PER_LEVEL * MAX_MEMO_LEVELS]>,
}

impl<'a> AtSource<'a> {
    /// For the column sampled at `w` in `input`.
    pub fn new(input: &'a ScenarioStep<'a>, layout: &'a StepLayout, nx: usize, w: Weights) -> Self {
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
                let mut v = step_levels(input.now, input.moisture[0], layout, nx, w, levels, bias);
                if let Some((next, wt, _)) = input.next {
                    let later = step_levels(next, input.moisture[1], layout, nx, w, levels, bias);
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
            if let Some((next, wt, _)) = input.next {
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
        AtSource::new(step, l, 3, w).level(k)
    }

    #[test]
    fn memo_and_direct_solve_give_the_same_bits() {
        let l = layout();
        let cols = columns(&l);
        let later: Vec<f32> = cols.iter().map(|v| v + 0.5).collect();
        let memo = LevelMoisture::new(6, &l, 1.5);
        let memo_later = LevelMoisture::new(6, &l, 1.5);
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
        // A reused memo forgets the old step's values.
        let mut m = LevelMoisture::new(6, &l, 1.5);
        let first = level(
            &input(&cols, None, [Some(&m), None], 1.5),
            &l,
            (1, 0, 0.0, 0.0),
            0,
        );
        m.reuse(0.0);
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
