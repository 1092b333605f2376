//! The moist thermodynamics the demo generator needs to make its heights hypsometric, built on
//! [`crate::diagnose::thermo`] (the engine's own, tested against MetPy) so there is one
//! implementation of each formula.
//!
//! Plain SI numbers in and out (K, Pa, kg/kg, m); out-of-domain input gives NaN.

use crate::diagnose::thermo::specific_humidity_from_rh;
pub use crate::diagnose::thermo::{
    saturation_vapor_pressure as saturation_vapour_pressure, virtual_temperature, EPSILON, G,
    LAPSE_RATE_STD as STANDARD_LAPSE, RD, T_FREEZE as ZERO_CELSIUS,
};

/// Specific humidity, kg/kg, from pressure `p_pa` and vapour pressure `e_pa` (both Pa):
/// q = ε·e / (p − (1 − ε)·e) (Wallace & Hobbs 2006, Atmospheric Science 2nd ed., §3.5.1;
/// equation number from memory). Valid for 0 ≤ e < p; NaN otherwise.
///
/// ```
/// use trackswing::demo::thermo::specific_humidity;
/// // Common practice: q ≈ ε·e/p when e ≪ p; 10 hPa of vapour at 1000 hPa is about 6.2 g/kg.
/// let q = specific_humidity(100_000.0, 1_000.0);
/// assert!((q - 0.622 * 1_000.0 / 100_000.0).abs() < 5e-5);
/// ```
pub fn specific_humidity(p_pa: f64, e_pa: f64) -> f64 {
    if !(p_pa > 0.0 && e_pa >= 0.0 && e_pa < p_pa) {
        return f64::NAN;
    }
    EPSILON * e_pa / (p_pa - (1.0 - EPSILON) * e_pa)
}

/// Virtual temperature, K, of air at `t_k` (K), relative humidity `rh_percent` (%, over water)
/// and pressure `p_pa` (Pa). NaN outside the domains of the thermo functions or for RH outside
/// 0…100 %.
///
/// ```
/// use trackswing::demo::thermo::virtual_temperature_from_rh;
/// // Dry air: the virtual temperature is the temperature.
/// assert_eq!(virtual_temperature_from_rh(270.0, 0.0, 85_000.0), 270.0);
/// ```
pub fn virtual_temperature_from_rh(t_k: f64, rh_percent: f64, p_pa: f64) -> f64 {
    if !(0.0..=100.0).contains(&rh_percent) {
        return f64::NAN;
    }
    virtual_temperature(t_k, specific_humidity_from_rh(p_pa, t_k, rh_percent))
}

/// Thickness of a layer, m, between pressures `p_bottom_pa` and `p_top_pa` (Pa) whose mean
/// virtual temperature (mean over ln p) is `tv_mean_k` (K).
///
/// The hypsometric equation Δz = (Rd·T̄v/g)·ln(p_bottom/p_top) (Wallace & Hobbs 2006,
/// Atmospheric Science 2nd ed., eq. 3.29, number from memory; SCIENCE.md §2). Valid for
/// positive pressures and temperature; NaN otherwise. A layer with p_top > p_bottom gets a
/// negative thickness, which the generator uses below sea level.
///
/// ```
/// use trackswing::demo::thermo::thickness;
/// // SCIENCE.md §2 check: 1000–500 hPa is 5400 m at a layer-mean Tv of −7.0 °C.
/// assert!((thickness(266.15, 100_000.0, 50_000.0) - 5400.0).abs() < 1.0);
/// ```
pub fn thickness(tv_mean_k: f64, p_bottom_pa: f64, p_top_pa: f64) -> f64 {
    if !(tv_mean_k > 0.0 && p_bottom_pa > 0.0 && p_top_pa > 0.0) {
        return f64::NAN;
    }
    RD * tv_mean_k / G * (p_bottom_pa / p_top_pa).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hypsometric_check_values() {
        // SCIENCE.md §2 check values for the hypsometric equation.
        let cases = [
            (-7.0, 1000.0, 500.0, 5400.0),
            (0.1, 1000.0, 850.0, 1300.0),
            (-2.2, 850.0, 700.0, 1540.0),
        ];
        for (tc, pb, pt, dz) in cases {
            let got = thickness(ZERO_CELSIUS + tc, pb * 100.0, pt * 100.0);
            assert!(
                (got - dz).abs() < 1.0,
                "{pb}-{pt} hPa at {tc} °C gave {got} m"
            );
        }
        assert!(thickness(-1.0, 1e5, 5e4).is_nan());
    }
}
