//! The storm track from the model's own sea-level pressure: the low centre followed through the
//! steps, placed between grid points by a quadratic fit.
//!
//! At the first step the track starts at the local minimum nearest a given point, or else at
//! the deepest *closed* low (one whose pressure is at least [`CLOSED_PA`] below every cell on a
//! square ring [`CLOSED_RING_KM`] out (less near the grid edge), so a closed isobar surrounds it at that interval). Later
//! steps take the local minimum nearest to the position extrapolated from the last two (or the
//! last one) within [`SEARCH_KM`]; the track ends where none is found.
//!
//! Sub-grid position: a least-squares quadric z = a + b·x + c·y + d·x² + e·y² + f·x·y over the
//! 3×3 cells around the grid minimum (x, y in cells), whose stationary point solves
//! [2d f; f 2e]·[x y]ᵀ = −[b c]ᵀ (e.g. Press et al. 2007, *Numerical Recipes*, 3rd ed.,
//! §15.4 on linear least squares; the 3×3 coefficients are exact sums over the stencil). When
//! the quadric is not a bowl or its minimum falls outside the centre cell, the grid point is
//! kept.

use crate::grid::Grid;
use chrono::{DateTime, Utc};
use geo::{Distance, Geodesic, Point};
use ndarray::ArrayView2;

/// A sea-level pressure field as the finder reads it: rows north to south, columns west to east,
/// indexed `[[row, col]]`.
type Field<'a> = ArrayView2<'a, f32>;

/// A low must be this much deeper than its ring to count as closed, Pa (one 1 hPa isobar).
pub const CLOSED_PA: f32 = 100.0;
/// Distance of the ring that must enclose a closed low, km.
pub const CLOSED_RING_KM: f64 = 300.0;
/// Smallest ring (cells from the centre) that can show a low is closed.
pub const MIN_RING_CELLS: i64 = 2;
/// How far from the expected position the next centre may be, km.
pub const SEARCH_KM: f64 = 600.0;

/// One found centre.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FoundCentre {
    /// Valid time.
    pub time: DateTime<Utc>,
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// Fractional column and row of the centre.
    pub col: f64,
    /// Fractional row.
    pub row: f64,
    /// Sea-level pressure at the centre from the fit, Pa.
    pub mslp_pa: f64,
}

/// Why no track was found.
#[derive(Debug, thiserror::Error)]
pub enum FinderError {
    /// No sea-level pressure.
    #[error("no mean sea-level pressure (parameter 0/3/1) at step {step} (valid {valid}); the track finder needs it at every step")]
    NoPressure {
        /// 1-based step.
        step: usize,
        /// Valid time.
        valid: String,
    },
    /// No start.
    #[error("{0}")]
    NoStart(String),
}

fn geodesic_km(a: (f64, f64), b: (f64, f64)) -> f64 {
    Geodesic.distance(Point::new(a.0, a.1), Point::new(b.0, b.1)) / 1000.0
}

/// Strict 3×3 local minima away from the edge, as (col, row).
fn local_minima(p: Field<'_>) -> Vec<(usize, usize)> {
    let (ny, nx) = p.dim();
    let mut out = Vec::new();
    for r in 1..ny.saturating_sub(1) {
        for c in 1..nx.saturating_sub(1) {
            let v = p[[r, c]];
            if !v.is_finite() {
                continue;
            }
            let mut lowest = true;
            'n: for dr in -1i64..=1 {
                for dc in -1i64..=1 {
                    if dr == 0 && dc == 0 {
                        continue;
                    }
                    let w = p[[(r as i64 + dr) as usize, (c as i64 + dc) as usize]];
                    // Ties go to the first cell in row-major order so a flat bottom yields one.
                    let before = dr < 0 || (dr == 0 && dc < 0);
                    if !w.is_finite() || w < v || (w == v && before) {
                        lowest = false;
                        break 'n;
                    }
                }
            }
            if lowest {
                out.push((c, r));
            }
        }
    }
    out
}

/// True when every cell on a square ring about `CLOSED_RING_KM` out lies at least `CLOSED_PA`
/// above the centre. Near the grid edge the ring shrinks to fit (but not below
/// [`MIN_RING_CELLS`]), since a regional grid often starts with the low near its edge.
fn is_closed(grid: &Grid, p: Field<'_>, c: usize, r: usize) -> bool {
    let m = grid.metric()[r * grid.nx + c];
    let want_e = (CLOSED_RING_KM * f64::from(m.col_per_km_east.abs().max(m.col_per_km_north.abs())))
        .ceil() as i64;
    let want_n = (CLOSED_RING_KM * f64::from(m.row_per_km_north.abs().max(m.row_per_km_east.abs())))
        .ceil() as i64;
    let (c, r) = (c as i64, r as i64);
    let room_e = c.min(grid.nx as i64 - 1 - c);
    let room_n = r.min(grid.ny as i64 - 1 - r);
    let (cells_e, cells_n) = (want_e.min(room_e), want_n.min(room_n));
    if cells_e < MIN_RING_CELLS || cells_n < MIN_RING_CELLS {
        return false;
    }
    let v = p[[r as usize, c as usize]];
    let at = |cc: i64, rr: i64| p[[rr as usize, cc as usize]];
    let ring = (-cells_e..=cells_e)
        .flat_map(|dc| [(c + dc, r - cells_n), (c + dc, r + cells_n)])
        .chain((-cells_n..=cells_n).flat_map(|dr| [(c - cells_e, r + dr), (c + cells_e, r + dr)]));
    let mut ok = true;
    for (cc, rr) in ring {
        let w = at(cc, rr);
        if !(w.is_finite() && w - v >= CLOSED_PA) {
            ok = false;
            break;
        }
    }
    ok
}

/// The sub-grid minimum around grid minimum (`c`, `r`): fractional (col, row) and the fitted
/// pressure.
pub fn refine(p: ArrayView2<'_, f32>, c: usize, r: usize) -> (f64, f64, f64) {
    let z = |dc: i64, dr: i64| f64::from(p[[(r as i64 + dr) as usize, (c as i64 + dc) as usize]]);
    let (mut sx, mut sy, mut sxy, mut s_edge_x, mut s_mid_x, mut s_edge_y, mut s_mid_y, mut sum) =
        (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for dr in -1i64..=1 {
        for dc in -1i64..=1 {
            let v = z(dc, dr);
            sum += v;
            sx += dc as f64 * v;
            sy += dr as f64 * v;
            sxy += (dc * dr) as f64 * v;
            if dc == 0 {
                s_mid_x += v;
            } else {
                s_edge_x += v;
            }
            if dr == 0 {
                s_mid_y += v;
            } else {
                s_edge_y += v;
            }
        }
    }
    // Least-squares coefficients on the 3×3 stencil (Σx² = 6, Σx²y² = 4 over its nine points).
    let b = sx / 6.0;
    let cc = sy / 6.0;
    let f = sxy / 4.0;
    let d = s_edge_x / 6.0 - s_mid_x / 3.0;
    let e = s_edge_y / 6.0 - s_mid_y / 3.0;
    let a = sum / 9.0 - (d + e) * 6.0 / 9.0;
    let det = 4.0 * d * e - f * f;
    let grid_point = (c as f64, r as f64, z(0, 0));
    if !(d > 0.0 && det > 0.0) {
        return grid_point;
    }
    let x = (-2.0 * e * b + f * cc) / det;
    let y = (-2.0 * d * cc + f * b) / det;
    if x.abs() > 1.0 || y.abs() > 1.0 {
        return grid_point;
    }
    let value = a + b * x + cc * y + d * x * x + e * y * y + f * x * y;
    (c as f64 + x, r as f64 + y, value)
}

fn centre(grid: &Grid, p: Field<'_>, time: DateTime<Utc>, c: usize, r: usize) -> FoundCentre {
    let (col, row, mslp_pa) = refine(p, c, r);
    let (lon, lat) = grid.lonlat_of(col, row);
    FoundCentre {
        time,
        lon,
        lat,
        col,
        row,
        mslp_pa,
    }
}

/// Follows the low through `steps` (valid time, sea-level pressure in Pa on `grid`), starting
/// near `start` (lon, lat) when given. Returns the centres found, in time order; the track ends
/// early when the low is lost, and `lost` says at which step.
pub fn find_track(
    grid: &Grid,
    steps: &[(DateTime<Utc>, Vec<f32>)],
    start: Option<(f64, f64)>,
) -> Result<(Vec<FoundCentre>, Option<usize>), FinderError> {
    let Some((t0, _)) = steps.first() else {
        return Err(FinderError::NoStart("no time steps".into()));
    };
    let fields = steps
        .iter()
        .enumerate()
        .map(|(k, (_, p))| {
            ArrayView2::from_shape((grid.ny, grid.nx), p).map_err(|_| {
                FinderError::NoStart(format!(
                    "step {}: the pressure field has {} values for a grid of {}×{} cells",
                    k + 1,
                    p.len(),
                    grid.nx,
                    grid.ny
                ))
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let p0 = fields[0];
    let minima = local_minima(p0);
    let first = match start {
        Some(s) => minima
            .iter()
            .map(|&(c, r)| {
                let k = r * grid.nx + c;
                ((c, r), geodesic_km(s, (grid.lon()[k], grid.lat()[k])))
            })
            .filter(|(_, d)| *d <= SEARCH_KM)
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .map(|(m, _)| m)
            .ok_or_else(|| {
                FinderError::NoStart(format!(
                    "no sea-level pressure minimum within {SEARCH_KM} km of the start {:.3},{:.3} (lat,lon) at the first step",
                    s.1, s.0
                ))
            })?,
        None => minima
            .iter()
            .copied()
            .filter(|&(c, r)| is_closed(grid, p0, c, r))
            .min_by(|a, b| p0[[a.1, a.0]].total_cmp(&p0[[b.1, b.0]]))
            .ok_or_else(|| {
                FinderError::NoStart(format!(
                    "no closed low at the first step (a minimum at least {} hPa below a ring {CLOSED_RING_KM} km out, inside the grid); start the finder near the low with `trackswing track FILES --start LAT,LON` and run with its track.csv as the track",
                    CLOSED_PA / 100.0
                ))
            })?,
    };
    let mut found = vec![centre(grid, p0, *t0, first.0, first.1)];
    for (k, ((t, _), &p)) in steps.iter().zip(&fields).enumerate().skip(1) {
        let last = found[found.len() - 1];
        let expect = match found.len() {
            1 => (last.lon, last.lat),
            n => {
                let prev = found[n - 2];
                (2.0 * last.lon - prev.lon, 2.0 * last.lat - prev.lat)
            }
        };
        let next = local_minima(p)
            .into_iter()
            .map(|(c, r)| {
                let i = r * grid.nx + c;
                ((c, r), geodesic_km(expect, (grid.lon()[i], grid.lat()[i])))
            })
            .filter(|(_, d)| *d <= SEARCH_KM)
            .min_by(|a, b| a.1.total_cmp(&b.1));
        match next {
            Some(((c, r), _)) => found.push(centre(grid, p, *t, c, r)),
            None => return Ok((found, Some(k))),
        }
    }
    Ok((found, None))
}

/// The track as CSV that `read_track` accepts: `time,lat,lon,mslp_pa`.
pub fn track_csv(track: &[FoundCentre]) -> String {
    let mut s = String::from("time,lat,lon,mslp_pa\n");
    for c in track {
        s.push_str(&format!(
            "{},{:.5},{:.5},{:.1}\n",
            c.time.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
            c.lat,
            c.lon,
            c.mslp_pa
        ));
    }
    s
}

/// The track as an RFC 7946 GeoJSON Feature with a LineString and a `times` property (what
/// `read_track` accepts), plus the centre pressures.
pub fn track_geojson(track: &[FoundCentre]) -> String {
    let coords: Vec<serde_json::Value> = track
        .iter()
        .map(|c| serde_json::json!([round(c.lon, 5), round(c.lat, 5)]))
        .collect();
    let times: Vec<String> = track
        .iter()
        .map(|c| c.time.to_rfc3339_opts(chrono::SecondsFormat::Secs, true))
        .collect();
    let mslp: Vec<f64> = track.iter().map(|c| round(c.mslp_pa, 1)).collect();
    let v = serde_json::json!({
        "type": "Feature",
        "geometry": {"type": "LineString", "coordinates": coords},
        "properties": {"times": times, "mslp_pa": mslp, "source": "trackswing track: sea-level pressure minimum"},
    });
    serde_json::to_string_pretty(&v).expect("JSON of numbers and strings") + "\n"
}

fn round(v: f64, digits: i32) -> f64 {
    let k = 10f64.powi(digits);
    (v * k).round() / k
}

/// The found centres as a [`crate::read::Track`] (at least two are needed for a heading).
pub fn to_track(found: &[FoundCentre], source: std::path::PathBuf) -> crate::read::Track {
    crate::read::Track {
        source,
        points: found
            .iter()
            .map(|c| crate::read::TrackPoint {
                time: c.time,
                lat: c.lat,
                lon: c.lon,
            })
            .collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Datum, Georef, Projected, Projection};
    use chrono::TimeZone;

    /// An analytic low: 101 000 Pa less 2 500 Pa·exp(−d²/2σ²), d the geodesic distance (Karney
    /// 2013, geo's `Geodesic`) to the centre, σ = 250 km. Its minimum is the centre exactly.
    fn low(grid: &Grid, centre: (f64, f64)) -> Vec<f32> {
        grid.lon()
            .iter()
            .zip(grid.lat())
            .map(|(lo, la)| {
                let d = geodesic_km((*lo, *la), centre);
                (101_000.0 - 2_500.0 * (-d * d / (2.0 * 250.0f64.powi(2))).exp()) as f32
            })
            .collect()
    }

    fn latlon() -> Grid {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [-40.0, 0.25, 0.0, 60.0, 0.0, -0.25],
        };
        Grid::new(120, 80, georef).unwrap()
    }

    fn lambert() -> Grid {
        let georef = Georef {
            crs: Crs::Projected(Projected {
                datum: Datum::Sphere {
                    radius_m: 6_371_229.0,
                },
                projection: Projection::LambertConformal2Sp {
                    lat_1: 40.0,
                    lat_2: 55.0,
                    lat_0: 45.0,
                    lon_0: -20.0,
                },
                false_easting_m: 0.0,
                false_northing_m: 0.0,
            }),
            geotransform: [-1_250_000.0, 25_000.0, 0.0, 1_000_000.0, 0.0, -25_000.0],
        };
        Grid::new(100, 80, georef).unwrap()
    }

    fn t(h: i64) -> DateTime<Utc> {
        Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap() + chrono::Duration::hours(h)
    }

    /// Distance in cells between the found centre and the true one.
    fn cell_error(grid: &Grid, f: &FoundCentre, truth: (f64, f64)) -> f64 {
        let (c, r) = grid.index_of(truth.0, truth.1).unwrap();
        (f.col - c).hypot(f.row - r)
    }

    #[test]
    fn a_low_between_grid_points_is_found_within_a_quarter_cell() {
        for grid in [latlon(), lambert()] {
            let mut worst = 0.0f64;
            for (dc, dr) in [(0.37, 0.71), (0.5, 0.5), (0.9, 0.1), (0.25, 0.0)] {
                let (lon, lat) = grid.lonlat_of(40.0 + dc, 35.0 + dr);
                let p = low(&grid, (lon, lat));
                let (found, lost) = find_track(&grid, &[(t(0), p)], None).unwrap();
                assert_eq!(lost, None);
                let e = cell_error(&grid, &found[0], (lon, lat));
                worst = worst.max(e);
                assert!(
                    (found[0].mslp_pa - 98_500.0).abs() < 20.0,
                    "{}",
                    found[0].mslp_pa
                );
            }
            eprintln!("{}: worst error {worst:.4} cell", grid.describe());
            assert!(worst <= 0.25, "worst {worst} cell");
        }
    }

    #[test]
    fn a_field_of_the_wrong_size_is_an_error() {
        let grid = latlon();
        let (lon, lat) = grid.lonlat_of(40.0, 35.0);
        let p = low(&grid, (lon, lat));
        let short = p[..p.len() - 1].to_vec();
        let e = find_track(&grid, &[(t(0), p), (t(1), short)], None).unwrap_err();
        assert!(e.to_string().contains("step 2"), "{e}");
    }

    #[test]
    fn a_moving_low_is_followed_along_its_path() {
        for grid in [latlon(), lambert()] {
            // Known path: 60 km per step towards the north-east, then curving east.
            let (lon0, lat0) = grid.lonlat_of(25.3, 55.6);
            let path: Vec<(f64, f64)> = (0..8)
                .map(|k| {
                    let k = k as f64;
                    (lon0 + 0.9 * k, lat0 + 0.5 * k - 0.03 * k * k)
                })
                .collect();
            let steps: Vec<_> = path
                .iter()
                .enumerate()
                .map(|(k, c)| (t(6 * k as i64), low(&grid, *c)))
                .collect();
            let (found, lost) = find_track(&grid, &steps, None).unwrap();
            assert_eq!(lost, None);
            assert_eq!(found.len(), path.len());
            let worst = found
                .iter()
                .zip(&path)
                .map(|(f, c)| cell_error(&grid, f, *c))
                .fold(0.0, f64::max);
            eprintln!(
                "{}: moving low, worst error {worst:.4} cell",
                grid.describe()
            );
            assert!(worst <= 0.25, "worst {worst} cell");
            assert_eq!(found[3].time, t(18));
        }
    }

    #[test]
    fn start_point_picks_the_nearer_of_two_lows() {
        let grid = latlon();
        let (a, b) = (grid.lonlat_of(30.2, 30.4), grid.lonlat_of(90.6, 50.3));
        let pa = low(&grid, a);
        let pb = low(&grid, b);
        // The second low is deeper; without a start the deepest closed low wins.
        let p: Vec<f32> = pa.iter().zip(&pb).map(|(x, y)| x.min(y - 500.0)).collect();
        let (deepest, _) = find_track(&grid, &[(t(0), p.clone())], None).unwrap();
        assert!(cell_error(&grid, &deepest[0], b) < 0.5);
        let (near, _) = find_track(&grid, &[(t(0), p)], Some(a)).unwrap();
        assert!(cell_error(&grid, &near[0], a) < 0.5);
    }

    #[test]
    fn written_tracks_read_back() {
        let grid = latlon();
        let steps: Vec<_> = (0..3)
            .map(|k| {
                (
                    t(3 * k),
                    low(&grid, grid.lonlat_of(30.0 + 4.0 * k as f64, 40.0)),
                )
            })
            .collect();
        let (found, _) = find_track(&grid, &steps, None).unwrap();
        let d = tempfile::tempdir().unwrap();
        for (name, text) in [
            ("t.csv", track_csv(&found)),
            ("t.geojson", track_geojson(&found)),
        ] {
            let p = d.path().join(name);
            std::fs::write(&p, text).unwrap();
            let tr = crate::read::read_track(&p).unwrap();
            assert_eq!(tr.points.len(), 3);
            assert!((tr.points[2].lon - found[2].lon).abs() < 1e-4);
            assert_eq!(tr.points[1].time, t(3));
        }
    }
}
