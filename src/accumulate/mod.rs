//! Stage 4, accumulate: per-scenario running totals over the time steps.
//!
//! Each scenario owns one [`Totals`]; nothing is shared between scenarios, so the totals of
//! scenarios computed in different processes (shards) are combined exactly by putting them side
//! by side, and the totals of consecutive time windows of one scenario add exactly
//! ([`Totals::add`]). A cell whose column was missing at any step is missing (NaN) for that
//! scenario: missing data never becomes zero snow.
//!
//! Besides the running sums each scenario carries two small per-cell states: the water already
//! given up to dry air below the cloud ([`Totals::carried`], see
//! [`crate::diagnose::subcloud::evaporate`]) and the step of first measurable snowfall
//! ([`Totals::onset`]). Memory is a fixed number of values per cell and scenario, whatever the
//! number of steps.

pub mod period;

use crate::diagnose::slr::{FREEZING_RAIN_ACCRETION_RATIO, ICE_PELLET_DEPTH_RATIO};
use crate::diagnose::PtypeFractions;

/// Running totals of one scenario, one value per cell (row-major). Liquid amounts in kg m⁻²
/// (= mm of water); snowfall in mm of snow depth.
#[derive(Clone, Debug, PartialEq)]
pub struct Totals {
    /// All precipitation reaching the ground, liquid equivalent.
    pub liquid: Vec<f32>,
    /// Liquid equivalent that fell as snow.
    pub snow_liquid: Vec<f32>,
    /// Snow depth (liquid × snow-to-liquid ratio), mm.
    pub snowfall: Vec<f32>,
    /// Liquid equivalent that fell as ice pellets.
    pub ice_pellets: Vec<f32>,
    /// Liquid equivalent that fell as freezing rain.
    pub freezing_rain: Vec<f32>,
    /// Water lost to dry air below the cloud so far, kg m⁻² (precipitation that left the cloud
    /// and never reached the ground); carried from step to step, it reduces each step's deficit.
    pub carried: Vec<f32>,
    /// 1-based step at which the snow reaching the ground first amounted to
    /// [`MEASURABLE_LIQUID`] in one step; 0 if it never did.
    pub onset: Vec<u32>,
    /// Cell-steps whose source point fell outside the grid (their totals are missing).
    pub outside: u64,
    /// Steps this scenario skipped because its time offset sampled beyond the model's steps.
    pub uncovered_steps: u32,
    /// Cell-steps the precipitation-type or snow-ratio method could not diagnose (input out of
    /// its domain; those cells are missing).
    pub undefined: u64,
}

impl Totals {
    /// Zero totals for `n` cells.
    pub fn new(n: usize) -> Self {
        Self {
            liquid: vec![0.0; n],
            snow_liquid: vec![0.0; n],
            snowfall: vec![0.0; n],
            ice_pellets: vec![0.0; n],
            freezing_rain: vec![0.0; n],
            carried: vec![0.0; n],
            onset: vec![0; n],
            outside: 0,
            uncovered_steps: 0,
            undefined: 0,
        }
    }

    /// The per-cell f32 arrays, in a fixed order: liquid, snow liquid, snowfall, ice pellets,
    /// freezing rain, carried water (the shard files' order).
    pub fn f32_arrays(&self) -> [&[f32]; 6] {
        [
            &self.liquid,
            &self.snow_liquid,
            &self.snowfall,
            &self.ice_pellets,
            &self.freezing_rain,
            &self.carried,
        ]
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.liquid.len()
    }

    /// True for zero cells.
    pub fn is_empty(&self) -> bool {
        self.liquid.is_empty()
    }

    /// Adds another window's totals of the same scenario (an exact merge of time shards).
    /// `other` is the later window, run on from this window's carried water (which it then
    /// holds as the running total) and with onset steps counted from the start of the run: the
    /// onset stays the earlier window's where it has one.
    pub fn add(&mut self, other: &Totals) {
        for (a, b) in [
            (&mut self.liquid, &other.liquid),
            (&mut self.snow_liquid, &other.snow_liquid),
            (&mut self.snowfall, &other.snowfall),
            (&mut self.ice_pellets, &other.ice_pellets),
            (&mut self.freezing_rain, &other.freezing_rain),
        ] {
            a.iter_mut().zip(b).for_each(|(x, y)| *x += *y);
        }
        self.carried.clone_from(&other.carried);
        for (a, b) in self.onset.iter_mut().zip(&other.onset) {
            if *a == 0 {
                *a = *b;
            }
        }
        self.outside += other.outside;
        self.uncovered_steps += other.uncovered_steps;
        self.undefined += other.undefined;
    }

    /// Snow share of the liquid at every cell (NaN where no precipitation fell, so the share is
    /// undefined rather than zero).
    pub fn snow_fraction(&self) -> Vec<f32> {
        share(&self.snow_liquid, &self.liquid)
    }

    /// Ice-pellet share of the liquid at every cell (NaN where nothing fell).
    pub fn ice_pellet_fraction(&self) -> Vec<f32> {
        share(&self.ice_pellets, &self.liquid)
    }

    /// Freezing-rain share of the liquid at every cell (NaN where nothing fell).
    pub fn freezing_rain_fraction(&self) -> Vec<f32> {
        share(&self.freezing_rain, &self.liquid)
    }

    /// Ice-pellet accumulation depth, mm: the ice-pellet liquid times
    /// [`ICE_PELLET_DEPTH_RATIO`] (2.5:1, common practice).
    pub fn ice_pellet_depth(&self) -> Vec<f32> {
        scaled(&self.ice_pellets, ICE_PELLET_DEPTH_RATIO)
    }

    /// Flat-surface ice accretion from freezing rain, mm: the freezing-rain liquid times
    /// [`FREEZING_RAIN_ACCRETION_RATIO`] (0.72, Sanders & Barjenbruch 2016).
    pub fn ice_accretion(&self) -> Vec<f32> {
        scaled(&self.freezing_rain, FREEZING_RAIN_ACCRETION_RATIO)
    }

    /// Splits every total into blocks of `cells` consecutive cells; yields each block's first
    /// cell index and its mutable views, for the tasks of the parallel engine.
    pub fn blocks_mut(&mut self, cells: usize) -> Vec<(usize, TotalsRows<'_>)> {
        let cells = cells.max(1);
        let n = self.len();
        let mut out = Vec::with_capacity(n.div_ceil(cells));
        let mut rest = self.rows_mut(0, n);
        let mut start = 0;
        while !rest.liquid.is_empty() {
            let take = cells.min(rest.liquid.len());
            let (head, tail) = rest.split_at(take);
            out.push((start, head));
            rest = tail;
            start += take;
        }
        out
    }

    /// Mutable views of rows `start..end` of every total, for one task of the parallel engine.
    pub fn rows_mut(&mut self, start: usize, end: usize) -> TotalsRows<'_> {
        TotalsRows {
            liquid: &mut self.liquid[start..end],
            snow_liquid: &mut self.snow_liquid[start..end],
            snowfall: &mut self.snowfall[start..end],
            ice_pellets: &mut self.ice_pellets[start..end],
            freezing_rain: &mut self.freezing_rain[start..end],
            carried: &mut self.carried[start..end],
            onset: &mut self.onset[start..end],
        }
    }
}

/// The onset step (1-based) of `totals` at a lon/lat point: that of the cell of largest weight
/// among the four that give the point's totals ([`crate::grid::Bilinear::nearest`]). `None`
/// when snow never amounted to [`MEASURABLE_LIQUID`] in a step there, any of the four cells of
/// positive weight is missing (as the point's totals are), or the point lies outside the grid.
/// A step is a time, so it is taken from one cell rather than interpolated.
pub fn onset_at(totals: &Totals, grid: &crate::grid::Grid, lon: f64, lat: f64) -> Option<u32> {
    let b = grid.bilinear_at(lon, lat)?;
    if b.weighted().any(|(i, _)| totals.liquid[i].is_nan()) {
        return None;
    }
    let i = b.nearest();
    (totals.onset[i] > 0).then_some(totals.onset[i])
}

/// Least liquid, kg m⁻², for a type share to be defined and for snow to count as having begun
/// (0.1 mm: the usual "measurable" precipitation threshold, common practice).
pub const MEASURABLE_LIQUID: f32 = 0.1;

fn share(part: &[f32], whole: &[f32]) -> Vec<f32> {
    part.iter()
        .zip(whole)
        .map(|(p, w)| {
            if *w >= MEASURABLE_LIQUID {
                p / w
            } else {
                f32::NAN
            }
        })
        .collect()
}

fn scaled(v: &[f32], factor: f64) -> Vec<f32> {
    v.iter().map(|x| (*x as f64 * factor) as f32).collect()
}

/// A slice of cells of one scenario's totals.
pub struct TotalsRows<'a> {
    /// See [`Totals::liquid`].
    pub liquid: &'a mut [f32],
    /// See [`Totals::snow_liquid`].
    pub snow_liquid: &'a mut [f32],
    /// See [`Totals::snowfall`].
    pub snowfall: &'a mut [f32],
    /// See [`Totals::ice_pellets`].
    pub ice_pellets: &'a mut [f32],
    /// See [`Totals::freezing_rain`].
    pub freezing_rain: &'a mut [f32],
    /// See [`Totals::carried`].
    pub carried: &'a mut [f32],
    /// See [`Totals::onset`].
    pub onset: &'a mut [u32],
}

impl<'a> TotalsRows<'a> {
    /// Splits into the first `k` cells and the rest.
    fn split_at(self, k: usize) -> (TotalsRows<'a>, TotalsRows<'a>) {
        let (l0, l1) = self.liquid.split_at_mut(k);
        let (s0, s1) = self.snow_liquid.split_at_mut(k);
        let (f0, f1) = self.snowfall.split_at_mut(k);
        let (i0, i1) = self.ice_pellets.split_at_mut(k);
        let (z0, z1) = self.freezing_rain.split_at_mut(k);
        let (c0, c1) = self.carried.split_at_mut(k);
        let (o0, o1) = self.onset.split_at_mut(k);
        (
            TotalsRows {
                liquid: l0,
                snow_liquid: s0,
                snowfall: f0,
                ice_pellets: i0,
                freezing_rain: z0,
                carried: c0,
                onset: o0,
            },
            TotalsRows {
                liquid: l1,
                snow_liquid: s1,
                snowfall: f1,
                ice_pellets: i1,
                freezing_rain: z1,
                carried: c1,
                onset: o1,
            },
        )
    }

    /// Adds one step's precipitation `liquid` (kg m⁻², what reaches the ground) at cell `i` of
    /// the slice, split by type. `step` (1-based) becomes the cell's onset when this is the
    /// first step whose snow amounts to [`MEASURABLE_LIQUID`].
    #[inline]
    pub fn add(&mut self, i: usize, liquid: f32, f: &PtypeFractions, snow_ratio: f64, step: u32) {
        let snow = liquid * f.snow as f32;
        if self.onset[i] == 0 && snow >= MEASURABLE_LIQUID {
            self.onset[i] = step;
        }
        self.liquid[i] += liquid;
        self.snow_liquid[i] += snow;
        self.snowfall[i] += snow * snow_ratio as f32;
        self.ice_pellets[i] += liquid * f.ice_pellets as f32;
        self.freezing_rain[i] += liquid * f.freezing_rain as f32;
    }

    /// Marks cell `i` missing for the whole run.
    #[inline]
    pub fn set_missing(&mut self, i: usize) {
        self.liquid[i] = f32::NAN;
        self.snow_liquid[i] = f32::NAN;
        self.snowfall[i] = f32::NAN;
        self.ice_pellets[i] = f32::NAN;
        self.freezing_rain[i] = f32::NAN;
        self.carried[i] = f32::NAN;
        self.onset[i] = 0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn split_by_type_and_shares() {
        let mut t = Totals::new(3);
        let f = PtypeFractions {
            snow: 0.5,
            ice_pellets: 0.25,
            freezing_rain: 0.25,
            rain: 0.0,
        };
        {
            let mut r = t.rows_mut(0, 3);
            r.add(0, 4.0, &f, 10.0, 1);
            r.add(1, 0.05, &f, 10.0, 1);
            r.set_missing(2);
            r.add(2, 1.0, &f, 10.0, 2);
        }
        assert_eq!(t.snowfall[0], 20.0);
        assert_eq!(t.ice_pellets[0], 1.0);
        assert_eq!(t.snow_fraction()[0], 0.5);
        assert!(t.snow_fraction()[1].is_nan(), "below measurable: undefined");
        assert!(
            t.snowfall[2].is_nan(),
            "missing stays missing after later steps"
        );
        assert_eq!(t.onset[..2], [1, 0], "0.025 mm of snow is not measurable");
        // Common practice: ice pellets lie 2–3 times their liquid deep; Sanders & Barjenbruch
        // (2016): flat ice accretion ≈ 0.72 × freezing-rain liquid.
        assert_eq!(t.ice_pellet_depth()[0], 2.5);
        assert!((t.ice_accretion()[0] - 0.72).abs() < 1e-6);
    }

    #[test]
    fn a_larger_ratio_never_gives_less_snowfall() {
        // Snow depth is liquid × ratio (the definition of the snow-to-liquid ratio): over
        // ratios 1…40 and snow shares 0…1, a larger ratio never gives less snow.
        for k in 0..=20 {
            let f = PtypeFractions {
                snow: k as f64 / 20.0,
                rain: 1.0 - k as f64 / 20.0,
                ..Default::default()
            };
            let mut prev = -1.0f32;
            for r in 1..=40 {
                let mut t = Totals::new(1);
                t.rows_mut(0, 1).add(0, 3.7, &f, r as f64, 1);
                assert!(
                    t.snowfall[0] >= prev,
                    "ratio {r}: {} < {prev}",
                    t.snowfall[0]
                );
                prev = t.snowfall[0];
            }
        }
    }

    #[test]
    fn blocks_cover_every_cell_once() {
        let mut t = Totals::new(10);
        let blocks = t.blocks_mut(4);
        let spans: Vec<(usize, usize)> = blocks.iter().map(|(s, r)| (*s, r.liquid.len())).collect();
        assert_eq!(spans, vec![(0, 4), (4, 4), (8, 2)]);
    }

    #[test]
    fn time_windows_merge_exactly() {
        let f = PtypeFractions {
            snow: 1.0,
            ..Default::default()
        };
        let (mut a, mut b, mut whole) = (Totals::new(1), Totals::new(1), Totals::new(1));
        a.rows_mut(0, 1).add(0, 2.0, &f, 12.0, 1);
        b.rows_mut(0, 1).add(0, 3.0, &f, 12.0, 2);
        whole.rows_mut(0, 1).add(0, 2.0, &f, 12.0, 1);
        whole.rows_mut(0, 1).add(0, 3.0, &f, 12.0, 2);
        a.add(&b);
        assert_eq!(a, whole);
    }
}
