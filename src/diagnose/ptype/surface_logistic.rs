//! Precipitation type from the surface temperature and humidity (Jennings et al. 2018), with
//! melting aloft after Stewart & King (1987).

use super::{smoothstep, PtypeFractions};
use crate::diagnose::thermo::T_FREEZE;

/// Jennings et al. (2018) logistic coefficients (T in °C, RH in %).
const JENNINGS_A: f64 = -10.04;
const JENNINGS_B: f64 = 1.41;
const JENNINGS_C: f64 = 0.09;
/// Wet-bulb range, °C, over which a warm layer aloft goes from leaving snow intact to melting
/// it completely (after Stewart & King 1987: partial below ~1 °C, complete above 3–4 °C).
const MELT_TW_START_C: f64 = 1.0;
const MELT_TW_END_C: f64 = 3.0;

/// Precipitation-type fractions from 2 m temperature (K) and relative humidity (%), with a
/// melting-layer check aloft.
///
/// Snow probability: p = 1/(1 + exp(−10.04 + 1.41·T + 0.09·RH)), T in °C, RH in % (Jennings,
/// K. S., T. S. Winchell, B. Livneh, and N. P. Molotch, 2018: Spatial variation of the
/// rain–snow temperature threshold across the Northern Hemisphere. *Nature Communications*,
/// **9**, 1148, bivariate binary logistic model). Melting aloft: if the warmest wet-bulb in a
/// layer aloft, `warm_layer_max_tw_k`, exceeds about 3 °C the snow melts completely, and below
/// about 1 °C it survives (Stewart, R. E., and P. King, 1987: Freezing precipitation in winter
/// storms. *Mon. Wea. Rev.*, **115**, 1270–1279; pages from memory); the share melted ramps
/// (smoothstep) from 1 °C to 3 °C. The liquid — Jennings' rain share plus the melted snow — is
/// freezing rain on a subfreezing surface and rain otherwise (±0.25 K ramp about 0 °C). The
/// method yields no ice pellets.
///
/// Pass the column's highest wet-bulb above the surface layer; if nothing aloft is above
/// freezing, any value ≤ 274.15 K has no effect.
///
/// Validity: T and Tw 173.15–373.15 K, 0 ≤ RH ≤ 110 % (values above 100 % are read as 100 %,
/// the fit's range); NaN fractions otherwise. The fit's data lie in the rain–snow transition
/// (roughly −10…+10 °C); beyond it the curve is saturated at 0 or 1.
///
/// ```
/// use trackswing::diagnose::ptype::surface_logistic;
/// // Jennings et al. (2018) check value: 1 °C, 80 % → p(snow) = 0.807 (no warm layer aloft).
/// let f = surface_logistic(274.15, 80.0, 270.0);
/// assert!((f.snow - 0.807).abs() < 0.001);
/// ```
pub fn surface_logistic(t2_k: f64, rh2_pct: f64, warm_layer_max_tw_k: f64) -> PtypeFractions {
    let in_t = |t: f64| (173.15..=373.15).contains(&t);
    if !(in_t(t2_k) && in_t(warm_layer_max_tw_k) && (0.0..=110.0).contains(&rh2_pct)) {
        return PtypeFractions::nan();
    }
    let t_c = t2_k - T_FREEZE;
    let rh = rh2_pct.min(100.0);
    let p_snow = 1.0 / (1.0 + (JENNINGS_A + JENNINGS_B * t_c + JENNINGS_C * rh).exp());
    let melted = smoothstep(
        T_FREEZE + MELT_TW_START_C,
        T_FREEZE + MELT_TW_END_C,
        warm_layer_max_tw_k,
    );
    let snow = p_snow * (1.0 - melted);
    PtypeFractions::with_liquid(snow, 0.0, 1.0 - snow, t2_k)
}

#[cfg(test)]
mod tests {
    use super::super::testing::*;
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn jennings_check_values() {
        // Jennings et al. (2018), Nat. Commun. 9, 1148: 1 °C/80 % → 0.807, 1 °C/100 % → 0.409;
        // tolerance 0.001 (three digits given).
        let a = surface_logistic(T0 + 1.0, 80.0, T0 - 5.0);
        assert!((a.snow - 0.807).abs() < 1e-3, "{a:?}");
        assert!((a.rain - 0.193).abs() < 1e-3, "{a:?}");
        let b = surface_logistic(T0 + 1.0, 100.0, T0 - 5.0);
        assert!((b.snow - 0.409).abs() < 1e-3, "{b:?}");
        assert_valid(&a);
        assert_valid(&b);
    }

    #[test]
    fn melting_layer_aloft_after_stewart_and_king() {
        // Stewart & King (1987) (pages from memory): Tw aloft above ~3 °C melts snow completely;
        // on a subfreezing surface the liquid is freezing rain.
        let f = surface_logistic(T0 - 4.0, 90.0, T0 + 3.5);
        assert!((f.freezing_rain - 1.0).abs() < 1e-12, "{f:?}");
        let g = surface_logistic(T0 + 2.0, 90.0, T0 + 3.5);
        assert!((g.rain - 1.0).abs() < 1e-12, "{g:?}");
        // Below 1 °C aloft nothing melts: cold surface stays snow (Jennings p ≈ 1 at −4 °C).
        let h = surface_logistic(T0 - 4.0, 90.0, T0 + 0.5);
        assert!(h.snow > 0.99, "{h:?}");
        let mid = surface_logistic(T0 - 4.0, 90.0, T0 + 2.0);
        assert!((mid.snow - 0.5 * h.snow).abs() < 1e-9, "{mid:?}");
        assert!(surface_logistic(f64::NAN, 90.0, T0).snow.is_nan());
        assert!(surface_logistic(T0, 150.0, T0).snow.is_nan());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        #[test]
        fn colder_surface_and_aloft_never_have_less_snow(
            t2 in -10.0..10.0_f64,
            rh in 0.0..100.0_f64,
            tw_aloft in -5.0..6.0_f64,
            cool in (0.0..4.0_f64, 0.0..4.0_f64),
        ) {
            // Jennings et al. (2018): p(snow) falls with temperature at fixed RH; Stewart & King
            // (1987): a colder warm layer melts less.
            let warm = surface_logistic(T0 + t2, rh, T0 + tw_aloft);
            let cold = surface_logistic(T0 + t2 - cool.0, rh, T0 + tw_aloft - cool.1);
            assert_valid(&warm);
            assert_valid(&cold);
            prop_assert!(cold.snow >= warm.snow - 1e-12, "{:?} → {:?}", warm, cold);
        }
    }
}
