//! The sub-cloud moisture of the model's isobaric levels, worked out once per grid point.
//!
//! The dry-air kernel ([`SubCloud`](crate::diagnose::subcloud::SubCloud)) needs, at every
//! sub-cloud point of a column, the isobaric wet-bulb, the water that saturates the air at it
//! and the air's specific humidity: a Newton solve with two to four exponentials. At an isobaric
//! level these depend only on the level's temperature (plus the scenario's warm bias) and
//! humidity at the model's grid points, not on the offset. So the engine works them out per
//! grid point, per step and per warm bias, and a shifted column takes them by bilinear
//! interpolation between the four grid points around its source point, like every other
//! storm-attached value. Only the surface point, which depends on the target cell's ground, is
//! solved per cell and scenario.
//!
//! Interpolating the derived values rather than deriving from interpolated temperature and
//! humidity differs at second order in the grid-point differences; an unshifted column takes
//! one grid point's values and is unchanged. docs/SCIENCE.md §5 gives the measured effect.
//!
//! The values are kept in a memo filled on first use ([`LevelMoisture`]): a grid point is solved
//! at most once per step and bias, and never where no scenario's precipitation reaches. Filling
//! races between threads are harmless: every thread writes the same bits, since each value is a
//! pure function of the step's fields. Without a memo (the sounding view) the grid points are
//! solved on the spot and give the same bits.

use super::ScenarioStep;
use crate::diagnose::column::PROFILE_TOP_PA;
use crate::diagnose::thermo::isobaric_wet_bulb_deficit_humidity;
use crate::read::StepLayout;
use rayon::prelude::*;
use std::sync::atomic::{AtomicU32, Ordering};

/// Bilinear weights of a source point: lower-left grid point (column, row) and fractions.
pub type Weights = (usize, usize, f32, f32);

/// Marks a memo entry not worked out yet: a NaN payload arithmetic never produces (stored
/// values are finite or the canonical NaN).
const NOT_YET: u32 = 0x7FC0_5A5A;

/// Values per level and grid point: wet-bulb (K), moistening and specific humidity (kg/kg).
const PER_LEVEL: usize = 3;

/// Levels of `layout` the sub-cloud kernel can use: the leading ones at or below 500 hPa.
fn sub_cloud_levels(layout: &StepLayout) -> usize {
    layout
        .levels_pa
        .iter()
        .take_while(|p| **p >= PROFILE_TOP_PA)
        .count()
}

/// One step's memo for one warm bias.
pub struct LevelMoisture {
    /// The warm bias the values include, K.
    pub warm_bias_k: f64,
    levels: usize,
    memo: Vec<AtomicU32>,
}

impl LevelMoisture {
    /// An empty memo for a grid of `cells` points (filled in parallel on the current rayon
    /// pool: a continental grid's memo is about 100 MB).
    pub fn new(cells: usize, layout: &StepLayout, warm_bias_k: f64) -> Self {
        let levels = sub_cloud_levels(layout);
        Self {
            warm_bias_k,
            levels,
            memo: (0..cells * levels * PER_LEVEL)
                .into_par_iter()
                .map(|_| AtomicU32::new(NOT_YET))
                .collect(),
        }
    }

    /// Empties the memo for another step and bias of the same grid and levels (reusing the
    /// memory saves a continental grid's page faults every step).
    pub fn reuse(&mut self, warm_bias_k: f64) {
        self.warm_bias_k = warm_bias_k;
        self.memo
            .par_iter_mut()
            .with_min_len(1 << 16)
            .for_each(|a| *a.get_mut() = NOT_YET);
    }

    /// True when this memo's memory fits a grid of `cells` points with `layout`'s levels.
    pub fn fits(&self, cells: usize, layout: &StepLayout) -> bool {
        self.memo.len() == cells * sub_cloud_levels(layout) * PER_LEVEL
    }

    /// Bytes held.
    pub fn bytes(&self) -> usize {
        self.memo.len() * 4
    }

    /// Level `k`'s values at grid point `cell` of `columns`, from the memo or solved (and kept).
    #[inline(always)]
    fn get(&self, columns: &[f32], layout: &StepLayout, cell: usize, k: usize) -> [f32; 3] {
        if k >= self.levels {
            return solve(columns, layout, cell, k, self.warm_bias_k);
        }
        let at = (cell * self.levels + k) * PER_LEVEL;
        let slot = &self.memo[at..at + PER_LEVEL];
        // The wet-bulb is stored last (release) and read first (acquire): once it is there,
        // so are the other two.
        let tw = slot[0].load(Ordering::Acquire);
        if tw == NOT_YET {
            let v = solve(columns, layout, cell, k, self.warm_bias_k);
            slot[1].store(v[1].to_bits(), Ordering::Relaxed);
            slot[2].store(v[2].to_bits(), Ordering::Relaxed);
            slot[0].store(v[0].to_bits(), Ordering::Release);
            v
        } else {
            [
                f32::from_bits(tw),
                f32::from_bits(slot[1].load(Ordering::Relaxed)),
                f32::from_bits(slot[2].load(Ordering::Relaxed)),
            ]
        }
    }
}

/// Level `k`'s wet-bulb, moistening and humidity at grid point `cell`, with the warm bias added
/// as [`crate::diagnose::column::Profile::build`] adds it; NaN (canonical) out of the kernel's
/// domain.
#[cold]
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
    [tw, d, q].map(|v| if v.is_nan() { f32::NAN } else { v as f32 })
}

/// Level `k`'s values at one step's grid point, memo or not.
#[inline(always)]
fn point(
    columns: &[f32],
    memo: Option<&LevelMoisture>,
    layout: &StepLayout,
    cell: usize,
    k: usize,
    warm_bias_k: f64,
) -> [f32; 3] {
    match memo {
        Some(m) => m.get(columns, layout, cell, k),
        None => solve(columns, layout, cell, k, warm_bias_k),
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

#[inline]
fn lerp(a: [f32; 3], b: [f32; 3], f: f32) -> [f32; 3] {
    [
        a[0] + f * (b[0] - a[0]),
        a[1] + f * (b[1] - a[1]),
        a[2] + f * (b[2] - a[2]),
    ]
}

/// Bilinear interpolation of level `k`'s values in one step, in the order and arithmetic of
/// [`crate::shift::sample_one`] (grid points with zero weight are not read).
#[inline]
fn bilinear(
    columns: &[f32],
    memo: Option<&LevelMoisture>,
    layout: &StepLayout,
    nx: usize,
    (i0, j0, fx, fy): Weights,
    k: usize,
    warm_bias_k: f64,
) -> [f32; 3] {
    let at = |di: usize, dj: usize| {
        point(
            columns,
            memo,
            layout,
            (j0 + dj) * nx + i0 + di,
            k,
            warm_bias_k,
        )
    };
    let top = if fx > 0.0 {
        lerp(at(0, 0), at(1, 0), fx)
    } else {
        at(0, 0)
    };
    if fy > 0.0 {
        let bottom = if fx > 0.0 {
            lerp(at(0, 1), at(1, 1), fx)
        } else {
            at(0, 1)
        };
        lerp(top, bottom, fy)
    } else {
        top
    }
}

/// Isobaric level `k`'s wet-bulb (K), moistening and specific humidity (kg/kg) at the source
/// point `w` of one scenario step, between two steps as the column itself is; `None` when any
/// is missing (the kernel then works them out from the column).
#[inline]
pub fn at_source(
    input: &ScenarioStep<'_>,
    layout: &StepLayout,
    nx: usize,
    w: Weights,
    k: usize,
) -> Option<[f64; 3]> {
    let bias = input.warm_bias_k;
    let mut v = bilinear(input.now, input.moisture[0], layout, nx, w, k, bias);
    if let Some((next, wt, _)) = input.next {
        let later = bilinear(next, input.moisture[1], layout, nx, w, k, bias);
        v = lerp(v, later, wt);
    }
    v.iter().all(|x| x.is_finite()).then(|| v.map(f64::from))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnose::thermo::isobaric_wet_bulb_deficit_humidity;

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

    #[test]
    fn memo_and_direct_solve_give_the_same_bits() {
        let l = layout();
        let cols = columns(&l);
        let memo = LevelMoisture::new(6, &l, 1.5);
        assert_eq!(
            memo.levels, 4,
            "300 hPa is above the sub-cloud kernel's top"
        );
        for w in [(0, 0, 0.0, 0.0), (1, 0, 0.25, 0.5), (0, 0, 0.7, 0.0)] {
            for k in 0..5 {
                let direct = bilinear(&cols, None, &l, 3, w, k, 1.5);
                let first = bilinear(&cols, Some(&memo), &l, 3, w, k, 1.5);
                let again = bilinear(&cols, Some(&memo), &l, 3, w, k, 1.5);
                assert_eq!(direct.map(f32::to_bits), first.map(f32::to_bits));
                assert_eq!(first.map(f32::to_bits), again.map(f32::to_bits));
            }
        }
    }

    #[test]
    fn a_grid_point_takes_its_own_solve_with_the_bias() {
        let l = layout();
        let cols = columns(&l);
        let nvar = l.nvar();
        // Grid point 4 = (1, 1), level 1 (850 hPa): T + 1.5 K bias, as Profile::build adds it.
        let v = bilinear(&cols, None, &l, 3, (1, 1, 0.0, 0.0), 1, 1.5);
        let t = cols[4 * nvar + l.t(1)] as f64 + 1.5;
        let rh = cols[4 * nvar + l.rh(1)] as f64;
        let (tw, d, q) = isobaric_wet_bulb_deficit_humidity(85_000.0, t, rh);
        assert_eq!(v, [tw as f32, d as f32, q as f32]);
        // 300 hPa takes no bias (above 500 hPa).
        let v = bilinear(&cols, None, &l, 3, (1, 1, 0.0, 0.0), 4, 1.5);
        let t = cols[4 * nvar + l.t(4)] as f64;
        let (tw, _, _) = isobaric_wet_bulb_deficit_humidity(30_000.0, t, rh);
        assert_eq!(v[0], tw as f32);
    }

    #[test]
    fn interpolation_lies_between_the_grid_points() {
        let l = layout();
        let cols = columns(&l);
        let a = bilinear(&cols, None, &l, 3, (0, 0, 0.0, 0.0), 0, 0.0);
        let b = bilinear(&cols, None, &l, 3, (1, 0, 0.0, 0.0), 0, 0.0);
        let mid = bilinear(&cols, None, &l, 3, (0, 0, 0.5, 0.0), 0, 0.0);
        for i in 0..3 {
            assert!((mid[i] - 0.5 * (a[i] + b[i])).abs() <= 1e-6 * a[i].abs().max(1.0));
        }
        // The wet-bulb of the mean air differs from the mean wet-bulb at second order only:
        // 1 K and 9 % RH apart, under 0.01 K.
        let (tw_mid, _, _) = isobaric_wet_bulb_deficit_humidity(100_000.0, 265.5, 44.5);
        assert!((mid[0] as f64 - tw_mid).abs() < 0.01, "{} {tw_mid}", mid[0]);
    }
}
