//! Snow-to-liquid ratio (SLR): depth of new snow per depth of liquid equivalent
//! (dimensionless), plus the depth ratios used for ice pellets and freezing rain.
//!
//! Bibliography keys (AuthorYear) refer to docs/REFERENCES.md.

use super::thermo::T_FREEZE;

/// The usual fixed snow-to-liquid ratio, 10:1 [common practice].
///
/// ```
/// use trackswing::diagnose::slr::{fixed_ratio, DEFAULT_FIXED_RATIO};
/// // Common practice: 12 mm of liquid at 10:1 is 12 cm of snow.
/// assert!((0.012 * fixed_ratio(DEFAULT_FIXED_RATIO) - 0.12).abs() < 1e-12);
/// ```
pub const DEFAULT_FIXED_RATIO: f64 = 10.0;

/// Ice-pellet accumulation depth per liquid depth, dimensionless: about 2–3:1
/// [common practice; no single source].
///
/// ```
/// use trackswing::diagnose::slr::ICE_PELLET_DEPTH_RATIO;
/// // Common practice: 10 mm of liquid falling as sleet lies 20–30 mm deep.
/// let depth_m = 0.010 * ICE_PELLET_DEPTH_RATIO;
/// assert!((0.020..=0.030).contains(&depth_m));
/// ```
pub const ICE_PELLET_DEPTH_RATIO: f64 = 2.5;

/// Radial ice accretion on flat surfaces per liquid depth of freezing rain, dimensionless: the
/// median ice-to-liquid ratio of about 0.72 found by Sanders, K. J., and B. L. Barjenbruch,
/// 2016: Analysis of ice-to-liquid ratios during freezing rain and the development of an ice
/// accumulation model. *Wea. Forecasting*, **31**, 1041–1060 (pages from memory).
///
/// ```
/// use trackswing::diagnose::slr::FREEZING_RAIN_ACCRETION_RATIO;
/// // Sanders & Barjenbruch (2016): 10 mm of freezing rain → about 7 mm of flat ice.
/// assert!((0.010 * FREEZING_RAIN_ACCRETION_RATIO - 0.0072).abs() < 1e-12);
/// ```
pub const FREEZING_RAIN_ACCRETION_RATIO: f64 = 0.72;

/// A user-chosen fixed snow-to-liquid ratio, dimensionless (default
/// [`DEFAULT_FIXED_RATIO`] = 10 [common practice]).
///
/// Validity: finite and positive; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::slr::fixed_ratio;
/// assert_eq!(fixed_ratio(15.0), 15.0);
/// assert!(fixed_ratio(-1.0).is_nan());
/// ```
pub fn fixed_ratio(r: f64) -> f64 {
    if r > 0.0 && r.is_finite() {
        r
    } else {
        f64::NAN
    }
}

/// Kuchera's pivot temperature, K.
const KUCHERA_PIVOT_K: f64 = 271.16;

/// Snow-to-liquid ratio from the warmest temperature (K) in the column from the surface to
/// 500 hPa, by the Kuchera method [common practice; no peer-reviewed source]:
/// 12 + 2·(271.16 − Tmax) when Tmax > 271.16 K, else 12 + (271.16 − Tmax), floored at 0.
///
/// Validity: Tmax in 150–350 K; NaN otherwise. The ratio is continuous (12 at the pivot) and
/// reaches 0 at 277.16 K.
///
/// ```
/// use trackswing::diagnose::slr::kuchera_ratio;
/// // SCIENCE.md check values: 261.16 K → 22; 273.16 K → 8.
/// assert!((kuchera_ratio(261.16) - 22.0).abs() < 1e-9);
/// assert!((kuchera_ratio(273.16) - 8.0).abs() < 1e-9);
/// ```
pub fn kuchera_ratio(t_max_k: f64) -> f64 {
    if !(150.0..=350.0).contains(&t_max_k) {
        return f64::NAN;
    }
    let below_pivot = KUCHERA_PIVOT_K - t_max_k;
    let r = if t_max_k > KUCHERA_PIVOT_K {
        12.0 + 2.0 * below_pivot
    } else {
        12.0 + below_pivot
    };
    r.max(0.0)
}

/// Relative humidity (over water, %) over which a layer goes from unsaturated to fully
/// counted. Ice saturation at −15 °C is about 86 % over water, so growing snow shows model RH
/// of 85–90 %; the ramp is centred on the ~80 % threshold of common practice.
const SATURATION_RAMP_START_PCT: f64 = 70.0;
const SATURATION_RAMP_END_PCT: f64 = 90.0;
/// Layers warmer than 0 °C grow no snow; their weight fades out between 0 and +1 °C.
const WARM_CUTOFF_WIDTH_K: f64 = 1.0;
/// Residual weight of a dry or warm layer, so that a column with no saturated subfreezing
/// layer still has a defined (depth-weighted) ratio instead of 0/0.
const WEIGHT_FLOOR: f64 = 1e-3;

/// Knots of the layer ratio curve: (temperature °C, ratio).
const RATIO_NEAR_FREEZING: (f64, f64) = (-2.0, 10.0);
const RATIO_GROWTH_ZONE_WARM_EDGE: (f64, f64) = (-12.0, 30.0);
const RATIO_GROWTH_ZONE_COLD_EDGE: (f64, f64) = (-16.0, 30.0);
const RATIO_VERY_COLD: (f64, f64) = (-24.0, 12.0);

fn smoothstep(lo: f64, hi: f64, x: f64) -> f64 {
    let u = ((x - lo) / (hi - lo)).clamp(0.0, 1.0);
    u * u * (3.0 - 2.0 * u)
}

/// Interpolates between two knots with a smoothstep (C1 at the knots).
fn between(a: (f64, f64), b: (f64, f64), t_c: f64) -> f64 {
    a.1 + (b.1 - a.1) * smoothstep(a.0, b.0, t_c)
}

/// Snow-to-liquid ratio of snow grown at `t_c` °C: 10 near freezing, rising to 30 over
/// −12…−16 °C (the dendritic growth zone peak), falling to 12 below −24 °C.
fn layer_ratio(t_c: f64) -> f64 {
    if t_c >= RATIO_GROWTH_ZONE_WARM_EDGE.0 {
        between(RATIO_NEAR_FREEZING, RATIO_GROWTH_ZONE_WARM_EDGE, t_c)
    } else if t_c >= RATIO_GROWTH_ZONE_COLD_EDGE.0 {
        RATIO_GROWTH_ZONE_WARM_EDGE.1
    } else {
        between(RATIO_GROWTH_ZONE_COLD_EDGE, RATIO_VERY_COLD, t_c)
    }
}

/// Snow-to-liquid ratio from the temperature and humidity profile, weighting each layer's
/// ratio by where snow grows, after Cobb, S. M., Jr., and J. S. Waldstreicher, 2005: A simple
/// physically based snowfall algorithm. *21st Conf. on Weather Analysis and Forecasting / 17th
/// Conf. on Numerical Weather Prediction*, Washington DC, Amer. Meteor. Soc., paper 2A.2.
///
/// Each layer between consecutive points gets a ratio from its mean temperature on a smooth
/// curve (piecewise smoothstep through knots): 10:1 at −2 °C and warmer, rising to 30:1 at
/// −12 °C, 30:1 over −12…−16 °C (the dendritic growth zone, −12…−18 °C, peaking near −15 °C),
/// falling to 12:1 at −24 °C and colder (plates and columns pack densely). Cobb & Waldstreicher
/// weight layers by upward motion and saturation; no vertical motion is available here, so the
/// weight is layer depth in pressure × saturation × subfreezing, where saturation ramps from 0
/// at 70 % to 1 at 90 % mean RH (over water) and subfreezing fades from 1 at 0 °C to 0 at
/// +1 °C. A floor of 10⁻³ on both factors keeps the ratio defined (a depth-weighted mean) when
/// no layer is saturated and below freezing. The curve's knots are this module's choice,
/// set to the rules of thumb [common practice]: about 10:1 near freezing, up to about 30:1 when
/// the saturated layer is near −12 °C.
///
/// Input: pressure (Pa), temperature (K), relative humidity over water (%) from the surface
/// upward; pass levels up to the cloud top or ~300 hPa.
///
/// Validity: 2 or more points of equal-length slices, p finite, positive and strictly
/// decreasing, T in 150–350 K, RH in 0–110 %; NaN otherwise. Result in [10, 30].
///
/// ```
/// use trackswing::diagnose::slr::growth_zone_ratio;
/// // Common practice: a saturated layer near −12 °C (10 °F) gives about 30:1.
/// let p = [100_000.0, 85_000.0, 70_000.0, 60_000.0, 50_000.0];
/// let t = [272.0, 268.0, 261.5, 261.0, 250.0];
/// let rh = [50.0, 50.0, 100.0, 100.0, 40.0];
/// assert!((growth_zone_ratio(&p, &t, &rh) - 30.0).abs() < 2.0);
/// ```
pub fn growth_zone_ratio(p_pa: &[f64], t_k: &[f64], rh_pct: &[f64]) -> f64 {
    let n = p_pa.len();
    if n < 2 || t_k.len() != n || rh_pct.len() != n {
        return f64::NAN;
    }
    let p_ok =
        p_pa.iter().all(|p| *p > 0.0 && p.is_finite()) && p_pa.windows(2).all(|w| w[1] < w[0]);
    let t_ok = t_k.iter().all(|t| (150.0..=350.0).contains(t));
    let rh_ok = rh_pct.iter().all(|rh| (0.0..=110.0).contains(rh));
    if !(p_ok && t_ok && rh_ok) {
        return f64::NAN;
    }
    let (mut weighted, mut total) = (0.0, 0.0);
    for i in 0..n - 1 {
        let t_mean = 0.5 * (t_k[i] + t_k[i + 1]);
        let rh_mean = 0.5 * (rh_pct[i] + rh_pct[i + 1]);
        let saturation = smoothstep(SATURATION_RAMP_START_PCT, SATURATION_RAMP_END_PCT, rh_mean);
        let subfreezing = 1.0 - smoothstep(T_FREEZE, T_FREEZE + WARM_CUTOFF_WIDTH_K, t_mean);
        let weight =
            (p_pa[i] - p_pa[i + 1]) * (WEIGHT_FLOOR + saturation) * (WEIGHT_FLOOR + subfreezing);
        weighted += weight * layer_ratio(t_mean - T_FREEZE);
        total += weight;
    }
    weighted / total
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(tc: f64) -> f64 {
        tc + T_FREEZE
    }

    #[test]
    fn kuchera_check_values() {
        // SCIENCE.md §4 (Kuchera, common practice): 261.16 → 22, 271.16 → 12, 273.16 → 8,
        // 277.16 → 0; tolerance 1e-9.
        for (t, r) in [
            (261.16, 22.0),
            (271.16, 12.0),
            (273.16, 8.0),
            (277.16, 0.0),
            (280.0, 0.0),
        ] {
            assert!((kuchera_ratio(t) - r).abs() < 1e-9, "{t}");
        }
        assert!(kuchera_ratio(f64::NAN).is_nan());
        assert!(kuchera_ratio(-3.0).is_nan());
    }

    #[test]
    fn fixed_ratio_domain() {
        assert_eq!(fixed_ratio(DEFAULT_FIXED_RATIO), 10.0);
        assert!(fixed_ratio(0.0).is_nan());
        assert!(fixed_ratio(f64::INFINITY).is_nan());
    }

    #[test]
    fn saturated_column_near_freezing_is_about_ten() {
        // Common practice: about 10:1 near freezing; tolerance ±1.
        let p = [100_000.0, 92_500.0, 85_000.0, 70_000.0, 50_000.0, 30_000.0];
        let t = [c(-0.5), c(-1.0), c(-2.0), c(-3.0), c(-20.0), c(-45.0)];
        let rh = [100.0, 100.0, 98.0, 95.0, 40.0, 30.0];
        let r = growth_zone_ratio(&p, &t, &rh);
        assert!((r - 10.0).abs() < 1.0, "{r}");
    }

    #[test]
    fn saturated_layer_near_minus_twelve_is_about_thirty() {
        // Common practice: ratios as high as about 30:1 with the growth layer near −12 °C
        // (10 °F); tolerance ±2. The dry, milder layers below barely count.
        let p = [100_000.0, 85_000.0, 75_000.0, 65_000.0, 55_000.0, 45_000.0];
        let t = [c(-1.0), c(-5.0), c(-11.5), c(-12.5), c(-13.0), c(-25.0)];
        let rh = [60.0, 60.0, 100.0, 100.0, 100.0, 30.0];
        let r = growth_zone_ratio(&p, &t, &rh);
        assert!((r - 30.0).abs() < 2.0, "{r}");
    }

    #[test]
    fn ratio_is_set_aloft_by_saturation_not_at_the_surface() {
        // Common practice: the ratio is set by the saturated layers aloft, not the surface.
        // Same temperatures, moisture moved from the growth zone to the low levels.
        let p = [100_000.0, 90_000.0, 80_000.0, 70_000.0, 60_000.0, 50_000.0];
        let t = [c(-1.0), c(-2.0), c(-6.0), c(-13.0), c(-15.0), c(-28.0)];
        let wet_aloft = growth_zone_ratio(&p, &t, &[60.0, 60.0, 70.0, 100.0, 100.0, 40.0]);
        let wet_low = growth_zone_ratio(&p, &t, &[100.0, 100.0, 80.0, 50.0, 50.0, 40.0]);
        assert!(wet_aloft > 25.0 && wet_low < 12.0, "{wet_aloft} {wet_low}");
    }

    #[test]
    fn very_cold_saturated_column_is_moderate() {
        // Common practice: ~8–12:1 in very cold air (small plates and columns).
        let p = [70_000.0, 60_000.0, 50_000.0, 40_000.0];
        let t = [c(-26.0), c(-30.0), c(-35.0), c(-42.0)];
        let r = growth_zone_ratio(&p, &t, &[100.0, 100.0, 100.0, 100.0]);
        assert!((8.0..=12.0).contains(&r), "{r}");
    }

    #[test]
    fn layer_curve_is_smooth_and_bounded() {
        // The documented curve: 0.01 K steps from +5 to −40 °C change the ratio by < 0.05
        // (max slope 1.5·20/10 = 3 per K), and it stays within [10, 30].
        let mut prev = layer_ratio(5.0);
        for i in 1..=4500 {
            let r = layer_ratio(5.0 - 0.01 * i as f64);
            assert!(
                (r - prev).abs() < 0.05 && (10.0..=30.0).contains(&r),
                "{i} {r}"
            );
            prev = r;
        }
        assert!((layer_ratio(-15.0) - 30.0).abs() < 1e-12);
    }

    #[test]
    fn growth_zone_out_of_domain() {
        let p = [100_000.0, 80_000.0];
        assert!(growth_zone_ratio(&p, &[270.0], &[90.0, 90.0]).is_nan());
        assert!(growth_zone_ratio(&p, &[270.0, f64::NAN], &[90.0, 90.0]).is_nan());
        assert!(growth_zone_ratio(&[80_000.0, 100_000.0], &[270.0, 265.0], &[90.0, 90.0]).is_nan());
        assert!(growth_zone_ratio(&p, &[270.0, 265.0], &[90.0, 190.0]).is_nan());
        // An all-dry, all-warm column still gives a defined ratio.
        let r = growth_zone_ratio(&p, &[285.0, 280.0], &[30.0, 30.0]);
        assert!((r - 10.0).abs() < 1e-9, "{r}");
    }
}
