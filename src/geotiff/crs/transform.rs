//! Lon/lat ↔ projected x/y of a [`Projected`] CRS, through proj4rs (a pure-Rust port of PROJ's
//! projection formulas), for the projections input grids come on: Lambert conformal conic 2SP
//! and polar stereographic, without a false origin.

use super::{Projected, Projection};

/// Forward and inverse transforms of one projected CRS. Built once per grid, so a grid's cell
/// centres and metric cost no parsing per cell.
#[derive(Clone)]
pub struct Projector {
    map: proj4rs::Proj,
    geo: proj4rs::Proj,
}

impl std::fmt::Debug for Projector {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Projector")
    }
}

impl Projector {
    /// The transforms of `p`; `Err` says why there are none (a projection or false origin
    /// input grids do not come on, or parameters proj4rs refuses).
    pub fn new(p: &Projected) -> Result<Self, String> {
        // Both systems spell the Earth by its semi-axes rather than `+datum=`/`+R=`, so they sit
        // on exactly the same figure and proj4rs has no datum shift to make between them.
        let (a, b) = p.datum.axes();
        let earth = format!("+a={a} +b={b} +units=m +no_defs");
        let map = match p.projection {
            Projection::LambertConformal2Sp {
                lat_1,
                lat_2,
                lat_0,
                lon_0,
            } => format!(
                "+proj=lcc +lat_1={lat_1} +lat_2={lat_2} +lat_0={lat_0} +lon_0={lon_0} +x_0=0 +y_0=0 {earth}"
            ),
            Projection::PolarStereographic { lat_ts, lon_0 } => format!(
                "+proj=stere +lat_0={} +lat_ts={lat_ts} +lon_0={lon_0} +x_0=0 +y_0=0 {earth}",
                if lat_ts < 0.0 { -90 } else { 90 }
            ),
            other => {
                return Err(format!(
                    "{other:?} is not supported for input grids (Lambert conformal 2SP and polar stereographic are)"
                ))
            }
        };
        // Readers move a false origin into the geotransform; one left here would be applied twice.
        if p.false_easting_m != 0.0 || p.false_northing_m != 0.0 {
            return Err(format!(
                "false easting/northing ({}, {}) m are not supported for input grids",
                p.false_easting_m, p.false_northing_m
            ));
        }
        let parse =
            |s: String| proj4rs::Proj::from_proj_string(&s).map_err(|e| format!("{s}: {e}"));
        Ok(Self {
            map: parse(map)?,
            geo: parse(format!("+proj=longlat +a={a} +b={b} +no_defs"))?,
        })
    }

    /// Projected x/y (m) of a lon/lat point (degrees); NaN where the projection has no value.
    pub fn forward(&self, lon: f64, lat: f64) -> (f64, f64) {
        let mut pt = (lon.to_radians(), lat.to_radians(), 0.0);
        match proj4rs::transform::transform(&self.geo, &self.map, &mut pt) {
            Ok(()) => (pt.0, pt.1),
            Err(_) => (f64::NAN, f64::NAN),
        }
    }

    /// Lon/lat (degrees) of projected x/y (m); NaN where the inverse has no value.
    pub fn inverse(&self, x: f64, y: f64) -> (f64, f64) {
        let mut pt = (x, y, 0.0);
        match proj4rs::transform::transform(&self.map, &self.geo, &mut pt) {
            Ok(()) => (pt.0.to_degrees(), pt.1.to_degrees()),
            Err(_) => (f64::NAN, f64::NAN),
        }
    }
}

impl Projected {
    /// Projected x/y (m) of a lon/lat point (degrees), e.g. a GRIB2 grid's first point.
    ///
    /// ```
    /// use trackswing::geotiff::*;
    /// let p = Projected {
    ///     datum: Datum::Sphere { radius_m: 6_371_229.0 },
    ///     projection: Projection::LambertConformal2Sp { lat_1: 25.0, lat_2: 25.0, lat_0: 25.0, lon_0: -95.0 },
    ///     false_easting_m: 0.0,
    ///     false_northing_m: 0.0,
    /// };
    /// // The origin (lat_0, lon_0) projects to (0, 0) (Snyder 1987, USGS PP 1395, eqs. 15-1, 15-2).
    /// let (x, y) = p.project(-95.0, 25.0).unwrap();
    /// assert!(x.abs() < 1e-6 && y.abs() < 1e-6);
    /// ```
    pub fn project(&self, lon: f64, lat: f64) -> Result<(f64, f64), String> {
        let (x, y) = Projector::new(self)?.forward(lon, lat);
        if x.is_finite() && y.is_finite() {
            Ok((x, y))
        } else {
            Err(format!(
                "{lon}°E {lat}°N has no place on {}",
                self.describe()
            ))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::Datum;

    fn on_sphere(projection: Projection, false_easting_m: f64) -> Projected {
        Projected {
            datum: Datum::Sphere {
                radius_m: 6_371_229.0,
            },
            projection,
            false_easting_m,
            false_northing_m: 0.0,
        }
    }

    #[test]
    fn lambert_conformal_matches_snyder_numerical_example() {
        // Snyder 1987 (USGS PP 1395), Lambert conformal conic, sphere of radius 1, p. 295:
        // φ1 = 33°, φ2 = 45°, φ0 = 23°, λ0 = −96°; (35°N, 75°W) → x = 0.2966785, y = 0.2462112.
        let p = on_sphere(
            Projection::LambertConformal2Sp {
                lat_1: 33.0,
                lat_2: 45.0,
                lat_0: 23.0,
                lon_0: -96.0,
            },
            0.0,
        );
        let r = 6_371_229.0;
        let (x, y) = p.project(-75.0, 35.0).unwrap();
        assert!((x / r - 0.296_678_5).abs() < 1e-7, "{}", x / r);
        assert!((y / r - 0.246_211_2).abs() < 1e-7, "{}", y / r);
        let (lon, lat) = Projector::new(&p).unwrap().inverse(x, y);
        assert!((lon + 75.0).abs() < 1e-9 && (lat - 35.0).abs() < 1e-9);
    }

    #[test]
    fn projections_input_grids_do_not_come_on_are_refused_by_name() {
        let mercator = on_sphere(
            Projection::Mercator {
                lat_ts: 20.0,
                lon_0: 0.0,
            },
            0.0,
        );
        let e = Projector::new(&mercator).unwrap_err();
        assert!(e.contains("Mercator") && e.contains("not supported"), "{e}");
        let shifted = on_sphere(
            Projection::PolarStereographic {
                lat_ts: 60.0,
                lon_0: -105.0,
            },
            1000.0,
        );
        let e = Projector::new(&shifted).unwrap_err();
        assert!(e.contains("false easting"), "{e}");
    }
}
