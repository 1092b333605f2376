//! Track error summarised by lead-time bin: the bias and σ of each component, with 95 %
//! confidence intervals.
//!
//! Bin `k` holds the leads in `[k·w, (k+1)·w)` hours. For a component with sample mean `x̄`,
//! sample standard deviation `s` (divisor `n − 1`) and `n` errors, assuming independent normal
//! errors (textbook intervals, e.g. Wilks 2011, *Statistical Methods in the Atmospheric
//! Sciences*, 3rd ed., §5.2):
//! - bias: `x̄ ± t(0.975; n−1)·s/√n` (Student's t);
//! - σ: `[ s·√((n−1)/χ²(0.975; n−1)), s·√((n−1)/χ²(0.025; n−1)) ]` (chi-square).
//!
//! The quantiles come from `statrs`. Errors of one storm at successive leads are correlated, so
//! the intervals are honest only when each bin holds one error per case, as with bins no wider
//! than the tracks' spacing; the bin width is the user's to choose.

use super::decompose::PositionError;
use statrs::distribution::{ChiSquared, ContinuousCDF, StudentsT};

/// Coverage of the confidence intervals.
pub const CONFIDENCE: f64 = 0.95;

/// Bias and σ of one error component in one bin, km.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ComponentStats {
    /// Mean error (bias), km.
    pub bias_km: f64,
    /// Lower and upper 95 % bounds of the bias, km (`None` with fewer than two errors).
    pub bias_ci_km: Option<(f64, f64)>,
    /// Sample standard deviation (divisor n − 1), km (`None` with fewer than two errors).
    pub sigma_km: Option<f64>,
    /// Lower and upper 95 % bounds of σ, km.
    pub sigma_ci_km: Option<(f64, f64)>,
}

/// The errors of one lead-time bin.
#[derive(Clone, Debug, PartialEq)]
pub struct LeadBin {
    /// First lead of the bin, hours (included).
    pub from_h: f64,
    /// End of the bin, hours (excluded).
    pub to_h: f64,
    /// Number of errors.
    pub n: usize,
    /// Cross-track errors.
    pub cross: ComponentStats,
    /// Along-track errors.
    pub along: ComponentStats,
}

/// Mean, standard deviation and intervals of `x` (at least one value).
///
/// ```
/// use trackswing::track_error::bins::component_stats;
/// let s = component_stats(&[1.0, 2.0, 3.0, 4.0, 5.0]);
/// assert_eq!(s.bias_km, 3.0);
/// // s = √2.5; t(0.975; 4) = 2.776 (any t table): 3 ± 2.776·√2.5/√5 = 3 ± 1.963.
/// let (lo, hi) = s.bias_ci_km.unwrap();
/// assert!((lo - 1.037).abs() < 1e-3 && (hi - 4.963).abs() < 1e-3);
/// ```
pub fn component_stats(x: &[f64]) -> ComponentStats {
    let n = x.len();
    let mean = x.iter().sum::<f64>() / n as f64;
    if n < 2 {
        return ComponentStats {
            bias_km: mean,
            bias_ci_km: None,
            sigma_km: None,
            sigma_ci_km: None,
        };
    }
    let dof = (n - 1) as f64;
    let s = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / dof).sqrt();
    let tail = (1.0 - CONFIDENCE) / 2.0;
    let t = StudentsT::new(0.0, 1.0, dof)
        .expect("n − 1 ≥ 1 degrees of freedom")
        .inverse_cdf(1.0 - tail);
    let chi = ChiSquared::new(dof).expect("n − 1 ≥ 1 degrees of freedom");
    let half = t * s / (n as f64).sqrt();
    ComponentStats {
        bias_km: mean,
        bias_ci_km: Some((mean - half, mean + half)),
        sigma_km: Some(s),
        sigma_ci_km: Some((
            s * (dof / chi.inverse_cdf(1.0 - tail)).sqrt(),
            s * (dof / chi.inverse_cdf(tail)).sqrt(),
        )),
    }
}

/// The errors summarised by lead-time bins of `width_h` hours (> 0), bins with errors only, in
/// lead order.
pub fn lead_bins(errors: &[PositionError], width_h: f64) -> Vec<LeadBin> {
    let mut by_bin: std::collections::BTreeMap<i64, Vec<&PositionError>> = Default::default();
    for e in errors {
        by_bin
            .entry((e.lead_h / width_h).floor() as i64)
            .or_default()
            .push(e);
    }
    by_bin
        .into_iter()
        .map(|(k, es)| {
            let cross: Vec<f64> = es.iter().map(|e| e.cross_km).collect();
            let along: Vec<f64> = es.iter().map(|e| e.along_km).collect();
            LeadBin {
                from_h: k as f64 * width_h,
                to_h: (k + 1) as f64 * width_h,
                n: es.len(),
                cross: component_stats(&cross),
                along: component_stats(&along),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigma_interval_matches_the_chi_square_table() {
        // Reference: the textbook formula with chi-square quantiles typed in from a table
        // (from memory, any statistics table): χ²(0.025; 9) = 2.700, χ²(0.975; 9) = 19.023.
        // Ten values ±a with mean 0 and s² = 10a²/9 = 1.
        let a = (0.9f64).sqrt();
        let x: Vec<f64> = (0..10).map(|i| if i % 2 == 0 { a } else { -a }).collect();
        let s = component_stats(&x);
        assert!((s.sigma_km.unwrap() - 1.0).abs() < 1e-12);
        let (lo, hi) = s.sigma_ci_km.unwrap();
        assert!((lo - (9.0f64 / 19.023).sqrt()).abs() < 1e-3, "{lo}");
        assert!((hi - (9.0f64 / 2.700).sqrt()).abs() < 1e-3, "{hi}");
        // t(0.975; 9) = 2.262: the bias interval is 0 ± 2.262/√10.
        let (blo, bhi) = s.bias_ci_km.unwrap();
        assert!((bhi - 2.262 / 10f64.sqrt()).abs() < 1e-3 && (blo + bhi).abs() < 1e-12);
    }

    #[test]
    fn one_error_has_a_bias_but_no_sigma_and_bins_are_half_open() {
        let e = |lead_h: f64, c: f64| PositionError {
            case: "c".into(),
            lead_h,
            cross_km: c,
            along_km: -c,
            total_km: c.abs() * 2f64.sqrt(),
        };
        let bins = lead_bins(&[e(0.0, 10.0), e(11.9, 20.0), e(12.0, 5.0)], 12.0);
        assert_eq!(bins.len(), 2);
        assert_eq!((bins[0].from_h, bins[0].to_h, bins[0].n), (0.0, 12.0, 2));
        assert_eq!(bins[0].cross.bias_km, 15.0);
        assert_eq!(bins[0].along.bias_km, -15.0);
        assert_eq!((bins[1].from_h, bins[1].n), (12.0, 1));
        assert_eq!(bins[1].cross.sigma_km, None);
    }
}
