//! The storm track: the low centre's position over time, from CSV or GeoJSON.
//!
//! CSV: a header with `time,lat,lon` (any order, more columns allowed), times in RFC 3339
//! (`2026-01-14T06:00:00Z`). GeoJSON: a Feature (or a FeatureCollection holding one) with a
//! LineString geometry and a `times` property listing one RFC 3339 time per vertex.

use chrono::{DateTime, Duration, Utc};
use geo::{Bearing, Destination, Geodesic, Point};
use std::path::{Path, PathBuf};

/// One position of the low centre.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TrackPoint {
    /// Valid time.
    pub time: DateTime<Utc>,
    /// Latitude, degrees north.
    pub lat: f64,
    /// Longitude, degrees east.
    pub lon: f64,
}

/// A storm track, times strictly increasing.
#[derive(Clone, Debug)]
pub struct Track {
    /// Where it was read from.
    pub source: PathBuf,
    /// At least two points.
    pub points: Vec<TrackPoint>,
}

/// Why a track file cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum TrackError {
    /// The file could not be opened or read.
    #[error("{path}: cannot read the track file: {source}")]
    Io {
        /// The track file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A row or property is malformed.
    #[error("{path}: line {line}: {what}")]
    Bad {
        /// The track file.
        path: PathBuf,
        /// 1-based line (CSV) or vertex (GeoJSON) number.
        line: usize,
        /// What was wrong and what was expected.
        what: String,
    },
    /// The file as a whole is unusable.
    #[error("{path}: {what}")]
    Unusable {
        /// The track file.
        path: PathBuf,
        /// What was wrong and what was expected.
        what: String,
    },
}

/// Reads a track from CSV (`.csv`) or GeoJSON (`.geojson`, `.json`).
pub fn read_track(path: &Path) -> Result<Track, TrackError> {
    let text = std::fs::read_to_string(path).map_err(|source| TrackError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    let points = if ext == "geojson" || ext == "json" {
        parse_geojson(path, &text)?
    } else {
        parse_csv(path, &text)?
    };
    validate(path, &points)?;
    Ok(Track {
        source: path.to_path_buf(),
        points,
    })
}

fn bad(path: &Path, line: usize, what: impl Into<String>) -> TrackError {
    TrackError::Bad {
        path: path.to_path_buf(),
        line,
        what: what.into(),
    }
}

fn parse_time(path: &Path, line: usize, s: &str) -> Result<DateTime<Utc>, TrackError> {
    DateTime::parse_from_rfc3339(s.trim())
        .map(|t| t.with_timezone(&Utc))
        .map_err(|_| {
            bad(
                path,
                line,
                format!("time '{s}' is not an RFC 3339 time such as 2026-01-14T06:00:00Z"),
            )
        })
}

fn parse_csv(path: &Path, text: &str) -> Result<Vec<TrackPoint>, TrackError> {
    let mut rdr = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let headers = rdr
        .headers()
        .map_err(|e| bad(path, 1, format!("cannot read the header: {e}")))?
        .clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h.eq_ignore_ascii_case(name))
            .ok_or_else(|| {
                bad(
                    path,
                    1,
                    format!("the header has no '{name}' column (expected time,lat,lon)"),
                )
            })
    };
    let (ct, cla, clo) = (col("time")?, col("lat")?, col("lon")?);
    let mut points = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| {
            let line = e.position().map(|p| p.line() as usize).unwrap_or(0);
            bad(path, line, e.to_string())
        })?;
        let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
        let num = |i: usize, name: &str| {
            rec.get(i)
                .and_then(|s| s.parse::<f64>().ok())
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    bad(
                        path,
                        line,
                        format!(
                            "'{name}' must be a number of degrees, got '{}'",
                            rec.get(i).unwrap_or("")
                        ),
                    )
                })
        };
        points.push(TrackPoint {
            time: parse_time(path, line, rec.get(ct).unwrap_or(""))?,
            lat: num(cla, "lat")?,
            lon: num(clo, "lon")?,
        });
    }
    Ok(points)
}

fn parse_geojson(path: &Path, text: &str) -> Result<Vec<TrackPoint>, TrackError> {
    let unusable = |what: String| TrackError::Unusable {
        path: path.to_path_buf(),
        what,
    };
    let gj: geojson::GeoJson = text
        .parse()
        .map_err(|e| unusable(format!("not valid GeoJSON: {e}")))?;
    let feature = match gj {
        geojson::GeoJson::Feature(f) => f,
        geojson::GeoJson::FeatureCollection(fc) if fc.features.len() == 1 => {
            fc.features.into_iter().next().expect("length checked")
        }
        _ => {
            return Err(unusable(
                "expected one Feature with a LineString geometry and a 'times' property".into(),
            ))
        }
    };
    let coords = match feature.geometry.as_ref().map(|g| &g.value) {
        Some(geojson::GeometryValue::LineString { coordinates }) => coordinates.clone(),
        _ => {
            return Err(unusable(
                "the feature's geometry must be a LineString".into(),
            ))
        }
    };
    let times = feature
        .property("times")
        .and_then(|v| v.as_array())
        .ok_or_else(|| {
            unusable("the feature needs a 'times' property: one time per vertex".into())
        })?;
    if times.len() != coords.len() {
        return Err(unusable(format!(
            "'times' lists {} times but the LineString has {} vertices",
            times.len(),
            coords.len()
        )));
    }
    coords
        .iter()
        .zip(times)
        .enumerate()
        .map(|(i, (c, t))| {
            let t = t
                .as_str()
                .ok_or_else(|| bad(path, i + 1, "each entry of 'times' must be a string"))?;
            let c = c.as_slice();
            if c.len() < 2 {
                return Err(bad(path, i + 1, "a vertex needs longitude and latitude"));
            }
            Ok(TrackPoint {
                time: parse_time(path, i + 1, t)?,
                lon: c[0],
                lat: c[1],
            })
        })
        .collect()
}

fn validate(path: &Path, points: &[TrackPoint]) -> Result<(), TrackError> {
    if points.len() < 2 {
        return Err(TrackError::Unusable {
            path: path.to_path_buf(),
            what: format!(
                "the track has {} point(s); at least two are needed to know where the storm moves",
                points.len()
            ),
        });
    }
    for (i, p) in points.iter().enumerate() {
        if !(-90.0..=90.0).contains(&p.lat) || !(-180.0..=360.0).contains(&p.lon) {
            return Err(bad(
                path,
                i + 2,
                format!(
                    "position {},{} is not a latitude,longitude in degrees",
                    p.lat, p.lon
                ),
            ));
        }
    }
    for (i, w) in points.windows(2).enumerate() {
        if w[1].time <= w[0].time {
            return Err(bad(
                path,
                i + 3,
                format!(
                    "time {} does not come after {}: track times must increase",
                    w[1].time.to_rfc3339(),
                    w[0].time.to_rfc3339()
                ),
            ));
        }
    }
    Ok(())
}

impl Track {
    /// First and last time.
    pub fn span(&self) -> (DateTime<Utc>, DateTime<Utc>) {
        (self.points[0].time, self.points[self.points.len() - 1].time)
    }

    /// Position (lon, lat) at time `t`, interpolated linearly in time between track points;
    /// `None` outside the track's time span.
    pub fn position_at(&self, t: DateTime<Utc>) -> Option<(f64, f64)> {
        let (t0, t1) = self.span();
        if t < t0 || t > t1 {
            return None;
        }
        let k = self.points.partition_point(|p| p.time <= t).max(1);
        let k = k.min(self.points.len() - 1);
        let (a, b) = (&self.points[k - 1], &self.points[k]);
        let f =
            (t - a.time).num_milliseconds() as f64 / (b.time - a.time).num_milliseconds() as f64;
        let mut dlon = b.lon - a.lon;
        if dlon > 180.0 {
            dlon -= 360.0;
        } else if dlon < -180.0 {
            dlon += 360.0;
        }
        Some((a.lon + f * dlon, a.lat + f * (b.lat - a.lat)))
    }

    /// Direction of motion at time `t`, degrees clockwise from north, from the geodesic between
    /// the positions one hour either side (clamped to the track's span).
    pub fn heading_at(&self, t: DateTime<Utc>) -> Option<f64> {
        let (t0, t1) = self.span();
        let before = (t - Duration::hours(1)).max(t0);
        let after = (t + Duration::hours(1)).min(t1);
        let (a, b) = (self.position_at(before)?, self.position_at(after)?);
        Some(Geodesic.bearing(Point::new(a.0, a.1), Point::new(b.0, b.1)))
    }

    /// Where the low centre sits at time `t` when the track is moved by `cross_km` (left of the
    /// motion positive) and `along_km` (ahead positive): a geodesic destination from the
    /// modelled centre (Karney 2013, via geo's `Geodesic`). Returns (lon, lat) and the
    /// displacement as (east km, north km) in the centre's local frame.
    pub fn shifted_centre(
        &self,
        t: DateTime<Utc>,
        cross_km: f64,
        along_km: f64,
    ) -> Option<((f64, f64), (f64, f64))> {
        let (lon, lat) = self.position_at(t)?;
        let h = self.heading_at(t)?.to_radians();
        // Unit vectors in (east, north): ahead = (sin h, cos h); left = ahead turned 90° anticlockwise.
        let east = along_km * h.sin() - cross_km * h.cos();
        let north = along_km * h.cos() + cross_km * h.sin();
        let dist_m = (east * east + north * north).sqrt() * 1000.0;
        if dist_m == 0.0 {
            return Some(((lon, lat), (0.0, 0.0)));
        }
        let bearing = east.atan2(north).to_degrees();
        let p = Geodesic.destination(Point::new(lon, lat), bearing, dist_m);
        Some(((p.x(), p.y()), (east, north)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn write(name: &str, text: &str) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join(name);
        std::fs::File::create(&p)
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
        (dir, p)
    }

    #[test]
    fn csv_and_geojson_give_the_same_track() {
        let (_d1, p1) = write(
            "t.csv",
            "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n2026-01-14T06:00:00Z,41,-78\n",
        );
        let (_d2, p2) = write(
            "t.geojson",
            r#"{"type":"Feature","geometry":{"type":"LineString","coordinates":[[-80,40],[-78,41]]},
               "properties":{"times":["2026-01-14T00:00:00Z","2026-01-14T06:00:00Z"]}}"#,
        );
        let a = read_track(&p1).unwrap();
        let b = read_track(&p2).unwrap();
        assert_eq!(a.points, b.points);
        let mid = a.points[0].time + Duration::hours(3);
        let (lon, lat) = a.position_at(mid).unwrap();
        assert!((lon + 79.0).abs() < 1e-12 && (lat - 40.5).abs() < 1e-12);
        assert!(a.position_at(mid + Duration::hours(4)).is_none());
    }

    #[test]
    fn bad_tracks_name_the_line() {
        let (_d, p) = write("t.csv", "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n");
        let e = read_track(&p).unwrap_err().to_string();
        assert!(e.contains("at least two"), "{e}");
        let (_d, p) = write(
            "t.csv",
            "time,lat,lon\n2026-01-14T06:00:00Z,40,-80\n2026-01-14T00:00:00Z,41,-79\n",
        );
        let e = read_track(&p).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("must increase"), "{e}");
        let (_d, p) = write(
            "t.csv",
            "time,lat,lon\nyesterday,40,-80\n2026-01-14T00:00:00Z,41,-79\n",
        );
        let e = read_track(&p).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("RFC 3339"), "{e}");
        let (_d, p) = write("t.csv", "when,lat,lon\n");
        assert!(read_track(&p).unwrap_err().to_string().contains("'time'"));
    }

    #[test]
    fn shifted_centre_moves_left_of_a_northward_track() {
        let (_d, p) = write(
            "t.csv",
            "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n2026-01-14T12:00:00Z,42,-80\n",
        );
        let t = read_track(&p).unwrap();
        let mid = t.points[0].time + Duration::hours(6);
        let ((lon, lat), (e, n)) = t.shifted_centre(mid, 100.0, 0.0).unwrap();
        // Moving north, "left" is west: 100 km west of (-80, 41).
        assert!((e + 100.0).abs() < 1e-6 && n.abs() < 1e-6, "{e} {n}");
        assert!(lon < -80.0 && (lat - 41.0).abs() < 0.01);
        // Reference: geodesic distance (Karney 2013, geo's Geodesic) back to the centre is 100 km.
        use geo::Distance;
        let d = Geodesic.distance(Point::new(-80.0, 41.0), Point::new(lon, lat));
        assert!((d - 100_000.0).abs() < 1e-3, "{d}");
        let ((_, lat2), _) = t.shifted_centre(mid, 0.0, 50.0).unwrap();
        assert!(lat2 > 41.0);
    }
}
