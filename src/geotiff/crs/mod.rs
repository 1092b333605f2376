//! Coordinate reference systems of model grids: geographic lon/lat and the conformal projections
//! regional models use (Lambert conformal conic 1SP/2SP, polar stereographic, Mercator), on WGS 84
//! or on a sphere of a given radius (as most models define their Earth).
//!
//! Parameters follow the EPSG method names (IOGP Guidance Note 7-2) and PROJ's parameter names;
//! [`Crs::proj_string`] gives the PROJ definition written to the manifest and compared with what
//! GDAL reads back from the GeoKeys (`gdalsrsinfo -o proj4`).
//!
//! This is the crate's one CRS model: the readers build it, [`Grid`](crate::grid::Grid) holds
//! it (through its `Georef`) and takes cell centres through its transforms (`transform.rs`),
//! and the GeoTIFF writer writes it as GeoKeys.

mod transform;

use super::metadata::format_number;
pub use transform::Projector;

/// WGS 84 semi-major axis, m (NIMA TR8350.2, table 3.1).
pub const WGS84_A: f64 = 6_378_137.0;
/// WGS 84 inverse flattening (NIMA TR8350.2, table 3.1).
pub const WGS84_INV_F: f64 = 298.257_223_563;
/// WGS 84 flattening.
pub const WGS84_F: f64 = 1.0 / WGS84_INV_F;

/// The figure of the Earth a CRS is defined on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Datum {
    /// The WGS 84 ellipsoid and datum (EPSG:4326 is its geographic CRS).
    Wgs84,
    /// A sphere of radius `radius_m` metres, as model grids use (e.g. 6 371 229 m).
    Sphere {
        /// Radius, m.
        radius_m: f64,
    },
}

impl Datum {
    /// The datum of an Earth given by its semi-axes `a` and `b` (m), as GRIB2's code table 3.2
    /// and PROJ's `+a`/`+b` give it: a sphere when a = b, WGS 84 for its ellipsoid (GRS 80, 0.1 mm
    /// away in the semi-minor axis, counts as WGS 84, as GIS software takes it). Other ellipsoids
    /// have no GeoTIFF datum here, so no grid is built on them.
    ///
    /// ```
    /// use trackswing::geotiff::Datum;
    /// assert_eq!(Datum::from_axes(6_371_229.0, 6_371_229.0), Ok(Datum::Sphere { radius_m: 6_371_229.0 }));
    /// assert_eq!(Datum::from_axes(6_378_137.0, 6_356_752.314_140), Ok(Datum::Wgs84)); // GRS 80
    /// assert!(Datum::from_axes(6_378_160.0, 6_356_774.719).is_err()); // IAU 1965
    /// ```
    pub fn from_axes(a: f64, b: f64) -> Result<Datum, String> {
        if a == b {
            Ok(Datum::Sphere { radius_m: a })
        } else if a == WGS84_A && (b - Datum::Wgs84.axes().1).abs() < 1e-3 {
            Ok(Datum::Wgs84)
        } else {
            Err(format!(
                "ellipsoid a = {a} m, b = {b} m (only WGS 84 or a sphere can be written as a GeoTIFF CRS)"
            ))
        }
    }

    /// Semi-major and semi-minor axes, m.
    pub fn axes(&self) -> (f64, f64) {
        match *self {
            Datum::Wgs84 => (WGS84_A, WGS84_A * (1.0 - WGS84_F)),
            Datum::Sphere { radius_m } => (radius_m, radius_m),
        }
    }

    /// The Earth in words, e.g. `sphere R = 6371229 m`.
    fn describe(&self) -> String {
        match self.axes() {
            (a, b) if a == b => format!("sphere R = {a} m"),
            (a, b) => format!("ellipsoid a = {a} m, b = {b} m"),
        }
    }

    fn proj_terms(&self) -> String {
        match *self {
            Datum::Wgs84 => "+datum=WGS84".into(),
            Datum::Sphere { radius_m } => format!("+R={}", format_number(radius_m)),
        }
    }
}

/// A map projection and its defining parameters, angles in degrees.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Projection {
    /// Lambert conformal conic with two standard parallels (EPSG method 9802; PROJ `lcc` with
    /// `lat_1`, `lat_2`). Equal parallels give the tangent cone models use (GRIB2 template 3.30
    /// with Latin1 = Latin2).
    LambertConformal2Sp {
        /// First standard parallel.
        lat_1: f64,
        /// Second standard parallel.
        lat_2: f64,
        /// Latitude of the false origin.
        lat_0: f64,
        /// Longitude of the false origin (central meridian).
        lon_0: f64,
    },
    /// Lambert conformal conic with one standard parallel and a scale factor there (EPSG method
    /// 9801; PROJ `lcc` with `lat_1 = lat_0` and `k_0`).
    LambertConformal1Sp {
        /// Latitude of the natural origin (the standard parallel).
        lat_0: f64,
        /// Longitude of the natural origin.
        lon_0: f64,
        /// Scale factor at the natural origin.
        scale: f64,
    },
    /// Polar stereographic, variant B: true scale at `lat_ts` (EPSG method 9829; PROJ `stere`
    /// with `lat_0 = ±90` and `lat_ts`). The pole is the north pole when `lat_ts > 0`. GRIB2
    /// template 3.20 defines its grids this way (LaD is `lat_ts`, LoV is `lon_0`).
    PolarStereographic {
        /// Latitude of true scale (standard parallel); its sign chooses the pole.
        lat_ts: f64,
        /// Longitude straight down from the pole (LoV).
        lon_0: f64,
    },
    /// Mercator, variant B: true scale at latitude ±`lat_ts` (EPSG method 9805; PROJ `merc`
    /// with `lat_ts`). `lat_ts = 0` is variant A with scale factor 1. GRIB2 template 3.10.
    Mercator {
        /// Latitude of true scale.
        lat_ts: f64,
        /// Central meridian.
        lon_0: f64,
    },
}

/// A projected CRS: a datum, a projection and the false origin in metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Projected {
    /// Figure of the Earth.
    pub datum: Datum,
    /// Method and parameters.
    pub projection: Projection,
    /// False easting, m.
    pub false_easting_m: f64,
    /// False northing, m.
    pub false_northing_m: f64,
}

impl Projected {
    /// A short human-readable name with the parameters, e.g. for `trackswing inspect`.
    ///
    /// ```
    /// use trackswing::geotiff::*;
    /// let p = Projected {
    ///     datum: Datum::Sphere { radius_m: 6371229.0 },
    ///     projection: Projection::PolarStereographic { lat_ts: 60.0, lon_0: -105.0 },
    ///     false_easting_m: 0.0,
    ///     false_northing_m: 0.0,
    /// };
    /// assert_eq!(p.describe(), "north polar stereographic (true scale at 60°; central meridian -105°; sphere R = 6371229 m)");
    /// ```
    pub fn describe(&self) -> String {
        let earth = self.datum.describe();
        let origin = if self.false_easting_m != 0.0 || self.false_northing_m != 0.0 {
            format!(
                "; false origin {} m, {} m",
                self.false_easting_m, self.false_northing_m
            )
        } else {
            String::new()
        };
        match self.projection {
            Projection::LambertConformal2Sp {
                lat_1,
                lat_2,
                lat_0,
                lon_0,
            } => format!(
                "Lambert conformal conic (standard parallels {lat_1}°, {lat_2}°; origin {lat_0}°N; central meridian {lon_0}°; {earth}{origin})"
            ),
            Projection::LambertConformal1Sp {
                lat_0,
                lon_0,
                scale,
            } => format!(
                "Lambert conformal conic (standard parallel {lat_0}°, scale {scale}; central meridian {lon_0}°; {earth}{origin})"
            ),
            Projection::PolarStereographic { lat_ts, lon_0 } => format!(
                "{} polar stereographic (true scale at {}°; central meridian {lon_0}°; {earth}{origin})",
                if lat_ts < 0.0 { "south" } else { "north" },
                lat_ts.abs()
            ),
            Projection::Mercator { lat_ts, lon_0 } => format!(
                "Mercator (true scale at ±{}°; central meridian {lon_0}°; {earth}{origin})",
                lat_ts.abs()
            ),
        }
    }
}

/// Coordinate reference system of a model grid and of the layers written on it.
///
/// Geographic CRSs have x = longitude, y = latitude in degrees; projected CRSs have x = easting,
/// y = northing in metres.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Crs {
    /// EPSG:4326, WGS 84 geographic; x = longitude, y = latitude, both in degrees.
    Wgs84Geographic,
    /// Longitude/latitude on a sphere of the given radius (a global model's lat/lon grid).
    GeographicSphere {
        /// Radius, m.
        radius_m: f64,
    },
    /// A projected CRS (regional models' Lambert, polar stereographic or Mercator grids).
    Projected(Projected),
}

impl Crs {
    /// The datum the CRS is defined on.
    pub fn datum(&self) -> Datum {
        match *self {
            Crs::Wgs84Geographic => Datum::Wgs84,
            Crs::GeographicSphere { radius_m } => Datum::Sphere { radius_m },
            Crs::Projected(p) => p.datum,
        }
    }

    /// True for lon/lat CRSs (x, y in degrees).
    pub fn is_geographic(&self) -> bool {
        !matches!(self, Crs::Projected(_))
    }

    /// The EPSG code, where the CRS is a registered one (only EPSG:4326 here; model grids are
    /// user-defined).
    pub fn epsg(&self) -> Option<u32> {
        match self {
            Crs::Wgs84Geographic => Some(4326),
            _ => None,
        }
    }

    /// The PROJ definition, e.g. `+proj=lcc +lat_0=25 +lon_0=-95 +lat_1=25 +lat_2=25 +x_0=0
    /// +y_0=0 +R=6371229 +units=m +no_defs`: what `gdalsrsinfo -o proj4` prints for the file.
    ///
    /// ```
    /// use trackswing::geotiff::*;
    /// let c = Crs::Projected(Projected {
    ///     datum: Datum::Sphere { radius_m: 6371229.0 },
    ///     projection: Projection::PolarStereographic { lat_ts: 60.0, lon_0: -105.0 },
    ///     false_easting_m: 0.0,
    ///     false_northing_m: 0.0,
    /// });
    /// assert_eq!(c.proj_string(), "+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-105 +x_0=0 +y_0=0 +R=6371229 +units=m +no_defs");
    /// ```
    pub fn proj_string(&self) -> String {
        let n = format_number;
        match self {
            Crs::Wgs84Geographic => "+proj=longlat +datum=WGS84 +no_defs".into(),
            Crs::GeographicSphere { radius_m } => {
                format!("+proj=longlat +R={} +no_defs", n(*radius_m))
            }
            Crs::Projected(p) => {
                let head = match p.projection {
                    Projection::LambertConformal2Sp {
                        lat_1,
                        lat_2,
                        lat_0,
                        lon_0,
                    } => format!(
                        "+proj=lcc +lat_0={} +lon_0={} +lat_1={} +lat_2={}",
                        n(lat_0),
                        n(lon_0),
                        n(lat_1),
                        n(lat_2)
                    ),
                    Projection::LambertConformal1Sp {
                        lat_0,
                        lon_0,
                        scale,
                    } => format!(
                        "+proj=lcc +lat_1={} +lat_0={} +lon_0={} +k_0={}",
                        n(lat_0),
                        n(lat_0),
                        n(lon_0),
                        n(scale)
                    ),
                    Projection::PolarStereographic { lat_ts, lon_0 } => format!(
                        "+proj=stere +lat_0={} +lat_ts={} +lon_0={}",
                        if lat_ts < 0.0 { -90 } else { 90 },
                        n(lat_ts),
                        n(lon_0)
                    ),
                    Projection::Mercator { lat_ts, lon_0 } => {
                        format!("+proj=merc +lat_ts={} +lon_0={}", n(lat_ts), n(lon_0))
                    }
                };
                format!(
                    "{head} +x_0={} +y_0={} {} +units=m +no_defs",
                    n(p.false_easting_m),
                    n(p.false_northing_m),
                    p.datum.proj_terms()
                )
            }
        }
    }

    /// Why the parameters cannot define a projection, if they cannot.
    pub fn check(&self) -> Result<(), String> {
        let finite = |name: &str, v: f64| {
            if v.is_finite() {
                Ok(())
            } else {
                Err(format!("{name} = {v} is not finite"))
            }
        };
        let lat = |name: &str, v: f64, limit: f64| {
            finite(name, v)?;
            if v.abs() <= limit {
                Ok(())
            } else {
                Err(format!("{name} = {v}° is outside ±{limit}°"))
            }
        };
        if let Datum::Sphere { radius_m } = self.datum() {
            if !(radius_m.is_finite() && radius_m > 1.0e6 && radius_m < 1.0e7) {
                return Err(format!(
                    "sphere radius {radius_m} m is not an Earth radius (1000–10000 km)"
                ));
            }
        }
        let Crs::Projected(p) = self else {
            return Ok(());
        };
        finite("false easting", p.false_easting_m)?;
        finite("false northing", p.false_northing_m)?;
        match p.projection {
            Projection::LambertConformal2Sp {
                lat_1,
                lat_2,
                lat_0,
                lon_0,
            } => {
                lat("lat_1", lat_1, 89.999)?;
                lat("lat_2", lat_2, 89.999)?;
                lat("lat_0", lat_0, 89.999)?;
                finite("lon_0", lon_0)?;
                if lat_1 + lat_2 == 0.0 {
                    return Err(
                        "standard parallels symmetric about the equator make a cylinder, not a cone"
                            .into(),
                    );
                }
            }
            Projection::LambertConformal1Sp {
                lat_0,
                lon_0,
                scale,
            } => {
                lat("lat_0", lat_0, 89.999)?;
                finite("lon_0", lon_0)?;
                if lat_0 == 0.0 {
                    return Err("lat_0 = 0 makes a cylinder, not a cone".into());
                }
                if !(scale.is_finite() && scale > 0.0) {
                    return Err(format!("scale factor {scale} must be positive"));
                }
            }
            Projection::PolarStereographic { lat_ts, lon_0 } => {
                lat("lat_ts", lat_ts, 90.0)?;
                finite("lon_0", lon_0)?;
                if lat_ts == 0.0 {
                    return Err("lat_ts = 0 does not choose a pole".into());
                }
            }
            Projection::Mercator { lat_ts, lon_0 } => {
                lat("lat_ts", lat_ts, 89.999)?;
                finite("lon_0", lon_0)?;
            }
        }
        Ok(())
    }
}
