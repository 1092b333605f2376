//! Stage 5, summarise: what the scenarios say together, per cell and per town.
//!
//! Every summary here is a function of the per-scenario totals alone, so summaries of a run
//! split into shards are recomputed exactly from the merged totals. A cell or town missing in
//! any scenario is missing in the summary: a range over incomplete scenarios would understate
//! the spread.
//!
//! Decision products: [`weights`] (the prior over track offsets), [`quantiles`] (weighted mean,
//! P10/P50/P90 and threshold probabilities), [`sensitivity`] (change per 50 km of offset and
//! the flip distance), [`ice`] (ice accretion) and [`bust`] (the ranked bust-prone towns).

pub mod bust;
pub mod ice;
pub mod quantiles;
pub mod sensitivity;
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

/// Minimum, maximum and range of one total over all scenarios, cell by cell.
pub fn spread(per_scenario: &[&[f32]]) -> Spread {
    let n = per_scenario.first().map_or(0, |s| s.len());
    let mut min = vec![f32::INFINITY; n];
    let mut max = vec![f32::NEG_INFINITY; n];
    for s in per_scenario {
        for i in 0..n {
            let v = s[i];
            if v.is_nan() || min[i].is_nan() {
                min[i] = f32::NAN;
                max[i] = f32::NAN;
            } else {
                min[i] = min[i].min(v);
                max[i] = max[i].max(v);
            }
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

/// Bilinear value of a field at a lon/lat point (NaN when any contributing cell is missing or
/// the point lies outside the grid).
pub fn value_at(grid: &Grid, field: &[f32], lon: f64, lat: f64) -> f32 {
    let Some((c, r)) = grid.index_of(lon, lat) else {
        return f32::NAN;
    };
    let mut out = [0.0f32];
    if crate::shift::sample_bilinear(field, 1, grid, c as f32, r as f32, &mut out) {
        out[0]
    } else {
        f32::NAN
    }
}

/// Totals of every scenario at every town.
pub fn towns(result: &RunResult) -> Vec<TownSummary> {
    let at = |t: &crate::read::Town, f: &dyn Fn(&Totals) -> &[f32]| -> Vec<f32> {
        result
            .totals
            .iter()
            .map(|tot| value_at(&result.grid, f(tot), t.lon, t.lat))
            .collect()
    };
    result
        .towns
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
    fn spread_is_min_max_and_missing_wins() {
        let a = [1.0, 5.0, f32::NAN];
        let b = [3.0, 2.0, 1.0];
        let s = spread(&[&a, &b]);
        assert_eq!(s.min[..2], [1.0, 2.0]);
        assert_eq!(s.max[..2], [3.0, 5.0]);
        assert_eq!(s.range[..2], [2.0, 3.0]);
        assert!(s.min[2].is_nan() && s.range[2].is_nan());
    }
}
