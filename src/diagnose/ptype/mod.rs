//! Precipitation-type fractions (snow, ice pellets, freezing rain, rain) from a temperature
//! profile, from partial thicknesses, or from surface temperature and humidity.
//!
//! Every method returns fractions that vary continuously with its inputs (smoothstep ramps
//! through each mixed range), so that accumulated totals vary smoothly with the track offset.
//! Bibliography keys (AuthorYear) refer to docs/REFERENCES.md.
//!
//! One room per method: [`energy_area`] (Bourgouin 2000), [`partial_thickness`] (the
//! forecasters' thickness rules) and [`surface_logistic`] (Jennings et al. 2018 with melting
//! aloft after Stewart & King 1987). What they share lives here: the fractions they return,
//! the profile size limit and the smooth ramps.

use super::thermo::T_FREEZE;

pub mod energy_area;
pub mod partial_thickness;
pub mod surface_logistic;

pub use energy_area::{
    bourgouin, bourgouin_ln, bourgouin_rule, energy_areas, BourgouinRule, Layer,
};
pub use partial_thickness::partial_thickness;
pub use surface_logistic::surface_logistic;

/// Shares of the precipitation falling as each type, dimensionless; they sum to 1
/// (all four are NaN when the input was out of domain).
///
/// ```
/// use trackswing::diagnose::ptype::{bourgouin, PtypeFractions};
/// // An all-subfreezing column gives snow only (Bourgouin 2000: no warm layer).
/// let f = bourgouin(&[100_000.0, 50_000.0], &[268.15, 243.15]);
/// assert_eq!(f, PtypeFractions { snow: 1.0, ..PtypeFractions::default() });
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct PtypeFractions {
    /// Snow.
    pub snow: f64,
    /// Ice pellets (sleet): drops that melted aloft and refroze before landing.
    pub ice_pellets: f64,
    /// Freezing rain: liquid landing on a subfreezing surface.
    pub freezing_rain: f64,
    /// Rain.
    pub rain: f64,
}

impl PtypeFractions {
    fn nan() -> Self {
        PtypeFractions {
            snow: f64::NAN,
            ice_pellets: f64::NAN,
            freezing_rain: f64::NAN,
            rain: f64::NAN,
        }
    }

    /// Splits `liquid` between freezing rain and rain by the surface temperature `t_surface_k`.
    /// Shares are clamped to [0, 1] against rounding (a product chain can reach 1 + 2⁻⁵²).
    fn with_liquid(snow: f64, ice_pellets: f64, liquid: f64, t_surface_k: f64) -> Self {
        let (snow, ice_pellets, liquid) = (
            snow.clamp(0.0, 1.0),
            ice_pellets.clamp(0.0, 1.0),
            liquid.clamp(0.0, 1.0),
        );
        let freezing = 1.0 - surface_thaw(t_surface_k);
        PtypeFractions {
            snow,
            ice_pellets,
            freezing_rain: liquid * freezing,
            rain: liquid * (1.0 - freezing),
        }
    }
}

/// Most points a profile may have (and so most layers [`energy_areas`] can return).
///
/// ```
/// use trackswing::diagnose::ptype::{energy_areas, Layer, MAX_LEVELS};
/// // A profile with more points than MAX_LEVELS is refused (no layers).
/// let p: Vec<f64> = (0..=MAX_LEVELS).map(|i| 100_000.0 - 500.0 * i as f64).collect();
/// let t = vec![270.0; p.len()];
/// let mut out = [Layer::default(); MAX_LEVELS];
/// assert_eq!(energy_areas(&p, &t, 50_000.0, &mut out), 0);
/// ```
pub const MAX_LEVELS: usize = 64;

/// Half-width, K, of the ramp around 0 °C that splits liquid at the surface between freezing
/// rain and rain (keeps fractions continuous as the surface crosses 0 °C).
const SURFACE_FREEZE_HALF_WIDTH_K: f64 = 0.25;

/// Smoothstep 3u² − 2u³ of u = (x − lo)/(hi − lo) clamped to [0, 1]: 0 at lo, 1 at hi, C1.
pub(crate) fn smoothstep(lo: f64, hi: f64, x: f64) -> f64 {
    let u = ((x - lo) / (hi - lo)).clamp(0.0, 1.0);
    u * u * (3.0 - 2.0 * u)
}

/// Share of surface liquid that stays liquid (rain) at surface temperature `t_k`.
fn surface_thaw(t_k: f64) -> f64 {
    smoothstep(
        T_FREEZE - SURFACE_FREEZE_HALF_WIDTH_K,
        T_FREEZE + SURFACE_FREEZE_HALF_WIDTH_K,
        t_k,
    )
}

/// What the tests of every method check a result against.
#[cfg(test)]
mod testing {
    use super::PtypeFractions;

    pub(super) const T0: f64 = super::T_FREEZE;

    pub(super) fn sum(f: &PtypeFractions) -> f64 {
        f.snow + f.ice_pellets + f.freezing_rain + f.rain
    }

    pub(super) fn assert_valid(f: &PtypeFractions) {
        for v in [f.snow, f.ice_pellets, f.freezing_rain, f.rain] {
            assert!((0.0..=1.0).contains(&v), "{f:?}");
        }
        assert!((sum(f) - 1.0).abs() < 1e-12, "{f:?}");
    }

    pub(super) fn max_change(a: &PtypeFractions, b: &PtypeFractions) -> f64 {
        [
            (a.snow - b.snow).abs(),
            (a.ice_pellets - b.ice_pellets).abs(),
            (a.freezing_rain - b.freezing_rain).abs(),
            (a.rain - b.rain).abs(),
        ]
        .into_iter()
        .fold(0.0, f64::max)
    }
}
