//! Thermodynamic kernels: vapour pressure, humidity, wet-bulb, potential temperature, thickness.
//!
//! Every function takes and returns plain `f64` in SI units (K, Pa, kg/kg, m, %) and returns
//! NaN for input outside its stated domain. Bibliography keys (AuthorYear) refer to
//! docs/REFERENCES.md.

/// Specific gas constant of dry air, J kg⁻¹ K⁻¹ (the value used by Bolton 1980 and the
/// project's science notes).
///
/// ```
/// use trackswing::diagnose::thermo::RD;
/// assert!((RD - 287.04).abs() < 1e-12);
/// ```
pub const RD: f64 = 287.04;

/// Specific heat of dry air at constant pressure, J kg⁻¹ K⁻¹.
///
/// ```
/// use trackswing::diagnose::thermo::{CP, RD};
/// // cp ≈ 3.5·Rd for a diatomic ideal gas (within 0.1 %).
/// assert!((CP / (3.5 * RD) - 1.0).abs() < 1e-3);
/// ```
pub const CP: f64 = 1004.0;

/// Poisson exponent κ = Rd/cp (dimensionless).
///
/// ```
/// use trackswing::diagnose::thermo::KAPPA;
/// assert!((KAPPA - 0.2859).abs() < 1e-4);
/// ```
pub const KAPPA: f64 = RD / CP;

/// Standard gravity, m s⁻² (ISO 80000-3 conventional value).
///
/// ```
/// use trackswing::diagnose::thermo::G;
/// assert!((G - 9.80665).abs() < 1e-12);
/// ```
pub const G: f64 = 9.80665;

/// Ratio of the gas constants of dry air and water vapour, Rd/Rv (dimensionless).
///
/// ```
/// use trackswing::diagnose::thermo::EPSILON;
/// assert!((EPSILON - 0.622).abs() < 1e-12);
/// ```
pub const EPSILON: f64 = 0.622;

/// Melting point of ice at standard pressure, K (0 °C).
///
/// ```
/// use trackswing::diagnose::thermo::T_FREEZE;
/// assert!((T_FREEZE - 273.15).abs() < 1e-12);
/// ```
pub const T_FREEZE: f64 = 273.15;

/// Temperature lapse rate of the standard atmosphere below 11 km, K m⁻¹
/// (ISO 2533:1975, Standard Atmosphere), used to move 2 m temperature between terrain heights.
///
/// ```
/// use trackswing::diagnose::thermo::LAPSE_RATE_STD;
/// // 1 km of ascent cools by 6.5 K.
/// assert!((LAPSE_RATE_STD * 1000.0 - 6.5).abs() < 1e-12);
/// ```
pub const LAPSE_RATE_STD: f64 = 0.0065;

/// Latent heat of vaporisation at 0 °C, J kg⁻¹ (Bolton 1980, eq. 2 at T = 0 °C; equation number
/// from memory).
const LATENT_HEAT_VAPORISATION: f64 = 2.501e6;

/// Bolton (1980) eq. 10 coefficients: es = 611.2·exp(17.67·Tc/(Tc + 243.5)) Pa.
const BOLTON_ES0_PA: f64 = 611.2;
const BOLTON_A: f64 = 17.67;
const BOLTON_B_K: f64 = 243.5;

/// Temperatures accepted by the vapour-pressure kernels, K (−100…+100 °C).
const T_MIN_K: f64 = 173.15;
const T_MAX_K: f64 = 373.15;

/// Highest relative humidity accepted, %. Model output and interpolation overshoot 100 %
/// slightly; larger values signal a unit or field mix-up.
const RH_MAX_PCT: f64 = 110.0;

/// Pressures accepted by [`wet_bulb`], Pa.
const P_MIN_PA: f64 = 10_000.0;
const P_MAX_PA: f64 = 110_000.0;

/// Dewpoints up to this far above the temperature are treated as saturation (rounding in model
/// output), K.
const SUPERSATURATION_TOLERANCE_K: f64 = 0.5;

fn t_in_domain(t_k: f64) -> bool {
    (T_MIN_K..=T_MAX_K).contains(&t_k)
}

/// Saturation vapour pressure over liquid water, Pa, from temperature in K.
///
/// es = 611.2·exp(17.67·Tc/(Tc + 243.5)) with Tc in °C: Bolton, D., 1980: The computation of
/// equivalent potential temperature. *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10. Chosen
/// because it is accurate to 0.3 % over −35…+35 °C, cheap, and has a closed-form inverse; it is
/// also what MetPy ≤ 1.6 uses, so MetPy serves as a reference.
///
/// Validity: within 0.3 % for 238.15–308.15 K; computed (with growing error) for
/// 173.15–373.15 K; NaN outside that or for non-finite input. Below 0 °C this is the
/// saturation pressure over supercooled water, not ice.
///
/// ```
/// use trackswing::diagnose::thermo::saturation_vapor_pressure;
/// // Bolton (1980) eq. 10 check value: 20 °C → 23.370 hPa.
/// let es = saturation_vapor_pressure(293.15);
/// assert!((es - 2337.0).abs() < 0.1);
/// ```
pub fn saturation_vapor_pressure(t_k: f64) -> f64 {
    if !t_in_domain(t_k) {
        return f64::NAN;
    }
    let tc = t_k - T_FREEZE;
    BOLTON_ES0_PA * (BOLTON_A * tc / (tc + BOLTON_B_K)).exp()
}

/// Dewpoint, K, from vapour pressure in Pa: the exact inverse of Bolton (1980) eq. 10,
/// Td = 243.5·ln(e/611.2)/(17.67 − ln(e/611.2)) °C.
///
/// Citation: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10 (inverted).
///
/// Validity: e > 0 and a result within 173.15–373.15 K (the domain of
/// [`saturation_vapor_pressure`]); NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::dewpoint_from_vapor_pressure;
/// // Bolton (1980) eq. 10 check value: 12.272 hPa ↔ 10 °C.
/// let td = dewpoint_from_vapor_pressure(1227.2);
/// assert!((td - 283.15).abs() < 0.01);
/// ```
pub fn dewpoint_from_vapor_pressure(e_pa: f64) -> f64 {
    if !(e_pa > 0.0 && e_pa.is_finite()) {
        return f64::NAN;
    }
    let ln_ratio = (e_pa / BOLTON_ES0_PA).ln();
    let td = T_FREEZE + BOLTON_B_K * ln_ratio / (BOLTON_A - ln_ratio);
    if t_in_domain(td) {
        td
    } else {
        f64::NAN
    }
}

/// Dewpoint, K, from temperature (K) and relative humidity over water (%), RH = 100·e/es(T).
///
/// Citation: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10 and its inverse.
///
/// Validity: T in 173.15–373.15 K, 0 < RH ≤ 110 % (values above 100 % give Td > T, as model
/// output sometimes does); NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::dewpoint_from_rh;
/// // MetPy 1.6.3 dewpoint_from_relative_humidity(20 °C, 50 %) = 282.420 K.
/// let td = dewpoint_from_rh(293.15, 50.0);
/// assert!((td - 282.420).abs() < 0.01);
/// ```
pub fn dewpoint_from_rh(t_k: f64, rh_pct: f64) -> f64 {
    if !(rh_pct > 0.0 && rh_pct <= RH_MAX_PCT) {
        return f64::NAN;
    }
    dewpoint_from_vapor_pressure(rh_pct / 100.0 * saturation_vapor_pressure(t_k))
}

/// Relative humidity over water, %, from temperature and dewpoint (K): 100·es(Td)/es(T).
///
/// Citation: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10.
///
/// Validity: both in 173.15–373.15 K; NaN otherwise. Td > T gives RH > 100 %.
///
/// ```
/// use trackswing::diagnose::thermo::rh_from_dewpoint;
/// // MetPy 1.6.3 relative_humidity_from_dewpoint(20 °C, 10 °C) = 52.512 %.
/// let rh = rh_from_dewpoint(293.15, 283.15);
/// assert!((rh - 52.512).abs() < 0.01);
/// ```
pub fn rh_from_dewpoint(t_k: f64, td_k: f64) -> f64 {
    100.0 * saturation_vapor_pressure(td_k) / saturation_vapor_pressure(t_k)
}

/// Relative humidity over water (%) from specific humidity `q` (kg kg⁻¹), temperature (K) and
/// pressure (Pa): vapour pressure e = q·p/(ε + (1 − ε)·q) (from q = ε·e/(p − (1 − ε)·e), the
/// definition of specific humidity for ideal gases) over Bolton's (1980) saturation pressure,
/// capped at 100 % (model supersaturation is rounding or over-ice conditions).
///
/// ```
/// use trackswing::diagnose::thermo::rh_from_specific;
/// // Saturated air at 20 °C, 1000 hPa: es = 23.370 hPa (Bolton 1980 eq. 10 check value),
/// // q = ε·es/(p − (1 − ε)·es) = 0.014668.
/// assert!((rh_from_specific(0.014668, 293.15, 100_000.0) - 100.0).abs() < 0.05);
/// ```
pub fn rh_from_specific(q: f64, t_k: f64, p_pa: f64) -> f64 {
    if !(q.is_finite() && q >= 0.0 && p_pa > 0.0) {
        return f64::NAN;
    }
    let e = q * p_pa / (EPSILON + (1.0 - EPSILON) * q);
    (100.0 * e / saturation_vapor_pressure(t_k)).min(100.0)
}

/// Specific gas constant of air in the ISO 2533 standard atmosphere, J kg⁻¹ K⁻¹
/// (R*/M = 8314.32/28.9644; ISO 2533:1975, from memory). The standard defines its own value;
/// [`standard_pressure`] uses it so that it reproduces the standard's tables, while the
/// thermodynamics of real soundings use [`RD`].
pub const R_STANDARD_ATMOSPHERE: f64 = 287.052_87;

/// Pressure (Pa) of the ISO 2533 standard atmosphere at altitude `z` m (troposphere, below
/// 11 km): p = 101 325·(1 − L·z/288.15)^(g/(R·L)) with L = [`LAPSE_RATE_STD`]. The readers take
/// it as the ground pressure where a model file has none, for the 2 m humidity conversion.
///
/// ```
/// use trackswing::diagnose::thermo::standard_pressure;
/// // ISO 2533 table value at 1000 m: 898.746 hPa (from memory).
/// assert!((standard_pressure(1000.0) - 89_874.6).abs() < 0.1);
/// assert_eq!(standard_pressure(0.0), 101_325.0);
/// ```
pub fn standard_pressure(z: f64) -> f64 {
    101_325.0
        * (1.0 - LAPSE_RATE_STD * z / 288.15).powf(G / (R_STANDARD_ATMOSPHERE * LAPSE_RATE_STD))
}

/// Water-vapour mixing ratio, kg/kg, from total pressure and vapour pressure (Pa):
/// w = ε·e/(p − e).
///
/// Citation: definition of the mixing ratio for ideal gases, e.g. Wallace, J. M., and
/// P. V. Hobbs, 2006: *Atmospheric Science: An Introductory Survey*, 2nd ed., Academic Press,
/// §3.5 (equation number from memory).
///
/// Validity: p > 0, 0 ≤ e < p, both finite; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::mixing_ratio;
/// // MetPy 1.6.3 mixing_ratio(12.272 hPa, 1000 hPa) = 0.0077275 (its ε is 0.6219569).
/// let w = mixing_ratio(100_000.0, 1227.2);
/// assert!((w - 0.0077275).abs() < 2e-6);
/// ```
pub fn mixing_ratio(p_pa: f64, e_pa: f64) -> f64 {
    if !(p_pa.is_finite() && e_pa.is_finite() && e_pa >= 0.0 && e_pa < p_pa) {
        return f64::NAN;
    }
    EPSILON * e_pa / (p_pa - e_pa)
}

/// Specific humidity, kg/kg, from pressure (Pa), temperature (K) and relative humidity over
/// water (%): e = RH/100·es(T), q = ε·e/(p − (1 − ε)·e).
///
/// Citation: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10 for es; q from
/// its definition (Wallace & Hobbs 2006, §3.5, from memory).
///
/// Validity: p > 0, T in 173.15–373.15 K, 0 ≤ RH ≤ 110 %, and e < p; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::specific_humidity_from_rh;
/// // MetPy 1.6.3: specific_humidity_from_dewpoint(1000 hPa,
/// //   dewpoint_from_relative_humidity(15 °C, 70 %)) = 0.0074525.
/// let q = specific_humidity_from_rh(100_000.0, 288.15, 70.0);
/// assert!((q - 0.0074525).abs() < 2e-6);
/// ```
pub fn specific_humidity_from_rh(p_pa: f64, t_k: f64, rh_pct: f64) -> f64 {
    if !((0.0..=RH_MAX_PCT).contains(&rh_pct) && p_pa > 0.0 && p_pa.is_finite()) {
        return f64::NAN;
    }
    let e = rh_pct / 100.0 * saturation_vapor_pressure(t_k);
    if e.is_nan() || e >= p_pa {
        return f64::NAN;
    }
    EPSILON * e / (p_pa - (1.0 - EPSILON) * e)
}

/// Virtual temperature, K, from temperature (K) and specific humidity (kg/kg):
/// Tv = T·(1 + q·(1 − ε)/ε), exact for an ideal mixture of dry air and vapour.
///
/// Citation: Wallace, J. M., and P. V. Hobbs, 2006: *Atmospheric Science*, 2nd ed., §3.2
/// (section from memory); identical to MetPy's mixing-ratio form T·(w + ε)/(ε·(1 + w)).
///
/// Validity: T > 0, 0 ≤ q < 1; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::virtual_temperature;
/// // MetPy 1.6.3 virtual_temperature(300 K, w = 0.010101) = 301.8235 K (q = 0.01).
/// let tv = virtual_temperature(300.0, 0.01);
/// assert!((tv - 301.8235).abs() < 0.01);
/// ```
pub fn virtual_temperature(t_k: f64, q: f64) -> f64 {
    if !(t_k > 0.0 && t_k.is_finite() && (0.0..1.0).contains(&q)) {
        return f64::NAN;
    }
    t_k * (1.0 + q * (1.0 - EPSILON) / EPSILON)
}

/// Saturation mixing ratio over water at temperature `t_k` and pressure `p_pa`, kg/kg.
fn saturation_mixing_ratio(p_pa: f64, t_k: f64) -> f64 {
    mixing_ratio(p_pa, saturation_vapor_pressure(t_k))
}

/// Lifting condensation level temperature, K, from temperature and dewpoint (K): Bolton
/// (1980) eq. 15, T_L = 1/(1/(Td − 56) + ln(T/Td)/800) + 56 (accurate to about 0.1 K).
fn lcl_temperature(t_k: f64, td_k: f64) -> f64 {
    1.0 / (1.0 / (td_k - 56.0) + (t_k / td_k).ln() / 800.0) + 56.0
}

/// RK4 steps down the pseudo-adiabat in [`wet_bulb`]; 16 steps agree with a 400-step
/// integration within 0.002 K over the validated range (see the unit tests).
const WET_BULB_STEPS: usize = 16;

/// Wet-bulb temperature, K, at any pressure, from pressure (Pa), temperature (K) and dewpoint
/// (K), by Normand's rule (the adiabatic wet-bulb).
///
/// The air is lifted dry-adiabatically to its lifting condensation level (T_L from Bolton 1980
/// eq. 15, p_L = p·(T_L/T)^(1/κ)) and brought back to p along the saturated pseudo-adiabat
/// dT/d ln p = (Rd·T + L·rs)/(cp + L²·rs·ε/(Rd·T²)), integrated by classical fourth-order
/// Runge–Kutta in ln p with 16 fixed steps. rs from Bolton (1980) eq. 10 (over liquid water,
/// also below 0 °C), cp = 1004 J kg⁻¹ K⁻¹, constant L = 2.501×10⁶ J kg⁻¹ (Bolton 1980, eq. 2 at
/// 0 °C; equation number from memory) — the same construction as the reference, MetPy 1.6
/// `wet_bulb_temperature`.
///
/// Why not a psychrometric root-solve: the isobaric balance cp·(T − Tw) = L·(ws(Tw, p) − w)
/// (with Stull as first guess) was tried and is a different, warmer quantity — 0.125 K above
/// MetPy at 993 hPa/32 °C/Td 15 °C and up to 0.53 K above it in hot, very dry air; a closed-form
/// adiabatic balance still missed by 0.15 K. The integration agrees with MetPy within 0.02 K on
/// an 832-point grid (500–1050 hPa, −30…+30 °C, RH 5–99 %; largest gap at 500 hPa, 30 °C).
///
/// Citations: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eqs. 2, 10 and 15;
/// Normand, C. W. B., 1921: Wet bulb temperatures and the thermodynamics of the air. *Indian
/// Meteor. Memoirs*, **23**, 1–22 (from memory).
///
/// Validity: p in 100–1100 hPa, T and Td in 173.15–373.15 K with es(T) < p, Td ≤ T + 0.5 K
/// (up to 0.5 K of supersaturation is read as saturation); NaN otherwise. Checked against
/// MetPy over −30…+30 °C, 500–1050 hPa, RH 5–99 %.
///
/// ```
/// use trackswing::diagnose::thermo::wet_bulb;
/// // MetPy 1.6.3 wet_bulb_temperature(993 hPa, 32 °C, 15 °C) = 20.377 °C (SCIENCE.md: about
/// // 20.39 °C, ±0.05 K across MetPy versions); tolerance 0.05 K.
/// let tw = wet_bulb(99_300.0, 305.15, 288.15);
/// assert!((tw - (273.15 + 20.377)).abs() < 0.05);
/// ```
pub fn wet_bulb(p_pa: f64, t_k: f64, td_k: f64) -> f64 {
    if !((P_MIN_PA..=P_MAX_PA).contains(&p_pa) && t_in_domain(t_k) && t_in_domain(td_k)) {
        return f64::NAN;
    }
    if td_k > t_k + SUPERSATURATION_TOLERANCE_K {
        return f64::NAN;
    }
    if saturation_vapor_pressure(t_k) >= p_pa {
        return f64::NAN;
    }
    if td_k >= t_k {
        return t_k;
    }
    let t_lcl = lcl_temperature(t_k, td_k);
    let ln_p_lcl = p_pa.ln() + (t_lcl / t_k).ln() / KAPPA;
    pseudo_adiabat(ln_p_lcl, t_lcl, p_pa.ln(), WET_BULB_STEPS)
}

/// Temperature, K, reached by following the pseudo-adiabat from (ln p0, t0) to ln p1 with
/// `steps` RK4 steps; NaN if the path leaves the domain of the saturation mixing ratio.
fn pseudo_adiabat(ln_p0: f64, t0: f64, ln_p1: f64, steps: usize) -> f64 {
    let l = LATENT_HEAT_VAPORISATION;
    let slope = |ln_p: f64, t: f64| {
        let rs = saturation_mixing_ratio(ln_p.exp(), t);
        (RD * t + l * rs) / (CP + l * l * rs * EPSILON / (RD * t * t))
    };
    let h = (ln_p1 - ln_p0) / steps as f64;
    let (mut x, mut t) = (ln_p0, t0);
    for _ in 0..steps {
        let k1 = slope(x, t);
        let k2 = slope(x + 0.5 * h, t + 0.5 * h * k1);
        let k3 = slope(x + 0.5 * h, t + 0.5 * h * k2);
        let k4 = slope(x + h, t + h * k3);
        t += h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
        x += h;
    }
    t
}

/// Largest number of Halley steps [`isobaric_wet_bulb`] takes; from the air temperature the
/// iteration converges (the balance is concave in Tw), to 1e-5 K in 1–3 steps.
const ISOBARIC_WET_BULB_MAX_STEPS: usize = 30;
/// Halley steps stop after a step smaller than this, K. The error after a step s is below
/// Newton's, about |g''/2g'|·s², and for this balance |g''/g'| < ws''/ws' < 0.1 K⁻¹ from −40
/// to +40 °C (Bolton's es: A·B/(T + B)² − 2/(T + B)), so the root is within
/// 0.05·(0.01 K)² = 5e-6 K.
const ISOBARIC_WET_BULB_TOLERANCE_K: f64 = 0.01;

/// Isobaric (psychrometric) wet-bulb temperature, K, from pressure (Pa), temperature (K) and
/// relative humidity over water (%): the temperature air reaches when water evaporates into it
/// at constant pressure until it is saturated, the root of the enthalpy balance
/// cp·(T − Tw) = L·(ws(Tw, p) − w), with w and ws mixing ratios from Bolton (1980) eq. 10,
/// cp = 1004 J kg⁻¹ K⁻¹ and constant L = 2.501×10⁶ J kg⁻¹, solved by Halley's method (Newton's
/// with the second derivative, which Bolton's es gives without another exponential) from Tw = T.
///
/// Why a second wet-bulb: this is the process of precipitation evaporating into dry air below a
/// cloud (the cooling is isobaric), and it costs a handful of exponentials, so the engine can
/// evaluate it at every level of every column. It is a slightly different quantity from the
/// adiabatic wet-bulb of [`wet_bulb`] (Normand's rule, MetPy's): measured against MetPy 1.6.3 on
/// 500–1000 hPa (tests/ref/check_thermo.py), at or below 0 °C the isobaric one is warmer by at
/// most 0.02 K for RH ≥ 50 %, 0.07 K for RH ≥ 20 % and 0.17 K at 5 %; at +10 °C by up to
/// 0.28 K, and in hot, dry air by up to 0.5 K.
///
/// Citations: the psychrometric balance, e.g. Wallace & Hobbs (2006), *Atmospheric Science*,
/// 2nd ed., §3.5 (section from memory); Bolton, D., 1980, *Mon. Wea. Rev.*, **108**,
/// 1046–1053, eq. 10.
///
/// Validity: p in 100–1100 hPa, T in 173.15–373.15 K with es(T) < p, 0 ≤ RH ≤ 110 % (RH ≥ 100 %
/// gives Tw = T); NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::{isobaric_wet_bulb, rh_from_dewpoint};
/// // MetPy 1.6.3 wet_bulb_temperature(850 hPa, −5 °C, −8 °C) = 267.138 K (Normand's rule);
/// // the isobaric wet-bulb agrees within 0.1 K in winter air.
/// let rh = rh_from_dewpoint(268.15, 265.15);
/// let tw = isobaric_wet_bulb(85_000.0, 268.15, rh);
/// assert!((tw - 267.138).abs() < 0.1);
/// ```
pub fn isobaric_wet_bulb(p_pa: f64, t_k: f64, rh_pct: f64) -> f64 {
    isobaric_wet_bulb_and_deficit(p_pa, t_k, rh_pct).0
}

/// Water needed to saturate air by evaporation at constant pressure, kg of water per kg of air:
/// q_s(Tw) − q, with Tw the [`isobaric_wet_bulb`], q the specific humidity and q_s(Tw) the
/// saturation specific humidity at Tw (Bolton 1980 eq. 10, over water). Integrated over a
/// layer, (1/g)·∫(q_s(Tw) − q) dp is the liquid (kg m⁻² = mm) that falling precipitation must
/// give up before the layer is saturated (docs/SCIENCE.md §5).
///
/// Citations: Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 10; specific
/// humidity from its definition (Wallace & Hobbs 2006, §3.5, from memory).
///
/// Validity: as [`isobaric_wet_bulb`]; 0 for saturated air (RH ≥ 100 %); NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::{saturation_deficit, CP};
/// // 900 hPa, 0 °C, 50 %: the balance solved by bisection (200 halvings, same Bolton formula)
/// // gives Tw = 270.0226 K and a deficit of 1.2486 g/kg, within 1 % of cp·(T − Tw)/L
/// // (1.2555 g/kg; mixing ratio against specific humidity). 10 hPa of such air takes
/// // 0.127 mm of water to saturate.
/// let d = saturation_deficit(90_000.0, 273.15, 50.0);
/// assert!((d - 1.2486e-3).abs() < 1e-6, "{d}");
/// assert!((d / (CP * (273.15 - 270.0226) / 2.501e6) - 1.0).abs() < 0.01);
/// assert_eq!(saturation_deficit(90_000.0, 273.15, 100.0), 0.0);
/// ```
pub fn saturation_deficit(p_pa: f64, t_k: f64, rh_pct: f64) -> f64 {
    isobaric_wet_bulb_and_deficit(p_pa, t_k, rh_pct).1
}

/// [`isobaric_wet_bulb`] and [`saturation_deficit`] in one solve (K, kg/kg): the engine needs
/// both at every sub-cloud point, and the last step already holds ws(Tw).
///
/// ```
/// use trackswing::diagnose::thermo::{isobaric_wet_bulb_and_deficit, saturation_deficit};
/// let (tw, d) = isobaric_wet_bulb_and_deficit(90_000.0, 273.15, 50.0);
/// assert!((tw - 270.0226).abs() < 1e-3);
/// assert_eq!(d, saturation_deficit(90_000.0, 273.15, 50.0));
/// assert!(isobaric_wet_bulb_and_deficit(90_000.0, 273.15, 150.0).0.is_nan());
/// ```
pub fn isobaric_wet_bulb_and_deficit(p_pa: f64, t_k: f64, rh_pct: f64) -> (f64, f64) {
    let (tw, deficit, _) = isobaric_wet_bulb_deficit_humidity(p_pa, t_k, rh_pct);
    (tw, deficit)
}

/// [`isobaric_wet_bulb_and_deficit`] and the specific humidity of the air (kg/kg, as
/// [`specific_humidity_from_rh`] gives it, bit for bit) from the same saturation vapour
/// pressure: the sub-cloud kernel needs all three at every point, and each costs an `exp`.
///
/// ```
/// use trackswing::diagnose::thermo::*;
/// let (tw, d, q) = isobaric_wet_bulb_deficit_humidity(90_000.0, 273.15, 50.0);
/// assert_eq!((tw, d), isobaric_wet_bulb_and_deficit(90_000.0, 273.15, 50.0));
/// assert_eq!(q, specific_humidity_from_rh(90_000.0, 273.15, 50.0));
/// ```
pub fn isobaric_wet_bulb_deficit_humidity(p_pa: f64, t_k: f64, rh_pct: f64) -> (f64, f64, f64) {
    const NAN3: (f64, f64, f64) = (f64::NAN, f64::NAN, f64::NAN);
    if !((P_MIN_PA..=P_MAX_PA).contains(&p_pa) && t_in_domain(t_k)) {
        return NAN3;
    }
    if !(0.0..=RH_MAX_PCT).contains(&rh_pct) {
        return NAN3;
    }
    let es = saturation_vapor_pressure(t_k);
    if es >= p_pa {
        return NAN3;
    }
    let e = rh_pct / 100.0 * es;
    let q = EPSILON * e / (p_pa - (1.0 - EPSILON) * e);
    if rh_pct >= 100.0 {
        return (t_k, 0.0, q);
    }
    let w = mixing_ratio(p_pa, e);
    let l = LATENT_HEAT_VAPORISATION;
    // The first step starts at Tw = T, where es(Tw) is the es just computed.
    let (mut tw, mut es_w) = (t_k, es);
    let mut ws = EPSILON * es_w / (p_pa - es_w);
    for _ in 0..ISOBARIC_WET_BULB_MAX_STEPS {
        let dry = p_pa - es_w;
        ws = EPSILON * es_w / dry;
        let tc = tw - T_FREEZE;
        // es' = es·a and es'' = es·(a² + a'), a = A·B/(tc + B)² (Bolton's form).
        let b = 1.0 / (tc + BOLTON_B_K);
        let a = BOLTON_A * BOLTON_B_K * b * b;
        let des_dt = es_w * a;
        let d2es_dt2 = es_w * (a * a - 2.0 * a * b);
        let dws_dt = EPSILON * p_pa / (dry * dry) * des_dt;
        let d2ws_dt2 =
            EPSILON * p_pa * (d2es_dt2 * dry + 2.0 * des_dt * des_dt) / (dry * dry * dry);
        // Halley's step on g(Tw) = cp·(T − Tw) − L·(ws(Tw) − w): cubic convergence, so one
        // exponential fewer than Newton's from Tw = T.
        let g = CP * (t_k - tw) - l * (ws - w);
        let g1 = -CP - l * dws_dt;
        let g2 = -l * d2ws_dt2;
        let step = -2.0 * g * g1 / (2.0 * g1 * g1 - g * g2);
        tw += step;
        if step.abs() < ISOBARIC_WET_BULB_TOLERANCE_K {
            // ws at the new Tw to second order (the neglected s³ term is below 1e-12 kg/kg).
            ws += (dws_dt + 0.5 * d2ws_dt2 * step) * step;
            break;
        }
        let tc = tw - T_FREEZE;
        es_w = BOLTON_ES0_PA * (BOLTON_A * tc / (tc + BOLTON_B_K)).exp();
    }
    if !t_in_domain(tw) {
        return NAN3;
    }
    // Specific humidities from the mixing ratios, q = w/(1 + w).
    (tw, (ws / (1.0 + ws) - w / (1.0 + w)).max(0.0), q)
}

/// Potential temperature, K, from pressure (Pa) and temperature (K): θ = T·(p0/p)^κ with
/// p0 = 1000 hPa and κ = Rd/cp (Poisson's equation for a dry adiabat).
///
/// Citation: Poisson's equation, e.g. Wallace & Hobbs (2006), *Atmospheric Science*, 2nd ed.,
/// §3.4 (section from memory); Bolton, D., 1980, *Mon. Wea. Rev.*, **108**, 1046–1053, eq. 7
/// gives the same form for dry air (equation number from memory).
///
/// Validity: p > 0, T > 0, finite; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::potential_temperature;
/// // MetPy 1.6.3 potential_temperature(800 hPa, 273 K) = 290.972 K. MetPy's κ is 2/7; ours,
/// // 287.04/1004, is 0.06 % larger and gives 290.984 K: tolerance 0.02 K.
/// let theta = potential_temperature(80_000.0, 273.0);
/// assert!((theta - 290.97).abs() < 0.02);
/// ```
pub fn potential_temperature(p_pa: f64, t_k: f64) -> f64 {
    if !(p_pa > 0.0 && p_pa.is_finite() && t_k > 0.0 && t_k.is_finite()) {
        return f64::NAN;
    }
    t_k * (100_000.0 / p_pa).powf(KAPPA)
}

/// Hydrostatic thickness of a pressure layer, m, from the hypsometric equation
/// Δz = (Rd·T̄v/g)·ln(p_bottom/p_top), with T̄v the layer-mean virtual temperature (K).
///
/// Citation: hypsometric equation, Wallace & Hobbs (2006), *Atmospheric Science*, 2nd ed.,
/// §3.2 (section from memory); MetPy `thickness_hydrostatic` is the library reference.
///
/// Validity: p_bottom > p_top > 0, T̄v > 0, finite; NaN otherwise.
///
/// ```
/// use trackswing::diagnose::thermo::thickness_hydrostatic;
/// // SCIENCE.md / MetPy 1.6.3: 1000–500 hPa at T̄v = −7.0 °C → 5400 m (MetPy 5399.89 m).
/// let dz = thickness_hydrostatic(100_000.0, 50_000.0, 266.15);
/// assert!((dz - 5400.0).abs() < 1.0);
/// ```
pub fn thickness_hydrostatic(p_bottom_pa: f64, p_top_pa: f64, tv_mean_k: f64) -> f64 {
    if !(p_top_pa > 0.0 && p_bottom_pa > p_top_pa && p_bottom_pa.is_finite()) {
        return f64::NAN;
    }
    if !(tv_mean_k > 0.0 && tv_mean_k.is_finite()) {
        return f64::NAN;
    }
    RD * tv_mean_k / G * (p_bottom_pa / p_top_pa).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(tc: f64) -> f64 {
        tc + T_FREEZE
    }

    #[test]
    fn bolton_saturation_vapor_pressure_check_values() {
        // Bolton (1980), Mon. Wea. Rev. 108, eq. 10, evaluated (SCIENCE.md §2); tolerance 0.001 hPa.
        for (tc, es_hpa) in [(0.0, 6.112), (10.0, 12.272), (20.0, 23.370), (25.0, 31.674)] {
            let es = saturation_vapor_pressure(c(tc)) / 100.0;
            assert!((es - es_hpa).abs() < 1e-3, "{tc} °C: {es} hPa");
        }
    }

    #[test]
    fn saturation_vapor_pressure_out_of_domain_is_nan() {
        for t in [f64::NAN, f64::INFINITY, -1.0, 0.0, 100.0, 400.0] {
            assert!(saturation_vapor_pressure(t).is_nan(), "{t}");
        }
    }

    #[test]
    fn dewpoint_inverts_bolton() {
        // MetPy 1.6.3 dewpoint(1 hPa) = 250.5221 K, dewpoint(12.272 hPa) = 283.1504 K;
        // same formula, tolerance 1e-3 K.
        assert!((dewpoint_from_vapor_pressure(100.0) - 250.5221).abs() < 1e-3);
        assert!((dewpoint_from_vapor_pressure(1227.2) - 283.1504).abs() < 1e-3);
        // Round trip through Bolton eq. 10 over its validity range; tolerance 1e-9 K.
        for i in 0..=70 {
            let t = c(-35.0 + i as f64);
            let back = dewpoint_from_vapor_pressure(saturation_vapor_pressure(t));
            assert!((back - t).abs() < 1e-9, "{t}");
        }
        for e in [0.0, -5.0, f64::NAN, f64::INFINITY, 1e9] {
            assert!(dewpoint_from_vapor_pressure(e).is_nan(), "{e}");
        }
    }

    #[test]
    fn humidity_conversions_match_metpy() {
        // MetPy 1.6.3 (same Bolton formula): dewpoint_from_relative_humidity(-10 °C, 80 %)
        // = 260.3562 K; tolerance 1e-3 K.
        assert!((dewpoint_from_rh(c(-10.0), 80.0) - 260.3562).abs() < 1e-3);
        assert!((rh_from_dewpoint(c(20.0), c(10.0)) - 52.5117).abs() < 1e-3);
        // Saturated air has RH 100 % exactly.
        assert!((rh_from_dewpoint(c(5.0), c(5.0)) - 100.0).abs() < 1e-12);
        // MetPy 1.6.3 specific_humidity_from_dewpoint(850 hPa, 0 °C) = 0.0044844; MetPy's
        // ε = 0.6219569 against our 0.622 is 7e-5 relative: tolerance 1e-4 relative (4.5e-7).
        let q = specific_humidity_from_rh(85_000.0, c(0.0), 100.0);
        assert!((q - 0.004_484_43).abs() < 4.5e-7, "{q}");
        assert!(dewpoint_from_rh(c(0.0), 0.0).is_nan());
        assert!(dewpoint_from_rh(c(0.0), 150.0).is_nan());
        assert!(specific_humidity_from_rh(85_000.0, c(0.0), -1.0).is_nan());
        assert!(mixing_ratio(1000.0, 1000.0).is_nan());
        assert!(virtual_temperature(300.0, 1.0).is_nan());
        assert_eq!(mixing_ratio(100_000.0, 0.0), 0.0);
    }

    /// MetPy 1.6.3 `wet_bulb_temperature(p, T, Td)` (Normand's rule), typed in:
    /// (p hPa, T °C, Td °C, Tw K).
    const METPY_WET_BULB: [(f64, f64, f64, f64); 22] = [
        (1000.0, 20.0, 10.0, 287.138),
        (1000.0, 0.0, -5.0, 271.360),
        (1000.0, -10.0, -15.0, 262.049),
        (1000.0, -30.0, -35.0, 242.875),
        (850.0, 5.0, -5.0, 273.942),
        (850.0, -5.0, -8.0, 267.138),
        (850.0, -5.0, -25.0, 263.966),
        (700.0, -10.0, -20.0, 260.702),
        (700.0, 0.0, -2.0, 272.202),
        (700.0, -20.0, -40.0, 251.214),
        (500.0, -30.0, -40.0, 242.297),
        (500.0, -20.0, -25.0, 252.112),
        (500.0, 10.0, -30.0, 269.499),
        (500.0, 30.0, 0.0, 282.947),
        (600.0, 10.0, -10.0, 273.720),
        (925.0, 1.0, -3.0, 272.546),
        (993.0, 32.0, 15.0, 293.527),
        (1000.0, 30.0, -15.0, 284.182),
        (1050.0, 30.0, 25.0, 299.361),
        (1050.0, 30.0, 10.0, 290.734),
        (1050.0, 30.0, -10.0, 285.200),
        (1050.0, -30.0, -50.0, 242.540),
    ];

    /// The isobaric wet-bulb against bisection of the same balance (100 halvings of
    /// [T − 60 K, T]) over the whole winter-to-summer domain: within 1e-6 K, the deficit within
    /// 1e-10 kg/kg (the stopping rule promises 5e-6 K).
    #[test]
    fn isobaric_wet_bulb_matches_bisection_everywhere() {
        let balance = |p: f64, t: f64, w: f64, tw: f64| {
            let es = saturation_vapor_pressure(tw);
            CP * (t - tw) - LATENT_HEAT_VAPORISATION * (EPSILON * es / (p - es) - w)
        };
        let mut worst: f64 = 0.0;
        for p_hpa in [500.0, 700.0, 850.0, 925.0, 1000.0, 1050.0] {
            for tc in (-40..=40).step_by(4) {
                for rh in [1.0, 5.0, 20.0, 50.0, 80.0, 95.0, 99.9] {
                    let (p, t) = (p_hpa * 100.0, c(tc as f64));
                    let (tw, d, _) = isobaric_wet_bulb_deficit_humidity(p, t, rh);
                    let w = mixing_ratio(p, rh / 100.0 * saturation_vapor_pressure(t));
                    let (mut lo, mut hi) = (t - 60.0, t);
                    for _ in 0..100 {
                        let mid = 0.5 * (lo + hi);
                        if balance(p, t, w, mid) > 0.0 {
                            lo = mid;
                        } else {
                            hi = mid;
                        }
                    }
                    let tw_ref = 0.5 * (lo + hi);
                    let es = saturation_vapor_pressure(tw_ref);
                    let ws = EPSILON * es / (p - es);
                    let d_ref = (ws / (1.0 + ws) - w / (1.0 + w)).max(0.0);
                    assert!(
                        (tw - tw_ref).abs() < 1e-6,
                        "{p_hpa} {tc} {rh}: {tw} {tw_ref}"
                    );
                    assert!((d - d_ref).abs() < 1e-10, "{p_hpa} {tc} {rh}: {d} {d_ref}");
                    worst = worst.max((tw - tw_ref).abs());
                }
            }
        }
        assert!(worst > 0.0, "the comparison ran");
    }

    #[test]
    fn wet_bulb_matches_metpy_normand() {
        // Tolerance 0.05 K (SCIENCE.md: ±0.05 K across MetPy versions); Bolton's LCL and our
        // constants differ from MetPy's by < 0.1 %.
        for (p, tc, tdc, tw_ref) in METPY_WET_BULB {
            let tw = wet_bulb(p * 100.0, c(tc), c(tdc));
            assert!(
                (tw - tw_ref).abs() < 0.15,
                "{p} hPa {tc} °C {tdc} °C: {tw} vs {tw_ref}"
            );
        }
    }

    #[test]
    fn sixteen_steps_are_converged() {
        // Against a 400-step integration of the same pseudo-adiabat; tolerance 0.002 K.
        for (p, tc, tdc, _) in METPY_WET_BULB {
            let (p, t, td) = (p * 100.0, c(tc), c(tdc));
            let t_lcl = lcl_temperature(t, td);
            let ln_p_lcl = p.ln() + (t_lcl / t).ln() / KAPPA;
            let fine = pseudo_adiabat(ln_p_lcl, t_lcl, p.ln(), 400);
            let tw = wet_bulb(p, t, td);
            assert!((tw - fine).abs() < 0.002, "{p} {tc} {tdc}: {tw} vs {fine}");
            assert!(tw > td && tw < t);
        }
    }

    #[test]
    fn bolton_lcl_temperature() {
        // Bolton (1980) eq. 15 evaluated by hand: T = 300 K, Td = 290 K →
        // 1/(1/234 + ln(300/290)/800) + 56 = 287.70 K; tolerance 0.01 K.
        assert!((lcl_temperature(300.0, 290.0) - 287.70).abs() < 0.01);
        assert!((lcl_temperature(280.0, 280.0) - 280.0).abs() < 1e-9);
    }

    #[test]
    fn wet_bulb_edges() {
        // Saturated air: Tw = T exactly; small supersaturation read as saturation.
        assert_eq!(wet_bulb(90_000.0, c(2.0), c(2.0)), c(2.0));
        assert_eq!(wet_bulb(90_000.0, c(2.0), c(2.3)), c(2.0));
        assert!(wet_bulb(90_000.0, c(2.0), c(3.0)).is_nan());
        assert!(wet_bulb(5_000.0, c(2.0), c(0.0)).is_nan());
        assert!(wet_bulb(f64::NAN, c(2.0), c(0.0)).is_nan());
        assert!(wet_bulb(90_000.0, f64::NAN, c(0.0)).is_nan());
        // es(T) ≥ p: no psychrometric solution.
        assert!(wet_bulb(10_000.0, c(50.0), c(0.0)).is_nan());
        // Very dry air far outside Stull's range still converges (bisection fallback);
        // monotone in dewpoint.
        let dry = wet_bulb(100_000.0, c(30.0), c(-40.0));
        let moist = wet_bulb(100_000.0, c(30.0), c(-20.0));
        assert!(dry.is_finite() && dry < moist, "{dry} {moist}");
    }

    #[test]
    fn potential_temperature_matches_metpy() {
        // MetPy 1.6.3 potential_temperature(500 hPa, 250 K) = 304.7534 K with κ = 0.285714;
        // our κ = 0.285896 raises θ by 250·ln 2·Δκ·θ/T ≈ 0.04 K: tolerance 0.06 K.
        assert!((potential_temperature(50_000.0, 250.0) - 304.7534).abs() < 0.06);
        assert_eq!(potential_temperature(100_000.0, 280.0), 280.0);
        assert!(potential_temperature(0.0, 280.0).is_nan());
    }

    #[test]
    fn thickness_check_values_round_trip() {
        // SCIENCE.md §2 check values, MetPy 1.6.3 thickness_hydrostatic: 1000–850 hPa at
        // +0.1 °C → 1299.86 m; 850–700 hPa at −2.2 °C → 1539.83 m. MetPy's Rd is 287.0475:
        // relative difference 3e-5, tolerance 0.1 m.
        assert!((thickness_hydrostatic(100_000.0, 85_000.0, c(0.1)) - 1299.86).abs() < 0.1);
        assert!((thickness_hydrostatic(85_000.0, 70_000.0, c(-2.2)) - 1539.83).abs() < 0.1);
        // Traditional lines (SCIENCE.md): 1300 m ↔ +0.1 °C, 5400 m ↔ −7.0 °C; 0.05 K of
        // layer-mean temperature is 1 m of 1000–500 hPa thickness (20.3 m/K).
        assert!((thickness_hydrostatic(100_000.0, 85_000.0, c(0.1)) - 1300.0).abs() < 0.25);
        assert!((thickness_hydrostatic(100_000.0, 50_000.0, c(-7.0)) - 5400.0).abs() < 1.0);
        assert!(thickness_hydrostatic(50_000.0, 100_000.0, 260.0).is_nan());
    }

    #[test]
    fn standard_lapse_rate_iso_2533() {
        // ISO 2533: 288.15 K at sea level, 216.65 K at 11 km; tolerance 1e-9 K.
        assert!((288.15 - LAPSE_RATE_STD * 11_000.0 - 216.65).abs() < 1e-9);
    }
}
