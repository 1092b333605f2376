//! GeoKey directory (tag 34735) with its double (34736) and ASCII (34737) parameter tags,
//! OGC GeoTIFF 1.1 (OGC 19-008r4), Section 7 (requirements classes GeoKeyDirectoryTag, GeoKeys).
//!
//! Key names are the 1.1 names; the 1.0 names are given where they differ, because GDAL's
//! `listgeo` and older files use them.

use std::fmt;
use std::path::Path;

use super::crs::{Datum, Projected, Projection};
use super::metadata::format_number;
use super::{Crs, GeoTiffError};

/// TIFF tag holding the GeoKey directory.
pub(crate) const GEO_KEY_DIRECTORY: u16 = 34735;
/// TIFF tag holding double-valued GeoKeys.
pub(crate) const GEO_DOUBLE_PARAMS: u16 = 34736;
/// TIFF tag holding ASCII GeoKeys, each value terminated by `|`.
pub(crate) const GEO_ASCII_PARAMS: u16 = 34737;

/// GTModelTypeGeoKey: 1 projected, 2 geographic, 3 geocentric.
const GT_MODEL_TYPE: u16 = 1024;
/// GTRasterTypeGeoKey: 1 PixelIsArea, 2 PixelIsPoint.
const GT_RASTER_TYPE: u16 = 1025;
/// GTCitationGeoKey: free text describing the CRS.
const GT_CITATION: u16 = 1026;
/// GeodeticCRSGeoKey (1.0: GeographicTypeGeoKey): EPSG code of the geographic CRS.
const GEODETIC_CRS: u16 = 2048;
/// GeodeticCitationGeoKey (1.0: GeogCitationGeoKey).
const GEODETIC_CITATION: u16 = 2049;
/// GeodeticDatumGeoKey (1.0: GeogGeodeticDatumGeoKey).
const GEODETIC_DATUM: u16 = 2050;
/// PrimeMeridianGeoKey (1.0: GeogPrimeMeridianGeoKey): EPSG code, 8901 = Greenwich.
const PRIME_MERIDIAN: u16 = 2051;
/// GeogAngularUnitsGeoKey: EPSG unit code, 9102 = degree.
const GEOG_ANGULAR_UNITS: u16 = 2054;
/// EllipsoidGeoKey (1.0: GeogEllipsoidGeoKey): EPSG code, 7030 = WGS 84.
const ELLIPSOID: u16 = 2056;
/// EllipsoidSemiMajorAxisGeoKey (1.0: GeogSemiMajorAxisGeoKey), m.
const SEMI_MAJOR: u16 = 2057;
/// EllipsoidSemiMinorAxisGeoKey (1.0: GeogSemiMinorAxisGeoKey), m.
const SEMI_MINOR: u16 = 2058;
/// EllipsoidInvFlatteningGeoKey (1.0: GeogInvFlatteningGeoKey).
const INV_FLATTENING: u16 = 2059;
/// ProjectedCRSGeoKey (1.0: ProjectedCSTypeGeoKey).
const PROJECTED_CRS: u16 = 3072;
/// ProjectedCitationGeoKey (1.0: PCSCitationGeoKey).
const PROJECTED_CITATION: u16 = 3073;
/// ProjectionGeoKey: EPSG code of the map projection (conversion).
const PROJECTION: u16 = 3074;
/// ProjMethodGeoKey (1.0: ProjCoordTransGeoKey): GeoTIFF code of the projection method.
const PROJ_METHOD: u16 = 3075;
/// ProjLinearUnitsGeoKey: EPSG unit code, 9001 = metre.
const PROJ_LINEAR_UNITS: u16 = 3076;
const PROJ_STD_PARALLEL_1: u16 = 3078;
const PROJ_STD_PARALLEL_2: u16 = 3079;
const PROJ_NAT_ORIGIN_LONG: u16 = 3080;
const PROJ_NAT_ORIGIN_LAT: u16 = 3081;
const PROJ_FALSE_EASTING: u16 = 3082;
const PROJ_FALSE_NORTHING: u16 = 3083;
const PROJ_FALSE_ORIGIN_LONG: u16 = 3084;
const PROJ_FALSE_ORIGIN_LAT: u16 = 3085;
const PROJ_FALSE_ORIGIN_EASTING: u16 = 3086;
const PROJ_FALSE_ORIGIN_NORTHING: u16 = 3087;
const PROJ_SCALE_AT_NAT_ORIGIN: u16 = 3092;
const PROJ_STRAIGHT_VERT_POLE_LONG: u16 = 3095;

const MODEL_TYPE_PROJECTED: u16 = 1;
const MODEL_TYPE_GEOGRAPHIC: u16 = 2;
const RASTER_PIXEL_IS_AREA: u16 = 1;
const RASTER_PIXEL_IS_POINT: u16 = 2;
/// OGC 19-008r4 §7.1.4: 32767 marks a user-defined value given by further keys.
const USER_DEFINED: u16 = 32767;
const EPSG_WGS84_GEOGRAPHIC: u16 = 4326;
const EPSG_WGS84_ELLIPSOID: u16 = 7030;
const EPSG_GREENWICH: u16 = 8901;
const EPSG_UNIT_DEGREE: u16 = 9102;
const EPSG_UNIT_METRE: u16 = 9001;
/// Projection method codes of GeoTIFF 1.0 §6.3.3.3 (kept by 1.1, Annex).
const CT_MERCATOR: u16 = 7;
const CT_LAMBERT_CONF_CONIC_2SP: u16 = 8;
const CT_LAMBERT_CONF_CONIC_1SP: u16 = 9;
const CT_POLAR_STEREOGRAPHIC: u16 = 15;

/// Name of a key for error messages.
fn key_name(key: u16) -> &'static str {
    match key {
        GT_MODEL_TYPE => "GTModelTypeGeoKey",
        GT_RASTER_TYPE => "GTRasterTypeGeoKey",
        GT_CITATION => "GTCitationGeoKey",
        GEODETIC_CRS => "GeodeticCRSGeoKey",
        GEODETIC_CITATION => "GeodeticCitationGeoKey",
        GEODETIC_DATUM => "GeodeticDatumGeoKey",
        PRIME_MERIDIAN => "PrimeMeridianGeoKey",
        GEOG_ANGULAR_UNITS => "GeogAngularUnitsGeoKey",
        ELLIPSOID => "EllipsoidGeoKey",
        SEMI_MAJOR => "EllipsoidSemiMajorAxisGeoKey",
        SEMI_MINOR => "EllipsoidSemiMinorAxisGeoKey",
        INV_FLATTENING => "EllipsoidInvFlatteningGeoKey",
        PROJECTED_CRS => "ProjectedCRSGeoKey",
        PROJECTED_CITATION => "ProjectedCitationGeoKey",
        PROJECTION => "ProjectionGeoKey",
        PROJ_METHOD => "ProjMethodGeoKey",
        PROJ_LINEAR_UNITS => "ProjLinearUnitsGeoKey",
        PROJ_STD_PARALLEL_1 => "ProjStdParallel1GeoKey",
        PROJ_STD_PARALLEL_2 => "ProjStdParallel2GeoKey",
        PROJ_NAT_ORIGIN_LONG => "ProjNatOriginLongGeoKey",
        PROJ_NAT_ORIGIN_LAT => "ProjNatOriginLatGeoKey",
        PROJ_FALSE_EASTING => "ProjFalseEastingGeoKey",
        PROJ_FALSE_NORTHING => "ProjFalseNorthingGeoKey",
        PROJ_FALSE_ORIGIN_LONG => "ProjFalseOriginLongGeoKey",
        PROJ_FALSE_ORIGIN_LAT => "ProjFalseOriginLatGeoKey",
        PROJ_FALSE_ORIGIN_EASTING => "ProjFalseOriginEastingGeoKey",
        PROJ_FALSE_ORIGIN_NORTHING => "ProjFalseOriginNorthingGeoKey",
        PROJ_SCALE_AT_NAT_ORIGIN => "ProjScaleAtNatOriginGeoKey",
        PROJ_STRAIGHT_VERT_POLE_LONG => "ProjStraightVertPoleLongGeoKey",
        _ => "GeoKey",
    }
}

/// Value of one GeoKey, by where the directory says it is stored.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum GeoKeyValue {
    Short(u16),
    Double(Vec<f64>),
    Ascii(String),
}

impl fmt::Display for GeoKeyValue {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GeoKeyValue::Short(v) => write!(f, "{v}"),
            GeoKeyValue::Double(v) => write!(f, "{v:?}"),
            GeoKeyValue::Ascii(s) => write!(f, "{s:?}"),
        }
    }
}

/// GeoKeys as stored: `(key id, value)` in ascending key order.
#[derive(Debug, Clone, PartialEq, Default)]
pub(crate) struct GeoKeys(pub Vec<(u16, GeoKeyValue)>);

/// The three GeoTIFF tags ready to write; empty vectors/strings mean "omit the tag".
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct EncodedGeoKeys {
    pub directory: Vec<u16>,
    pub doubles: Vec<f64>,
    pub ascii: String,
}

impl GeoKeys {
    /// The keys describing `crs` for a pixel-is-area raster: EPSG:4326 by code; every other CRS
    /// user-defined (code 32767) with its datum and projection parameters as keys (OGC 19-008r4
    /// §7.1.4, requirements classes "User-defined geodetic CRS" and "User-defined projected CRS").
    pub fn for_crs(crs: Crs) -> GeoKeys {
        use GeoKeyValue::{Ascii, Double, Short};
        let mut k = vec![
            (
                GT_MODEL_TYPE,
                Short(if crs.is_geographic() {
                    MODEL_TYPE_GEOGRAPHIC
                } else {
                    MODEL_TYPE_PROJECTED
                }),
            ),
            (GT_RASTER_TYPE, Short(RASTER_PIXEL_IS_AREA)),
        ];
        match crs.datum() {
            Datum::Wgs84 => k.extend([
                (GEODETIC_CRS, Short(EPSG_WGS84_GEOGRAPHIC)),
                (GEODETIC_CITATION, Ascii("WGS 84".into())),
                (GEOG_ANGULAR_UNITS, Short(EPSG_UNIT_DEGREE)),
            ]),
            Datum::Sphere { radius_m } => k.extend([
                (GEODETIC_CRS, Short(USER_DEFINED)),
                (
                    GEODETIC_CITATION,
                    Ascii(format!("sphere of radius {} m", format_number(radius_m))),
                ),
                (GEODETIC_DATUM, Short(USER_DEFINED)),
                (PRIME_MERIDIAN, Short(EPSG_GREENWICH)),
                (GEOG_ANGULAR_UNITS, Short(EPSG_UNIT_DEGREE)),
                (ELLIPSOID, Short(USER_DEFINED)),
                (SEMI_MAJOR, Double(vec![radius_m])),
                (SEMI_MINOR, Double(vec![radius_m])),
            ]),
        }
        if let Crs::Projected(p) = crs {
            let d = |key: u16, v: f64| (key, Double(vec![v]));
            let (method, name, params) = match p.projection {
                Projection::LambertConformal2Sp {
                    lat_1,
                    lat_2,
                    lat_0,
                    lon_0,
                } => (
                    CT_LAMBERT_CONF_CONIC_2SP,
                    "Lambert conformal conic (2SP)",
                    vec![
                        d(PROJ_STD_PARALLEL_1, lat_1),
                        d(PROJ_STD_PARALLEL_2, lat_2),
                        d(PROJ_FALSE_ORIGIN_LONG, lon_0),
                        d(PROJ_FALSE_ORIGIN_LAT, lat_0),
                        d(PROJ_FALSE_ORIGIN_EASTING, p.false_easting_m),
                        d(PROJ_FALSE_ORIGIN_NORTHING, p.false_northing_m),
                    ],
                ),
                Projection::LambertConformal1Sp {
                    lat_0,
                    lon_0,
                    scale,
                } => (
                    CT_LAMBERT_CONF_CONIC_1SP,
                    "Lambert conformal conic (1SP)",
                    vec![
                        d(PROJ_NAT_ORIGIN_LONG, lon_0),
                        d(PROJ_NAT_ORIGIN_LAT, lat_0),
                        d(PROJ_FALSE_EASTING, p.false_easting_m),
                        d(PROJ_FALSE_NORTHING, p.false_northing_m),
                        d(PROJ_SCALE_AT_NAT_ORIGIN, scale),
                    ],
                ),
                // Variant B as GeoTIFF readers (libgeotiff, GDAL) take it: the latitude of true
                // scale in ProjNatOriginLatGeoKey with a scale factor of 1 there.
                Projection::PolarStereographic { lat_ts, lon_0 } => (
                    CT_POLAR_STEREOGRAPHIC,
                    "polar stereographic (variant B)",
                    vec![
                        d(PROJ_NAT_ORIGIN_LAT, lat_ts),
                        d(PROJ_FALSE_EASTING, p.false_easting_m),
                        d(PROJ_FALSE_NORTHING, p.false_northing_m),
                        d(PROJ_SCALE_AT_NAT_ORIGIN, 1.0),
                        d(PROJ_STRAIGHT_VERT_POLE_LONG, lon_0),
                    ],
                ),
                Projection::Mercator { lat_ts, lon_0 } => (
                    CT_MERCATOR,
                    "Mercator (variant B)",
                    vec![
                        d(PROJ_STD_PARALLEL_1, lat_ts),
                        d(PROJ_NAT_ORIGIN_LONG, lon_0),
                        d(PROJ_NAT_ORIGIN_LAT, 0.0),
                        d(PROJ_FALSE_EASTING, p.false_easting_m),
                        d(PROJ_FALSE_NORTHING, p.false_northing_m),
                    ],
                ),
            };
            let citation = match p.datum {
                Datum::Wgs84 => format!("{name}, WGS 84"),
                Datum::Sphere { radius_m } => {
                    format!("{name}, sphere of radius {} m", format_number(radius_m))
                }
            };
            k.extend([
                (GT_CITATION, Ascii(citation.clone())),
                (PROJECTED_CRS, Short(USER_DEFINED)),
                (PROJECTED_CITATION, Ascii(citation)),
                (PROJECTION, Short(USER_DEFINED)),
                (PROJ_METHOD, Short(method)),
                (PROJ_LINEAR_UNITS, Short(EPSG_UNIT_METRE)),
            ]);
            k.extend(params);
        }
        GeoKeys(k)
    }

    fn get(&self, key: u16) -> Option<&GeoKeyValue> {
        self.0.iter().find(|(k, _)| *k == key).map(|(_, v)| v)
    }

    /// Packs the keys into the directory layout of OGC 19-008r4 Section 7.1.3: a header
    /// (KeyDirectoryVersion 1, KeyRevision 1, MinorRevision 1 = GeoTIFF 1.1, key count) then
    /// `(KeyID, TIFFTagLocation, Count, ValueOffset)` per key, ascending by KeyID.
    pub fn encode(&self) -> EncodedGeoKeys {
        let mut keys = self.0.clone();
        keys.sort_by_key(|(k, _)| *k);
        let mut directory = vec![1, 1, 1, keys.len() as u16];
        let mut doubles = Vec::new();
        let mut ascii = String::new();
        for (key, value) in &keys {
            let entry = match value {
                GeoKeyValue::Short(v) => [*key, 0, 1, *v],
                GeoKeyValue::Double(v) => {
                    let e = [
                        *key,
                        GEO_DOUBLE_PARAMS,
                        v.len() as u16,
                        doubles.len() as u16,
                    ];
                    doubles.extend_from_slice(v);
                    e
                }
                GeoKeyValue::Ascii(s) => {
                    let e = [
                        *key,
                        GEO_ASCII_PARAMS,
                        s.len() as u16 + 1,
                        ascii.len() as u16,
                    ];
                    ascii.push_str(s);
                    ascii.push('|');
                    e
                }
            };
            directory.extend_from_slice(&entry);
        }
        EncodedGeoKeys {
            directory,
            doubles,
            ascii,
        }
    }

    /// Unpacks a directory read from `path`; out-of-range references are errors naming the key.
    pub fn decode(
        path: &Path,
        directory: &[u16],
        doubles: &[f64],
        ascii: &str,
    ) -> Result<GeoKeys, GeoTiffError> {
        let bad_tag = |what: String| GeoTiffError::BadTag {
            path: path.to_path_buf(),
            tag: GEO_KEY_DIRECTORY,
            name: "GeoKeyDirectoryTag",
            what,
        };
        if directory.len() < 4 {
            return Err(bad_tag(format!(
                "{} values, header needs 4",
                directory.len()
            )));
        }
        if directory[0] != 1 {
            return Err(bad_tag(format!(
                "KeyDirectoryVersion {} (expected 1)",
                directory[0]
            )));
        }
        let n = usize::from(directory[3]);
        let entries = directory
            .get(4..4 + 4 * n)
            .ok_or_else(|| bad_tag(format!("header announces {n} keys, tag is too short")))?;
        let mut keys = Vec::with_capacity(n);
        for e in entries.chunks_exact(4) {
            let (key, location, count, offset) = (e[0], e[1], usize::from(e[2]), usize::from(e[3]));
            let bad_key = |what: String| GeoTiffError::GeoKey {
                path: path.to_path_buf(),
                key,
                name: key_name(key),
                what,
            };
            let value = match location {
                0 => GeoKeyValue::Short(e[3]),
                GEO_KEY_DIRECTORY => {
                    GeoKeyValue::Short(*directory.get(offset).ok_or_else(|| {
                        bad_key(format!("short at {offset} is outside the directory"))
                    })?)
                }
                GEO_DOUBLE_PARAMS => GeoKeyValue::Double(
                    doubles
                        .get(offset..offset + count)
                        .ok_or_else(|| {
                            bad_key(format!("doubles {offset}..+{count} outside tag 34736"))
                        })?
                        .to_vec(),
                ),
                GEO_ASCII_PARAMS => {
                    let s = ascii.get(offset..offset + count).ok_or_else(|| {
                        bad_key(format!("text {offset}..+{count} outside tag 34737"))
                    })?;
                    GeoKeyValue::Ascii(s.trim_end_matches(['|', '\0']).to_string())
                }
                other => return Err(bad_key(format!("value stored in unknown tag {other}"))),
            };
            keys.push((key, value));
        }
        Ok(GeoKeys(keys))
    }

    /// The CRS these keys describe, and whether the raster is pixel-is-point.
    pub fn crs(&self, path: &Path) -> Result<(Crs, bool), GeoTiffError> {
        let err = |key: u16, what: String| GeoTiffError::GeoKey {
            path: path.to_path_buf(),
            key,
            name: key_name(key),
            what,
        };
        let is_point = match self.short(path, GT_RASTER_TYPE)? {
            None | Some(RASTER_PIXEL_IS_AREA) => false,
            Some(RASTER_PIXEL_IS_POINT) => true,
            Some(v) => return Err(err(GT_RASTER_TYPE, format!("unknown raster type {v}"))),
        };
        let projected = match self.short(path, GT_MODEL_TYPE)? {
            Some(MODEL_TYPE_GEOGRAPHIC) => false,
            Some(MODEL_TYPE_PROJECTED) => true,
            Some(v) => {
                return Err(err(
                    GT_MODEL_TYPE,
                    format!("model type {v} is not supported"),
                ))
            }
            None => return Err(err(GT_MODEL_TYPE, "missing".into())),
        };
        match self.short(path, GEOG_ANGULAR_UNITS)? {
            None | Some(EPSG_UNIT_DEGREE) => {}
            Some(v) => {
                return Err(err(
                    GEOG_ANGULAR_UNITS,
                    format!("unit {v} is not degree (9102)"),
                ));
            }
        }
        match self.short(path, PROJECTED_CRS)? {
            _ if !projected => {}
            None | Some(USER_DEFINED) => {}
            Some(code) => {
                return Err(err(
                    PROJECTED_CRS,
                    format!(
                        "projected CRS EPSG:{code} is not supported: only user-defined projections \
                         (32767) given by their parameter keys can be read without an EPSG database"
                    ),
                ))
            }
        }
        let datum = self.datum(path)?;
        if !projected {
            let crs = match datum {
                Datum::Wgs84 => Crs::Wgs84Geographic,
                Datum::Sphere { radius_m } => Crs::GeographicSphere { radius_m },
            };
            return Ok((crs, is_point));
        }
        match self.short(path, PROJ_LINEAR_UNITS)? {
            None | Some(EPSG_UNIT_METRE) => {}
            Some(v) => {
                return Err(err(
                    PROJ_LINEAR_UNITS,
                    format!("unit {v} is not metre (9001)"),
                ))
            }
        }
        let method = self
            .short(path, PROJ_METHOD)?
            .ok_or_else(|| err(PROJ_METHOD, "missing for a user-defined projection".into()))?;
        // A parameter key, or its stand-in under the other origin convention (readers accept
        // false-origin and natural-origin keys interchangeably for the conic).
        let param = |keys: &[u16], default: Option<f64>| -> Result<f64, GeoTiffError> {
            for &key in keys {
                if let Some(v) = self.double(path, key)? {
                    return Ok(v);
                }
            }
            default.ok_or_else(|| {
                err(
                    keys[0],
                    format!("missing, needed by projection method {method}"),
                )
            })
        };
        let (projection, fe, fn_) = match method {
            CT_LAMBERT_CONF_CONIC_2SP => (
                Projection::LambertConformal2Sp {
                    lat_1: param(&[PROJ_STD_PARALLEL_1], None)?,
                    lat_2: param(&[PROJ_STD_PARALLEL_2, PROJ_STD_PARALLEL_1], None)?,
                    lat_0: param(&[PROJ_FALSE_ORIGIN_LAT, PROJ_NAT_ORIGIN_LAT], None)?,
                    lon_0: param(&[PROJ_FALSE_ORIGIN_LONG, PROJ_NAT_ORIGIN_LONG], None)?,
                },
                param(&[PROJ_FALSE_ORIGIN_EASTING, PROJ_FALSE_EASTING], Some(0.0))?,
                param(
                    &[PROJ_FALSE_ORIGIN_NORTHING, PROJ_FALSE_NORTHING],
                    Some(0.0),
                )?,
            ),
            CT_LAMBERT_CONF_CONIC_1SP => (
                Projection::LambertConformal1Sp {
                    lat_0: param(&[PROJ_NAT_ORIGIN_LAT, PROJ_FALSE_ORIGIN_LAT], None)?,
                    lon_0: param(&[PROJ_NAT_ORIGIN_LONG, PROJ_FALSE_ORIGIN_LONG], None)?,
                    scale: param(&[PROJ_SCALE_AT_NAT_ORIGIN], Some(1.0))?,
                },
                param(&[PROJ_FALSE_EASTING], Some(0.0))?,
                param(&[PROJ_FALSE_NORTHING], Some(0.0))?,
            ),
            CT_POLAR_STEREOGRAPHIC => {
                let lat = param(&[PROJ_NAT_ORIGIN_LAT], None)?;
                let scale = param(&[PROJ_SCALE_AT_NAT_ORIGIN], Some(1.0))?;
                let lat_ts = match self.double(path, PROJ_STD_PARALLEL_1)? {
                    Some(ts) if lat.abs() == 90.0 => ts.abs() * lat.signum(),
                    _ => lat,
                };
                if (scale - 1.0).abs() > 1e-12 {
                    return Err(err(
                        PROJ_SCALE_AT_NAT_ORIGIN,
                        format!("polar stereographic with scale factor {scale} (variant A) is not supported; only true scale at a latitude (variant B)"),
                    ));
                }
                (
                    Projection::PolarStereographic {
                        lat_ts,
                        lon_0: param(&[PROJ_STRAIGHT_VERT_POLE_LONG, PROJ_NAT_ORIGIN_LONG], None)?,
                    },
                    param(&[PROJ_FALSE_EASTING], Some(0.0))?,
                    param(&[PROJ_FALSE_NORTHING], Some(0.0))?,
                )
            }
            CT_MERCATOR => {
                let lat_ts = match self.double(path, PROJ_STD_PARALLEL_1)? {
                    Some(ts) => ts,
                    None => {
                        let k0 = param(&[PROJ_SCALE_AT_NAT_ORIGIN], Some(1.0))?;
                        if (k0 - 1.0).abs() > 1e-12 {
                            return Err(err(
                                PROJ_SCALE_AT_NAT_ORIGIN,
                                format!("Mercator with scale factor {k0} (variant A) is not supported; give the latitude of true scale (variant B)"),
                            ));
                        }
                        0.0
                    }
                };
                (
                    Projection::Mercator {
                        lat_ts,
                        lon_0: param(&[PROJ_NAT_ORIGIN_LONG], None)?,
                    },
                    param(&[PROJ_FALSE_EASTING], Some(0.0))?,
                    param(&[PROJ_FALSE_NORTHING], Some(0.0))?,
                )
            }
            other => {
                return Err(err(
                    PROJ_METHOD,
                    format!(
                        "projection method {other} is not supported (Lambert conformal 1SP/2SP, \
                         polar stereographic and Mercator are)"
                    ),
                ))
            }
        };
        let crs = Crs::Projected(Projected {
            datum,
            projection,
            false_easting_m: fe,
            false_northing_m: fn_,
        });
        crs.check().map_err(|what| err(PROJ_METHOD, what))?;
        Ok((crs, is_point))
    }

    /// A SHORT key's value, `None` if absent.
    fn short(&self, path: &Path, key: u16) -> Result<Option<u16>, GeoTiffError> {
        match self.get(key) {
            None => Ok(None),
            Some(GeoKeyValue::Short(v)) => Ok(Some(*v)),
            Some(v) => Err(GeoTiffError::GeoKey {
                path: path.to_path_buf(),
                key,
                name: key_name(key),
                what: format!("expected a SHORT value, found {v}"),
            }),
        }
    }

    /// A single DOUBLE key's value, `None` if absent.
    fn double(&self, path: &Path, key: u16) -> Result<Option<f64>, GeoTiffError> {
        match self.get(key) {
            None => Ok(None),
            Some(GeoKeyValue::Double(v)) if v.len() == 1 && v[0].is_finite() => Ok(Some(v[0])),
            Some(v) => Err(GeoTiffError::GeoKey {
                path: path.to_path_buf(),
                key,
                name: key_name(key),
                what: format!("expected one finite DOUBLE value, found {v}"),
            }),
        }
    }

    /// The datum: EPSG:4326 by code, or a user-defined geodetic CRS on the WGS 84 ellipsoid or
    /// on a sphere (semi-minor axis equal to the semi-major, or inverse flattening 0).
    fn datum(&self, path: &Path) -> Result<Datum, GeoTiffError> {
        let err = |key: u16, what: String| GeoTiffError::GeoKey {
            path: path.to_path_buf(),
            key,
            name: key_name(key),
            what,
        };
        match self.short(path, GEODETIC_CRS)? {
            Some(EPSG_WGS84_GEOGRAPHIC) => return Ok(Datum::Wgs84),
            Some(USER_DEFINED) => {}
            Some(v) => {
                return Err(err(
                    GEODETIC_CRS,
                    format!("geographic CRS {v} is not supported (EPSG:4326 or user-defined)"),
                ))
            }
            None => return Err(err(GEODETIC_CRS, "missing".into())),
        }
        match self.short(path, PRIME_MERIDIAN)? {
            None | Some(EPSG_GREENWICH) => {}
            Some(v) => {
                return Err(err(
                    PRIME_MERIDIAN,
                    format!("prime meridian {v} is not Greenwich (8901)"),
                ))
            }
        }
        let a = self.double(path, SEMI_MAJOR)?;
        let b = self.double(path, SEMI_MINOR)?;
        let inv_f = self.double(path, INV_FLATTENING)?;
        match (self.short(path, ELLIPSOID)?, a, b, inv_f) {
            (Some(EPSG_WGS84_ELLIPSOID), ..) => Ok(Datum::Wgs84),
            (_, Some(a), _, Some(f))
                if a == crate::geotiff::crs::WGS84_A
                    && (f - crate::geotiff::crs::WGS84_INV_F).abs() < 1e-9 =>
            {
                Ok(Datum::Wgs84)
            }
            (_, Some(a), Some(b), _) if a == b => Ok(Datum::Sphere { radius_m: a }),
            (_, Some(a), None, Some(0.0)) => Ok(Datum::Sphere { radius_m: a }),
            (_, Some(a), None, None) => Ok(Datum::Sphere { radius_m: a }),
            (e, a, b, f) => Err(err(
                ELLIPSOID,
                format!(
                    "ellipsoid {e:?} (a = {a:?}, b = {b:?}, 1/f = {f:?}) is not supported: \
                     WGS 84 or a sphere"
                ),
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wgs84_directory_matches_geotiff_layout() {
        // OGC 19-008r4 Section 7.1.3 layout; key ids and codes from Annex / EPSG registry:
        // 1024 = 2 (geographic), 1025 = 1 (PixelIsArea), 2048 = 4326, 2054 = 9102 (degree).
        let enc = GeoKeys::for_crs(Crs::Wgs84Geographic).encode();
        assert_eq!(
            enc.directory,
            [
                1, 1, 1, 5, //
                1024, 0, 1, 2, //
                1025, 0, 1, 1, //
                2048, 0, 1, 4326, //
                2049, 34737, 7, 0, //
                2054, 0, 1, 9102,
            ]
        );
        assert_eq!(enc.ascii, "WGS 84|");
        assert!(enc.doubles.is_empty());
    }

    #[test]
    fn decode_inverts_encode_and_finds_crs() {
        let keys = GeoKeys(vec![
            (2057, GeoKeyValue::Double(vec![6378137.0])),
            (1024, GeoKeyValue::Short(2)),
            (2048, GeoKeyValue::Short(4326)),
            (1026, GeoKeyValue::Ascii("a|b".into())),
        ]);
        let enc = keys.encode();
        let back =
            GeoKeys::decode(Path::new("x.tif"), &enc.directory, &enc.doubles, &enc.ascii).unwrap();
        let mut sorted = keys.0.clone();
        sorted.sort_by_key(|(k, _)| *k);
        // The '|' inside a value is kept; only the terminator is stripped.
        assert_eq!(back.0, sorted);
        assert_eq!(
            back.crs(Path::new("x.tif")).unwrap(),
            (Crs::Wgs84Geographic, false)
        );
    }

    #[test]
    fn malformed_and_unsupported_keys_are_named() {
        let p = Path::new("bad.tif");
        let short_dir = GeoKeys::decode(p, &[1, 1, 0, 3, 1024, 0, 1, 2], &[], "");
        assert!(short_dir
            .unwrap_err()
            .to_string()
            .contains("announces 3 keys"));
        let out_of_range = GeoKeys::decode(p, &[1, 1, 0, 1, 2049, 34737, 10, 0], &[], "WGS|");
        let msg = out_of_range.unwrap_err().to_string();
        assert!(msg.contains("bad.tif") && msg.contains("2049"), "{msg}");
        let projected = GeoKeys(vec![
            (1024, GeoKeyValue::Short(1)),
            (3072, GeoKeyValue::Short(32633)),
        ]);
        let msg = projected.crs(p).unwrap_err().to_string();
        assert!(msg.contains("3072") && msg.contains("32633"), "{msg}");
        let nad27 = GeoKeys(vec![
            (1024, GeoKeyValue::Short(2)),
            (2048, GeoKeyValue::Short(4267)),
        ]);
        assert!(nad27.crs(p).unwrap_err().to_string().contains("4267"));
    }
}
