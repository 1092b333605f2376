//! Stage 4, accumulate: per-scenario running totals over the time steps.
//!
//! Each scenario owns one [`Totals`]; nothing is shared between scenarios, so the totals of
//! scenarios computed in different processes (shards) are combined exactly by putting them side
//! by side, and the totals of consecutive time windows of one scenario add exactly
//! ([`Totals::add`]). A cell whose column was missing at any step is missing (NaN) for that
//! scenario: missing data never becomes zero snow.

use crate::diagnose::PtypeFractions;

/// Running totals of one scenario, one value per cell (row-major). Liquid amounts in kg m⁻²
/// (= mm of water); snowfall in mm of snow depth.
#[derive(Clone, Debug, PartialEq)]
pub struct Totals {
    /// All precipitation, liquid equivalent.
    pub liquid: Vec<f32>,
    /// Liquid equivalent that fell as snow.
    pub snow_liquid: Vec<f32>,
    /// Snow depth (liquid × snow-to-liquid ratio), mm.
    pub snowfall: Vec<f32>,
    /// Liquid equivalent that fell as ice pellets.
    pub ice_pellets: Vec<f32>,
    /// Liquid equivalent that fell as freezing rain.
    pub freezing_rain: Vec<f32>,
    /// Cell-steps whose source point fell outside the grid (their totals are missing).
    pub outside: u64,
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
            outside: 0,
        }
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
        self.outside += other.outside;
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

    /// Splits every total into blocks of `cells` consecutive cells; yields each block's first
    /// cell index and its mutable views, for the tasks of the parallel engine.
    pub fn blocks_mut(&mut self, cells: usize) -> Vec<(usize, TotalsRows<'_>)> {
        let cells = cells.max(1);
        self.liquid
            .chunks_mut(cells)
            .zip(self.snow_liquid.chunks_mut(cells))
            .zip(self.snowfall.chunks_mut(cells))
            .zip(self.ice_pellets.chunks_mut(cells))
            .zip(self.freezing_rain.chunks_mut(cells))
            .enumerate()
            .map(
                |(k, ((((liquid, snow_liquid), snowfall), ice_pellets), freezing_rain))| {
                    (
                        k * cells,
                        TotalsRows {
                            liquid,
                            snow_liquid,
                            snowfall,
                            ice_pellets,
                            freezing_rain,
                        },
                    )
                },
            )
            .collect()
    }

    /// Mutable views of rows `start..end` of every total, for one task of the parallel engine.
    pub fn rows_mut(&mut self, start: usize, end: usize) -> TotalsRows<'_> {
        TotalsRows {
            liquid: &mut self.liquid[start..end],
            snow_liquid: &mut self.snow_liquid[start..end],
            snowfall: &mut self.snowfall[start..end],
            ice_pellets: &mut self.ice_pellets[start..end],
            freezing_rain: &mut self.freezing_rain[start..end],
        }
    }
}

/// Least liquid, kg m⁻², for a type share to be defined (0.1 mm: the usual "measurable"
/// precipitation threshold, common practice).
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
}

impl TotalsRows<'_> {
    /// Adds one step's precipitation `liquid` (kg m⁻²) at cell `i` of the slice, split by type.
    #[inline]
    pub fn add(&mut self, i: usize, liquid: f32, f: &PtypeFractions, snow_ratio: f64) {
        let snow = liquid * f.snow as f32;
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
            r.add(0, 4.0, &f, 10.0);
            r.add(1, 0.05, &f, 10.0);
            r.set_missing(2);
            r.add(2, 1.0, &f, 10.0);
        }
        assert_eq!(t.snowfall[0], 20.0);
        assert_eq!(t.ice_pellets[0], 1.0);
        assert_eq!(t.snow_fraction()[0], 0.5);
        assert!(t.snow_fraction()[1].is_nan(), "below measurable: undefined");
        assert!(
            t.snowfall[2].is_nan(),
            "missing stays missing after later steps"
        );
    }

    #[test]
    fn time_windows_merge_exactly() {
        let f = PtypeFractions {
            snow: 1.0,
            ..Default::default()
        };
        let (mut a, mut b, mut whole) = (Totals::new(1), Totals::new(1), Totals::new(1));
        a.rows_mut(0, 1).add(0, 2.0, &f, 12.0);
        b.rows_mut(0, 1).add(0, 3.0, &f, 12.0);
        whole.rows_mut(0, 1).add(0, 2.0, &f, 12.0);
        whole.rows_mut(0, 1).add(0, 3.0, &f, 12.0);
        a.add(&b);
        assert_eq!(a, whole);
    }
}
