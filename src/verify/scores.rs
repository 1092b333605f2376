//! Scores of a weighted scenario distribution against one observation: the continuous ranked
//! probability score (CRPS), the probability integral transform (PIT) and the Brier score.
//!
//! Every function takes the scenarios as (value, weight) pairs; weights need not add up to 1
//! (they are normalised here), pairs of weight 0 or without a value (NaN) are left out by the
//! caller ([`crate::summarise::quantiles::prepare`]).

/// CRPS of the discrete distribution that puts weight `wᵢ` on `xᵢ`, against the observation `y`,
/// in the units of the values.
///
/// `CRPS = Σᵢ wᵢ|xᵢ − y| − ½ Σᵢ Σⱼ wᵢ wⱼ |xᵢ − xⱼ|` (weights normalised), the energy form of
/// Gneiting & Raftery (2007), *Strictly proper scoring rules, prediction, and estimation*,
/// JASA 102(477), 359–378, eq. 21, for a distribution with finite first moment. The double sum
/// runs in O(n log n): with the values sorted and `Cᵢ` the weight up to and including `xᵢ`,
/// `Σᵢ Σⱼ wᵢ wⱼ |xᵢ − xⱼ| = 2 Σᵢ wᵢ xᵢ (Cᵢ₋₁ − (1 − Cᵢ))` (ties cancel pairwise). For a single
/// value it is the absolute error.
///
/// NaN when no weight is positive.
///
/// ```
/// use trackswing::verify::scores::crps;
/// // Two equally likely values 0 and 2, observed 1: ½·1 + ½·1 − ½·(2·¼·2) = 0.5.
/// assert!((crps(&[(0.0, 0.5), (2.0, 0.5)], 1.0) - 0.5).abs() < 1e-12);
/// // One value: the absolute error.
/// assert_eq!(crps(&[(3.0, 1.0)], 1.0), 2.0);
/// ```
pub fn crps(pairs: &[(f64, f64)], y: f64) -> f64 {
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    if total <= 0.0 || pairs.is_empty() {
        return f64::NAN;
    }
    let mut sorted: Vec<(f64, f64)> = pairs.iter().map(|&(x, w)| (x, w / total)).collect();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let error: f64 = sorted.iter().map(|&(x, w)| w * (x - y).abs()).sum();
    let mut below = 0.0;
    let mut spread = 0.0;
    for &(x, w) in &sorted {
        let upto = below + w;
        spread += w * x * (below - (1.0 - upto));
        below = upto;
    }
    // `spread` is half the double sum.
    (error - spread).max(0.0)
}

/// The weight strictly below `y` and the weight at `y` (normalised): the weighted CDF's left
/// limit `F(y⁻)` and its jump `F(y) − F(y⁻)`.
pub fn cdf_at(pairs: &[(f64, f64)], y: f64) -> (f64, f64) {
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    // Folds from +0, not `sum` (whose empty sum is −0, which prints as "-0").
    let below = pairs.iter().filter(|p| p.0 < y).fold(0.0, |a, p| a + p.1);
    let at = pairs.iter().filter(|p| p.0 == y).fold(0.0, |a, p| a + p.1);
    (below / total, at / total)
}

/// Randomised PIT of the observation `y`: `F(y⁻) + u·(F(y) − F(y⁻))` with `u` uniform on [0, 1),
/// so an observation equal to some scenarios (a common case: 0 snow where every scenario has
/// none) falls anywhere in their step rather than at its top (Gneiting, Balabdaoui & Raftery
/// 2007, *Probabilistic forecasts, calibration and sharpness*, JRSS B 69(2), 243–268, §2.1,
/// the randomised PIT for discrete forecasts). A calibrated forecast gives uniform PIT values.
///
/// ```
/// use trackswing::verify::scores::pit;
/// let s = [(0.0, 0.5), (1.0, 0.25), (2.0, 0.25)];
/// assert_eq!(pit(&s, 1.5, 0.3), 0.75); // no tie: u does not matter
/// assert_eq!(pit(&s, 0.0, 0.5), 0.25); // half-way up the step of 0
/// ```
pub fn pit(pairs: &[(f64, f64)], y: f64, u: f64) -> f64 {
    let (below, at) = cdf_at(pairs, y);
    (below + u * at).clamp(0.0, 1.0)
}

/// Brier score of probabilities `p` for the events `happened`: the mean of `(p − o)²` with
/// `o` = 1 when the event happened, 0 otherwise (Brier 1950, *Verification of forecasts
/// expressed in terms of probability*, Monthly Weather Review 78(1), 1–3, eq. 1, for one
/// event). 0 is perfect; NaN for no pairs.
///
/// ```
/// use trackswing::verify::scores::brier;
/// // (0.8 − 1)² and (0.3 − 0)²: (0.04 + 0.09) / 2.
/// assert!((brier(&[(0.8, true), (0.3, false)]) - 0.065).abs() < 1e-12);
/// ```
pub fn brier(pairs: &[(f64, bool)]) -> f64 {
    if pairs.is_empty() {
        return f64::NAN;
    }
    pairs
        .iter()
        .map(|&(p, o)| (p - if o { 1.0 } else { 0.0 }).powi(2))
        .sum::<f64>()
        / pairs.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    /// The double sum of the definition, term by term (Gneiting & Raftery 2007, eq. 21).
    fn crps_by_definition(pairs: &[(f64, f64)], y: f64) -> f64 {
        let total: f64 = pairs.iter().map(|p| p.1).sum();
        let mut a = 0.0;
        let mut b = 0.0;
        for &(xi, wi) in pairs {
            a += wi / total * (xi - y).abs();
            for &(xj, wj) in pairs {
                b += wi / total * wj / total * (xi - xj).abs();
            }
        }
        a - 0.5 * b
    }

    /// CRPS as the integral of (F(x) − 1{x ≥ y})² over x (Matheson & Winkler 1976, the
    /// original definition), exact on a step function by summing over the breakpoints.
    fn crps_by_integral(pairs: &[(f64, f64)], y: f64) -> f64 {
        let total: f64 = pairs.iter().map(|p| p.1).sum();
        let mut points: Vec<f64> = pairs.iter().map(|p| p.0).collect();
        points.push(y);
        points.sort_by(f64::total_cmp);
        let mut s = 0.0;
        for k in 0..points.len() - 1 {
            let (a, b) = (points[k], points[k + 1]);
            let f: f64 = pairs.iter().filter(|p| p.0 <= a).map(|p| p.1).sum::<f64>() / total;
            let h = if a >= y { 1.0 } else { 0.0 };
            s += (f - h).powi(2) * (b - a);
        }
        s
    }

    #[test]
    fn crps_matches_its_definitions_on_random_weighted_ensembles() {
        let mut rng = rand_pcg::Pcg64::seed_from_u64(7);
        for case in 0..500 {
            let n = 1 + case % 40;
            let mut pairs: Vec<(f64, f64)> = (0..n)
                .map(|_| {
                    // Rounded so that ties occur.
                    let x = (rng.random::<f64>() * 30.0).round() / 2.0;
                    (x, rng.random::<f64>() + 0.01)
                })
                .collect();
            if case % 3 == 0 {
                pairs.push((0.0, 0.5));
            }
            let y = (rng.random::<f64>() * 34.0 - 2.0).round() / 2.0;
            let got = crps(&pairs, y);
            let want = crps_by_definition(&pairs, y);
            let integral = crps_by_integral(&pairs, y);
            assert!((got - want).abs() < 1e-9, "{pairs:?} {y}: {got} vs {want}");
            assert!(
                (got - integral).abs() < 1e-9,
                "{got} vs integral {integral}"
            );
        }
    }

    #[test]
    fn pit_is_uniform_for_observations_drawn_from_the_forecast() {
        // Probability integral transform (Dawid 1984): when y is drawn from the forecast
        // distribution itself, the randomised PIT is uniform on [0, 1], ties included.
        let mut rng = rand_pcg::Pcg64::seed_from_u64(11);
        let pairs = [(0.0, 0.3), (1.0, 0.1), (2.0, 0.4), (5.0, 0.2)];
        let n = 40_000;
        let mut bins = [0usize; 10];
        for _ in 0..n {
            let r: f64 = rng.random();
            let mut c = 0.0;
            let y = pairs
                .iter()
                .find(|p| {
                    c += p.1;
                    r < c
                })
                .map_or(5.0, |p| p.0);
            let v = pit(&pairs, y, rng.random());
            bins[((v * 10.0) as usize).min(9)] += 1;
        }
        for b in bins {
            let share = b as f64 / n as f64;
            // 10 % each; 4 binomial standard deviations (√(0.09/40000) = 0.0015).
            assert!((share - 0.1).abs() < 0.006, "{bins:?}");
        }
    }

    #[test]
    fn pit_at_the_extremes() {
        let s = [(1.0, 0.5), (2.0, 0.5)];
        assert_eq!(pit(&s, 0.0, 0.9), 0.0);
        assert_eq!(pit(&s, 3.0, 0.1), 1.0);
        assert_eq!(pit(&s, 2.0, 0.5), 0.75);
    }

    #[test]
    fn brier_of_certain_forecasts() {
        assert_eq!(brier(&[(1.0, true), (0.0, false)]), 0.0);
        assert_eq!(brier(&[(0.0, true), (1.0, false)]), 1.0);
        assert!(brier(&[]).is_nan());
    }
}
