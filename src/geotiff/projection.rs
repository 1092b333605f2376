//! Forward and inverse map projections of the CRSs in `crs.rs`, on the ellipsoid (e > 0) or the
//! sphere (e = 0) with the same formulas.
//!
//! Formulas: Snyder (1987), *Map Projections — A Working Manual*, USGS Professional Paper 1395:
//! Lambert conformal conic eqs. 15-1 to 15-11 with 14-15 and 7-9/7-10 (pp. 107–109), polar
//! stereographic eqs. 21-33 to 21-40 (pp. 160–162), Mercator eqs. 7-6, 7-7, 7-9 (p. 44), the
//! isometric-latitude inversion by iteration of eq. 7-9. Tests compare with PROJ through GDAL.

use super::crs::{Crs, Projected, Projection};

const HALF_PI: f64 = std::f64::consts::FRAC_PI_2;
const QUARTER_PI: f64 = std::f64::consts::FRAC_PI_4;

/// Snyder eq. 15-9 / 7-7: t(φ) = tan(π/4 − φ/2) / ((1 − e sin φ)/(1 + e sin φ))^(e/2).
fn tsfn(phi: f64, e: f64) -> f64 {
    let es = e * phi.sin();
    (QUARTER_PI - phi / 2.0).tan() / ((1.0 - es) / (1.0 + es)).powf(e / 2.0)
}

/// Snyder eq. 14-15: m(φ) = cos φ / (1 − e² sin² φ)^½.
fn msfn(phi: f64, e: f64) -> f64 {
    let es = e * phi.sin();
    phi.cos() / (1.0 - es * es).sqrt()
}

/// Latitude from t, Snyder eq. 7-9 iterated (converges to 1e-15 rad in a few steps).
fn phi_of_t(t: f64, e: f64) -> f64 {
    let mut phi = HALF_PI - 2.0 * t.atan();
    for _ in 0..32 {
        let es = e * phi.sin();
        let next = HALF_PI - 2.0 * (t * ((1.0 - es) / (1.0 + es)).powf(e / 2.0)).atan();
        let done = (next - phi).abs() < 1e-15;
        phi = next;
        if done {
            break;
        }
    }
    phi
}

/// Longitude difference reduced to −π…π.
fn wrap(dlon: f64) -> f64 {
    let two_pi = 2.0 * std::f64::consts::PI;
    dlon - two_pi * ((dlon + std::f64::consts::PI) / two_pi).floor()
}

/// Cone constants of a Lambert conformal conic: n, a·F and ρ0 (Snyder eqs. 15-3, 15-2, 15-1a),
/// or `None` for other projections. The 1SP form has n = sin φ0 and the scale factor in F.
fn lcc_constants(p: &Projected) -> Option<(f64, f64, f64)> {
    let (a, e) = p.datum.axis_and_eccentricity();
    match p.projection {
        Projection::LambertConformal2Sp {
            lat_1,
            lat_2,
            lat_0,
            ..
        } => {
            let (p1, p2, p0) = (lat_1.to_radians(), lat_2.to_radians(), lat_0.to_radians());
            let (m1, m2) = (msfn(p1, e), msfn(p2, e));
            let (t1, t2) = (tsfn(p1, e), tsfn(p2, e));
            let n = if (p1 - p2).abs() < 1e-12 {
                p1.sin()
            } else {
                (m1.ln() - m2.ln()) / (t1.ln() - t2.ln())
            };
            let af = a * m1 / (n * t1.powf(n));
            Some((n, af, af * tsfn(p0, e).powf(n)))
        }
        Projection::LambertConformal1Sp { lat_0, scale, .. } => {
            let p0 = lat_0.to_radians();
            let n = p0.sin();
            let t0 = tsfn(p0, e);
            let af = a * scale * msfn(p0, e) / (n * t0.powf(n));
            Some((n, af, af * t0.powf(n)))
        }
        _ => None,
    }
}

/// ρ at the standard parallel scaled for a polar stereographic variant B (Snyder eq. 21-34), or at
/// the pole with k0 = 1 (eq. 21-33): ρ = k·t with this k.
fn polar_k(a: f64, e: f64, lat_ts_abs: f64) -> f64 {
    if (lat_ts_abs - 90.0).abs() < 1e-12 {
        2.0 * a / ((1.0 + e).powf(1.0 + e) * (1.0 - e).powf(1.0 - e)).sqrt()
    } else {
        let pc = lat_ts_abs.to_radians();
        a * msfn(pc, e) / tsfn(pc, e)
    }
}

/// Projects WGS 84 / sphere longitude and latitude (degrees) to projected x, y (m). Geographic
/// CRSs return the input. NaN for points the projection cannot map (a pole of Mercator, the far
/// pole of a stereographic or conic projection).
///
/// ```
/// use trackswing::geotiff::*;
/// let lcc = Crs::Projected(Projected {
///     datum: Datum::Sphere { radius_m: 6371229.0 },
///     projection: Projection::LambertConformal2Sp { lat_1: 25.0, lat_2: 25.0, lat_0: 25.0, lon_0: -95.0 },
///     false_easting_m: 0.0,
///     false_northing_m: 0.0,
/// });
/// // On the central meridian at the origin latitude: the origin.
/// let (x, y) = forward(&lcc, -95.0, 25.0);
/// assert!(x.abs() < 1e-6 && y.abs() < 1e-6);
/// let (lon, lat) = inverse(&lcc, 1.0e6, 5.0e5);
/// let (x, y) = forward(&lcc, lon, lat);
/// assert!((x - 1.0e6).abs() < 1e-6 && (y - 5.0e5).abs() < 1e-6);
/// ```
pub fn forward(crs: &Crs, lon: f64, lat: f64) -> (f64, f64) {
    let Crs::Projected(p) = crs else {
        return (lon, lat);
    };
    let (a, e) = p.datum.axis_and_eccentricity();
    let phi = lat.to_radians();
    let (x, y) = match p.projection {
        Projection::LambertConformal2Sp { lon_0, .. }
        | Projection::LambertConformal1Sp { lon_0, .. } => {
            let Some((n, af, rho0)) = lcc_constants(p) else {
                return (f64::NAN, f64::NAN);
            };
            if (phi.abs() - HALF_PI).abs() < 1e-12 && phi * n < 0.0 {
                return (f64::NAN, f64::NAN);
            }
            let rho = af * tsfn(phi, e).powf(n);
            let theta = n * wrap((lon - lon_0).to_radians());
            (rho * theta.sin(), rho0 - rho * theta.cos())
        }
        Projection::PolarStereographic { lat_ts, lon_0 } => {
            let south = lat_ts < 0.0;
            let k = polar_k(a, e, lat_ts.abs());
            let phi_n = if south { -phi } else { phi };
            if phi_n <= -HALF_PI + 1e-12 {
                return (f64::NAN, f64::NAN);
            }
            let rho = k * tsfn(phi_n, e);
            let dl = wrap((lon - lon_0).to_radians());
            if south {
                (rho * dl.sin(), rho * dl.cos())
            } else {
                (rho * dl.sin(), -rho * dl.cos())
            }
        }
        Projection::Mercator { lat_ts, lon_0 } => {
            if phi.abs() >= HALF_PI - 1e-12 {
                return (f64::NAN, f64::NAN);
            }
            let k0 = msfn(lat_ts.to_radians(), e);
            let dl = wrap((lon - lon_0).to_radians());
            (a * k0 * dl, -a * k0 * tsfn(phi, e).ln())
        }
    };
    (x + p.false_easting_m, y + p.false_northing_m)
}

/// Inverse of [`forward`]: projected x, y (m) to longitude, latitude (degrees), longitude in
/// −180…180. Geographic CRSs return the input.
pub fn inverse(crs: &Crs, x: f64, y: f64) -> (f64, f64) {
    let Crs::Projected(p) = crs else {
        return (x, y);
    };
    let (a, e) = p.datum.axis_and_eccentricity();
    let (x, y) = (x - p.false_easting_m, y - p.false_northing_m);
    let (lon, phi) = match p.projection {
        Projection::LambertConformal2Sp { lon_0, .. }
        | Projection::LambertConformal1Sp { lon_0, .. } => {
            let Some((n, af, rho0)) = lcc_constants(p) else {
                return (f64::NAN, f64::NAN);
            };
            let s = n.signum();
            let rho = s * (x * x + (rho0 - y) * (rho0 - y)).sqrt();
            let theta = (s * x).atan2(s * (rho0 - y));
            let phi = if rho == 0.0 {
                s * HALF_PI
            } else {
                phi_of_t((rho / af).powf(1.0 / n), e)
            };
            (lon_0 + (theta / n).to_degrees(), phi)
        }
        Projection::PolarStereographic { lat_ts, lon_0 } => {
            let south = lat_ts < 0.0;
            let k = polar_k(a, e, lat_ts.abs());
            let rho = (x * x + y * y).sqrt();
            let phi = phi_of_t(rho / k, e);
            if south {
                (lon_0 + x.atan2(y).to_degrees(), -phi)
            } else {
                (lon_0 + x.atan2(-y).to_degrees(), phi)
            }
        }
        Projection::Mercator { lat_ts, lon_0 } => {
            let k0 = msfn(lat_ts.to_radians(), e);
            let phi = phi_of_t((-y / (a * k0)).exp(), e);
            (lon_0 + (x / (a * k0)).to_degrees(), phi)
        }
    };
    (wrap(lon.to_radians()).to_degrees(), phi.to_degrees())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::crs::Datum;

    fn crs(datum: Datum, projection: Projection) -> Crs {
        Crs::Projected(Projected {
            datum,
            projection,
            false_easting_m: 1000.0,
            false_northing_m: -2000.0,
        })
    }

    fn all() -> Vec<Crs> {
        let mut v = Vec::new();
        for d in [
            Datum::Wgs84,
            Datum::Sphere {
                radius_m: 6_371_229.0,
            },
        ] {
            v.push(crs(
                d,
                Projection::LambertConformal2Sp {
                    lat_1: 33.0,
                    lat_2: 45.0,
                    lat_0: 40.0,
                    lon_0: -97.0,
                },
            ));
            v.push(crs(
                d,
                Projection::LambertConformal1Sp {
                    lat_0: 50.0,
                    lon_0: 10.0,
                    scale: 0.999,
                },
            ));
            v.push(crs(
                d,
                Projection::LambertConformal2Sp {
                    lat_1: -35.0,
                    lat_2: -35.0,
                    lat_0: -35.0,
                    lon_0: 140.0,
                },
            ));
            v.push(crs(
                d,
                Projection::PolarStereographic {
                    lat_ts: 60.0,
                    lon_0: -105.0,
                },
            ));
            v.push(crs(
                d,
                Projection::PolarStereographic {
                    lat_ts: -71.0,
                    lon_0: 0.0,
                },
            ));
            v.push(crs(
                d,
                Projection::PolarStereographic {
                    lat_ts: 90.0,
                    lon_0: 45.0,
                },
            ));
            v.push(crs(
                d,
                Projection::Mercator {
                    lat_ts: 20.0,
                    lon_0: -100.0,
                },
            ));
        }
        v
    }

    #[test]
    fn inverse_undoes_forward() {
        for c in all() {
            let south = matches!(c, Crs::Projected(Projected { projection: Projection::PolarStereographic { lat_ts, .. }, .. }) if lat_ts < 0.0)
                || matches!(c, Crs::Projected(Projected { projection: Projection::LambertConformal2Sp { lat_1, .. }, .. }) if lat_1 < 0.0);
            for lon in [-179.0, -120.0, -97.0, -30.0, 0.0, 45.0, 140.0, 179.5] {
                for lat in [5.0, 20.0, 40.0, 60.0, 85.0] {
                    let lat = if south { -lat } else { lat };
                    let (x, y) = forward(&c, lon, lat);
                    assert!(x.is_finite() && y.is_finite(), "{c:?} {lon} {lat}");
                    let (lo, la) = inverse(&c, x, y);
                    assert!(
                        (lo - lon).abs() < 1e-9 && (la - lat).abs() < 1e-9,
                        "{c:?}: {lon},{lat} -> {x},{y} -> {lo},{la}"
                    );
                }
            }
        }
    }

    #[test]
    fn conformal_scale_is_one_on_standard_parallels() {
        // Snyder (1987) p. 105 and p. 157: the conic is true to scale along its standard
        // parallels, the polar stereographic along lat_ts, Mercator along ±lat_ts. Scale along a
        // parallel: projected length of a small arc over its length on the ellipsoid (N cos φ dλ,
        // Snyder eq. 4-20 / 14-15 with a·m(φ)).
        let d = Datum::Sphere {
            radius_m: 6_371_229.0,
        };
        let cases = [
            (
                Projection::LambertConformal2Sp {
                    lat_1: 33.0,
                    lat_2: 45.0,
                    lat_0: 40.0,
                    lon_0: -97.0,
                },
                [33.0, 45.0],
            ),
            (
                Projection::PolarStereographic {
                    lat_ts: 60.0,
                    lon_0: -105.0,
                },
                [60.0, 60.0],
            ),
            (
                Projection::Mercator {
                    lat_ts: 20.0,
                    lon_0: -100.0,
                },
                [20.0, -20.0],
            ),
        ];
        for datum in [d, Datum::Wgs84] {
            let (a, e) = datum.axis_and_eccentricity();
            for (p, lats) in cases {
                let c = crs(datum, p);
                for lat in lats {
                    let dl = 1e-4;
                    let (x0, y0) = forward(&c, -97.0, lat);
                    let (x1, y1) = forward(&c, -97.0 + dl, lat);
                    let ground = a * msfn(lat.to_radians(), e) * dl.to_radians();
                    let k = ((x1 - x0).hypot(y1 - y0)) / ground;
                    assert!((k - 1.0).abs() < 1e-7, "{p:?} {datum:?} lat {lat}: k = {k}");
                }
            }
        }
    }
}
