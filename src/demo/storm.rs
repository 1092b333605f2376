//! The invented storm, in storm time s (0 at the first step, 1 at the last), so any step count
//! shows the same storm from entry to exit. Shapes are in the region's km frame
//! ([`super::region::MapRow`]); storm-relative coordinates are `a` km ahead of the low along its
//! motion and `b` km to the left of it.

use super::region::bump;

/// Control points of the quadratic Bézier path of the depression's centre, km. It enters in
/// the south-west heading north-north-east and leaves in the north-east heading east-north-east.
const PATH: [(f64, f64); 3] = [(-520.0, -470.0), (-150.0, 150.0), (480.0, 420.0)];

/// Pressure far from the low, hPa.
const BACKGROUND_HPA: f64 = 1014.0;
/// The cold anticyclone to the north-west that feeds the trapped cold air: centre (km), peak
/// excess (hPa) and radius (km) of its rational profile.
const HIGH: (f64, f64, f64, f64) = (-700.0, 650.0, 9.0, 650.0);
/// Radius of the depression's rational profile, km.
const LOW_RADIUS_KM: f64 = 320.0;

/// Liquid falling in storm-time 1 under the peak of the precipitation shape, kg m⁻² (tuned so
/// the heaviest storm totals on the shipped grid come to about 33 mm).
pub(crate) const PRECIP_PER_STORM_TIME: f64 = 118.0;

/// Centre of the depression profile (not quite the pressure minimum: the background tilts it).
fn path(s: f64) -> (f64, f64) {
    let (p0, p1, p2) = (PATH[0], PATH[1], PATH[2]);
    let (u, v) = (1.0 - s, s);
    (
        u * u * p0.0 + 2.0 * u * v * p1.0 + v * v * p2.0,
        u * u * p0.1 + 2.0 * u * v * p1.1 + v * v * p2.1,
    )
}

/// Unit direction of motion along the path.
fn heading(s: f64) -> (f64, f64) {
    let (p0, p1, p2) = (PATH[0], PATH[1], PATH[2]);
    let dx = 2.0 * (1.0 - s) * (p1.0 - p0.0) + 2.0 * s * (p2.0 - p1.0);
    let dy = 2.0 * (1.0 - s) * (p1.1 - p0.1) + 2.0 * s * (p2.1 - p1.1);
    let norm = dx.hypot(dy);
    (dx / norm, dy / norm)
}

/// Depth of the depression below the background, hPa: it deepens through the run.
fn depth_hpa(s: f64) -> f64 {
    27.0 + 13.0 * super::region::smoothstep(0.0, 1.0, s)
}

/// Strength of the precipitation through the storm's life, 0…1.
fn precip_strength(s: f64) -> f64 {
    (0.6 + 0.4 * (std::f64::consts::PI * s).sin()).max(0.0)
}

/// Sea-level pressure without the low at map point (x, y) km, hPa; it does not change in time.
fn background_hpa(x: f64, y: f64) -> f64 {
    let (hx, hy, h_peak, h_radius) = HIGH;
    let hr2 = ((x - hx).powi(2) + (y - hy).powi(2)) / (h_radius * h_radius);
    BACKGROUND_HPA + h_peak / ((1.0 + hr2) * (1.0 + hr2))
}

/// The storm at one storm time.
#[derive(Debug, Clone, Copy)]
pub(crate) struct StormState {
    /// Centre of the depression profile, km.
    profile_centre: (f64, f64),
    depth: f64,
    /// The sea-level pressure minimum, km: what the track reports and what everything that
    /// moves with the storm is attached to.
    pub centre: (f64, f64),
    /// Unit direction of motion.
    pub heading: (f64, f64),
    /// Pressure at the minimum, hPa.
    pub min_hpa: f64,
    /// Precipitation strength, 0…1.
    pub strength: f64,
}

impl StormState {
    /// The storm at storm time `s`, its whole path moved by `offset_km` (east, north; zero for
    /// the demo storm, otherwise a demo member whose low tracks elsewhere); the pressure minimum
    /// is found by Newton's method on the analytic field (a fixed number of iterations, so it
    /// is deterministic).
    pub(crate) fn moved(s: f64, offset_km: (f64, f64)) -> Self {
        let (x, y) = path(s);
        let profile_centre = (x + offset_km.0, y + offset_km.1);
        let depth = depth_hpa(s);
        let mut state = StormState {
            profile_centre,
            depth,
            centre: profile_centre,
            heading: heading(s),
            min_hpa: 0.0,
            strength: precip_strength(s),
        };
        let h = 0.5;
        let (mut x, mut y) = profile_centre;
        for _ in 0..12 {
            let f = |dx: f64, dy: f64| state.mslp_hpa(x + dx, y + dy);
            let f0 = f(0.0, 0.0);
            let gx = (f(h, 0.0) - f(-h, 0.0)) / (2.0 * h);
            let gy = (f(0.0, h) - f(0.0, -h)) / (2.0 * h);
            let hxx = (f(h, 0.0) - 2.0 * f0 + f(-h, 0.0)) / (h * h);
            let hyy = (f(0.0, h) - 2.0 * f0 + f(0.0, -h)) / (h * h);
            let hxy = (f(h, h) - f(h, -h) - f(-h, h) + f(-h, -h)) / (4.0 * h * h);
            let det = hxx * hyy - hxy * hxy;
            if det <= 0.0 {
                break;
            }
            x -= (hyy * gx - hxy * gy) / det;
            y -= (hxx * gy - hxy * gx) / det;
        }
        state.centre = (x, y);
        state.min_hpa = state.mslp_hpa(x, y);
        state
    }

    /// Sea-level pressure at map point (x, y) km, hPa.
    pub(crate) fn mslp_hpa(&self, x: f64, y: f64) -> f64 {
        let (cx, cy) = self.profile_centre;
        let r2 = ((x - cx).powi(2) + (y - cy).powi(2)) / (LOW_RADIUS_KM * LOW_RADIUS_KM);
        background_hpa(x, y) - self.depth / (1.0 + r2)
    }

    /// Storm-relative coordinates of map point (x, y): (km ahead, km to the left).
    pub(crate) fn relative(&self, x: f64, y: f64) -> (f64, f64) {
        let (dx, dy) = (x - self.centre.0, y - self.centre.1);
        let (mx, my) = self.heading;
        (dx * mx + dy * my, dy * mx - dx * my)
    }
}

/// Shape of the precipitation around the low at storm-relative (a, b) km, about 0…1: a curved
/// comma-head / deformation band left of the track, a warm-frontal shield ahead and a weaker
/// cold-frontal band behind and to the right. Compact bumps, so it is exactly zero far away.
pub(crate) fn precip_shape(a: f64, b: f64) -> f64 {
    let comma_axis = 210.0 - 0.0006 * (a + 30.0) * (a + 30.0);
    let comma = bump((b - comma_axis) * (1.0 / 200.0)) * bump((a + 30.0) * (1.0 / 430.0));
    let warm_front = bump((a - 240.0) * (1.0 / 220.0)) * bump((b - 40.0) * (1.0 / 260.0));
    let cold_front = bump((a + 150.0) * (1.0 / 300.0)) * bump((b + 200.0) * (1.0 / 90.0));
    comma + 0.5 * warm_front + 0.25 * cold_front
}

/// Dryness of the dry slot wrapping in behind and right of the low, 0…1.
pub(crate) fn dry_slot(a: f64, b: f64) -> f64 {
    bump((a + 120.0) * (1.0 / 200.0)) * bump((b + 40.0) * (1.0 / 120.0))
}

/// Along-track weights of the storm-attached thermal pattern at `a` km ahead: the warm
/// bulge ahead of the low (warm advection) and the cold surge behind it, each 0…1.
pub(crate) fn front_weights(a: f64) -> (f64, f64) {
    let w = (a - 200.0) * (1.0 / 250.0);
    let c = (a + 100.0) * (1.0 / 250.0);
    (1.0 / (1.0 + w * w), 0.5 - 0.5 * c / (1.0 + c * c).sqrt())
}

/// Reference pressures of the thermal tables, hPa.
const TABLE_HPA: [f64; 6] = [1000.0, 925.0, 850.0, 700.0, 500.0, 300.0];
/// Temperature of the cold air mass, K.
const T_COLD: [f64; 6] = [270.0, 267.0, 264.5, 257.0, 241.0, 222.0];
/// Temperature of the warm air mass, K.
const T_WARM: [f64; 6] = [282.0, 279.5, 278.0, 268.0, 250.0, 228.0];
/// Position of the baroclinic zone far from the low, km left of the track. It leans further
/// left with height, as fronts lean over their cold air: warm air aloft overruns the cold.
const FRONT_LEFT_KM: [f64; 6] = [100.0, 130.0, 180.0, 220.0, 250.0, 250.0];
/// How far the warm bulge ahead of the low pushes the zone to the left, km.
const WARM_BULGE_KM: [f64; 6] = [50.0, 100.0, 170.0, 150.0, 80.0, 40.0];
/// How far the cold surge behind the low pushes the zone to the right, km.
const COLD_SURGE_KM: [f64; 6] = [420.0, 420.0, 400.0, 360.0, 300.0, 250.0];
/// Half-width of the baroclinic zone, km.
const ZONE_HALF_WIDTH_KM: [f64; 6] = [90.0, 90.0, 100.0, 120.0, 150.0, 180.0];
/// Relative humidity away from the precipitation, %.
const RH_DRY: [f64; 6] = [72.0, 70.0, 62.0, 50.0, 40.0, 35.0];
/// Relative humidity inside the precipitation, %.
const RH_WET: [f64; 6] = [99.5, 99.5, 99.0, 97.0, 90.0, 80.0];
/// Relative humidity removed by the dry slot at full dryness, %.
const RH_SLOT: [f64; 6] = [15.0, 20.0, 30.0, 35.0, 30.0, 20.0];

/// The thermal and moisture pattern of one isobaric level.
#[derive(Debug, Clone, Copy)]
pub(crate) struct LevelPattern {
    pub p_pa: f64,
    pub t_cold: f64,
    pub t_contrast: f64,
    pub front_left_km: f64,
    pub warm_bulge_km: f64,
    pub cold_surge_km: f64,
    /// Inverse of the zone's half-width, km⁻¹.
    pub inv_half_width_km: f64,
    pub rh_dry: f64,
    pub rh_wet: f64,
    pub rh_slot: f64,
    /// Height of the level in the standard atmosphere, m (ISO 2533), only to shape how far the
    /// near-ground anomaly reaches up.
    pub z_standard: f64,
}

impl LevelPattern {
    /// The pattern at `p_hpa`, interpolated linearly in ln p between the tables; below
    /// 1000 hPa the lowest pair is extrapolated, above 300 hPa the 300 hPa row holds.
    pub(crate) fn at(p_hpa: f64) -> Self {
        let lnp = p_hpa.clamp(300.0, 1100.0).ln();
        let k = (0..TABLE_HPA.len() - 2)
            .find(|&k| lnp >= TABLE_HPA[k + 1].ln())
            .unwrap_or(TABLE_HPA.len() - 2);
        let w = (TABLE_HPA[k].ln() - lnp) / (TABLE_HPA[k].ln() - TABLE_HPA[k + 1].ln());
        let lerp = |t: &[f64; 6]| t[k] + w * (t[k + 1] - t[k]);
        let t_cold = lerp(&T_COLD);
        LevelPattern {
            p_pa: p_hpa * 100.0,
            t_cold,
            t_contrast: lerp(&T_WARM) - t_cold,
            front_left_km: lerp(&FRONT_LEFT_KM),
            warm_bulge_km: lerp(&WARM_BULGE_KM),
            cold_surge_km: lerp(&COLD_SURGE_KM),
            inv_half_width_km: 1.0 / lerp(&ZONE_HALF_WIDTH_KM),
            rh_dry: lerp(&RH_DRY),
            rh_wet: lerp(&RH_WET),
            rh_slot: lerp(&RH_SLOT),
            z_standard: 288.15 / 0.0065 * (1.0 - (p_hpa / 1013.25).powf(0.190_263)),
        }
    }

    /// Free-air temperature, K, at storm-relative cross-track `b` km, given the along-track
    /// [`front_weights`]. An algebraic sigmoid across the zone keeps it to one square root.
    pub(crate) fn temperature(&self, b: f64, warm_bulge: f64, cold_surge: f64) -> f64 {
        let front =
            self.front_left_km + self.warm_bulge_km * warm_bulge - self.cold_surge_km * cold_surge;
        let u = (front - b) * self.inv_half_width_km;
        self.t_cold + self.t_contrast * (0.5 + 0.5 * u / (1.0 + u * u).sqrt())
    }
}
