//! Members aligned on one track: the members' weighted mean track, the displacement per step
//! that moves each member's low onto it, and each member's run as issued with its storm so
//! moved (the track-aligned comparison of [`crate::summarise::aligned`]).
//!
//! The mean track is taken at the valid times of the primary member's steps: at each, the
//! weighted mean (member weights) of the low centres of the members whose track covers that
//! time, as the normalised weighted sum of the centres' unit vectors on a sphere (the centroid
//! on the sphere). A member whose track does not cover the time adds nothing there; a time no
//! member covers has no mean and nobody is moved. Lows that all sit on one point have that
//! point as their mean, exactly. Latitudes are used as given (geodetic) on the sphere: the
//! error against a mean on the ellipsoid is of second order in the members' separation, far
//! below a grid cell for lows a few hundred kilometres apart.
//!
//! A member's displacement at a time is the geodesic from its centre to the mean centre (WGS 84,
//! Karney 2013 via geo's `Geodesic`), as east and north km in its centre's local frame: the
//! same convention as [`crate::read::Track::shifted_centre`], whose destination along that
//! vector is the mean centre. The storm is moved by the engine's shift ([`crate::shift`]):
//! fully within the core radius of the displaced centre, tapering to nothing at the outer
//! radius; the far field and the terrain stay.

use super::{run, EngineError, GroupRun};
use crate::case::Case;
use crate::progress::Progress;
use crate::read::Track;
use crate::scenario::Axes;
use crate::shift::{ExplicitShifts, StepShift};
use chrono::{DateTime, Utc};
use geo::{Bearing, Distance, Geodesic, Point};

/// The members aligned on their weighted mean track.
#[derive(Clone, Debug)]
pub struct Alignment {
    /// The primary member's valid times, where the mean track is taken.
    pub times: Vec<DateTime<Utc>>,
    /// The mean low centre (lon, lat) at each time; `None` where no member's track covers it.
    pub mean_track: Vec<Option<(f64, f64)>>,
    /// Per member, per time: the displacement (east km, north km) that moves its low onto the
    /// mean track; `None` where its track or the mean does not cover the time.
    pub displacements: Vec<Vec<Option<(f64, f64)>>>,
    /// Per member: its run as issued (first method combination, no offset) with its low moved
    /// onto the mean track at every step; snowfall total, mm of snow depth.
    pub snowfall: Vec<Vec<f32>>,
}

/// Why the members are not aligned.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NotAligned {
    /// One member: there is no other track to align on.
    #[error("the case has one member: there is no between-member spread to explain")]
    OneMember,
    /// A member without a track has no low to move.
    #[error("member '{0}' has no track (give it a track file or `track = \"find\"`), so its low cannot be moved onto the members' mean track")]
    NoTrack(String),
    /// No member's track covers any of the primary member's valid times.
    #[error("no member's track covers any of the primary member's valid times, so there is no mean track")]
    NoCommonTime,
}

/// The weighted mean of points (lon, lat, degrees) with positive weights, on the sphere: the
/// normalised weighted sum of their unit vectors. Exactly the common point when every point is
/// the same; `None` for no points or a sum of zero length (points spread evenly round the
/// globe).
///
/// ```
/// use trackswing::engine::align::mean_centre;
/// // Two equally weighted points on the equator: the mean is halfway.
/// let (lon, lat) = mean_centre(&[((10.0, 0.0), 1.0), ((20.0, 0.0), 1.0)]).unwrap();
/// assert!((lon - 15.0).abs() < 1e-12 && lat.abs() < 1e-12);
/// ```
pub fn mean_centre(points: &[((f64, f64), f64)]) -> Option<(f64, f64)> {
    let (first, _) = *points.first()?;
    if points.iter().all(|(p, _)| *p == first) {
        return Some(first);
    }
    let (mut x, mut y, mut z) = (0.0, 0.0, 0.0);
    for &((lon, lat), w) in points {
        let (l, p) = (lon.to_radians(), lat.to_radians());
        x += w * p.cos() * l.cos();
        y += w * p.cos() * l.sin();
        z += w * p.sin();
    }
    let h = x.hypot(y);
    if h.hypot(z) < 1e-12 {
        return None;
    }
    Some((y.atan2(x).to_degrees(), z.atan2(h).to_degrees()))
}

/// The displacement (east km, north km) from `from` to `to` (lon, lat, degrees): the geodesic's
/// length along its initial bearing, in `from`'s local frame (WGS 84, Karney 2013).
///
/// ```
/// use trackswing::engine::align::displacement_km;
/// // One degree of latitude due north at 45° N: about 111.1 km (a meridian degree there).
/// let (e, n) = displacement_km((-30.0, 44.5), (-30.0, 45.5));
/// assert!(e.abs() < 1e-6 && (n - 111.13).abs() < 0.01);
/// ```
pub fn displacement_km(from: (f64, f64), to: (f64, f64)) -> (f64, f64) {
    if from == to {
        return (0.0, 0.0);
    }
    let (a, b) = (Point::new(from.0, from.1), Point::new(to.0, to.1));
    let d = Geodesic.distance(a, b) / 1000.0;
    let bearing = Geodesic.bearing(a, b).to_radians();
    (d * bearing.sin(), d * bearing.cos())
}

/// The weighted mean track at `times` of the members' `tracks` (`None` for a member without
/// one) under `weights`.
pub fn mean_track(
    tracks: &[Option<&Track>],
    weights: &[f64],
    times: &[DateTime<Utc>],
) -> Vec<Option<(f64, f64)>> {
    times
        .iter()
        .map(|&t| {
            let points: Vec<((f64, f64), f64)> = tracks
                .iter()
                .zip(weights)
                .filter_map(|(tr, &w)| tr.and_then(|tr| tr.position_at(t)).map(|p| (p, w)))
                .collect();
            mean_centre(&points)
        })
        .collect()
}

/// Aligns every member of `case` on the members' weighted mean track and runs each once more,
/// as issued but with its low so moved. `groups` are the case's group runs (member outer), from
/// which the tracks and the primary's valid times come; `warnings` the warnings already given,
/// which the aligned runs do not repeat and to which they add what they say that is new, named
/// by their member.
pub fn align_members(
    case: &Case,
    groups: &[GroupRun],
    threads: usize,
    progress: &dyn Progress,
    warnings: &mut Vec<String>,
) -> Result<Result<Alignment, NotAligned>, EngineError> {
    let members = &case.inputs.members;
    if members.len() < 2 {
        return Ok(Err(NotAligned::OneMember));
    }
    let as_issued = |m: usize| {
        groups
            .iter()
            .find(|g| g.member == m && g.option == 0)
            .map(|g| &g.run)
    };
    let mut tracks = Vec::with_capacity(members.len());
    for (m, member) in members.iter().enumerate() {
        match as_issued(m).and_then(|r| r.track.as_ref()) {
            Some(t) => tracks.push(Some(t)),
            None => return Ok(Err(NotAligned::NoTrack(member.name.clone()))),
        }
    }
    let weights: Vec<f64> = members.iter().map(|m| m.weight).collect();
    let times = groups[0].run.valid_times.clone();
    let mean = mean_track(&tracks, &weights, &times);
    if mean.iter().all(Option::is_none) {
        return Ok(Err(NotAligned::NoCommonTime));
    }
    let mut displacements = Vec::with_capacity(members.len());
    let mut snowfall = Vec::with_capacity(members.len());
    for (m, member) in members.iter().enumerate() {
        let track = tracks[m].expect("every member has a track");
        let mut steps = Vec::new();
        let mut per_time = Vec::with_capacity(times.len());
        for (&t, c) in times.iter().zip(&mean) {
            let d = c.zip(track.position_at(t)).map(|(c, own)| {
                let (e, n) = displacement_km(own, c);
                steps.push((
                    t,
                    StepShift {
                        centre_lon: c.0,
                        centre_lat: c.1,
                        east_km: e,
                        north_km: n,
                    },
                ));
                (e, n)
            });
            per_time.push(d);
        }
        displacements.push(per_time);
        let mut aligned = case.group(m, 0);
        aligned.axes = Axes::default();
        aligned.physics.explicit_shifts = Some(ExplicitShifts { steps });
        let label = format!("member '{}' aligned on the mean track", member.name);
        let quiet = Repeated {
            inner: progress,
            label: &label,
            known: warnings,
        };
        let mut r = run(&aligned, threads, &quiet)?;
        let new: Vec<String> = r
            .warnings
            .iter()
            .filter(|w| !is_known(warnings, w))
            .map(|w| format!("{label}: {w}"))
            .collect();
        warnings.extend(new);
        let snow = std::mem::take(&mut r.totals[r.baseline].snowfall);
        // A member on another grid ran on its own: its total is resampled onto the output grid
        // as its other totals are ([`super::regrid`]).
        let target = &groups[0].run.grid;
        snowfall.push(if r.grid.same_as(target) {
            snow
        } else {
            super::regrid::Remap::new(&r.grid, target).conservative(&snow)
        });
    }
    Ok(Ok(Alignment {
        times,
        mean_track: mean,
        displacements,
        snowfall,
    }))
}

/// Progress of an aligned run: its bars carry its name, and it warns only about what the runs
/// as issued did not already say.
struct Repeated<'a> {
    inner: &'a dyn Progress,
    label: &'a str,
    known: &'a [String],
}

impl Progress for Repeated<'_> {
    fn start(&self, what: &str, total: u64) {
        self.inner.start(&format!("{}: {what}", self.label), total);
    }
    fn advance(&self, n: u64) {
        self.inner.advance(n);
    }
    fn finish(&self) {
        self.inner.finish();
    }
    fn warn(&self, message: &str) {
        if !is_known(self.known, message) {
            self.inner.warn(&format!("{}: {message}", self.label));
        }
    }
}

/// Whether `message` was given already, by the primary run or named by its group.
fn is_known(known: &[String], message: &str) -> bool {
    known
        .iter()
        .any(|k| k == message || k.ends_with(&format!(": {message}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Great-circle distance on a sphere of radius 6371.0088 km (the IUGG mean radius), by the
    /// haversine formula (Sinnott 1984, Sky & Telescope 68(2) p. 159; typed in from memory).
    fn haversine_km(a: (f64, f64), b: (f64, f64)) -> f64 {
        let (l1, p1, l2, p2) = (
            a.0.to_radians(),
            a.1.to_radians(),
            b.0.to_radians(),
            b.1.to_radians(),
        );
        let h =
            ((p2 - p1) / 2.0).sin().powi(2) + p1.cos() * p2.cos() * ((l2 - l1) / 2.0).sin().powi(2);
        2.0 * 6371.0088 * h.sqrt().asin()
    }

    /// Initial bearing on a sphere, degrees clockwise from north (the standard spherical
    /// formula θ = atan2(sin Δλ cos φ2, cos φ1 sin φ2 − sin φ1 cos φ2 cos Δλ); from memory).
    fn bearing_deg(a: (f64, f64), b: (f64, f64)) -> f64 {
        let (p1, p2, dl) = (a.1.to_radians(), b.1.to_radians(), (b.0 - a.0).to_radians());
        (dl.sin() * p2.cos())
            .atan2(p1.cos() * p2.sin() - p1.sin() * p2.cos() * dl.cos())
            .to_degrees()
    }

    #[test]
    fn the_displacement_matches_the_haversine_distance_and_the_spherical_bearing() {
        // Lows a few tens to a few hundred km apart, in the demo's latitudes and elsewhere.
        let pairs = [
            ((-30.0, 47.0), (-29.2, 47.5)),
            ((-25.0, 45.0), (-25.0, 45.54)),
            ((-80.0, 40.0), (-77.5, 38.9)),
            ((179.5, 60.0), (-179.6, 60.3)),
        ];
        for (a, b) in pairs {
            let (e, n) = displacement_km(a, b);
            let d = e.hypot(n);
            let h = haversine_km(a, b);
            // Sphere against ellipsoid: the distances differ by at most about 0.5 %.
            assert!(
                (d - h).abs() <= 0.005 * h,
                "{a:?}→{b:?}: {d} km against {h} km"
            );
            let bearing = e.atan2(n).to_degrees();
            let s = bearing_deg(a, b);
            let diff = (bearing - s + 540.0).rem_euclid(360.0) - 180.0;
            assert!(diff.abs() < 0.3, "{a:?}→{b:?}: {bearing}° against {s}°");
        }
        assert_eq!(displacement_km((-30.0, 47.0), (-30.0, 47.0)), (0.0, 0.0));
    }

    #[test]
    fn the_mean_centre_lies_on_the_geodesic_at_the_weights_share() {
        // Weights 3 and 1: the mean lies a quarter of the way from the heavier low to the
        // other (the weighted mean in a tangent plane; on the sphere to second order).
        let (a, b) = ((-30.0, 46.0), (-27.0, 47.5));
        let m = mean_centre(&[(a, 3.0), (b, 1.0)]).unwrap();
        let (am, mb, ab) = (haversine_km(a, m), haversine_km(m, b), haversine_km(a, b));
        assert!((am / ab - 0.25).abs() < 1e-3, "{am} of {ab} km");
        assert!(
            (am + mb - ab).abs() < 1e-3 * ab,
            "the mean is off the geodesic"
        );
        // Across the antimeridian the mean stays between the lows.
        let m = mean_centre(&[((179.0, 50.0), 1.0), ((-179.0, 50.0), 1.0)]).unwrap();
        assert!((m.0.abs() - 180.0).abs() < 1e-9 && m.1 > 50.0, "{m:?}");
        // One point, or several on one spot: that point, exactly.
        assert_eq!(mean_centre(&[((-30.1, 47.3), 2.0)]), Some((-30.1, 47.3)));
        assert_eq!(
            mean_centre(&[((-30.1, 47.3), 2.0), ((-30.1, 47.3), 0.5)]),
            Some((-30.1, 47.3))
        );
        assert_eq!(mean_centre(&[]), None);
    }

    #[test]
    fn members_moved_onto_the_mean_track_meet_there() {
        use crate::read::TrackPoint;
        use chrono::TimeZone;
        let t0 = Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap();
        let track = |dlat: f64| Track {
            source: "t.csv".into(),
            points: (0..3)
                .map(|k| TrackPoint {
                    time: t0 + chrono::Duration::hours(6 * k),
                    lat: 44.0 + k as f64 + dlat,
                    lon: -32.0 + 2.0 * k as f64,
                })
                .collect(),
        };
        let (a, b) = (track(0.0), track(0.6));
        // A time past the tracks' end has no mean.
        let times = [
            t0,
            t0 + chrono::Duration::hours(9),
            t0 + chrono::Duration::hours(13),
        ];
        let mean = mean_track(&[Some(&a), Some(&b)], &[1.0, 1.0], &times);
        assert!(mean[2].is_none());
        for (t, c) in times.iter().zip(&mean).take(2) {
            let c = c.unwrap();
            let (pa, pb) = (a.position_at(*t).unwrap(), b.position_at(*t).unwrap());
            // Equal weights: the lows are moved towards each other by equal distances.
            let (da, db) = (displacement_km(pa, c), displacement_km(pb, c));
            let half = haversine_km(pa, pb) / 2.0;
            assert!((da.0.hypot(da.1) - half).abs() < 0.005 * half);
            assert!((db.0.hypot(db.1) - half).abs() < 0.005 * half);
            assert!(da.1 > 0.0 && db.1 < 0.0, "{da:?} {db:?}");
        }
    }
}
