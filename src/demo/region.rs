//! The invented region: its map frame and its ground (coast, the Sallow Flats coastal plain,
//! the Greymantle Ridge and the Wendle Valley behind it). Nothing here describes a real place.
//!
//! The region is put over open ocean at real mid-latitudes on purpose: its layers land on a
//! map, and no real coast or town lies under them to be mistaken for the invented ones.

/// Mean Earth radius, km (IUGG), for the demo's local map frame.
const EARTH_RADIUS_KM: f64 = 6371.0;

/// Outer edges of the region, degrees (cell edges, not centres).
pub(crate) const WEST: f64 = -35.0;
pub(crate) const EAST: f64 = -15.8;
pub(crate) const NORTH: f64 = 52.0;
pub(crate) const SOUTH: f64 = 41.6;

const LON0: f64 = 0.5 * (WEST + EAST);
const LAT0: f64 = 0.5 * (NORTH + SOUTH);
const KM_PER_DEG: f64 = EARTH_RADIUS_KM * std::f64::consts::PI / 180.0;

/// Map frame of the storm along one parallel: x east and y north in km from the region's
/// centre, a sinusoidal projection on a sphere, with the cosine of the latitude worked out
/// once per row. Distances within the region are true to a few per cent, enough for an
/// invented storm whose shapes are defined in this frame.
#[derive(Debug, Clone, Copy)]
pub(crate) struct MapRow {
    y: f64,
    km_per_deg_lon: f64,
}

impl MapRow {
    pub(crate) fn new(lat: f64) -> Self {
        MapRow {
            y: (lat - LAT0) * KM_PER_DEG,
            km_per_deg_lon: KM_PER_DEG * lat.to_radians().cos(),
        }
    }

    pub(crate) fn to_km(self, lon: f64) -> (f64, f64) {
        ((lon - LON0) * self.km_per_deg_lon, self.y)
    }
}

/// Inverse of [`MapRow::to_km`]: (lat, lon) in degrees.
pub(crate) fn to_geo(x: f64, y: f64) -> (f64, f64) {
    let lat = LAT0 + y / KM_PER_DEG;
    (lat, LON0 + x / (KM_PER_DEG * lat.to_radians().cos()))
}

/// The coastline is an arc around this centre (km), running parallel to the storm's path a
/// little inland of it; land lies outside the arc.
const COAST_CENTRE: (f64, f64) = (1315.3, -1525.3);
const COAST_RADIUS_KM: f64 = 2117.1 + 70.0;

/// The ground under one point.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Ground {
    /// Surface altitude, m.
    pub z: f64,
    /// Land area fraction, 0…1.
    pub land: f64,
    /// Near-ground temperature anomaly, K: warmth from the sea near the coast, and the cold
    /// pools trapped against the ridge's coastal side and in the valley behind it.
    pub dt: f64,
}

/// (1 − u²)³ inside |u| < 1, else 0: a smooth bump with compact support and no transcendental.
pub(crate) fn bump(u: f64) -> f64 {
    let v = 1.0 - u * u;
    if v > 0.0 {
        v * v * v
    } else {
        0.0
    }
}

/// Cubic smoothstep from 0 at `lo` to 1 at `hi`.
pub(crate) fn smoothstep(lo: f64, hi: f64, v: f64) -> f64 {
    let t = ((v - lo) * (1.0 / (hi - lo))).clamp(0.0, 1.0);
    t * t * (3.0 - 2.0 * t)
}

/// A sine-like wave of period 2π built from parabola arcs (continuous with its slope), so
/// the ground needs no trigonometric call per cell; its peaks are ±1 like a sine's.
pub(crate) fn wave(theta: f64) -> f64 {
    let v = theta * std::f64::consts::FRAC_1_PI;
    let f = v - 2.0 * (0.5 * v).floor();
    if f < 1.0 {
        4.0 * f * (1.0 - f)
    } else {
        -4.0 * (f - 1.0) * (2.0 - f)
    }
}

/// Ground at map point (x, y) km. Deterministic and smooth; square roots and polynomials
/// only, so a whole grid of it costs little more than its memory.
pub(crate) fn ground(x: f64, y: f64) -> Ground {
    let (dx, dy) = (x - COAST_CENTRE.0, y - COAST_CENTRE.1);
    let r = (dx * dx + dy * dy).sqrt();
    // A coordinate along the coast, km: R·sin of the angle round the arc, monotonic over the
    // region (the arc spans well under ±90°).
    let along = -COAST_RADIUS_KM * dx / r;
    let wiggle = 18.0 * wave(along * (1.0 / 110.0)) + 9.0 * wave(along * (1.0 / 47.0) + 1.3);
    ground_profile(r - COAST_RADIUS_KM - wiggle, along)
}

/// Ground `d` km inland of the coastline (negative at sea) and `along` km along it.
fn ground_profile(d: f64, along: f64) -> Ground {
    let land = smoothstep(-3.0, 3.0, d);
    let base = 100.0 * smoothstep(0.0, 150.0, d)
        + 160.0 * smoothstep(150.0, 260.0, d)
        + 380.0 * smoothstep(330.0, 500.0, d);
    let ridge_crest = 1180.0 * (1.0 + 0.12 * wave(along * (1.0 / 90.0) + 0.4));
    let ridge = ridge_crest * bump((d - 225.0) * (1.0 / 55.0));
    let z = if d > 0.0 { (base + ridge) * land } else { 0.0 };
    let marine = 2.5 * (1.0 - smoothstep(-20.0, 50.0, d));
    let pool_plain = -4.5 * bump((d - 150.0) * (1.0 / 60.0));
    let pool_valley = -5.0 * bump((d - 300.0) * (1.0 / 60.0));
    Ground {
        z,
        land,
        dt: marine + pool_plain + pool_valley,
    }
}

/// How strongly the near-ground anomaly reaches a level `z_agl` m above the ground: full at and
/// below the ground, half at 450 m, a rational fall-off that needs no exponential.
pub(crate) fn ground_weight(z_agl: f64) -> f64 {
    let h = z_agl.max(0.0) * (1.0 / 450.0);
    1.0 / (1.0 + h * h)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn frame_round_trip() {
        for (lat, lon) in [(42.0, -34.0), (46.8, -25.4), (51.9, -16.0)] {
            let (x, y) = MapRow::new(lat).to_km(lon);
            let (lat2, lon2) = to_geo(x, y);
            assert!((lat - lat2).abs() < 1e-9 && (lon - lon2).abs() < 1e-9);
        }
    }

    #[test]
    fn frame_distance_along_a_meridian() {
        // One degree of latitude on a 6371 km sphere is 111.19 km (common practice).
        let (_, y0) = MapRow::new(45.0).to_km(-25.0);
        let (_, y1) = MapRow::new(46.0).to_km(-25.0);
        assert!((y1 - y0 - 111.19).abs() < 0.01);
    }

    #[test]
    fn wave_is_sine_like() {
        for k in -400..400 {
            let theta = 0.05 * f64::from(k);
            // A parabolic wave stays within 0.06 of the sine it replaces.
            assert!((wave(theta) - theta.sin()).abs() < 0.06, "{theta}");
        }
    }

    #[test]
    fn ground_has_plain_ridge_and_valley() {
        let mut peak: f64 = 0.0;
        for k in 0..2000 {
            let along = -700.0 + 0.7 * k as f64;
            peak = peak.max(ground_profile(225.0, along).z);
            assert_eq!(ground_profile(-60.0, along).z, 0.0);
            assert!(ground_profile(80.0, along).z < 100.0);
            assert!(ground_profile(300.0, along).z < 300.0);
            assert!(ground_profile(300.0, along).dt < -4.0);
        }
        assert!((1200.0..=1550.0).contains(&peak), "ridge peak {peak} m");
    }
}
