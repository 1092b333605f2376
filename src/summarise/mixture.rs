//! The blend of several groups' distributions (members × method combinations) as a mixture.
//!
//! Each group (one member with one method combination) has its own weighted distribution over
//! the offsets, with the percentiles of [`super::quantiles`] (mid-step positions, linear
//! between them). The blend is the mixture `F(x) = Σ_g W_g·F_g(x)` of the groups' cumulative
//! distributions, `F_g` the inverse of group g's quantile function, and `W_g` the group's weight
//! times the share of its prior's weight with data at the place, renormalised over the groups
//! (the pooled coverage rule, [`super::coverage`]). Its q-quantile is the smallest x with
//! `F(x) ≥ q`; F is linear between the groups' values, so the inverse is exact.
//!
//! Why a mixture rather than one pooled sample: a sample quantile that interpolates between
//! neighbouring values depends on how many scenarios hold each value (Hyndman & Fan 1996), so
//! pooling two identical members as one sample of twice the size would move P10 and P90 even
//! though the distribution is the same. The mixture of identical groups is the group itself,
//! bit for bit: F = ½F₁ + ½F₁ = F₁ exactly in floating point. The mean and the probability of
//! reaching a threshold are the groups' weighted means (for them pooling and mixing agree).

use super::coverage::share;
use super::quantiles::QUANTILES;
use super::quantiles::{exceedance, fill_layers, prepare, summary, DistributionLayers, Summary};
use crate::accumulate::Totals;

/// One group's prepared distribution at one place.
struct Part {
    /// Weight in the blend (the parts' weights add up to 1).
    weight: f64,
    /// Sorted values.
    values: Vec<f64>,
    /// Mid-step position of each value (as in [`super::quantiles::weighted_quantile`]).
    positions: Vec<f64>,
    /// The group's own mean and quantiles.
    summary: Summary,
    /// The group's sorted (value, weight) pairs.
    pairs: Vec<(f64, f64)>,
}

/// The blend at one place: `groups[g]` holds group g's (value, prior weight) pairs and
/// `group_weights[g]` its weight; `None` where the scenarios with a value carry less than
/// `min_coverage` of the blended weight.
pub struct Mixture {
    parts: Vec<Part>,
}

impl Mixture {
    /// Prepares the groups' pairs (they are sorted in place and those without a value or
    /// weight dropped).
    pub fn new(
        groups: &mut [Vec<(f64, f64)>],
        group_weights: &[f64],
        min_coverage: f64,
    ) -> Option<Self> {
        // The pooled coverage, summed in the pool's order with the pool's weights.
        let pooled: Vec<(f64, f64)> = groups
            .iter()
            .zip(group_weights)
            .flat_map(|(pairs, gw)| pairs.iter().map(move |(v, w)| (*v, gw * w)))
            .collect();
        let coverage = share(&pooled)?;
        if coverage < min_coverage || coverage == 0.0 {
            return None;
        }
        let mut parts = Vec::with_capacity(groups.len());
        for (pairs, gw) in groups.iter_mut().zip(group_weights) {
            let Some(c) = prepare(pairs, 0.0) else {
                continue;
            };
            let total: f64 = pairs.iter().map(|p| p.1).sum();
            let mut cum = 0.0;
            let positions = pairs
                .iter()
                .map(|&(_, w)| {
                    let p = (cum + w / 2.0) / total;
                    cum += w;
                    p
                })
                .collect();
            parts.push(Part {
                weight: gw * c,
                values: pairs.iter().map(|p| p.0).collect(),
                positions,
                summary: summary(pairs),
                pairs: std::mem::take(pairs),
            });
        }
        let sum: f64 = parts.iter().map(|p| p.weight).sum();
        for p in &mut parts {
            p.weight /= sum;
        }
        Some(Self { parts })
    }

    /// The blend's mean and P10/P50/P90.
    pub fn summary(&self) -> Summary {
        Summary {
            mean: self.parts.iter().map(|p| p.weight * p.summary.mean).sum(),
            quantiles: QUANTILES.map(|q| self.quantile(q)),
        }
    }

    /// `P(X ≥ threshold)` under the blend.
    pub fn exceedance(&self, threshold: f64) -> f64 {
        let p: f64 = self
            .parts
            .iter()
            .map(|p| p.weight * exceedance(&p.pairs, threshold))
            .sum();
        p.clamp(0.0, 1.0)
    }

    /// The blend's cumulative distribution at x: (limit from the left, value).
    fn cdf(&self, x: f64) -> (f64, f64) {
        let (mut left, mut at) = (0.0, 0.0);
        for p in &self.parts {
            let (l, a) = part_cdf(p, x);
            left += p.weight * l;
            at += p.weight * a;
        }
        (left, at)
    }

    /// The smallest x with `F(x) ≥ q`, linear between the groups' values.
    pub fn quantile(&self, q: f64) -> f64 {
        let mut xs: Vec<f64> = self
            .parts
            .iter()
            .flat_map(|p| p.values.iter().copied())
            .collect();
        xs.sort_by(f64::total_cmp);
        xs.dedup();
        let Some(&last) = xs.last() else {
            return f64::NAN;
        };
        // F is non-decreasing: the first breakpoint where it reaches q.
        let j = xs.partition_point(|&x| self.cdf(x).1 < q);
        if j == xs.len() {
            // Rounding left the total a hair under q.
            return last;
        }
        let (left, _) = self.cdf(xs[j]);
        if j == 0 || left < q {
            return xs[j];
        }
        let (x0, x1) = (xs[j - 1], xs[j]);
        let f0 = self.cdf(x0).1;
        x0 + (q - f0) / (left - f0) * (x1 - x0)
    }
}

/// The blended distribution of `value(totals, cell)` at every cell: `totals` holds every
/// group's scenarios, group-major, `prior` the prior's weight of each offset (the same in every
/// group) and `group_weights` each group's weight.
pub fn blended_distribution(
    totals: &[&Totals],
    prior: &[f64],
    group_weights: &[f64],
    value: impl Fn(&Totals, usize) -> f32 + Sync,
    thresholds: &[f64],
    min_coverage: f64,
) -> DistributionLayers {
    let n = totals.first().map_or(0, |t| t.len());
    let per_group = prior.len();
    fill_layers(
        n,
        thresholds.len(),
        |i, groups: &mut Vec<Vec<(f64, f64)>>, cell| {
            groups.resize(group_weights.len(), Vec::new());
            for (g, pairs) in groups.iter_mut().enumerate() {
                pairs.clear();
                pairs.extend(
                    totals[g * per_group..(g + 1) * per_group]
                        .iter()
                        .zip(prior)
                        .map(|(t, w)| (value(t, i) as f64, *w)),
                );
            }
            let Some(m) = Mixture::new(groups, group_weights, min_coverage) else {
                return;
            };
            let s = m.summary();
            cell[0] = s.mean as f32;
            for (v, q) in cell[1..4].iter_mut().zip(s.quantiles) {
                *v = q as f32;
            }
            for (v, t) in cell[4..].iter_mut().zip(thresholds) {
                *v = m.exceedance(*t) as f32;
            }
        },
    )
}

/// One group's cumulative distribution at x, the inverse of its quantile function (flat at
/// its smallest value below the first position and at its largest above the last, linear
/// between the positions): (limit from the left, value).
fn part_cdf(p: &Part, x: f64) -> (f64, f64) {
    let (v, pos) = (&p.values, &p.positions);
    let n = v.len();
    let lo = v.partition_point(|a| *a < x);
    let hi = v.partition_point(|a| *a <= x);
    if hi > lo {
        // x is one of the values (maybe several tied): a jump from its first position to its
        // last (from 0 at the smallest value, to 1 at the largest).
        let left = if lo == 0 { 0.0 } else { pos[lo] };
        let at = if hi == n { 1.0 } else { pos[hi - 1] };
        return (left, at);
    }
    let f = if lo == 0 {
        0.0
    } else if lo == n {
        1.0
    } else {
        pos[lo - 1] + (x - v[lo - 1]) / (v[lo] - v[lo - 1]) * (pos[lo] - pos[lo - 1])
    };
    (f, f)
}

#[cfg(test)]
mod tests {
    use super::super::quantiles::weighted_quantile;
    use super::*;
    use proptest::prelude::*;

    fn mixture(groups: &[(f64, Vec<(f64, f64)>)]) -> Mixture {
        let mut g: Vec<Vec<(f64, f64)>> = groups.iter().map(|x| x.1.clone()).collect();
        let w: Vec<f64> = groups.iter().map(|x| x.0).collect();
        Mixture::new(&mut g, &w, 0.9).unwrap()
    }

    proptest! {
        /// Two identical groups are the group itself, bit for bit (a mixture of one
        /// distribution with itself is that distribution).
        #[test]
        fn identical_groups_are_the_group_itself(
            v in prop::collection::vec((0.0f64..500.0, 0.01f64..1.0), 1..30),
            q in 0.0f64..1.0,
        ) {
            let mut one = v.clone();
            prepare(&mut one, 1.0).unwrap();
            let m = mixture(&[(0.5, v.clone()), (0.5, v.clone())]);
            prop_assert_eq!(m.quantile(q), weighted_quantile(&one, q));
            prop_assert_eq!(m.summary().mean, summary(&one).mean);
            prop_assert_eq!(m.exceedance(100.0), exceedance(&one, 100.0));
        }

        /// The blend's quantiles are ordered and bounded by the groups' values.
        #[test]
        fn quantiles_are_ordered_and_within_the_values(
            a in prop::collection::vec((0.0f64..500.0, 0.01f64..1.0), 1..20),
            b in prop::collection::vec((0.0f64..500.0, 0.01f64..1.0), 1..20),
            w in 0.05f64..0.95,
        ) {
            let m = mixture(&[(w, a.clone()), (1.0 - w, b.clone())]);
            let s = m.summary();
            let lo = a.iter().chain(&b).map(|p| p.0).fold(f64::INFINITY, f64::min);
            let hi = a.iter().chain(&b).map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
            prop_assert!(lo <= s.quantiles[0] && s.quantiles[0] <= s.quantiles[1]);
            prop_assert!(s.quantiles[1] <= s.quantiles[2] && s.quantiles[2] <= hi);
        }
    }

    /// Worked by hand: group A (weight ¾) is 0 and 10 with equal weight, positions ¼ and ¾;
    /// group B (¼) is 20 alone, position ½ (a jump from 0 to 1 at 20).
    /// F(0) = ¾·¼ = 0.1875; F(10) = ¾·1 = 0.75 (A is 1 at its largest value); F(20) = 1.
    /// Between 0 and 10, F rises linearly from ¾·¼ to ¾·¾ = 0.5625 just below 10 (A's own
    /// line from (¼, 0) to (¾, 10)), then jumps to 0.75 at 10.
    /// P10 = 0 (F(0) ≥ 0.1); P50: 0 + (0.5 − 0.1875)/(0.5625 − 0.1875)·10 = 8.333…;
    /// P90: F(10) = 0.75 < 0.9, and just below 20 F is still 0.75 (B jumps at 20): P90 = 20.
    /// Mean = ¾·5 + ¼·20 = 8.75; P(X ≥ 10) = ¾·½ + ¼ = 0.625.
    #[test]
    fn two_groups_match_the_hand_computation() {
        let m = mixture(&[
            (0.75, vec![(0.0, 0.5), (10.0, 0.5)]),
            (0.25, vec![(20.0, 1.0)]),
        ]);
        let s = m.summary();
        assert_eq!(s.quantiles[0], 0.0);
        assert!(
            (s.quantiles[1] - 25.0 / 3.0).abs() < 1e-12,
            "{}",
            s.quantiles[1]
        );
        assert_eq!(s.quantiles[2], 20.0);
        assert!((s.mean - 8.75).abs() < 1e-12);
        assert!((m.exceedance(10.0) - 0.625).abs() < 1e-12);
    }

    #[test]
    fn a_group_without_data_is_left_out_when_the_rest_carry_enough() {
        let mut g = vec![vec![(5.0, 1.0)], vec![(f64::NAN, 1.0)]];
        // Half the blended weight has no value: under 0.9, missing; at 0.5, the other group.
        assert!(Mixture::new(&mut g.clone(), &[0.5, 0.5], 0.9).is_none());
        let m = Mixture::new(&mut g, &[0.5, 0.5], 0.5).unwrap();
        assert_eq!(m.summary().quantiles, [5.0; 3]);
        assert_eq!(m.summary().mean, 5.0);
    }
}
