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
/// Coldest temperature below the warm layer, °C, over which drops that kept an ice core
/// (partly melted) refreeze to ice pellets: any subfreezing layer refreezes them, the ice core
/// seeding the freezing (Stewart & King 1987; the −3 °C end is this project's choice).
const CORED_REFREEZE_START_C: f64 = 0.0;
const CORED_REFREEZE_END_C: f64 = -3.0;
/// Coldest temperature below the warm layer, °C, over which completely melted drops refreeze:
/// without an ice core they supercool, and refreeze to pellets only in a cold layer below about
/// −8 °C (Stewart & King 1987, value from memory); ramped ±2 K about −8 °C.
const MELTED_REFREEZE_START_C: f64 = -6.0;
const MELTED_REFREEZE_END_C: f64 = -10.0;

/// Precipitation-type fractions from 2 m temperature (K) and relative humidity (%), with
/// melting aloft and refreezing below it.
///
/// Snow probability: p = 1/(1 + exp(−10.04 + 1.41·T + 0.09·RH)), T in °C, RH in % (Jennings,
/// K. S., T. S. Winchell, B. Livneh, and N. P. Molotch, 2018: Spatial variation of the
/// rain–snow temperature threshold across the Northern Hemisphere. *Nature Communications*,
/// **9**, 1148, bivariate binary logistic model).
///
/// Melting aloft and refreezing below, after Stewart, R. E., and P. King, 1987: Freezing
/// precipitation in winter storms. *Mon. Wea. Rev.*, **115**, 1270–1279 (pages and the numbers
/// below from memory): snow survives a warm layer whose warmest wet-bulb
/// `warm_layer_max_tw_k` is below about 1 °C and melts completely above about 3 °C; in between
/// it melts in part, and the partly melted particles keep an ice core that makes them refreeze
/// to ice pellets in the subfreezing air below. Completely melted drops supercool and refreeze
/// only where that air is colder than about −8 °C. So, with m = smoothstep(1, 3 °C, Tw_aloft)
/// the melted share and k = 1 − m the share of the melted snow that kept an ice core:
/// - snow = p·(1 − m);
/// - ice pellets = p·m·(k·r_cored + (1 − k)·r_melted), r_cored = smoothstep(0, −3 °C, T_cold),
///   r_melted = smoothstep(−6, −10 °C, T_cold), T_cold = `cold_below_k`, the coldest
///   temperature between the ground and the warm layer;
/// - the rest — Jennings' rain share plus the melted snow not refrozen — is liquid: freezing
///   rain on a subfreezing surface and rain otherwise (±0.25 K ramp about 0 °C).
///
/// Pass the column's highest wet-bulb above the surface layer; if nothing aloft is above
/// freezing, any value ≤ 274.15 K has no effect (and `cold_below_k` none either).
///
/// Validity: T, Tw and T_cold 173.15–373.15 K, 0 ≤ RH ≤ 110 % (values above 100 % are read as
/// 100 %, the fit's range); NaN fractions otherwise. The fit's data lie in the rain–snow
/// transition (roughly −10…+10 °C); beyond it the curve is saturated at 0 or 1.
///
/// ```
/// use trackswing::diagnose::ptype::surface_logistic;
/// // Jennings et al. (2018) check value: 1 °C, 80 % → p(snow) = 0.807 (no warm layer aloft).
/// let f = surface_logistic(274.15, 80.0, 270.0, 270.0);
/// assert!((f.snow - 0.807).abs() < 0.001);
/// // Warm layer aloft at Tw 2 °C over −5 °C air (Stewart & King 1987): half the snow melts,
/// // half of that kept its ice core and refreezes; the fully melted half stays liquid.
/// let f = surface_logistic(268.15, 90.0, 275.15, 268.15);
/// assert!((f.ice_pellets - 0.25 * f.snow / 0.5).abs() < 1e-3, "{f:?}");
/// ```
pub fn surface_logistic(
    t2_k: f64,
    rh2_pct: f64,
    warm_layer_max_tw_k: f64,
    cold_below_k: f64,
) -> PtypeFractions {
    let in_t = |t: f64| (173.15..=373.15).contains(&t);
    if !(in_t(t2_k)
        && in_t(warm_layer_max_tw_k)
        && in_t(cold_below_k)
        && (0.0..=110.0).contains(&rh2_pct))
    {
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
    let cored = 1.0 - melted;
    let cold_c = cold_below_k - T_FREEZE;
    // smoothstep with lo > hi ramps downward: 0 at lo, 1 at hi.
    let refreeze_cored = smoothstep(CORED_REFREEZE_START_C, CORED_REFREEZE_END_C, cold_c);
    let refreeze_melted = smoothstep(MELTED_REFREEZE_START_C, MELTED_REFREEZE_END_C, cold_c);
    let snow = p_snow * (1.0 - melted);
    let pellets = p_snow * melted * (cored * refreeze_cored + (1.0 - cored) * refreeze_melted);
    PtypeFractions::with_liquid(snow, pellets, 1.0 - snow - pellets, t2_k)
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
        let a = surface_logistic(T0 + 1.0, 80.0, T0 - 5.0, T0 - 5.0);
        assert!((a.snow - 0.807).abs() < 1e-3, "{a:?}");
        assert!((a.rain - 0.193).abs() < 1e-3, "{a:?}");
        let b = surface_logistic(T0 + 1.0, 100.0, T0 - 5.0, T0 - 5.0);
        assert!((b.snow - 0.409).abs() < 1e-3, "{b:?}");
        assert_valid(&a);
        assert_valid(&b);
    }

    #[test]
    fn melting_layer_aloft_after_stewart_and_king() {
        // Stewart & King (1987) (numbers from memory): Tw aloft above ~3 °C melts snow
        // completely; the drops supercool, and on a subfreezing surface under a cold layer no
        // colder than −4 °C land as freezing rain.
        let f = surface_logistic(T0 - 4.0, 90.0, T0 + 3.5, T0 - 4.0);
        assert!((f.freezing_rain - 1.0).abs() < 1e-12, "{f:?}");
        let g = surface_logistic(T0 + 2.0, 90.0, T0 + 3.5, T0 + 2.0);
        assert!((g.rain - 1.0).abs() < 1e-12, "{g:?}");
        // Below 1 °C aloft nothing melts: cold surface stays snow (Jennings p ≈ 1 at −4 °C).
        let h = surface_logistic(T0 - 4.0, 90.0, T0 + 0.5, T0 - 4.0);
        assert!(h.snow > 0.99, "{h:?}");
        assert!(surface_logistic(f64::NAN, 90.0, T0, T0).snow.is_nan());
        assert!(surface_logistic(T0, 150.0, T0, T0).snow.is_nan());
        assert!(surface_logistic(T0, 90.0, T0, f64::NAN).snow.is_nan());
    }

    #[test]
    fn partial_melting_refreezes_to_ice_pellets() {
        // Stewart & King (1987) (from memory): partly melted snow keeps an ice core and
        // refreezes to ice pellets in subfreezing air below; completely melted drops refreeze
        // only under a cold layer below about −8 °C.
        let h = surface_logistic(T0 - 4.0, 90.0, T0 + 0.5, T0 - 4.0);
        // Tw aloft 2 °C: half melts (m = 0.5), half of that kept a core (k = 0.5). Under −4 °C
        // air the cored drops all refreeze and the melted ones not at all.
        let mid = surface_logistic(T0 - 4.0, 90.0, T0 + 2.0, T0 - 4.0);
        assert!((mid.snow - 0.5 * h.snow).abs() < 1e-9, "{mid:?}");
        assert!((mid.ice_pellets - 0.25 * h.snow).abs() < 1e-9, "{mid:?}");
        assert!(
            (mid.freezing_rain - (1.0 - 0.75 * h.snow)).abs() < 1e-9,
            "{mid:?}"
        );
        // Under −12 °C air everything that melted refreezes: no freezing rain from the melt.
        let cold = surface_logistic(T0 - 4.0, 90.0, T0 + 2.0, T0 - 12.0);
        assert!((cold.ice_pellets - 0.5 * h.snow).abs() < 1e-9, "{cold:?}");
        // Complete melting (Tw aloft 3.5 °C) over −12 °C air: ice pellets.
        let deep = surface_logistic(T0 - 4.0, 90.0, T0 + 3.5, T0 - 12.0);
        assert!((deep.ice_pellets - h.snow).abs() < 1e-9, "{deep:?}");
        // No subfreezing air below the warm layer: nothing refreezes.
        let warm = surface_logistic(T0 + 1.0, 90.0, T0 + 2.0, T0 + 1.0);
        assert_eq!(warm.ice_pellets, 0.0);
        for f in [mid, cold, deep, warm] {
            assert_valid(&f);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        #[test]
        fn colder_surface_and_aloft_never_have_less_snow(
            t2 in -10.0..10.0_f64,
            rh in 0.0..100.0_f64,
            tw_aloft in -5.0..6.0_f64,
            below in -15.0..5.0_f64,
            cool in (0.0..4.0_f64, 0.0..4.0_f64, 0.0..4.0_f64),
        ) {
            // Jennings et al. (2018): p(snow) falls with temperature at fixed RH; Stewart & King
            // (1987): a colder warm layer melts less, and colder air below refreezes more, so
            // the frozen share (snow and ice pellets) never falls either.
            let warm = surface_logistic(T0 + t2, rh, T0 + tw_aloft, T0 + below);
            let cold = surface_logistic(
                T0 + t2 - cool.0,
                rh,
                T0 + tw_aloft - cool.1,
                T0 + below - cool.2,
            );
            assert_valid(&warm);
            assert_valid(&cold);
            prop_assert!(cold.snow >= warm.snow - 1e-12, "{:?} → {:?}", warm, cold);
            let frozen = |f: &PtypeFractions| f.snow + f.ice_pellets;
            prop_assert!(frozen(&cold) >= frozen(&warm) - 1e-12, "{:?} → {:?}", warm, cold);
        }
    }
}
