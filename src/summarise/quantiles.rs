//! Weighted distribution of a total over the scenarios: mean, quantiles and the probability of
//! reaching a threshold, per cell and per town.
//!
//! **Weighted quantile.** Sort the scenario values `v₁ ≤ … ≤ vₙ` with their normalised weights
//! `wᵢ` (scenarios of weight 0 are left out). Each value sits at the middle of its step of the
//! weighted empirical CDF, `pᵢ = Σⱼ₍ⱼ₌₁…ᵢ₎ wⱼ − wᵢ/2`. The q-quantile is `v₁` for `q ≤ p₁`, `vₙ`
//! for `q ≥ pₙ`, and between them the straight line through `(pᵢ, vᵢ)` and `(pᵢ₊₁, vᵢ₊₁)`. With
//! equal weights `pᵢ = (i − ½)/n`, which is definition 5 of Hyndman & Fan (1996), *Sample
//! quantiles in statistical packages*, The American Statistician 50(4), 361–365 (numpy's
//! `method="hazen"`). The quantiles are monotone in q, so P10 ≤ P50 ≤ P90 always.
//!
//! **Probability of reaching a threshold** `t`: `P(X ≥ t) = Σ wᵢ·[vᵢ ≥ t]`, the weight of the
//! scenarios at or above it. It lies in [0, 1] and never increases with `t`.
//!
//! Scenarios without a value (NaN: their source point left the grid) are left out and the
//! others' weights renormalised, where they carry at least the minimum share of the prior's
//! weight ([`super::coverage`]: under it a percentile is not bounded by the data); below it the
//! summary is missing.

use crate::accumulate::Totals;
use rayon::prelude::*;
use std::borrow::Borrow;

/// Quantiles every summary reports.
pub const QUANTILES: [f64; 3] = [0.1, 0.5, 0.9];

/// Summary of one weighted sample.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Summary {
    /// Weighted mean.
    pub mean: f64,
    /// P10, P50, P90.
    pub quantiles: [f64; 3],
}

/// Keeps the (value, weight) pairs of positive weight that have a value, sorted by value, when
/// they carry at least `min_coverage` of the positive weight ([`super::coverage::share`]);
/// returns that share, or `None` when less is known or no weight is positive.
pub fn prepare(pairs: &mut Vec<(f64, f64)>, min_coverage: f64) -> Option<f64> {
    let coverage = super::coverage::share(pairs)?;
    if coverage < min_coverage || coverage == 0.0 {
        return None;
    }
    pairs.retain(|(v, w)| *w > 0.0 && !v.is_nan());
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    Some(coverage)
}

/// The q-quantile of sorted, positively weighted pairs (see the module notes).
///
/// ```
/// use trackswing::summarise::quantiles::weighted_quantile;
/// // Hyndman & Fan (1996) definition 5 on 1, 2, 3, 4: the 30 % point is 1.7.
/// let s = [(1.0, 0.25), (2.0, 0.25), (3.0, 0.25), (4.0, 0.25)];
/// assert!((weighted_quantile(&s, 0.3) - 1.7).abs() < 1e-12);
/// ```
pub fn weighted_quantile(sorted: &[(f64, f64)], q: f64) -> f64 {
    let total: f64 = sorted.iter().map(|p| p.1).sum();
    let mut cum = 0.0;
    let mut prev: Option<(f64, f64)> = None;
    for &(v, w) in sorted {
        let p = (cum + w / 2.0) / total;
        cum += w;
        if q <= p {
            return match prev {
                None => v,
                Some((pp, pv)) => pv + (q - pp) / (p - pp) * (v - pv),
            };
        }
        prev = Some((p, v));
    }
    sorted.last().map_or(f64::NAN, |p| p.0)
}

/// `P(X ≥ threshold)`: the share of the weight at or above the threshold.
pub fn exceedance(sorted: &[(f64, f64)], threshold: f64) -> f64 {
    let total: f64 = sorted.iter().map(|p| p.1).sum();
    // A fold from +0, not `sum` (whose empty sum is −0, which prints as "-0").
    let above = sorted
        .iter()
        .filter(|p| p.0 >= threshold)
        .fold(0.0, |a, p| a + p.1);
    (above / total).clamp(0.0, 1.0)
}

/// Mean and quantiles of sorted, positively weighted pairs.
pub fn summary(sorted: &[(f64, f64)]) -> Summary {
    let total: f64 = sorted.iter().map(|p| p.1).sum();
    let mean = sorted.iter().map(|p| p.0 * p.1).sum::<f64>() / total;
    Summary {
        mean,
        quantiles: QUANTILES.map(|q| weighted_quantile(sorted, q)),
    }
}

/// Per-cell weighted distribution of one total, in the total's units (mm).
#[derive(Clone, Debug)]
pub struct DistributionLayers {
    /// Weighted mean.
    pub mean: Vec<f32>,
    /// P10, P50, P90.
    pub quantiles: [Vec<f32>; 3],
    /// `P(X ≥ tₖ)` for every threshold, one layer each.
    pub exceedance: Vec<Vec<f32>>,
}

/// The weighted distribution of `value(totals, cell)` over the scenarios with a value, for
/// every cell where they carry at least `min_coverage` of the weight ([`prepare`]).
/// `thresholds` are in the same units as `value` (mm). Memory: the outputs plus one cell's
/// values at a time; the totals are read in place.
pub fn distribution<T: Borrow<Totals> + Sync>(
    totals: &[T],
    weights: &[f64],
    value: impl Fn(&Totals, usize) -> f32 + Sync,
    thresholds: &[f64],
    min_coverage: f64,
) -> DistributionLayers {
    let n = totals.first().map_or(0, |t| t.borrow().len());
    fill_layers(
        n,
        thresholds.len(),
        |i, pairs: &mut Vec<(f64, f64)>, cell| {
            pairs.clear();
            pairs.extend(
                totals
                    .iter()
                    .zip(weights)
                    .map(|(t, w)| (value(t.borrow(), i) as f64, *w)),
            );
            if prepare(pairs, min_coverage).is_none() {
                return;
            }
            let s = summary(pairs);
            cell[0] = s.mean as f32;
            for (v, q) in cell[1..4].iter_mut().zip(s.quantiles) {
                *v = q as f32;
            }
            for (v, t) in cell[4..].iter_mut().zip(thresholds) {
                *v = exceedance(pairs, *t) as f32;
            }
        },
    )
}

/// The layers of `n` cells with `thresholds` exceedance layers: `cell(i, scratch, out)` writes
/// cell i's mean, P10/P50/P90 and exceedances into `out` (left NaN where missing). Cells run
/// in parallel blocks, each with its own `scratch`; each cell's values depend on that cell
/// only, so any thread count gives the same bits.
pub fn fill_layers<S: Default>(
    n: usize,
    thresholds: usize,
    cell: impl Fn(usize, &mut S, &mut [f32]) + Sync,
) -> DistributionLayers {
    let width = 4 + thresholds;
    const BLOCK: usize = 4096;
    let mut flat = vec![f32::NAN; n * width];
    flat.par_chunks_mut(BLOCK * width)
        .enumerate()
        .for_each(|(b, chunk)| {
            let mut scratch = S::default();
            for (j, out) in chunk.chunks_exact_mut(width).enumerate() {
                cell(b * BLOCK + j, &mut scratch, out);
            }
        });
    let layer = |k: usize| -> Vec<f32> { flat.iter().skip(k).step_by(width).copied().collect() };
    DistributionLayers {
        mean: layer(0),
        quantiles: [layer(1), layer(2), layer(3)],
        exceedance: (0..thresholds).map(|t| layer(4 + t)).collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Three scenarios, totals 40, 10, 20 mm with weights 0.1, 0.6, 0.3, worked by hand:
    /// sorted 10 (0.6), 20 (0.3), 40 (0.1); mid-step positions p = 0.3, 0.75, 0.95.
    /// mean = 0.6·10 + 0.3·20 + 0.1·40 = 16;
    /// P10 = 10 (0.1 < p₁); P50 = 10 + (0.5 − 0.3)/(0.75 − 0.3)·10 = 14.444…;
    /// P90 = 20 + (0.9 − 0.75)/(0.95 − 0.75)·20 = 35;
    /// P(≥5) = 1, P(≥15) = 0.4, P(≥25) = 0.1, P(≥40) = 0.1, P(≥50) = 0.
    #[test]
    fn three_scenarios_match_the_hand_computation() {
        let mut t: Vec<Totals> = (0..3).map(|_| Totals::new(2)).collect();
        for (k, v) in [40.0, 10.0, 20.0].iter().enumerate() {
            t[k].snowfall = vec![*v, f32::NAN];
        }
        t[1].snowfall[1] = 5.0;
        let w = [0.1, 0.6, 0.3];
        let th = [5.0, 15.0, 25.0, 40.0, 50.0];
        let d = distribution(&t, &w, |x, i| x.snowfall[i], &th, 1.0);
        assert!((d.mean[0] - 16.0).abs() < 1e-5);
        assert_eq!(d.quantiles[0][0], 10.0);
        assert!((d.quantiles[1][0] - 14.444_445).abs() < 1e-4);
        assert!((d.quantiles[2][0] - 35.0).abs() < 1e-5);
        let want = [1.0, 0.4, 0.1, 0.1, 0.0];
        for (layer, p) in d.exceedance.iter().zip(want) {
            assert!((layer[0] - p).abs() < 1e-6, "{} vs {p}", layer[0]);
        }
        assert!(d.mean[1].is_nan() && d.quantiles[1][1].is_nan() && d.exceedance[0][1].is_nan());
        assert!(d.exceedance[4][0].is_sign_positive(), "no negative zero");
    }

    #[test]
    fn equal_weights_are_hyndman_fan_definition_5() {
        // Definition 5 (Hyndman & Fan 1996): h = n·q + ½, Q = x⌊h⌋ + (h − ⌊h⌋)(x⌊h⌋₊₁ − x⌊h⌋),
        // clamped to the sample. On 3, 1, 4, 1, 5 (sorted 1, 1, 3, 4, 5):
        // q = 0.5 → h = 3 → 3; q = 0.3 → h = 2 → 1; q = 0.7 → h = 4 → 4;
        // q = 0.65 → h = 3.75 → 3.75; q = 0.05 → h = 0.75 → 1; q = 0.95 → 5.
        let mut p: Vec<(f64, f64)> = [3.0, 1.0, 4.0, 1.0, 5.0]
            .iter()
            .map(|v| (*v, 0.2))
            .collect();
        prepare(&mut p, 1.0).unwrap();
        for (q, want) in [
            (0.5, 3.0),
            (0.3, 1.0),
            (0.7, 4.0),
            (0.65, 3.75),
            (0.05, 1.0),
            (0.95, 5.0),
        ] {
            assert!((weighted_quantile(&p, q) - want).abs() < 1e-12, "q {q}");
        }
    }

    #[test]
    fn zero_weights_are_ignored_even_when_missing() {
        let mut p = vec![(f64::NAN, 0.0), (2.0, 0.5), (4.0, 0.5)];
        assert_eq!(prepare(&mut p, 1.0), Some(1.0));
        assert_eq!(summary(&p).mean, 3.0);
        let mut p = vec![(f64::NAN, 0.25), (2.0, 0.75)];
        assert!(prepare(&mut p, 0.9).is_none());
    }

    /// Renormalising: with a quarter of the weight missing and the rule at 0.75, the summary is
    /// that of the rest with their weights scaled to add up to one. Values 10, 20, 40 with
    /// weights 0.25, 0.25, 0.25 (and a missing 0.25) are the equal-weight sample 10, 20, 40:
    /// mean 70/3, P50 = 20 (Hyndman & Fan 1996 definition 5: h = 3·0.5 + ½ = 2),
    /// P(≥ 20) = 2/3.
    #[test]
    fn missing_scenarios_are_left_out_and_the_rest_renormalised() {
        let mut p = vec![(40.0, 0.25), (f64::NAN, 0.25), (10.0, 0.25), (20.0, 0.25)];
        assert_eq!(prepare(&mut p, 0.75), Some(0.75));
        let s = summary(&p);
        assert!((s.mean - 70.0 / 3.0).abs() < 1e-12);
        assert!((s.quantiles[1] - 20.0).abs() < 1e-12);
        assert!((exceedance(&p, 20.0) - 2.0 / 3.0).abs() < 1e-12);
        let mut t: Vec<Totals> = (0..4).map(|_| Totals::new(1)).collect();
        for (k, v) in [40.0, f32::NAN, 10.0, 20.0].iter().enumerate() {
            t[k].snowfall = vec![*v];
        }
        let w = [0.25; 4];
        let d = distribution(&t, &w, |x, i| x.snowfall[i], &[20.0], 0.75);
        assert!((d.quantiles[1][0] - 20.0).abs() < 1e-6);
        assert!((d.exceedance[0][0] - 2.0 / 3.0).abs() < 1e-6);
        let d = distribution(&t, &w, |x, i| x.snowfall[i], &[20.0], 0.8);
        assert!(d.mean[0].is_nan() && d.quantiles[2][0].is_nan());
    }

    proptest! {
        #[test]
        fn quantiles_ordered_and_probabilities_monotone(
            v in prop::collection::vec((0.0f64..500.0, 0.0f64..1.0), 1..40),
            t in prop::collection::vec(0.0f64..600.0, 1..8),
        ) {
            let mut p = v.clone();
            prop_assume!(p.iter().any(|x| x.1 > 0.0));
            prepare(&mut p, 1.0).unwrap();
            let s = summary(&p);
            prop_assert!(s.quantiles[0] <= s.quantiles[1] + 1e-9);
            prop_assert!(s.quantiles[1] <= s.quantiles[2] + 1e-9);
            prop_assert!(s.quantiles[0] >= p[0].0 - 1e-9);
            prop_assert!(s.quantiles[2] <= p[p.len() - 1].0 + 1e-9);
            let mut th = t.clone();
            th.sort_by(f64::total_cmp);
            let probs: Vec<f64> = th.iter().map(|x| exceedance(&p, *x)).collect();
            for w in probs.windows(2) {
                prop_assert!(w[1] <= w[0]);
            }
            prop_assert!(probs.iter().all(|x| (0.0..=1.0).contains(x)));
        }
    }
}
