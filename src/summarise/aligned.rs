//! How much of the members' disagreement is where they put the low: the share of the variance
//! between the members' runs as issued that goes away once every member's low is moved onto the
//! members' weighted mean track ([`crate::engine::align`]).
//!
//! With the members' normalised weights `W_m`, their runs as issued `b_m` (first method
//! combination, no offset) and the same runs aligned on the mean track `a_m`:
//!
//! ```text
//! track_explains_members = 1 − Var_W(a) / Var_W(b),   Var_W(x) = Σ_m W_m (x_m − Σ_k W_k x_k)²
//! ```
//!
//! clamped to [0, 1]. The variance is of the runs as issued, not of the members' means over
//! methods and offsets (band 2 of `snowfall_spread.tif`): the alignment moves the tracks as
//! issued, so it is compared with the spread of the runs it moved. Near 1 the members disagree
//! because their lows are in different places; near 0 they disagree about the air mass
//! (temperature, moisture) or anything else the move does not carry. Alignment that makes the
//! members disagree more (their storms differ so that moving them apart suits them better)
//! gives 0. Missing where any member's value is missing, and where the runs as issued agree to
//! within [`super::variance::NO_SPREAD_MM`] of standard deviation (no spread to explain).

use super::variance::NO_SPREAD_MM;

/// The members' weighted variance (weights need not be normalised); `None` when a value is
/// missing or the weights add up to zero.
///
/// ```
/// use trackswing::summarise::aligned::between_members;
/// // Two equal members 10 mm apart: variance (10/2)² = 25 mm².
/// assert_eq!(between_members(&[5.0, 15.0], &[1.0, 1.0]), Some(25.0));
/// assert_eq!(between_members(&[5.0, f32::NAN], &[1.0, 1.0]), None);
/// ```
pub fn between_members(values: &[f32], weights: &[f64]) -> Option<f64> {
    let w: f64 = weights.iter().sum();
    if w <= 0.0 || values.iter().any(|v| v.is_nan()) {
        return None;
    }
    let mean = values
        .iter()
        .zip(weights)
        .map(|(x, w)| *x as f64 * w)
        .sum::<f64>()
        / w;
    Some(
        values
            .iter()
            .zip(weights)
            .map(|(x, wk)| wk * (*x as f64 - mean).powi(2))
            .sum::<f64>()
            / w,
    )
}

/// The share of the members' spread as issued (`baselines`) that their track differences
/// explain, given the same members aligned on the mean track (`aligned`), under `weights`;
/// NaN where a value is missing or the runs as issued do not spread.
///
/// ```
/// use trackswing::summarise::aligned::track_explains;
/// // Aligned, the members agree: all of their spread was the track.
/// assert_eq!(track_explains(&[5.0, 15.0], &[9.0, 9.0], &[1.0, 1.0]), 1.0);
/// // Aligned, they are as far apart as before: none of it was.
/// assert_eq!(track_explains(&[5.0, 15.0], &[7.0, 17.0], &[1.0, 1.0]), 0.0);
/// // Half the standard deviation left: three quarters of the variance explained.
/// assert_eq!(track_explains(&[5.0, 15.0], &[8.0, 13.0], &[1.0, 1.0]), 0.75);
/// ```
pub fn track_explains(baselines: &[f32], aligned: &[f32], weights: &[f64]) -> f32 {
    let (Some(b), Some(a)) = (
        between_members(baselines, weights),
        between_members(aligned, weights),
    ) else {
        return f32::NAN;
    };
    if b.sqrt() < NO_SPREAD_MM as f64 {
        return f32::NAN;
    }
    (1.0 - a / b).clamp(0.0, 1.0) as f32
}

/// [`track_explains`] at every cell: `baselines[m]` and `aligned[m]` are member m's fields.
pub fn track_explains_cells(
    baselines: &[Vec<f32>],
    aligned: &[Vec<f32>],
    weights: &[f64],
) -> Vec<f32> {
    let cells = baselines.first().map_or(0, Vec::len);
    let mut b = vec![0.0f32; baselines.len()];
    let mut a = vec![0.0f32; aligned.len()];
    (0..cells)
        .map(|i| {
            for (m, x) in baselines.iter().enumerate() {
                b[m] = x[i];
            }
            for (m, x) in aligned.iter().enumerate() {
                a[m] = x[i];
            }
            track_explains(&b, &a, weights)
        })
        .collect()
}

/// The words for a town's track-explained share: most of the members' difference is where they
/// put the low (at least 0.7), or it is the air mass rather than the low (at most 0.3); nothing
/// in between or where the share is missing.
pub fn explains_words(share: f32) -> Option<String> {
    let pct = (100.0 * share).round();
    if share >= 0.7 {
        Some(format!(
            "the models differ here mostly in where they put the low ({pct:.0} % of their difference goes once their lows are moved onto one track)"
        ))
    } else if share <= 0.3 {
        Some(format!(
            "the models differ here in the air they bring, not in where they put the low (moving their lows onto one track removes {pct:.0} % of their difference)"
        ))
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_spread_and_missing_values_give_no_share() {
        // Members that agree as issued: nothing to explain, whatever the alignment does.
        assert!(track_explains(&[12.0, 12.0], &[3.0, 20.0], &[1.0, 1.0]).is_nan());
        // A standard deviation just under the threshold, and just over it.
        let d = 2.0 * NO_SPREAD_MM;
        assert!(track_explains(&[0.0, 0.99 * d], &[0.0, 0.0], &[1.0, 1.0]).is_nan());
        assert_eq!(
            track_explains(&[0.0, 1.01 * d], &[0.0, 0.0], &[1.0, 1.0]),
            1.0
        );
        assert!(track_explains(&[1.0, 9.0], &[f32::NAN, 2.0], &[1.0, 1.0]).is_nan());
        // Alignment that spreads the members more explains nothing (clamped, not negative).
        assert_eq!(track_explains(&[5.0, 15.0], &[0.0, 30.0], &[1.0, 1.0]), 0.0);
    }

    #[test]
    fn member_weights_weigh_the_variance() {
        // Weights 3 and 1, values 0 and 8: mean 2, variance (3·4 + 1·36)/4 = 12 (the weighted
        // variance's definition, computed by hand).
        assert_eq!(between_members(&[0.0, 8.0], &[3.0, 1.0]), Some(12.0));
        let cells = track_explains_cells(
            &[vec![0.0, 1.0], vec![8.0, 1.0]],
            &[vec![2.0, 1.0], vec![6.0, 1.0]],
            &[3.0, 1.0],
        );
        // Aligned: mean 3, variance (3·1 + 1·9)/4 = 3; 1 − 3/12 = 0.75. The second cell does not
        // spread.
        assert_eq!(cells[0], 0.75);
        assert!(cells[1].is_nan());
    }
}
