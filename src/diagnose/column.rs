//! The methods applied to one column as a cell sees it after the shift.
//!
//! [`Profile::build`] (in [`super::profile`]) turns a cell's sampled values into the sounding
//! the precipitation falls through. [`Profile::diagnose`] applies the chosen precipitation-type and snow-ratio methods.
//! [`step_column`] is one step of one cell, dry air below the cloud included; the engine and the
//! sounding view both call it, so what a forecaster inspects is what the layers hold.

use super::profile::Profile;
use super::ptype::{bourgouin_ln, partial_thickness, surface_logistic, PtypeFractions};
use super::slr::{fixed_ratio, growth_zone_ratio, kuchera_ratio};
use super::subcloud::{evaporate, SubCloud};
use crate::read::StepLayout;
use serde::Serialize;

/// Precipitation-type method.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PtypeMethod {
    /// Energy areas on the sounding, Bourgouin (2000).
    EnergyArea,
    /// 1000–850, 850–700 and 1000–500 hPa thicknesses [common practice].
    PartialThickness,
    /// 2 m temperature and humidity, Jennings et al. (2018), with a melting check aloft.
    SurfaceLogistic,
}

impl PtypeMethod {
    /// Every method, in the order tables list them.
    pub const ALL: [PtypeMethod; 3] = [
        PtypeMethod::EnergyArea,
        PtypeMethod::PartialThickness,
        PtypeMethod::SurfaceLogistic,
    ];

    /// The name used in case files and on the command line.
    ///
    /// ```
    /// use trackswing::diagnose::PtypeMethod;
    /// for m in PtypeMethod::ALL {
    ///     assert_eq!(PtypeMethod::parse(m.name()), Some(m));
    /// }
    /// ```
    pub fn name(&self) -> &'static str {
        match self {
            PtypeMethod::EnergyArea => "energy-area",
            PtypeMethod::PartialThickness => "partial-thickness",
            PtypeMethod::SurfaceLogistic => "surface-logistic",
        }
    }

    /// Parses a method name.
    pub fn parse(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|m| m.name() == s.trim())
    }
}

/// Snow-to-liquid ratio method.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SlrMethod {
    /// A fixed ratio (10:1 by common practice).
    Fixed(f64),
    /// From the warmest temperature between the ground and 500 hPa (the Kuchera method).
    MaxColumnTemperature,
    /// Layer ratios weighted by saturation and depth, after Cobb & Waldstreicher (2005).
    GrowthZone,
}

impl SlrMethod {
    /// The method names used in case files and on the command line.
    pub const NAMES: [&'static str; 3] = ["fixed", "max-column-temperature", "growth-zone"];

    /// The name used in case files and on the command line.
    ///
    /// ```
    /// use trackswing::diagnose::SlrMethod;
    /// assert_eq!(SlrMethod::parse("fixed", 12.0), Some(SlrMethod::Fixed(12.0)));
    /// assert_eq!(SlrMethod::GrowthZone.name(), "growth-zone");
    /// ```
    pub fn name(&self) -> &'static str {
        match self {
            SlrMethod::Fixed(_) => "fixed",
            SlrMethod::MaxColumnTemperature => "max-column-temperature",
            SlrMethod::GrowthZone => "growth-zone",
        }
    }

    /// Parses a method name; `fixed_ratio` is the ratio `fixed` uses.
    pub fn parse(s: &str, fixed_ratio: f64) -> Option<Self> {
        match s.trim() {
            "fixed" => Some(SlrMethod::Fixed(fixed_ratio)),
            "max-column-temperature" => Some(SlrMethod::MaxColumnTemperature),
            "growth-zone" => Some(SlrMethod::GrowthZone),
            _ => None,
        }
    }
}

/// The methods and constants one run uses.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Methods {
    /// Precipitation type.
    pub ptype: PtypeMethod,
    /// Snow-to-liquid ratio.
    pub slr: SlrMethod,
    /// Lapse rate used to move 2 m temperature over different terrain, K/m (ISO 2533: 0.0065).
    pub lapse_rate_k_per_m: f64,
    /// Precipitation evaporates into dry air below the cloud before any reaches the ground, and
    /// cools that air toward its wet-bulb (docs/SCIENCE.md §5).
    pub dry_air: bool,
}

impl Methods {
    /// True when the chosen methods read the humidity of the profile (the type from the
    /// surface wet-bulb or the warmest wet-bulb aloft, the ratio from the growth zone's
    /// saturation); energy areas with a fixed or maximum-temperature ratio read temperatures
    /// only, so the sub-cloud cooling need not recompute humidity for them.
    pub fn read_humidity(&self) -> bool {
        self.ptype != PtypeMethod::EnergyArea || self.slr == SlrMethod::GrowthZone
    }
}

/// What one column gives at the ground.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ColumnResult {
    /// Fractions of the liquid falling as each type.
    pub fractions: PtypeFractions,
    /// Snow depth per liquid depth for the snow part.
    pub snow_ratio: f64,
}

/// The chosen methods applied to a built profile.
impl Profile {
    /// Precipitation-type fractions by one method.
    pub fn ptype(&self, method: PtypeMethod) -> PtypeFractions {
        match method {
            PtypeMethod::EnergyArea => {
                bourgouin_ln(self.pressures(), &self.ln_p[..self.n], self.temperatures())
            }
            PtypeMethod::PartialThickness => {
                let [_, mid, deep] = self.partial_thicknesses();
                partial_thickness(self.low_level_thickness(), mid, deep, self.wet_bulb(0))
            }
            PtypeMethod::SurfaceLogistic => {
                let (aloft, cold_below) = self.warmest_wet_bulb_aloft();
                // No level between the ground and 500 hPa: nothing aloft to melt in.
                let aloft = if aloft.is_finite() { aloft } else { self.t[0] };
                surface_logistic(self.t[0], self.rh[0], aloft, cold_below)
            }
        }
    }

    /// Snow-to-liquid ratio by one method.
    pub fn snow_ratio(&self, method: SlrMethod) -> f64 {
        match method {
            SlrMethod::Fixed(r) => fixed_ratio(r),
            SlrMethod::MaxColumnTemperature => kuchera_ratio(self.warmest_temperature()),
            SlrMethod::GrowthZone => {
                growth_zone_ratio(self.pressures(), self.temperatures(), &self.rh[..self.n])
            }
        }
    }

    /// The chosen methods applied; `None` when a method's input is out of its domain.
    pub fn diagnose(&self, methods: &Methods) -> Option<ColumnResult> {
        let fractions = self.ptype(methods.ptype);
        let snow_ratio = self.snow_ratio(methods.slr);
        if fractions.snow.is_nan() || snow_ratio.is_nan() {
            return None;
        }
        Some(ColumnResult {
            fractions,
            snow_ratio,
        })
    }
}

/// Diagnoses one column as modelled: no warm-layer bias, no dry-air correction.
///
/// `col` holds the sampled storm-attached values in `layout` order; `ground_m` is the target
/// cell's terrain height (see [`Profile::build`]). Returns `None` when the column has missing
/// values or the ground lies above the highest level.
pub fn diagnose_column(
    col: &[f32],
    layout: &StepLayout,
    ground_m: f32,
    methods: &Methods,
) -> Option<ColumnResult> {
    Profile::build(col, layout, ground_m, methods.lapse_rate_k_per_m, 0.0)?.diagnose(methods)
}

/// One step of one cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ColumnStep {
    /// Precipitation leaving the cloud this step (the model's, times the scenario's intensity
    /// factor), kg m⁻².
    pub falling: f64,
    /// What reaches the ground, kg m⁻².
    pub reaching_ground: f64,
    /// Water needed to saturate the sub-cloud layer as the profile stands, kg m⁻²
    /// (0 with the dry-air correction off).
    pub deficit: f64,
    /// Water given up to the sub-cloud layer so far, carried to the next step, kg m⁻².
    pub carried: f64,
    /// Share of the deficit met, 0–1: how far the sub-cloud layer was cooled toward its
    /// wet-bulb.
    pub met: f64,
    /// Type and ratio of what reaches the ground; `None` when nothing does.
    pub result: Option<ColumnResult>,
}

/// Why a column step could not be computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColumnMissing {
    /// A value is missing or the ground is above the highest level.
    Profile,
    /// A method's input is out of its domain.
    Method,
}

/// One step of one cell: builds the profile (into `profile`, which the sounding view shows),
/// takes the sub-cloud deficit from the falling precipitation (when `methods.dry_air`), cools
/// the sub-cloud layer in proportion to the share of the deficit met, and diagnoses what
/// reaches the ground. `carried` is the water given up to the sub-cloud layer in earlier steps
/// (see [`evaporate`]). `sub` is scratch for the sub-cloud layer, and `known` may give the
/// isobaric levels' wet-bulb, moistening and humidity (see [`SubCloud::compute`]).
#[allow(clippy::too_many_arguments)]
pub fn step_column(
    col: &[f32],
    layout: &StepLayout,
    ground_m: f32,
    methods: &Methods,
    warm_bias_k: f64,
    falling: f64,
    carried: f64,
    profile: &mut Profile,
    sub: &mut SubCloud,
    known: impl FnMut(usize) -> Option<[f64; 3]>,
) -> Result<ColumnStep, ColumnMissing> {
    if !profile.build_into(
        col,
        layout,
        ground_m,
        methods.lapse_rate_k_per_m,
        warm_bias_k,
    ) {
        return Err(ColumnMissing::Profile);
    }
    let (reaching_ground, deficit, carried, met) = if methods.dry_air {
        sub.compute(profile, known);
        if sub.deficit.is_nan() {
            return Err(ColumnMissing::Profile);
        }
        let e = evaporate(carried, sub.deficit, falling);
        if e.met > 0.0 {
            sub.cool_with(profile, e.met, methods.read_humidity());
        }
        (e.reaching_ground, sub.deficit, e.carried, e.met)
    } else {
        (falling, 0.0, 0.0, 0.0)
    };
    let result = if reaching_ground > 0.0 {
        Some(profile.diagnose(methods).ok_or(ColumnMissing::Method)?)
    } else {
        None
    };
    Ok(ColumnStep {
        falling,
        reaching_ground,
        deficit,
        carried,
        met,
        result,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnose::profile::{P1000, P500};
    use crate::diagnose::thermo::{thickness_hydrostatic, G, RD};

    /// A hydrostatically consistent column: isothermal layers of the given temperatures, heights
    /// from the hypsometric equation.
    pub(crate) fn column(
        levels_hpa: &[f64],
        temps: &[f64],
        t2: f64,
        z0: f64,
    ) -> (StepLayout, Vec<f32>) {
        let layout = StepLayout::new(levels_hpa.iter().map(|p| p * 100.0).collect());
        let mut col = vec![0.0f32; layout.nvar()];
        let mut z = z0;
        for k in 0..levels_hpa.len() {
            if k > 0 {
                let tm = 0.5 * (temps[k - 1] + temps[k]);
                z += thickness_hydrostatic(layout.levels_pa[k - 1], layout.levels_pa[k], tm);
            }
            col[layout.t(k)] = temps[k] as f32;
            col[layout.z(k)] = z as f32;
            col[layout.rh(k)] = 95.0;
        }
        col[layout.t2()] = t2 as f32;
        col[layout.rh2()] = 90.0;
        col[layout.precip()] = 1.0;
        col[layout.terrain()] = 0.0;
        (layout, col)
    }

    const LEVELS: [f64; 5] = [1000.0, 925.0, 850.0, 700.0, 500.0];
    const FIXED: Methods = Methods {
        ptype: PtypeMethod::EnergyArea,
        slr: SlrMethod::Fixed(10.0),
        lapse_rate_k_per_m: 0.0065,
        dry_air: false,
    };

    /// One step of column `c` at sea level with no warm bias, the levels solved from the
    /// profile itself.
    fn step(
        c: &[f32],
        l: &StepLayout,
        methods: &Methods,
        falling: f64,
        carried: f64,
        pr: &mut Profile,
    ) -> ColumnStep {
        step_column(
            c,
            l,
            0.0,
            methods,
            0.0,
            falling,
            carried,
            pr,
            &mut SubCloud::empty(),
            |_| None,
        )
        .unwrap()
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(1000))]

        /// A drier sub-cloud layer never lets more precipitation reach the ground: the same
        /// column with lower humidity at any points (2 m and isobaric) gives at most the same
        /// amount at the ground in one step, through the whole kernel (profile, cloud base,
        /// deficit, evaporation). Winter columns from −20 to +8 °C at the ground.
        #[test]
        fn a_drier_column_never_gives_more_at_the_ground(
            t2 in 253.0..281.0_f64,
            lapse in 3.0..9.0_f64,
            rh in proptest::collection::vec(20.0..100.0_f64, 6),
            drying in proptest::collection::vec(0.0..40.0_f64, 6),
            falling in 0.0..6.0_f64,
        ) {
            let temps: Vec<f64> = [0.0, 0.7, 1.5, 3.0, 5.6]
                .iter()
                .map(|km| t2 - 0.5 - lapse * km)
                .collect();
            let (l, mut moist) = column(&LEVELS, &temps, t2, 100.0);
            moist[l.rh2()] = rh[0] as f32;
            for k in 0..LEVELS.len() {
                moist[l.rh(k)] = rh[k + 1] as f32;
            }
            let mut dry = moist.clone();
            dry[l.rh2()] = (rh[0] - drying[0]).max(0.0) as f32;
            for k in 0..LEVELS.len() {
                dry[l.rh(k)] = (rh[k + 1] - drying[k + 1]).max(0.0) as f32;
            }
            let methods = Methods { dry_air: true, ..FIXED };
            let mut pr = Profile::empty();
            let a = step(&moist, &l, &methods, falling, 0.0, &mut pr);
            let b = step(&dry, &l, &methods, falling, 0.0, &mut pr);
            proptest::prop_assert!(b.deficit >= a.deficit - 1e-9, "deficit {} < {}", b.deficit, a.deficit);
            proptest::prop_assert!(
                b.reaching_ground <= a.reaching_ground + 1e-9,
                "drier {} > moister {}",
                b.reaching_ground,
                a.reaching_ground
            );
        }
    }

    #[test]
    fn cold_column_is_snow_and_warm_column_rain() {
        let (l, c) = column(&LEVELS, &[268.0, 266.0, 264.0, 256.0, 240.0], 268.5, 100.0);
        let r = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(r.fractions.snow > 0.999, "{:?}", r.fractions);
        assert_eq!(r.snow_ratio, 10.0);
        let (l, c) = column(&LEVELS, &[280.0, 278.0, 276.0, 268.0, 250.0], 281.0, 100.0);
        let r = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(r.fractions.rain > 0.999, "{:?}", r.fractions);
    }

    #[test]
    fn every_method_agrees_on_clear_cases() {
        // Deep cold column (all below −2 °C, 850–700 hPa thickness ≈ 1490 m) is snow and a
        // deep warm one (+7 °C at the ground, 1000–850 hPa ≈ 1340 m) is rain by every method
        // (Bourgouin 2000; partial thickness, common practice; Jennings et al. 2018).
        let (lc, cc) = column(&LEVELS, &[268.0, 266.0, 264.0, 256.0, 240.0], 268.5, 100.0);
        let (lw, cw) = column(&LEVELS, &[280.0, 278.0, 276.0, 268.0, 250.0], 281.0, 100.0);
        for m in PtypeMethod::ALL {
            let methods = Methods { ptype: m, ..FIXED };
            let cold = diagnose_column(&cc, &lc, 0.0, &methods).unwrap();
            let warm = diagnose_column(&cw, &lw, 0.0, &methods).unwrap();
            assert!(cold.fractions.snow > 0.99, "{m:?} {:?}", cold.fractions);
            assert!(warm.fractions.rain > 0.99, "{m:?} {:?}", warm.fractions);
        }
    }

    #[test]
    fn the_low_layer_over_higher_ground_is_held_to_the_same_mean_temperature() {
        // Isothermal 270 K column, ground at 500 m (between 1000 and 850 hPa): the ground–850 hPa
        // layer read as 1000–850 hPa is the 1000–850 hPa thickness of 270 K air (hypsometric
        // equation, Wallace & Hobbs 2006 §3.2; thickness_hydrostatic is checked against MetPy).
        let (l, c) = column(&LEVELS, &[270.0; 5], 270.0, 100.0);
        let pr = Profile::build(&c, &l, 500.0, 0.0, 0.0).unwrap();
        assert!(pr.p[0] < P1000 && pr.p[1] == 92_500.0, "{}", pr.p[0]);
        assert!(pr.partial_thicknesses()[0].is_nan());
        let expected = thickness_hydrostatic(1e5, 85_000.0, 270.0);
        assert!(
            (pr.low_level_thickness() - expected).abs() < 0.5,
            "{}",
            pr.low_level_thickness()
        );
        // Where 1000 hPa is above the ground, it is the 1000–850 hPa thickness itself.
        let sea = Profile::build(&c, &l, 0.0, 0.0, 0.0).unwrap();
        assert_eq!(sea.low_level_thickness(), sea.partial_thicknesses()[0]);
        // Ground above 850 hPa: no low layer.
        let high = Profile::build(&c, &l, 1600.0, 0.0, 0.0).unwrap();
        assert!(high.low_level_thickness().is_nan());
    }

    #[test]
    fn levels_below_ground_are_not_used() {
        // 1000 and 925 hPa are warm but lie below a 1200 m ridge top; above it the air is cold.
        let (l, c) = column(&LEVELS, &[283.0, 279.0, 268.0, 260.0, 245.0], 283.0, 100.0);
        let r = diagnose_column(&c, &l, 1600.0, &FIXED).unwrap();
        // 2 m temperature moved 1600 m up at 6.5 K/km: 283 − 10.4 = 272.6 K (below freezing).
        assert!(r.fractions.snow > 0.99, "{:?}", r.fractions);
        let at_sea = diagnose_column(&c, &l, 0.0, &FIXED).unwrap();
        assert!(at_sea.fractions.rain > 0.99, "{:?}", at_sea.fractions);
        // The thicknesses that need a level below the ground are NaN (ptype.rs contract): at
        // 1200 m, 1000 hPa (100 m) and 925 hPa (≈ 760 m) are below, 850 hPa (≈ 1480 m) above.
        let pr = Profile::build(&c, &l, 1200.0, 0.0065, 0.0).unwrap();
        assert_eq!(pr.p[1], 85_000.0);
        let [low, mid, deep] = pr.partial_thicknesses();
        assert!(
            low.is_nan() && deep.is_nan() && mid.is_finite(),
            "{low} {mid} {deep}"
        );
    }

    #[test]
    fn thicknesses_follow_the_hypsometric_equation_and_the_warm_bias() {
        // Isothermal 266.15 K column: 1000–500 hPa is 5400 m (SCIENCE.md, MetPy 1.6.3
        // thickness_hydrostatic 5399.89 m); +1 K on every level adds Rd·1/g·ln 2 = 20.29 m.
        let (l, c) = column(&LEVELS, &[266.15; 5], 266.15, 100.0);
        let pr = Profile::build(&c, &l, 0.0, 0.0065, 0.0).unwrap();
        let [low, mid, deep] = pr.partial_thicknesses();
        assert!((deep - 5399.89).abs() < 1.0, "{deep}");
        assert!((low - thickness_hydrostatic(1e5, 85_000.0, 266.15)).abs() < 0.01);
        assert!((mid - thickness_hydrostatic(85_000.0, 70_000.0, 266.15)).abs() < 0.01);
        let warm = Profile::build(&c, &l, 0.0, 0.0065, 1.0).unwrap();
        let deep_warm = warm.thickness(P1000, P500);
        let expected = thickness_hydrostatic(1e5, 5e4, 267.15);
        assert!(
            (deep_warm - expected).abs() < 0.01,
            "{deep_warm} {expected}"
        );
        assert!((deep_warm - deep - RD / G * 2f64.ln()).abs() < 0.01);
        // The bias reaches the isobaric levels up to 500 hPa, not the 2 m temperature.
        assert_eq!(warm.t[0], pr.t[0]);
        assert!((1..warm.n).all(|i| (warm.t[i] - pr.t[i] - 1.0).abs() < 1e-12));
    }

    #[test]
    fn colder_bias_never_less_snow_by_any_method() {
        // A warm-nose column near the rain–snow line, cooled aloft in 0.001 K steps from +3 to
        // −3 K: no method ever gives less snow for the colder column (common practice), and
        // the snow share moves without a jump (no step over 0.05; the ±0.5 J/kg ramp about
        // Bourgouin's 2 J/kg line for a warm layer aloft spans about 0.03 K of this nose).
        let (l, mut c) = column(&LEVELS, &[272.5, 274.0, 273.0, 265.0, 248.0], 272.0, 100.0);
        c[l.rh2()] = 95.0;
        for m in PtypeMethod::ALL {
            let mut prev: Option<f64> = None;
            for i in 0..=6000 {
                let bias = 3.0 - 0.001 * i as f64;
                let snow = Profile::build(&c, &l, 0.0, 0.0065, bias)
                    .unwrap()
                    .ptype(m)
                    .snow;
                if let Some(p) = prev {
                    assert!(snow >= p - 1e-12, "{m:?} bias {bias}: {p} → {snow}");
                    assert!(snow - p < 0.05, "{m:?} bias {bias}: {p} → {snow}");
                }
                prev = Some(snow);
            }
            assert!(prev.unwrap() > 0.5, "{m:?}: −3 K aloft must mostly snow");
        }
    }

    #[test]
    fn kuchera_uses_the_warmest_level() {
        let (l, c) = column(&LEVELS, &[265.0, 267.16, 264.0, 256.0, 240.0], 265.0, 100.0);
        let m = Methods {
            slr: SlrMethod::MaxColumnTemperature,
            ..FIXED
        };
        let r = diagnose_column(&c, &l, 0.0, &m).unwrap();
        // Kuchera (common practice): Tmax 267.16 K ≤ 271.16 K → 12 + (271.16 − 267.16) = 16.
        assert!((r.snow_ratio - 16.0).abs() < 1e-3, "{}", r.snow_ratio);
    }

    #[test]
    fn growth_zone_reads_the_humidity_of_the_column() {
        // Common practice: a saturated layer near −12 °C gives about 30:1, a column saturated
        // only near freezing about 10:1.
        let (l, mut c) = column(&LEVELS, &[271.0, 268.0, 263.0, 261.0, 250.0], 271.5, 100.0);
        let m = Methods {
            slr: SlrMethod::GrowthZone,
            ..FIXED
        };
        for (k, rh) in [50.0, 60.0, 100.0, 100.0, 40.0].into_iter().enumerate() {
            c[l.rh(k)] = rh;
        }
        c[l.rh2()] = 50.0;
        let high = diagnose_column(&c, &l, 0.0, &m).unwrap().snow_ratio;
        for (k, rh) in [100.0, 100.0, 50.0, 40.0, 40.0].into_iter().enumerate() {
            c[l.rh(k)] = rh;
        }
        c[l.rh2()] = 100.0;
        let low = diagnose_column(&c, &l, 0.0, &m).unwrap().snow_ratio;
        assert!(high > 24.0 && low < 14.0, "{high} {low}");
    }

    #[test]
    fn missing_values_give_none() {
        let (l, mut c) = column(&LEVELS, &[265.0, 264.0, 263.0, 256.0, 240.0], 265.0, 100.0);
        c[l.t(2)] = f32::NAN;
        assert!(diagnose_column(&c, &l, 0.0, &FIXED).is_none());
    }

    #[test]
    fn surface_pressure_follows_the_hypsometric_equation() {
        // Isothermal 270 K column: the ground 0.01 m below the 925 hPa height lies at 925 hPa
        // within Rd·T/g·Δln p: 0.01 m ↔ 1.2e-6 relative.
        let (l, c) = column(&LEVELS, &[270.0; 5], 270.0, 100.0);
        let z925 = c[l.z(1)];
        let pr = Profile::build(&c, &l, z925 - 0.01, 0.0065, 0.0).unwrap();
        assert!((pr.p[0] / 92_500.0 - 1.0).abs() < 1e-5, "{}", pr.p[0]);
        assert_eq!(pr.p[1], 92_500.0, "925 hPa is still above the ground");
        let r = diagnose_column(&c, &l, z925 - 0.01, &FIXED).unwrap();
        assert!(r.fractions.snow > 0.99);
    }

    #[test]
    fn dry_air_delays_and_saturated_air_passes_everything() {
        let (l, mut c) = column(&LEVELS, &[272.0, 270.0, 268.0, 260.0, 245.0], 273.0, 100.0);
        let dry = Methods {
            dry_air: true,
            ..FIXED
        };
        let mut pr = Profile::build(&c, &l, 0.0, 0.0065, 0.0).unwrap();
        // Saturated at the surface (RH 90 % counts as cloud): everything reaches the ground.
        let s = step(&c, &l, &dry, 1.0, 0.0, &mut pr);
        assert_eq!((s.reaching_ground, s.deficit), (1.0, 0.0));
        // Dry below 850 hPa: the deficit is taken first, and the carried water reduces it.
        for k in 0..2 {
            c[l.rh(k)] = 50.0;
        }
        c[l.rh2()] = 50.0;
        let s1 = step(&c, &l, &dry, 0.5, 0.0, &mut pr);
        assert!(s1.deficit > 0.5, "{s1:?}");
        assert_eq!(s1.reaching_ground, 0.0);
        assert!(s1.result.is_none());
        let s2 = step(&c, &l, &dry, 10.0, s1.carried, &mut pr);
        assert!(
            (s2.reaching_ground - (10.5 - s1.deficit)).abs() < 1e-12,
            "{s2:?}"
        );
        assert_eq!(s2.met, 1.0);
        // Fully met: the sub-cloud layer sits at its wet-bulb and is saturated.
        let cold = Profile::build(&c, &l, 0.0, 0.0065, 0.0).unwrap();
        assert!((pr.t[0] - cold.wet_bulb(0)).abs() < 1e-9);
        // Energy areas with a fixed ratio never read humidity: the kernel leaves it as it was.
        assert!(!dry.read_humidity());
        assert_eq!(pr.rh[0], cold.rh[0]);
        // A method that reads it sees the cooled layer saturated.
        let reads = Methods {
            slr: SlrMethod::GrowthZone,
            ..dry
        };
        assert!(reads.read_humidity());
        let again = step(&c, &l, &reads, 10.0, s1.carried, &mut pr);
        assert_eq!(again.met, 1.0);
        assert!((pr.t[0] - cold.wet_bulb(0)).abs() < 1e-9);
        assert!((pr.rh[0] - 100.0).abs() < 0.5, "{}", pr.rh[0]);
        let off = step(&c, &l, &FIXED, 0.5, 0.0, &mut pr);
        assert_eq!(off.reaching_ground, 0.5);
    }
}
