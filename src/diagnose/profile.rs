//! The sounding a cell's precipitation falls through, as the engine builds it from the sampled
//! column: the surface point at the target ground and every isobaric level above it, with the
//! scenario's warm-layer bias. What the methods read of it (pressures, thicknesses, wet-bulbs,
//! the warmest level) is measured here; [`super::column`] applies the methods and
//! [`super::subcloud`] cools and moistens it below the cloud.

use super::ptype::MAX_LEVELS;
use super::thermo::{isobaric_wet_bulb, G, RD};
use crate::read::StepLayout;

/// Warm layers above this pressure are ignored (SCIENCE.md §3: above ~500 hPa they do not melt
/// falling snow in winter storms); the Kuchera maximum, the warmest wet-bulb aloft, the
/// warm-layer bias and the sub-cloud layer stop here too.
pub const PROFILE_TOP_PA: f64 = 50_000.0;

/// Marks the surface point in [`Profile::level`].
pub const SURFACE: usize = usize::MAX;

/// The sounding a cell's precipitation falls through: the surface point first, then every
/// isobaric level above the ground, upward. Fixed-size arrays: no allocation per cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Profile {
    /// Points in use.
    pub n: usize,
    /// Pressure, Pa (strictly decreasing).
    pub p: [f64; MAX_LEVELS],
    /// ln of the pressure (ln Pa), as [`Profile::build`] sets it with `p`; the energy areas
    /// read it.
    pub ln_p: [f64; MAX_LEVELS],
    /// Geopotential height, m, as in the model (the surface point: the target ground).
    pub z: [f64; MAX_LEVELS],
    /// Temperature, K, after the warm-layer bias and any sub-cloud cooling.
    pub t: [f64; MAX_LEVELS],
    /// Relative humidity over water, %, after any sub-cloud moistening.
    pub rh: [f64; MAX_LEVELS],
    /// Temperature change applied to the model's value, K (bias plus cooling): thicknesses
    /// follow it hydrostatically.
    pub dt: [f64; MAX_LEVELS],
    /// Index of the isobaric level in the step layout, or [`SURFACE`].
    pub level: [usize; MAX_LEVELS],
}

/// Levels of the partial-thickness method, Pa.
pub(super) const P1000: f64 = 100_000.0;
pub(super) const P850: f64 = 85_000.0;
pub(super) const P700: f64 = 70_000.0;
pub(super) const P500: f64 = 50_000.0;
impl Profile {
    /// A profile with no points (a buffer to build into).
    pub fn empty() -> Profile {
        Profile {
            n: 0,
            p: [0.0; MAX_LEVELS],
            ln_p: [0.0; MAX_LEVELS],
            z: [0.0; MAX_LEVELS],
            t: [0.0; MAX_LEVELS],
            rh: [0.0; MAX_LEVELS],
            dt: [0.0; MAX_LEVELS],
            level: [SURFACE; MAX_LEVELS],
        }
    }

    /// Builds the profile a cell sees.
    ///
    /// `col` holds the sampled storm-attached values in `layout` order (including the model
    /// terrain height under the source point); `ground_m` is the terrain height of the target
    /// cell. The 2 m temperature is moved to the target ground with `lapse_rate_k_per_m`. The
    /// surface pressure at the target ground comes from the hypsometric equation between the
    /// isobaric heights that bracket it (temperature linear in height, moisture neglected: under
    /// 0.5 % error in the layer thickness for the cold moist air of winter storms); levels at or
    /// below the ground are not used.
    ///
    /// `warm_bias_k` is added to the temperature of every isobaric level above the ground at or
    /// below 500 hPa (p ≥ 500 hPa); the 2 m temperature is left as modelled, and levels above
    /// 500 hPa too. Thicknesses follow the bias hydrostatically (see [`Profile::thickness`]).
    ///
    /// Returns `None` when a value is missing or not finite, or the ground lies above the
    /// highest level.
    pub fn build(
        col: &[f32],
        layout: &StepLayout,
        ground_m: f32,
        lapse_rate_k_per_m: f64,
        warm_bias_k: f64,
    ) -> Option<Profile> {
        let mut pr = Profile::empty();
        pr.build_into(col, layout, ground_m, lapse_rate_k_per_m, warm_bias_k)
            .then_some(pr)
    }

    /// [`Profile::build`] into `self` (no copy of the arrays, for the per-cell kernel); false
    /// when the profile cannot be built, `self` then being unusable.
    pub fn build_into(
        &mut self,
        col: &[f32],
        layout: &StepLayout,
        ground_m: f32,
        lapse_rate_k_per_m: f64,
        warm_bias_k: f64,
    ) -> bool {
        self.n = 0;
        let nlev = layout.levels_pa.len();
        let z_src = col[layout.terrain()] as f64;
        let t2 = col[layout.t2()] as f64 - lapse_rate_k_per_m * (ground_m as f64 - z_src);
        let zg = ground_m as f64;
        let rh2 = col[layout.rh2()] as f64;
        if !(t2.is_finite() && zg.is_finite() && rh2.is_finite()) {
            return false;
        }
        let z = |k: usize| col[layout.z(k)] as f64;
        let t = |k: usize| col[layout.t(k)] as f64;
        let Some(first_above) = (0..nlev).find(|&k| z(k) > zg) else {
            return false;
        };
        // p_sfc = p_k·exp(x), so ln p_sfc = ln p_k + x.
        let (k, x) = if first_above == 0 {
            let tm = 0.5 * (t2 + t(0));
            (0, G * (z(0) - zg) / (RD * tm))
        } else {
            let k = first_above - 1;
            let f = (zg - z(k)) / (z(k + 1) - z(k));
            let tg = t(k) + f * (t(k + 1) - t(k));
            let tm = 0.5 * (t(k) + tg);
            (k, -G * (zg - z(k)) / (RD * tm))
        };
        let p_sfc = layout.levels_pa[k] * x.exp();
        if !p_sfc.is_finite() {
            return false;
        }
        let pr = self;
        pr.n = 1;
        pr.dt[0] = 0.0;
        pr.level[0] = SURFACE;
        pr.p[0] = p_sfc;
        pr.ln_p[0] = layout.ln_level(k) + x;
        pr.z[0] = zg;
        pr.t[0] = t2;
        pr.rh[0] = rh2;
        for k in first_above..nlev {
            if pr.n == MAX_LEVELS {
                break;
            }
            let pk = layout.levels_pa[k];
            if pk >= p_sfc {
                continue;
            }
            let i = pr.n;
            pr.p[i] = pk;
            pr.ln_p[i] = layout.ln_level(k);
            pr.z[i] = z(k);
            pr.t[i] = t(k);
            pr.rh[i] = col[layout.rh(k)] as f64;
            pr.level[i] = k;
            pr.dt[i] = 0.0;
            if warm_bias_k != 0.0 && pk >= PROFILE_TOP_PA {
                pr.t[i] += warm_bias_k;
                pr.dt[i] = warm_bias_k;
            }
            pr.n += 1;
        }
        let n = pr.n;
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        n >= 2 && finite(&pr.t[..n]) && finite(&pr.z[..n]) && finite(&pr.rh[..n])
    }

    /// Pressures of the points in use, Pa.
    pub fn pressures(&self) -> &[f64] {
        &self.p[..self.n]
    }

    /// Temperatures of the points in use, K.
    pub fn temperatures(&self) -> &[f64] {
        &self.t[..self.n]
    }

    /// Point index of the isobaric level at `p_pa`, if the input has it above the ground.
    fn point_at(&self, p_pa: f64) -> Option<usize> {
        (1..self.n).find(|&i| self.p[i] == p_pa)
    }

    /// Thickness between two isobaric levels, m: the model's height difference plus the
    /// hydrostatic effect of the temperature changes applied to the profile,
    /// (Rd/g)·∫ΔT d ln p with ΔT linear in ln p between points (the hypsometric equation,
    /// Wallace & Hobbs 2006 §3.2). NaN when either level is absent from the input or lies at or
    /// below the ground, as [`partial_thickness`](super::ptype::partial_thickness) expects.
    pub fn thickness(&self, p_bottom_pa: f64, p_top_pa: f64) -> f64 {
        let (Some(a), Some(b)) = (self.point_at(p_bottom_pa), self.point_at(p_top_pa)) else {
            return f64::NAN;
        };
        self.thickness_of_points(a, b)
    }

    /// Thickness between points `a` < `b`, m, as [`Profile::thickness`].
    fn thickness_of_points(&self, a: usize, b: usize) -> f64 {
        let mut dz = self.z[b] - self.z[a];
        for i in a..b {
            let mean_dt = 0.5 * (self.dt[i] + self.dt[i + 1]);
            if mean_dt != 0.0 {
                dz += RD / G * mean_dt * (self.p[i] / self.p[i + 1]).ln();
            }
        }
        dz
    }

    /// The three thicknesses of the partial-thickness method, m: 1000–850, 850–700 and
    /// 1000–500 hPa (NaN where a level is absent or below ground).
    pub fn partial_thicknesses(&self) -> [f64; 3] {
        [
            self.thickness(P1000, P850),
            self.thickness(P850, P700),
            self.thickness(P1000, P500),
        ]
    }

    /// The low-level thickness the partial-thickness rules read, m: the 1000–850 hPa thickness
    /// where 1000 hPa is above the ground. Where the ground lies between 1000 and 850 hPa, the
    /// layer from the ground to 850 hPa stands in, at its own mean temperature: its thickness
    /// times ln(1000/850)/ln(p_ground/850), the 1000–850 hPa thickness of air that warm (the
    /// hypsometric equation, Wallace & Hobbs 2006 §3.2). The rule "1000–850 hPa above 1310 m"
    /// is a layer-mean temperature of about +2.2 °C, which the air actually above the ground is
    /// then held to. NaN where 850 hPa is at or below the ground or absent: no low layer to
    /// melt in.
    ///
    /// ```
    /// use trackswing::diagnose::profile::Profile;
    /// // Ground at 950 hPa (z 0), 850 hPa 900 m above it: 900·ln(1000/850)/ln(950/850).
    /// let mut p = Profile::empty();
    /// p.n = 2;
    /// p.p[..2].copy_from_slice(&[95_000.0, 85_000.0]);
    /// p.z[..2].copy_from_slice(&[0.0, 900.0]);
    /// let expected = 900.0 * (1000.0_f64 / 850.0).ln() / (950.0_f64 / 850.0).ln();
    /// assert!((p.low_level_thickness() - expected).abs() < 1e-9);
    /// ```
    pub fn low_level_thickness(&self) -> f64 {
        let direct = self.thickness(P1000, P850);
        if !direct.is_nan() || self.n == 0 || self.p[0] > P1000 {
            return direct;
        }
        let Some(b) = self.point_at(P850) else {
            return f64::NAN;
        };
        self.thickness_of_points(0, b) * (P1000 / P850).ln() / (self.p[0] / P850).ln()
    }

    /// Isobaric wet-bulb temperature at point `i`, K ([`isobaric_wet_bulb`]).
    pub fn wet_bulb(&self, i: usize) -> f64 {
        isobaric_wet_bulb(self.p[i], self.t[i], self.rh[i])
    }

    /// The warmest wet-bulb above the surface point, up to 500 hPa, K (what
    /// [`surface_logistic`](super::ptype::surface_logistic) checks for melting aloft; −∞ when
    /// no point lies aloft), and the coldest temperature from the ground up to that point, K
    /// (the air melted snow falls through after the warm layer; the ground's when no point
    /// lies aloft).
    pub fn warmest_wet_bulb_aloft(&self) -> (f64, f64) {
        let (warmest, tw) = (1..self.n)
            .filter(|&i| self.p[i] >= PROFILE_TOP_PA)
            .map(|i| (i, self.wet_bulb(i)))
            .fold((0, f64::NEG_INFINITY), |a, b| if b.1 > a.1 { b } else { a });
        let coldest = self.t[..=warmest]
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min);
        (tw, coldest)
    }

    /// The warmest temperature from the surface to 500 hPa, K (the Kuchera method's input).
    pub fn warmest_temperature(&self) -> f64 {
        (0..self.n)
            .filter(|&i| self.p[i] >= PROFILE_TOP_PA)
            .map(|i| self.t[i])
            .fold(f64::NEG_INFINITY, f64::max)
    }
}
