//! Prior coverage: how much of the track-error prior's weight has data at a cell, and the rule
//! that decides where the weighted summaries and the min/max/range layers are computed.
//!
//! A scenario has no total at a cell when its shifted source point left the grid at some step
//! (or an input was missing). **Coverage** is the share of the prior's positive weight carried
//! by the scenarios that have a value there, 0–1. Where coverage is at least the minimum
//! ([`DEFAULT_MIN_COVERAGE`], `--min-coverage`, `[weights] min_coverage`) the summaries are
//! computed over the scenarios with data, their weights renormalised to add up to one; below it
//! the cell is nodata. `prior_coverage.tif` shows the share, so a renormalised cell is not
//! mistaken for a complete one.
//!
//! **Why 0.9.** With a share `m = 1 − coverage` of the weight unknown, the data bound the true
//! P90 only while `m ≤ 0.1`: the unknown scenarios could all lie above the rest, and the 90 %
//! point then sits at the `0.9 / coverage` point of the scenarios with data, which exists only
//! for coverage ≥ 0.9 (likewise P10 from below). Under 0.9 any P90 is consistent with the data.
//!
//! **What was measured on the demo** (128×104 cells of 0.15° × 0.1°, cross −100…100 km by 10,
//! along −60, 0, 60 km, Gaussian prior σ 50 km both ways). 25 % of the cells lack some
//! scenario, all of them within 11 cells (the largest shift, √(100² + 60²) km) of the grid
//! edge. Of the 2412 cells with 10 cm or more as modelled, 581 lie within 10 cells of the
//! north or west edge, where the heavy snow reaches the edge; the scenarios missing there move
//! the storm to the right of its motion (south-east), so their source points fall north-west of
//! the grid. At the edge cell itself 52–55 % of the weight is missing, 1 cell in 41–44 %,
//! 5 cells in 12 %. Share of those cells with a P90 by minimum coverage: 1.0: 74.2 %,
//! 0.9: 87.7 %, 0.8: 91.6 %, 0.7: 94.3 %, 0.5: 98.3 %, 0.45: 100 %.
//!
//! Two ways to recover the missing scenarios were measured and rejected:
//! - *count only the steps inside the grid*: the missing scenarios leave the grid at 9–16 of
//!   the 25 steps at most such cells, and those are the wet steps (the storm is near, so the
//!   shift is full): sampling the nearest edge point instead puts a median 100 % of their
//!   snowfall in the steps off the grid. A total without them is not a total; even accepting a
//!   scenario whose missing steps hold up to 20 % of that edge estimate gives 88.4 %.
//! - *renormalise over less of the prior*: applying the edge cells' missing patterns to inland
//!   cells with 10 cm or more, where every scenario is known, moves P90 by a median 0.27 cm
//!   (1 cell in 10 by 4.2 cm or more) at coverage 0.85–0.9, 0.65 cm (6.9 cm) near 0.8 and
//!   4.5 cm (14.9 cm) near 0.5, because the missing scenarios are one side of the track.
//!
//! So the summaries stop at 0.9 and the maps say where: a run whose heavy snow reaches the grid
//! edge needs a larger grid (at least the largest offset beyond the area of interest on every
//! side), not a looser rule.

use crate::accumulate::Totals;
use std::borrow::Borrow;

/// Default minimum share of the prior's weight with data for a cell to be summarised.
pub const DEFAULT_MIN_COVERAGE: f64 = 0.9;

/// Checks a minimum coverage: a number with 0 < x ≤ 1.
///
/// ```
/// use trackswing::summarise::coverage::check_min_coverage;
/// assert_eq!(check_min_coverage(0.9), Ok(0.9));
/// assert!(check_min_coverage(0.0).is_err() && check_min_coverage(1.5).is_err());
/// ```
pub fn check_min_coverage(v: f64) -> Result<f64, String> {
    if v > 0.0 && v <= 1.0 {
        Ok(v)
    } else {
        Err(format!(
            "{v}: the minimum share of the prior's weight with data must be a number above 0 and at most 1 (default {DEFAULT_MIN_COVERAGE})"
        ))
    }
}

/// Share of the positive weight carried by the pairs (value, weight) whose value is not
/// missing; `None` when no weight is positive.
///
/// ```
/// use trackswing::summarise::coverage::share;
/// assert_eq!(share(&[(1.0, 0.5), (f64::NAN, 0.25), (3.0, 0.25)]), Some(0.75));
/// ```
pub fn share(pairs: &[(f64, f64)]) -> Option<f64> {
    let (mut all, mut known) = (0.0, 0.0);
    for &(v, w) in pairs {
        if w > 0.0 {
            all += w;
            if !v.is_nan() {
                known += w;
            }
        }
    }
    // Every value known: exactly 1, whatever the rounding of the two sums.
    (all > 0.0).then(|| if known == all { 1.0 } else { known / all })
}

/// The coverage of every cell and the minimum that decides where summaries are computed.
#[derive(Clone, Debug)]
pub struct PriorCoverage {
    /// Share of the prior's weight with data, per cell (0 where no scenario has data).
    pub share: Vec<f64>,
    /// The minimum share for a cell to be summarised.
    pub min: f64,
}

/// How many cells of the map the coverage rule touches.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CoverageCounts {
    /// Cells of the map.
    pub cells: usize,
    /// Summarised from part of the prior (min ≤ coverage < 1).
    pub partial: usize,
    /// Left nodata by the rule (0 < coverage < min).
    pub short: usize,
}

impl PriorCoverage {
    /// Coverage of every cell from the scenarios' totals (a cell missing in a scenario is missing
    /// in all its totals, so snowfall stands for them all).
    pub fn of<T: Borrow<Totals>>(totals: &[T], weights: &[f64], min: f64) -> Self {
        let n = totals.first().map_or(0, |t| t.borrow().len());
        let mut pairs = Vec::with_capacity(totals.len());
        let share = (0..n)
            .map(|i| {
                pairs.clear();
                pairs.extend(
                    totals
                        .iter()
                        .zip(weights)
                        .map(|(t, w)| (t.borrow().snowfall[i] as f64, *w)),
                );
                share(&pairs).unwrap_or(0.0)
            })
            .collect();
        Self { share, min }
    }

    /// Whether cell `i` is summarised.
    pub fn summarised(&self, i: usize) -> bool {
        self.share[i] > 0.0 && self.share[i] >= self.min
    }

    /// The cells the rule touches.
    pub fn counts(&self) -> CoverageCounts {
        let mut c = CoverageCounts {
            cells: self.share.len(),
            partial: 0,
            short: 0,
        };
        for &s in &self.share {
            if s > 0.0 && s < self.min {
                c.short += 1;
            } else if s >= self.min && s < 1.0 {
                c.partial += 1;
            }
        }
        c
    }

    /// The warning for the run's list, in shares of the map's cells; `None` when every cell
    /// with data has the whole prior.
    pub fn warning(&self) -> Option<String> {
        self.warning_of("the track-error prior", "the prior's weight")
    }

    /// [`PriorCoverage::warning`] for summaries weighted by `prior`, whose weight is called
    /// `weight` (in a several-member case, the blend: member × method × track-error prior).
    pub fn warning_of(&self, prior: &str, weight: &str) -> Option<String> {
        let c = self.counts();
        if c.partial == 0 && c.short == 0 {
            return None;
        }
        let pct = |k: usize| 100.0 * k as f64 / c.cells.max(1) as f64;
        Some(format!(
            "some scenarios have no total near the grid edge (their shifted source points left the grid): {:.1} % of the map's cells ({}) are summarised from part of {prior} (weights renormalised, see prior_coverage.tif) and {:.1} % ({}) are nodata in the weighted mean, percentiles, probabilities and min/max/range because under {} of {weight} has data there (--min-coverage)",
            pct(c.partial),
            c.partial,
            pct(c.short),
            c.short,
            self.min
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coverage_counts_weight_not_scenarios() {
        // Four scenarios, weights 1/2, 1/4, 1/8, 1/8 (exact in binary); cell 0 all known,
        // cell 1 misses a 1/8 scenario (7/8), cell 2 the 1/4 one (3/4), cell 3 has none.
        let mut t: Vec<Totals> = (0..4).map(|_| Totals::new(4)).collect();
        let miss = |t: &mut Totals, i: usize| t.rows_mut(0, 4).set_missing(i);
        miss(&mut t[3], 1);
        miss(&mut t[1], 2);
        for s in &mut t {
            miss(s, 3);
        }
        let c = PriorCoverage::of(&t, &[0.5, 0.25, 0.125, 0.125], 0.8);
        assert_eq!(c.share, [1.0, 0.875, 0.75, 0.0]);
        assert!(c.summarised(0) && c.summarised(1) && !c.summarised(2) && !c.summarised(3));
        let n = c.counts();
        assert_eq!((n.cells, n.partial, n.short), (4, 1, 1));
        let w = c.warning().unwrap();
        assert!(
            w.contains("25.0 % of the map's cells (1) are summarised"),
            "{w}"
        );
        assert!(w.contains("25.0 % (1) are nodata"), "{w}");
        let whole = PriorCoverage::of(&t[..1], &[1.0], 0.9);
        assert_eq!(whole.counts().partial + whole.counts().short, 0);
        assert!(whole.warning().is_none());
    }

    #[test]
    fn minimum_is_checked() {
        for bad in [0.0, -0.1, 1.01, f64::NAN, f64::INFINITY] {
            assert!(check_min_coverage(bad).is_err(), "{bad}");
        }
        assert_eq!(check_min_coverage(1.0), Ok(1.0));
    }
}
