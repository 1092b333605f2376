//! Moist thermodynamics the demo generator needs to make its heights hypsometric.
//!
//! Plain SI numbers in and out (K, Pa, kg/kg, m); out-of-domain input gives NaN.

/// Gas constant of dry air, J kg⁻¹ K⁻¹ (SCIENCE.md §1).
pub const RD: f64 = 287.04;
/// Standard gravity, m s⁻² (the conventional value adopted by the 3rd CGPM, 1901).
pub const G: f64 = 9.80665;
/// Ratio of the gas constants of dry air and water vapour, ε (SCIENCE.md §1).
pub const EPSILON: f64 = 0.622;
/// Temperature lapse rate of the standard atmosphere, K m⁻¹ (ISO 2533 / ICAO).
pub const STANDARD_LAPSE: f64 = 0.0065;
/// 0 °C in kelvin.
pub const ZERO_CELSIUS: f64 = 273.15;

/// Saturation vapour pressure over liquid water, Pa.
///
/// Bolton (1980), Mon. Wea. Rev. 108, 1046–1053, eq. 10:
/// es = 611.2·exp(17.67·T/(T + 243.5)) with T in °C. Bolton states ±0.3 % for −35…35 °C; it is
/// used here down to −80 °C because at those temperatures the vapour changes the virtual
/// temperature by less than 0.01 K, so the extrapolation error does not matter for heights.
/// Outside −80…60 °C the result is NaN.
///
/// ```
/// use trackswing::demo::thermo::saturation_vapour_pressure;
/// // Check value from Bolton (1980) eq. 10 as tabulated in SCIENCE.md §2: 20 °C → 23.370 hPa.
/// assert!((saturation_vapour_pressure(293.15) - 2337.0).abs() < 0.5);
/// ```
pub fn saturation_vapour_pressure(t_k: f64) -> f64 {
    let tc = t_k - ZERO_CELSIUS;
    if !(-80.0..=60.0).contains(&tc) {
        return f64::NAN;
    }
    611.2 * (17.67 * tc / (tc + 243.5)).exp()
}

/// Specific humidity, kg/kg, from pressure `p_pa` and vapour pressure `e_pa` (both Pa).
///
/// q = ε·e / (p − (1 − ε)·e), the definition of specific humidity written with the vapour
/// pressure (Wallace & Hobbs 2006, Atmospheric Science 2nd ed., §3.5.1; equation number from
/// memory). Valid for 0 ≤ e < p; NaN otherwise.
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

/// Virtual temperature, K, from temperature `t_k` (K) and specific humidity `q` (kg/kg).
///
/// Tv = T·(1 + q·(1 − ε)/ε), exact for an ideal mixture of dry air and vapour (Wallace & Hobbs
/// 2006, Atmospheric Science 2nd ed., §3.1.1; equation number from memory). Valid for
/// T > 0 and 0 ≤ q < 1; NaN otherwise.
///
/// ```
/// use trackswing::demo::thermo::virtual_temperature;
/// // Common practice: Tv ≈ T·(1 + 0.61·q); at 300 K and 20 g/kg that is 303.66 K.
/// assert!((virtual_temperature(300.0, 0.02) - 303.66).abs() < 0.05);
/// ```
pub fn virtual_temperature(t_k: f64, q: f64) -> f64 {
    if !(t_k > 0.0 && (0.0..1.0).contains(&q)) {
        return f64::NAN;
    }
    t_k * (1.0 + q * (1.0 - EPSILON) / EPSILON)
}

/// Virtual temperature, K, of air at `t_k` (K), relative humidity `rh_percent` (%, over water)
/// and pressure `p_pa` (Pa): Bolton's saturation vapour pressure, then
/// [`specific_humidity`] and [`virtual_temperature`]. NaN outside their domains or for RH
/// outside 0…100 %.
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
    let e = 0.01 * rh_percent * saturation_vapour_pressure(t_k);
    virtual_temperature(t_k, specific_humidity(p_pa, e))
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
    fn bolton_check_values() {
        // Bolton (1980) eq. 10, values typed in from SCIENCE.md §2 (hPa).
        for (tc, hpa) in [(0.0, 6.112), (10.0, 12.272), (20.0, 23.370), (25.0, 31.674)] {
            let es = saturation_vapour_pressure(ZERO_CELSIUS + tc) / 100.0;
            assert!((es - hpa).abs() < 0.002, "{tc} °C gave {es} hPa");
        }
        assert!(saturation_vapour_pressure(100.0).is_nan());
    }

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

    #[test]
    fn virtual_temperature_matches_the_common_approximation() {
        // Common practice: Tv ≈ T(1 + 0.61 q); the exact factor (1 − ε)/ε is 0.608.
        for (t, q) in [(260.0, 0.001), (280.0, 0.006), (300.0, 0.02)] {
            let approx = t * (1.0 + 0.61 * q);
            assert!((virtual_temperature(t, q) - approx).abs() < 0.02);
        }
        assert!(virtual_temperature(280.0, -0.1).is_nan());
        assert!(virtual_temperature_from_rh(280.0, 101.0, 1e5).is_nan());
        assert!(specific_humidity(1_000.0, 2_000.0).is_nan());
    }
}
