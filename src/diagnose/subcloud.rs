//! Dry air below the cloud: precipitation evaporates into it before any reaches the ground, and
//! cools it toward its wet-bulb (docs/SCIENCE.md §5).
//!
//! The rule is derived, not taken from one paper: the water needed to saturate the sub-cloud
//! layer, S = (1/g)·∫(q_s(Tw) − q) dp (kg m⁻² = mm), is taken from the falling precipitation
//! first; the water given up so far is carried from step to step and reduces the deficit
//! recomputed at each step ([`evaporate`]), so onset is delayed and light amounts vanish. For the type decision the sub-cloud layer is moved toward
//! its wet-bulb in proportion to the share of S already met ([`SubCloud::cool`]).
//!
//! **Cloud base.** A point counts as cloud with weight c = smoothstep(80 %, 90 %, RH): fully at
//! RH ≥ 90 % (the usual "saturated" threshold for model RH over water, which sits below 100 % in
//! ice cloud: ice saturation at −15 °C is about 86 % over water), not at all below 80 %. The
//! sub-cloud weight of point k is u_k = Π_{j≤k}(1 − c_j): the chance that neither it nor any
//! point below it is cloud. With a hard threshold, u is 1 below the lowest point with RH ≥ 90 %
//! (the cloud base) and 0 from it upward; the ramp keeps S continuous when a level's humidity
//! crosses the threshold. A column with no cloud up to 500 hPa counts as sub-cloud throughout.

use super::profile::{Profile, PROFILE_TOP_PA, SURFACE};
use super::ptype::{smoothstep, MAX_LEVELS};
use super::thermo::{isobaric_wet_bulb_deficit_humidity, saturation_vapor_pressure, EPSILON, G};

/// Relative humidity (over water, %) from which a point starts to count as cloud.
pub const CLOUD_RH_START_PCT: f64 = 80.0;
/// Relative humidity (over water, %) at and above which a point is cloud (the cloud base is the
/// lowest such point).
pub const CLOUD_RH_FULL_PCT: f64 = 90.0;

/// The sub-cloud layer of one profile.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SubCloud {
    /// Water needed to saturate the sub-cloud layer, kg m⁻² (= mm).
    pub deficit: f64,
    /// Points 0..`points` have a non-zero sub-cloud weight.
    pub points: usize,
    /// Sub-cloud weight u_k of each point, 0–1.
    pub weight: [f64; MAX_LEVELS],
    /// Isobaric wet-bulb of each weighted point, K.
    pub wet_bulb: [f64; MAX_LEVELS],
    /// Specific humidity each weighted point gains when saturated at its wet-bulb, kg/kg.
    pub moistening: [f64; MAX_LEVELS],
    /// Specific humidity of each weighted point as the profile stands, kg/kg.
    pub humidity: [f64; MAX_LEVELS],
}

impl SubCloud {
    /// The sub-cloud layer of `profile` and the water needed to saturate it:
    /// S = Σ_layers u_bottom·½(d_bottom + d_top)·Δp/g over the layers from the surface to
    /// 500 hPa, with d = q_s(Tw) − q ([`super::thermo::saturation_deficit`]) at each point and
    /// u_bottom the sub-cloud weight of the layer's lower point (a layer whose top is the cloud
    /// base is still below the cloud). NaN when a weighted point is out of the thermodynamic
    /// kernels' domain.
    ///
    /// ```
    /// use trackswing::diagnose::profile::Profile;
    /// use trackswing::diagnose::subcloud::SubCloud;
    /// use trackswing::diagnose::thermo::saturation_deficit;
    /// // 1000 and 900 hPa at 0 °C and 50 %, saturated cloud from 800 hPa: the trapezoid of
    /// // the point deficits (900 hPa: 1.2486 g/kg by bisection, see saturation_deficit) over
    /// // 1000–900 and 900–800 hPa, divided by g — about 2 mm of water.
    /// let mut p = Profile { n: 3, p: [0.0; 64], ln_p: [0.0; 64], z: [0.0; 64], t: [0.0; 64],
    ///                       rh: [0.0; 64], dt: [0.0; 64], level: [0; 64] };
    /// p.p[..3].copy_from_slice(&[100_000.0, 90_000.0, 80_000.0]);
    /// p.t[..3].copy_from_slice(&[273.15, 273.15, 268.0]);
    /// p.rh[..3].copy_from_slice(&[50.0, 50.0, 100.0]);
    /// let s = SubCloud::of(&p);
    /// let d0 = saturation_deficit(1e5, 273.15, 50.0);
    /// let expected = (0.5 * (d0 + 1.2486e-3) + 0.5 * 1.2486e-3) * 10_000.0 / 9.80665;
    /// assert!((s.deficit - expected).abs() < 1e-4, "{} {expected}", s.deficit);
    /// ```
    pub fn of(profile: &Profile) -> SubCloud {
        let mut s = SubCloud::empty();
        s.compute(profile, |_| None);
        s
    }

    /// A sub-cloud layer with no points (a buffer to compute into).
    pub fn empty() -> SubCloud {
        SubCloud {
            deficit: 0.0,
            points: 0,
            weight: [0.0; MAX_LEVELS],
            wet_bulb: [0.0; MAX_LEVELS],
            moistening: [0.0; MAX_LEVELS],
            humidity: [0.0; MAX_LEVELS],
        }
    }

    /// [`SubCloud::of`] into `self`, without clearing the arrays (only points 0..`points` are
    /// meaningful). `known(k)` may give the isobaric wet-bulb (K), moistening and specific
    /// humidity (kg/kg) of the profile's isobaric level `k` (its index in the step layout)
    /// already worked out, as the engine does from the model's grid points
    /// ([`crate::engine::moisture`]); where it gives `None`, and at the surface point, they are
    /// computed from the profile.
    pub fn compute(&mut self, profile: &Profile, mut known: impl FnMut(usize) -> Option<[f64; 3]>) {
        let s = self;
        s.deficit = 0.0;
        s.points = 0;
        let mut u = 1.0;
        // A point is computed while the weight of the layer below it is non-zero: the layer
        // whose top is the cloud base still needs the cloud base's deficit.
        for k in 0..profile.n {
            if profile.p[k] < PROFILE_TOP_PA {
                break;
            }
            if u == 0.0 {
                break;
            }
            let (p, t, rh) = (profile.p[k], profile.t[k], profile.rh[k]);
            let u_k = u * (1.0 - smoothstep(CLOUD_RH_START_PCT, CLOUD_RH_FULL_PCT, rh));
            if k == 0 && u_k == 0.0 {
                // Cloud down to the ground: nothing to saturate.
                break;
            }
            let level = profile.level[k];
            let (tw, deficit, q) = match (level != SURFACE).then(|| known(level)).flatten() {
                Some([tw, deficit, q]) => (tw, deficit, q),
                None => isobaric_wet_bulb_deficit_humidity(p, t, rh),
            };
            if !(tw.is_finite() && deficit.is_finite()) {
                s.deficit = f64::NAN;
                return;
            }
            u = u_k;
            s.weight[k] = u;
            s.wet_bulb[k] = tw;
            s.moistening[k] = deficit;
            s.humidity[k] = q;
            s.points = k + 1;
        }
        let top = (0..profile.n)
            .take_while(|&k| profile.p[k] >= PROFILE_TOP_PA)
            .count();
        for k in 0..s.points.min(top.saturating_sub(1)) {
            let dp = profile.p[k] - profile.p[k + 1];
            s.deficit += s.weight[k] * 0.5 * (s.moistening[k] + s.moistening[k + 1]) * dp / G;
        }
    }

    /// Moves the sub-cloud layer toward its wet-bulb: each point with sub-cloud weight u is
    /// cooled by f·(T − Tw) and gains f·(q_s(Tw) − q) of water vapour, f = `met`·u, which keeps
    /// the enthalpy balance of evaporation (cp·ΔT = L·Δq) along the way; `met` is the share of the
    /// deficit already met (0–1). At `met` = 1 the layer sits at its wet-bulb and is saturated.
    /// RH is recomputed (capped at 100 %) and the temperature change recorded in
    /// [`Profile::dt`], so thicknesses follow the cooling.
    pub fn cool(&self, profile: &mut Profile, met: f64) {
        self.cool_with(profile, met, true);
    }

    /// [`SubCloud::cool`], recomputing the humidity only when `humidity` is set (it costs an
    /// exponential per point, and some methods never read it); otherwise the profile keeps
    /// the humidity it had before the cooling.
    pub fn cool_with(&self, profile: &mut Profile, met: f64, humidity: bool) {
        let met = met.clamp(0.0, 1.0);
        for k in 0..self.points {
            let f = met * self.weight[k];
            if f == 0.0 {
                continue;
            }
            let (p, t) = (profile.p[k], profile.t[k]);
            let t_new = t - f * (t - self.wet_bulb[k]);
            if humidity {
                let q = self.humidity[k] + f * self.moistening[k];
                let e = q * p / (EPSILON + (1.0 - EPSILON) * q);
                profile.rh[k] = (100.0 * e / saturation_vapor_pressure(t_new)).min(100.0);
            }
            profile.dt[k] += t_new - t;
            profile.t[k] = t_new;
        }
    }
}

/// What one step's evaporation below the cloud leaves.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Evaporation {
    /// Precipitation reaching the ground, kg m⁻².
    pub reaching_ground: f64,
    /// Water given up to the sub-cloud layer so far, carried to the next step, kg m⁻².
    pub carried: f64,
    /// Share of the deficit met after this step, 0–1 (1 when there is no deficit).
    pub met: f64,
}

/// One step of evaporation below the cloud.
///
/// `carried` is the water given up in earlier steps, `deficit` the water the sub-cloud layer
/// needs as the profile now stands (recomputed every step, so the model's own moistening and any
/// new dry air show in it), `falling` what leaves the cloud this step (all kg m⁻²). The step
/// gives up e = min(falling, max(0, deficit − carried)) and carries carried + e on; the rest,
/// falling − e, reaches the ground.
///
/// Limits: a saturated profile (deficit 0) lets everything through; with no precipitation
/// nothing evaporates and nothing reaches the ground; with a steady deficit S the ground
/// receives max(0, ΣP − S) in total, the first S being lost. The carried water only grows, so
/// the amount lost over a storm never exceeds the largest deficit met, and a larger deficit at
/// every step never lets more through (the carried water is min(carried + P, max(carried, S)),
/// non-decreasing in both). The price: water given up early still counts against a dry spell
/// that returns after the layer had saturated, which delays nothing the second time — a
/// deliberate choice, since a cap or reset would break the monotonicity (a moister history could
/// then lose more).
///
/// ```
/// use trackswing::diagnose::subcloud::evaporate;
/// // 3 mm deficit, 1 mm per step: nothing for three steps, then all of it.
/// let mut carried = 0.0;
/// let mut ground = Vec::new();
/// for _ in 0..5 {
///     let e = evaporate(carried, 3.0, 1.0);
///     carried = e.carried;
///     ground.push(e.reaching_ground);
/// }
/// assert_eq!(ground, vec![0.0, 0.0, 0.0, 1.0, 1.0]);
/// assert_eq!(evaporate(2.0, 0.0, 1.0).reaching_ground, 1.0);
/// ```
pub fn evaporate(carried: f64, deficit: f64, falling: f64) -> Evaporation {
    let given = falling.min(deficit - carried).max(0.0);
    let carried = carried + given;
    let met = if deficit > 0.0 {
        (carried / deficit).min(1.0)
    } else {
        1.0
    };
    Evaporation {
        reaching_ground: falling - given,
        carried,
        met,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnose::thermo::{isobaric_wet_bulb, saturation_deficit};
    use proptest::prelude::*;

    fn profile(p: &[f64], t: &[f64], rh: &[f64]) -> Profile {
        let mut pr = Profile {
            n: p.len(),
            p: [0.0; MAX_LEVELS],
            ln_p: [0.0; MAX_LEVELS],
            z: [0.0; MAX_LEVELS],
            t: [0.0; MAX_LEVELS],
            rh: [0.0; MAX_LEVELS],
            dt: [0.0; MAX_LEVELS],
            level: [0; MAX_LEVELS],
        };
        pr.p[..p.len()].copy_from_slice(p);
        pr.t[..p.len()].copy_from_slice(t);
        pr.rh[..p.len()].copy_from_slice(rh);
        pr
    }

    const P: [f64; 5] = [100_000.0, 92_500.0, 85_000.0, 70_000.0, 50_000.0];
    const T: [f64; 5] = [275.0, 272.0, 270.0, 262.0, 245.0];

    #[test]
    fn saturated_surface_has_no_deficit() {
        let s = SubCloud::of(&profile(&P, &T, &[95.0, 60.0, 60.0, 60.0, 60.0]));
        assert_eq!(s.deficit, 0.0);
        assert_eq!(s.points, 0);
    }

    #[test]
    fn deficit_is_the_integral_below_the_cloud_base() {
        // Cloud base at 850 hPa: S = Σ over 1000–925 and 925–850 of ½(d_b + d_t)·Δp/g, with
        // d at 850 hPa (RH 95 %) itself a small positive number.
        let rh = [50.0, 60.0, 95.0, 95.0, 95.0];
        let s = SubCloud::of(&profile(&P, &T, &rh));
        let d: Vec<f64> = (0..3)
            .map(|k| saturation_deficit(P[k], T[k], rh[k]))
            .collect();
        let expected = 0.5 * (d[0] + d[1]) * 7_500.0 / G + 0.5 * (d[1] + d[2]) * 7_500.0 / G;
        assert!(
            (s.deficit - expected).abs() < 1e-9,
            "{} {expected}",
            s.deficit
        );
        // Of the order of a millimetre: 150 hPa of air at 50–60 % near 0 °C.
        assert!((0.5..3.0).contains(&s.deficit), "{}", s.deficit);
        // The cloud base (850 hPa) is the last point computed, with weight 0.
        assert_eq!(s.points, 3);
        assert_eq!(s.weight[2], 0.0);
        assert_eq!(s.weight[..2], [1.0, 1.0]);
    }

    #[test]
    fn deficit_is_continuous_as_a_level_reaches_cloud() {
        // 925 hPa's RH swept through the 80–90 % ramp in 0.01 % steps: S never jumps.
        let mut prev = f64::NAN;
        for i in 0..=3000 {
            let rh925 = 70.0 + 0.01 * i as f64;
            let s = SubCloud::of(&profile(&P, &T, &[50.0, rh925, 60.0, 95.0, 95.0])).deficit;
            if prev.is_finite() {
                assert!((s - prev).abs() < 2e-3, "{rh925}: {prev} → {s}");
            }
            prev = s;
        }
    }

    #[test]
    fn cooling_reaches_the_wet_bulb_in_proportion() {
        let rh = [50.0, 60.0, 95.0, 95.0, 95.0];
        let mut pr = profile(&P, &T, &rh);
        let s = SubCloud::of(&pr);
        s.cool(&mut pr, 0.5);
        let tw0 = isobaric_wet_bulb(P[0], T[0], rh[0]);
        assert!((pr.t[0] - (T[0] - 0.5 * (T[0] - tw0))).abs() < 1e-12);
        assert!(pr.rh[0] > 50.0 && pr.rh[0] < 100.0);
        assert_eq!(pr.t[3], T[3], "cloud is not cooled");
        let mut full = profile(&P, &T, &rh);
        s.cool(&mut full, 1.0);
        assert!((full.t[0] - tw0).abs() < 1e-12);
        // Saturated at its wet-bulb (the enthalpy balance closes): RH 100 % within rounding.
        assert!((full.rh[0] - 100.0).abs() < 0.5, "{}", full.rh[0]);
        assert!((full.dt[0] - (tw0 - T[0])).abs() < 1e-12);
    }

    #[test]
    fn steady_deficit_gives_the_excess() {
        // max(0, ΣP − S): 2.5 mm deficit, 1 mm per step for 4 steps → 1.5 mm at the ground.
        let mut carried = 0.0;
        let mut total = 0.0;
        for _ in 0..4 {
            let e = evaporate(carried, 2.5, 1.0);
            carried = e.carried;
            total += e.reaching_ground;
        }
        assert!((total - 1.5f64).abs() < 1e-12);
        let none = evaporate(1.0, 2.5, 0.0);
        assert_eq!((none.reaching_ground, none.carried), (0.0, 1.0));
        // The model moistens the layer (deficit 2.5 → 1 mm) after 2 mm were given up: met.
        let later = evaporate(2.0, 1.0, 1.0);
        assert_eq!(
            (later.reaching_ground, later.carried, later.met),
            (1.0, 2.0, 1.0)
        );
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        /// A drier sub-cloud layer (a larger deficit at every step) never lets more
        /// precipitation reach the ground, over any sequence of steps.
        #[test]
        fn drier_never_more_at_the_ground(
            steps in proptest::collection::vec((0.0..5.0_f64, 0.0..4.0_f64, 0.0..2.0_f64), 1..12)
        ) {
            let (mut c1, mut c2, mut g1, mut g2) = (0.0, 0.0, 0.0, 0.0);
            for (d, extra, p) in steps {
                let a = evaporate(c1, d, p);
                let b = evaporate(c2, d + extra, p);
                c1 = a.carried;
                c2 = b.carried;
                g1 += a.reaching_ground;
                g2 += b.reaching_ground;
                prop_assert!(a.reaching_ground >= 0.0 && a.reaching_ground <= p);
                prop_assert!(g2 <= g1 + 1e-9, "drier {} > moister {}", g2, g1);
            }
        }
    }
}
