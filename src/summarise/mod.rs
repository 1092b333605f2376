//! Stage 5, summarise: what the scenarios say together, per cell and per town.
//!
//! Every summary here is a function of the per-scenario totals alone, so summaries of a run
//! split into shards are recomputed exactly from the merged totals. A cell some scenarios have
//! no total for is summarised over the others only where they carry enough of the prior's
//! weight ([`coverage`]); elsewhere it is missing.
//!
//! Decision products: [`weights`] (the prior over track offsets), [`coverage`] (where the
//! prior is known well enough to summarise), [`quantiles`] (weighted mean,
//! P10/P50/P90 and threshold probabilities), [`sensitivity`] (change per 50 km of offset and
//! the flip distance), [`ice`] (ice accretion) and [`bust`] (the ranked bust-prone towns).

pub mod aligned;
pub mod bust;
pub mod coverage;
pub mod ice;
pub mod lead_prior;
pub mod members;
pub mod mixture;
pub mod names;
pub mod pool;
pub mod quantiles;
pub mod scope;
pub mod sensitivity;
pub mod summary;
pub mod types;
pub mod variance;
pub mod weights;

use crate::accumulate::Totals;
use crate::engine::RunResult;
use crate::grid::Grid;

/// Per-cell spread of snowfall over the scenarios, mm of snow depth.
#[derive(Clone, Debug)]
pub struct Spread {
    /// Smallest total over the scenarios.
    pub min: Vec<f32>,
    /// Largest total over the scenarios.
    pub max: Vec<f32>,
    /// `max − min`.
    pub range: Vec<f32>,
}

/// Minimum, maximum and range of one total over the scenarios with a value, cell by cell,
/// where the coverage rule summarises the cell (missing elsewhere).
pub fn spread(per_scenario: &[&[f32]], coverage: &coverage::PriorCoverage) -> Spread {
    let n = per_scenario.first().map_or(0, |s| s.len());
    let mut min = vec![f32::INFINITY; n];
    let mut max = vec![f32::NEG_INFINITY; n];
    for s in per_scenario {
        for i in 0..n {
            // NaN compares false: a scenario without a value changes neither.
            min[i] = min[i].min(s[i]);
            max[i] = max[i].max(s[i]);
        }
    }
    for i in 0..n {
        if !coverage.summarised(i) || min[i] > max[i] {
            min[i] = f32::NAN;
            max[i] = f32::NAN;
        }
    }
    let range = min.iter().zip(&max).map(|(a, b)| b - a).collect();
    Spread { min, max, range }
}

/// One town's totals.
#[derive(Clone, Debug)]
pub struct TownSummary {
    /// Name.
    pub name: String,
    /// Latitude.
    pub lat: f64,
    /// Longitude.
    pub lon: f64,
    /// Snowfall per scenario, mm of snow depth (scenario order of the run).
    pub snowfall: Vec<f32>,
    /// Snow share of the liquid per scenario (NaN where less than measurable fell).
    pub snow_fraction: Vec<f32>,
    /// Liquid per scenario, mm.
    pub liquid: Vec<f32>,
    /// Smallest snowfall, mm.
    pub min: f32,
    /// Largest snowfall, mm.
    pub max: f32,
    /// Index of the scenario with the smallest snowfall.
    pub argmin: usize,
    /// Index of the scenario with the largest snowfall.
    pub argmax: usize,
}

impl TownSummary {
    /// `max − min`, mm.
    pub fn range(&self) -> f32 {
        self.max - self.min
    }
}

/// Value of a field at a lon/lat point by the grid's one point rule ([`Grid::bilinear_at`]:
/// bilinear from the four surrounding cell centres, wrapping on a global grid; NaN when any
/// cell of positive weight is missing or the point lies outside the grid).
pub fn value_at(grid: &Grid, field: &[f32], lon: f64, lat: f64) -> f32 {
    grid.bilinear_at(lon, lat)
        .map_or(f32::NAN, |b| b.sample(field))
}

/// Totals of every scenario of a run at every town.
pub fn towns(result: &RunResult) -> Vec<TownSummary> {
    towns_in(&result.grid, &result.towns, &result.totals)
}

/// Totals of every scenario in `totals` (a run's, or a pool's, [`pool`]) at every town.
pub fn towns_in<T: std::borrow::Borrow<Totals>>(
    grid: &Grid,
    towns: &[crate::read::Town],
    totals: &[T],
) -> Vec<TownSummary> {
    let at = |t: &crate::read::Town, f: &dyn Fn(&Totals) -> &[f32]| -> Vec<f32> {
        totals
            .iter()
            .map(|tot| value_at(grid, f(tot.borrow()), t.lon, t.lat))
            .collect()
    };
    towns
        .iter()
        .map(|t| {
            let snowfall = at(t, &|x| &x.snowfall);
            let liquid = at(t, &|x| &x.liquid);
            let snow_liquid = at(t, &|x| &x.snow_liquid);
            let snow_fraction = snow_liquid
                .iter()
                .zip(&liquid)
                .map(|(s, l)| {
                    if *l >= crate::accumulate::MEASURABLE_LIQUID {
                        s / l
                    } else {
                        f32::NAN
                    }
                })
                .collect();
            let (mut argmin, mut argmax) = (0, 0);
            for (i, v) in snowfall.iter().enumerate() {
                if *v < snowfall[argmin] {
                    argmin = i;
                }
                if *v > snowfall[argmax] {
                    argmax = i;
                }
            }
            let any_missing = snowfall.iter().any(|v| v.is_nan());
            let (min, max) = if any_missing {
                (f32::NAN, f32::NAN)
            } else {
                (snowfall[argmin], snowfall[argmax])
            };
            TownSummary {
                name: t.name.clone(),
                lat: t.lat,
                lon: t.lon,
                snowfall,
                snow_fraction,
                liquid,
                min,
                max,
                argmin,
                argmax,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spread_is_min_max_over_the_scenarios_with_data_where_covered() {
        let a = [1.0, 5.0, f32::NAN, f32::NAN];
        let b = [3.0, 2.0, 1.0, 4.0];
        let c = [2.0, 4.0, 3.0, 6.0];
        // Weights 1/4, 1/4, 1/2: cells 2 and 3 lack a quarter of the prior.
        let cov = |min: f64| coverage::PriorCoverage {
            share: vec![1.0, 1.0, 0.75, 0.75],
            min,
        };
        let s = spread(&[&a, &b, &c], &cov(0.75));
        assert_eq!(s.min, [1.0, 2.0, 1.0, 4.0]);
        assert_eq!(s.max, [3.0, 5.0, 3.0, 6.0]);
        assert_eq!(s.range, [2.0, 3.0, 2.0, 2.0]);
        let s = spread(&[&a, &b, &c], &cov(0.9));
        assert_eq!(s.range[..2], [2.0, 3.0]);
        assert!(s.min[2].is_nan() && s.max[3].is_nan() && s.range[3].is_nan());
    }
}
