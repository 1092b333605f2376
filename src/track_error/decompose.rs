//! One position error split into cross-track and along-track kilometres.
//!
//! Frame: the forecast track's own direction of motion at the valid time (its
//! [`Track::heading_at`]). The error is the geodesic from the forecast centre to the analysed
//! centre (Karney 2013, via geo's `Geodesic`): distance `d` and initial azimuth `β`. With the
//! heading `h`, the along-track part is `d·cos(β − h)` (positive: the real low was ahead) and the
//! cross-track part `d·sin(h − β)` (positive: the real low went left of the forecast motion), the
//! same convention as the scenarios' offsets ([`crate::scenario`]): moving the forecast track by
//! the returned offsets with [`Track::shifted_centre`] lands on the analysed centre.

use crate::read::track::Track;
use chrono::{DateTime, Utc};
use geo::{Bearing, Distance, Geodesic, Point};

/// The error of one forecast position against the analysis valid at the same time.
#[derive(Clone, Debug, PartialEq)]
pub struct PositionError {
    /// The case (past forecast) it belongs to.
    pub case: String,
    /// Hours from the forecast's reference time to the valid time.
    pub lead_h: f64,
    /// Cross-track error, km, positive when the analysed low was left of the forecast motion.
    pub cross_km: f64,
    /// Along-track error, km, positive when the analysed low was ahead.
    pub along_km: f64,
    /// Geodesic distance between the two centres, km.
    pub total_km: f64,
}

/// Cross, along and total km of the analysed centre `analysed` (lon, lat) relative to the
/// forecast track at time `t`; `None` outside the forecast's time span.
///
/// ```
/// use chrono::{Duration, TimeZone, Utc};
/// use trackswing::read::track::{Track, TrackPoint};
/// use trackswing::track_error::decompose::split_error;
/// let t0 = Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap();
/// let p = |h: i64, lat: f64| TrackPoint { time: t0 + Duration::hours(h), lat, lon: -80.0 };
/// let track = Track { source: "f.csv".into(), points: vec![p(0, 40.0), p(12, 42.0)] };
/// // Moving north, an analysed low due west is left of the motion: all cross-track.
/// let (c, a, d) = split_error(&track, t0 + Duration::hours(6), (-81.0, 41.0)).unwrap();
/// assert!(c > 0.0 && a.abs() < 0.5 && (c - d).abs() < 0.01);
/// ```
pub fn split_error(
    forecast: &Track,
    t: DateTime<Utc>,
    analysed: (f64, f64),
) -> Option<(f64, f64, f64)> {
    let (lon, lat) = forecast.position_at(t)?;
    let h = forecast.heading_at(t)?.to_radians();
    let (from, to) = (Point::new(lon, lat), Point::new(analysed.0, analysed.1));
    let d_km = Geodesic.distance(from, to) / 1000.0;
    if d_km == 0.0 {
        return Some((0.0, 0.0, 0.0));
    }
    let beta = Geodesic.bearing(from, to).to_radians();
    Some(((h - beta).sin() * d_km, (beta - h).cos() * d_km, d_km))
}

/// The errors of one case at every time of the forecast track that the analysed track covers
/// and that is not before `reference` (the forecast's reference time), in time order. The
/// analysis is interpolated in time between its points ([`Track::position_at`]).
pub fn case_errors(
    case: &str,
    forecast: &Track,
    analysis: &Track,
    reference: DateTime<Utc>,
) -> Vec<PositionError> {
    forecast
        .points
        .iter()
        .filter(|p| p.time >= reference)
        .filter_map(|p| {
            let analysed = analysis.position_at(p.time)?;
            let (cross_km, along_km, total_km) = split_error(forecast, p.time, analysed)?;
            Some(PositionError {
                case: case.to_string(),
                lead_h: (p.time - reference).num_seconds() as f64 / 3600.0,
                cross_km,
                along_km,
                total_km,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::read::track::TrackPoint;
    use chrono::{Duration, TimeZone};

    /// A curving forecast track: north-east, then east, then south-east, 6-hourly.
    fn forecast() -> Track {
        let t0 = Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap();
        let pts = [
            (38.0, -90.0),
            (39.5, -87.5),
            (40.2, -84.0),
            (40.0, -80.5),
            (39.0, -77.5),
        ];
        Track {
            source: "forecast.csv".into(),
            points: pts
                .iter()
                .enumerate()
                .map(|(i, &(lat, lon))| TrackPoint {
                    time: t0 + Duration::hours(6 * i as i64),
                    lat,
                    lon,
                })
                .collect(),
        }
    }

    #[test]
    fn known_offsets_are_recovered_to_a_tenth_of_a_km() {
        // Reference: the analysed track is the forecast moved by exact offsets with the
        // geodesic destination of Track::shifted_centre (Karney 2013, geo's Geodesic); the
        // decomposition must invert it. Offsets vary by point, up to 300 km, all quadrants.
        let f = forecast();
        let offsets = [
            (120.0, -40.0),
            (-75.0, 210.0),
            (0.0, -300.0),
            (250.0, 0.0),
            (-30.0, -60.0),
        ];
        let analysis = Track {
            source: "analysis.csv".into(),
            points: f
                .points
                .iter()
                .zip(offsets)
                .map(|(p, (c, a))| {
                    let ((lon, lat), _) = f.shifted_centre(p.time, c, a).unwrap();
                    TrackPoint {
                        time: p.time,
                        lat,
                        lon,
                    }
                })
                .collect(),
        };
        let errs = case_errors("c", &f, &analysis, f.points[0].time);
        assert_eq!(errs.len(), 5);
        for (e, (c, a)) in errs.iter().zip(offsets) {
            assert!((e.cross_km - c).abs() < 0.1, "{e:?} vs {c}");
            assert!((e.along_km - a).abs() < 0.1, "{e:?} vs {a}");
            assert!((e.total_km - f64::hypot(c, a)).abs() < 0.1, "{e:?}");
        }
        assert_eq!(
            errs.iter().map(|e| e.lead_h).collect::<Vec<_>>(),
            vec![0.0, 6.0, 12.0, 18.0, 24.0]
        );
    }

    #[test]
    fn the_analysis_is_interpolated_and_its_span_limits_the_times() {
        let f = forecast();
        // An analysis only every 12 h and only over the first 18 h: the 6 h point is matched by
        // interpolation in time, the 24 h point is outside and dropped.
        let a = Track {
            source: "a.csv".into(),
            points: vec![
                TrackPoint {
                    time: f.points[0].time,
                    lat: 38.0,
                    lon: -90.0,
                },
                TrackPoint {
                    time: f.points[2].time,
                    lat: 40.2,
                    lon: -84.0,
                },
                TrackPoint {
                    time: f.points[3].time,
                    lat: 40.0,
                    lon: -80.5,
                },
            ],
        };
        let errs = case_errors("c", &f, &a, f.points[1].time);
        assert_eq!(
            errs.iter().map(|e| e.lead_h).collect::<Vec<_>>(),
            vec![0.0, 6.0, 12.0]
        );
        // At 6 h the analysis is the midpoint of (38, −90) and (40.2, −84): (39.1, −87),
        // about 0.4° south and 0.5° east of the forecast's (39.5, −87.5).
        assert!(
            errs[0].total_km > 40.0 && errs[0].total_km < 80.0,
            "{:?}",
            errs[0]
        );
        assert!(errs[1].total_km < 1e-9 && errs[2].total_km < 1e-9);
    }
}
