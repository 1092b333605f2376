//! GeoKey directory (tag 34735) with its double (34736) and ASCII (34737) parameter tags,
//! OGC GeoTIFF 1.1 (OGC 19-008r4), Section 7 (requirements classes GeoKeyDirectoryTag, GeoKeys).
//!
//! Key names are the 1.1 names; the 1.0 names are given where they differ, because GDAL's
//! `listgeo` and older files use them.

use std::fmt;
use std::path::Path;

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
/// GeodeticCRSGeoKey (1.0: GeographicTypeGeoKey): EPSG code of the geographic CRS.
const GEODETIC_CRS: u16 = 2048;
/// GeodeticCitationGeoKey (1.0: GeogCitationGeoKey).
const GEODETIC_CITATION: u16 = 2049;
/// GeogAngularUnitsGeoKey: EPSG unit code, 9102 = degree.
const GEOG_ANGULAR_UNITS: u16 = 2054;
/// ProjectedCRSGeoKey (1.0: ProjectedCSTypeGeoKey).
const PROJECTED_CRS: u16 = 3072;

const MODEL_TYPE_PROJECTED: u16 = 1;
const MODEL_TYPE_GEOGRAPHIC: u16 = 2;
const RASTER_PIXEL_IS_AREA: u16 = 1;
const RASTER_PIXEL_IS_POINT: u16 = 2;
const EPSG_WGS84_GEOGRAPHIC: u16 = 4326;
const EPSG_UNIT_DEGREE: u16 = 9102;

/// Name of a key for error messages.
fn key_name(key: u16) -> &'static str {
    match key {
        GT_MODEL_TYPE => "GTModelTypeGeoKey",
        GT_RASTER_TYPE => "GTRasterTypeGeoKey",
        GEODETIC_CRS => "GeodeticCRSGeoKey",
        GEODETIC_CITATION => "GeodeticCitationGeoKey",
        GEOG_ANGULAR_UNITS => "GeogAngularUnitsGeoKey",
        PROJECTED_CRS => "ProjectedCRSGeoKey",
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
    /// The keys describing `crs` for a pixel-is-area raster.
    pub fn for_crs(crs: Crs) -> GeoKeys {
        match crs {
            Crs::Wgs84Geographic => GeoKeys(vec![
                (GT_MODEL_TYPE, GeoKeyValue::Short(MODEL_TYPE_GEOGRAPHIC)),
                (GT_RASTER_TYPE, GeoKeyValue::Short(RASTER_PIXEL_IS_AREA)),
                (GEODETIC_CRS, GeoKeyValue::Short(EPSG_WGS84_GEOGRAPHIC)),
                (GEODETIC_CITATION, GeoKeyValue::Ascii("WGS 84".into())),
                (GEOG_ANGULAR_UNITS, GeoKeyValue::Short(EPSG_UNIT_DEGREE)),
            ]),
        }
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
        let short = |key: u16| -> Result<Option<u16>, GeoTiffError> {
            match self.get(key) {
                None => Ok(None),
                Some(GeoKeyValue::Short(v)) => Ok(Some(*v)),
                Some(v) => Err(err(key, format!("expected a SHORT value, found {v}"))),
            }
        };
        let is_point = match short(GT_RASTER_TYPE)? {
            None | Some(RASTER_PIXEL_IS_AREA) => false,
            Some(RASTER_PIXEL_IS_POINT) => true,
            Some(v) => return Err(err(GT_RASTER_TYPE, format!("unknown raster type {v}"))),
        };
        match short(GT_MODEL_TYPE)? {
            Some(MODEL_TYPE_GEOGRAPHIC) => {}
            Some(MODEL_TYPE_PROJECTED) => {
                let code = self
                    .get(PROJECTED_CRS)
                    .map_or("absent".to_string(), |v| v.to_string());
                return Err(err(
                    GT_MODEL_TYPE,
                    format!(
                        "projected CRS (ProjectedCRSGeoKey 3072 = {code}) is not supported yet"
                    ),
                ));
            }
            Some(v) => {
                return Err(err(
                    GT_MODEL_TYPE,
                    format!("model type {v} is not supported"),
                ))
            }
            None => return Err(err(GT_MODEL_TYPE, "missing".into())),
        }
        match short(GEOG_ANGULAR_UNITS)? {
            None | Some(EPSG_UNIT_DEGREE) => {}
            Some(v) => {
                return Err(err(
                    GEOG_ANGULAR_UNITS,
                    format!("unit {v} is not degree (9102)"),
                ));
            }
        }
        match short(GEODETIC_CRS)? {
            Some(EPSG_WGS84_GEOGRAPHIC) => Ok((Crs::Wgs84Geographic, is_point)),
            Some(v) => Err(err(
                GEODETIC_CRS,
                format!("geographic CRS {v} is not supported (only EPSG:4326)"),
            )),
            None => Err(err(GEODETIC_CRS, "missing".into())),
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
        assert!(msg.contains("1024") && msg.contains("32633"), "{msg}");
        let nad27 = GeoKeys(vec![
            (1024, GeoKeyValue::Short(2)),
            (2048, GeoKeyValue::Short(4267)),
        ]);
        assert!(nad27.crs(p).unwrap_err().to_string().contains("4267"));
    }
}
