//! The partial-thickness rules for precipitation type (Cantin & Bachand 1993).

use super::{smoothstep, PtypeFractions};

/// Partial-thickness thresholds, m (Cantin & Bachand 1993, from memory; common practice since).
const SNOW_850_700_M: f64 = 1540.0;
const FREEZING_RAIN_850_700_M: f64 = 1560.0;
const RAIN_1000_850_M: f64 = 1310.0;
const RAIN_1000_500_M: f64 = 5400.0;
/// Ramp half-widths, m: ±5 m is about ±1 K of layer-mean temperature for 850–700 and
/// 1000–850 hPa (5.7 and 4.8 m/K), and ±20 m the same for 1000–500 hPa (20.3 m/K). The narrow
/// 850–700 ramps keep a pure ice-pellet plateau (1545–1555 m) inside the 1540–1560 m band.
const HALF_WIDTH_PARTIAL_M: f64 = 5.0;
const HALF_WIDTH_1000_500_M: f64 = 20.0;

fn ramp_about(centre: f64, half_width: f64, x: f64) -> f64 {
    smoothstep(centre - half_width, centre + half_width, x)
}

/// Precipitation-type fractions from partial thicknesses (m) and the surface wet-bulb
/// temperature (K), by the partial-thickness rules of Cantin, A., and D. Bachand, 1993:
/// *Synoptic pattern recognition and partial thickness techniques as a tool for precipitation
/// types forecasting associated with a winter storm.* Technical Note 93N-002, 9 pp. (the
/// algorithm Bourgouin 2000 compares his method with; the report's title, number and the
/// thresholds are from memory, and they are common practice since):
/// - 850–700 hPa ≤ 1540 m: snow; 1540–1560 m: ice pellets (melting aloft, refreezing below);
///   > 1560 m: liquid, which is freezing rain on a surface with wet-bulb ≤ 0 °C, else rain;
/// - 1000–850 hPa > 1310 m: the low levels melt whatever falls into them (liquid);
/// - 1000–500 hPa 5400 m: the traditional rain/snow line, used only when 850–700 hPa is
///   missing.
///
/// Ramps (smoothstep): ±5 m about 1540, 1560 and 1310 m (≈ ±1 K of layer-mean temperature),
/// ±20 m about 5400 m (the same ≈ ±1 K), ±0.25 K about 0 °C for the freezing-rain split.
///
/// Missing levels: pass NaN for a thickness whose levels are below ground. Where the ground is
/// above 1000 hPa but below 850 hPa, the engine passes the layer from the ground to 850 hPa at
/// its own mean temperature as the 1000–850 hPa thickness
/// ([`Profile::low_level_thickness`](crate::diagnose::profile::Profile::low_level_thickness));
/// the published rules are for stations near sea level and say nothing of higher ground. A NaN
/// 1000–850 hPa thickness (850 hPa at or below the ground) means no low-level layer to melt in
/// (that term drops out); a NaN 850–700 hPa
/// thickness falls back to the 1000–500 hPa line; if both 850–700 and 1000–500 are NaN the
/// result is NaN.
///
/// Validity: thicknesses finite and positive (or NaN as above), wet-bulb 173.15–373.15 K;
/// NaN fractions otherwise.
///
/// ```
/// use trackswing::diagnose::ptype::partial_thickness;
/// // Common practice: 850–700 hPa at 1520 m (≤ 1540) and 1000–850 hPa at 1280 m: snow.
/// let f = partial_thickness(1280.0, 1520.0, 5350.0, 272.15);
/// assert!((f.snow - 1.0).abs() < 1e-12);
/// ```
pub fn partial_thickness(
    dz_1000_850_m: f64,
    dz_850_700_m: f64,
    dz_1000_500_m: f64,
    tw_surface_k: f64,
) -> PtypeFractions {
    let usable = |dz: f64| dz.is_nan() || (dz > 0.0 && dz.is_finite());
    if !(usable(dz_1000_850_m) && usable(dz_850_700_m) && usable(dz_1000_500_m)) {
        return PtypeFractions::nan();
    }
    if !(173.15..=373.15).contains(&tw_surface_k) {
        return PtypeFractions::nan();
    }
    let low_melt = if dz_1000_850_m.is_nan() {
        0.0
    } else {
        ramp_about(RAIN_1000_850_M, HALF_WIDTH_PARTIAL_M, dz_1000_850_m)
    };
    let (aloft_partial, aloft_full) = if !dz_850_700_m.is_nan() {
        (
            ramp_about(SNOW_850_700_M, HALF_WIDTH_PARTIAL_M, dz_850_700_m),
            ramp_about(FREEZING_RAIN_850_700_M, HALF_WIDTH_PARTIAL_M, dz_850_700_m),
        )
    } else if !dz_1000_500_m.is_nan() {
        let melt = ramp_about(RAIN_1000_500_M, HALF_WIDTH_1000_500_M, dz_1000_500_m);
        (melt, melt)
    } else {
        return PtypeFractions::nan();
    };
    let snow = (1.0 - aloft_partial) * (1.0 - low_melt);
    let pellets = (aloft_partial - aloft_full) * (1.0 - low_melt);
    PtypeFractions::with_liquid(snow, pellets, 1.0 - snow - pellets, tw_surface_k)
}

#[cfg(test)]
mod tests {
    use super::super::testing::*;
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn partial_thickness_rules() {
        // Common practice (SCIENCE.md §3), away from the ±5 m ramps.
        let snow = partial_thickness(1290.0, 1530.0, 5380.0, T0 - 2.0);
        assert_eq!(snow.snow, 1.0);
        let pellets = partial_thickness(1290.0, 1550.0, 5420.0, T0 - 2.0);
        assert_eq!(pellets.ice_pellets, 1.0);
        let fzra = partial_thickness(1300.0, 1575.0, 5450.0, T0 - 1.0);
        assert_eq!(fzra.freezing_rain, 1.0);
        let rain = partial_thickness(1300.0, 1575.0, 5450.0, T0 + 1.0);
        assert_eq!(rain.rain, 1.0);
        // Warm low levels (1000–850 > 1310 m) melt snow to rain.
        let low_warm = partial_thickness(1330.0, 1530.0, 5420.0, T0 + 2.0);
        assert_eq!(low_warm.rain, 1.0);
        // At a threshold the ramp is half-way.
        let edge = partial_thickness(1290.0, 1540.0, 5400.0, T0 - 2.0);
        assert!((edge.snow - 0.5).abs() < 1e-12 && (edge.ice_pellets - 0.5).abs() < 1e-12);
        for f in [snow, pellets, fzra, rain, low_warm, edge] {
            assert_valid(&f);
        }
    }

    #[test]
    fn partial_thickness_missing_levels() {
        // 1000 hPa below ground: the 1000–850 term drops out.
        let f = partial_thickness(f64::NAN, 1530.0, f64::NAN, T0 - 2.0);
        assert_eq!(f.snow, 1.0);
        // 850–700 missing: the 5400 m line (common practice) decides.
        assert_eq!(
            partial_thickness(1290.0, f64::NAN, 5350.0, T0 - 2.0).snow,
            1.0
        );
        assert_eq!(
            partial_thickness(1290.0, f64::NAN, 5450.0, T0 + 2.0).rain,
            1.0
        );
        assert!(partial_thickness(f64::NAN, f64::NAN, f64::NAN, T0)
            .snow
            .is_nan());
        assert!(partial_thickness(-5.0, 1530.0, 5400.0, T0).snow.is_nan());
        assert!(partial_thickness(1290.0, 1530.0, 5400.0, f64::NAN)
            .snow
            .is_nan());
    }

    #[test]
    fn partial_thickness_is_continuous() {
        // 0.1 m steps through every threshold: at most 0.05 per step.
        let mut prev = partial_thickness(1300.0, 1520.0, 5400.0, T0 - 1.0);
        for i in 1..=600 {
            let dz = 1520.0 + 0.1 * i as f64;
            let f = partial_thickness(1300.0 + 0.05 * i as f64, dz, 5400.0, T0 - 1.0);
            assert_valid(&f);
            assert!(max_change(&prev, &f) <= 0.05, "{dz}");
            prev = f;
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        #[test]
        fn thinner_layers_never_have_less_snow(
            low in 1250.0..1370.0_f64,
            mid in 1480.0..1620.0_f64,
            deep in 5300.0..5500.0_f64,
            tw in -5.0..5.0_f64,
            shrink in (0.0..40.0_f64, 0.0..40.0_f64, 0.0..80.0_f64, 0.0..3.0_f64),
            missing in 0usize..4,
        ) {
            // Common practice: colder air is denser, so thinner layers; thinner never means
            // less snow. `missing` drops the 1000–850 or the 850–700 thickness (ground above
            // the level), the same one in both columns.
            let nan_if = |cond: bool, v: f64| if cond { f64::NAN } else { v };
            let warm = partial_thickness(
                nan_if(missing == 1, low),
                nan_if(missing == 2, mid),
                deep,
                T0 + tw,
            );
            let cold = partial_thickness(
                nan_if(missing == 1, low - shrink.0),
                nan_if(missing == 2, mid - shrink.1),
                deep - shrink.2,
                T0 + tw - shrink.3,
            );
            assert_valid(&warm);
            assert_valid(&cold);
            prop_assert!(cold.snow >= warm.snow - 1e-12, "{:?} → {:?}", warm, cold);
        }
    }
}
