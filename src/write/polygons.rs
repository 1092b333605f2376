//! Filled areas of grid fields as RFC 7946 polygons: contouring (the `contour` crate's marching
//! squares, linear interpolation between cell centres), clipping to the cells that hold data,
//! and the way back from grid cells to WGS 84 lon/lat through the grid's CRS.
//!
//! All geometry is built in the padded grid's index space, where the grid's edges are straight:
//! - the field is padded by one cell on every side (edge values repeated) and its missing cells
//!   take the mean of their valid neighbours, so contours run on to the edge of the data;
//! - the *data area* is the 0.5 contour of a 0/1 mask of valid cells: its boundary runs along
//!   cell edges, halfway between a valid and a missing (or outside) cell centre, cutting
//!   corners diagonally — so no area is drawn over a cell without data;
//! - the area where `field ≥ level` is the contour crate's rings at `level`, taken as a soup of
//!   rings under the even-odd rule (geo's i_overlay boolean operations), which gets nested
//!   holes and islands right whatever the crate's own ring nesting says;
//! - isobands are differences of such areas, intersected with the data area.
//!
//! Then every segment is densified to at most one cell, vertices are taken to lon/lat
//! (`Grid::lonlat_of`), rings are unwrapped across ±180° and cut there (RFC 7946 §3.1.9), a ring
//! around a pole is closed along the pole, exteriors are turned counter-clockwise and holes
//! clockwise (§3.1.6), and coordinates are rounded to 1e-5° (about 1 m).

use crate::grid::Grid;
use contour::ContourBuilder;
use geo::orient::{Direction, Orient};
use geo::{Area, BooleanOps, Coord, LineString, MultiPolygon, Polygon};

use super::WriteError;

/// Decimal places of written coordinates: 1e-5° ≈ 1 m, far below any model grid's spacing.
pub const DECIMALS: f64 = 1e5;

/// A grid field padded by one cell, ready for contouring.
pub struct Padded<'a> {
    grid: &'a Grid,
    /// (nx + 2) × (ny + 2) values, row-major.
    values: Vec<f64>,
}

impl<'a> Padded<'a> {
    /// Pads `field` (NaN = missing). Missing cells next to valid ones take the mean of their
    /// valid 8-neighbours; the rest take `fill`, which never matters, because the data area
    /// excludes every square of the contouring grid they touch.
    pub fn new(grid: &'a Grid, field: &[f32], fill: f64) -> Self {
        let (nx, ny) = (grid.nx, grid.ny);
        let mut inner = vec![0f64; nx * ny];
        for r in 0..ny {
            for c in 0..nx {
                let v = field[r * nx + c];
                inner[r * nx + c] = if v.is_nan() {
                    let mut sum = 0.0;
                    let mut n = 0;
                    for rr in r.saturating_sub(1)..(r + 2).min(ny) {
                        for cc in c.saturating_sub(1)..(c + 2).min(nx) {
                            let w = field[rr * nx + cc];
                            if !w.is_nan() {
                                sum += f64::from(w);
                                n += 1;
                            }
                        }
                    }
                    if n > 0 {
                        sum / f64::from(n)
                    } else {
                        fill
                    }
                } else {
                    f64::from(v)
                };
            }
        }
        let (pnx, pny) = (nx + 2, ny + 2);
        let mut values = vec![0f64; pnx * pny];
        for pr in 0..pny {
            let r = pr.clamp(1, ny) - 1;
            for pc in 0..pnx {
                let c = pc.clamp(1, nx) - 1;
                values[pr * pnx + pc] = inner[r * nx + c];
            }
        }
        Self { grid, values }
    }

    /// A 0/1 mask padded with 0: 1 where `valid` is true.
    pub fn mask(grid: &'a Grid, valid: impl Fn(usize) -> bool) -> Self {
        let (nx, ny) = (grid.nx, grid.ny);
        let pnx = nx + 2;
        let mut values = vec![0f64; pnx * (ny + 2)];
        for r in 0..ny {
            for c in 0..nx {
                if valid(r * nx + c) {
                    values[(r + 1) * pnx + c + 1] = 1.0;
                }
            }
        }
        Self { grid, values }
    }

    /// The area where the padded field is at least `level`, in padded contour coordinates.
    pub fn at_least(&self, level: f64) -> Result<MultiPolygon<f64>, WriteError> {
        let lines = ContourBuilder::new(self.grid.nx + 2, self.grid.ny + 2, true)
            .lines(&self.values, &[level])
            .map_err(|e| WriteError::Contour(format!("{e:?}")))?;
        let rings: Vec<Polygon<f64>> = lines
            .into_iter()
            .flat_map(|l| l.into_inner().0 .0)
            .filter(|ring| ring.0.len() >= 4)
            .map(|ring| Polygon::new(ring, vec![]))
            .collect();
        // An empty subject unioned with the soup resolves the soup under the even-odd rule.
        Ok(MultiPolygon::new(Vec::new()).union(&MultiPolygon::new(rings)))
    }
}

/// The area where `lower ≤ field < upper` (no upper bound for `None`) within `data`.
pub fn band(
    field: &Padded,
    data: &MultiPolygon<f64>,
    lower: f64,
    upper: Option<f64>,
) -> Result<MultiPolygon<f64>, WriteError> {
    let low = field.at_least(lower)?;
    let area = match upper {
        Some(u) => low.difference(&field.at_least(u)?),
        None => low,
    };
    Ok(area.intersection(data))
}

/// Padded contour coordinates to the grid's cell-centre index space: the contour crate puts
/// value (i, j) of the padded grid at (i + 0.5, j + 0.5), and padded index i is column i − 1.
fn to_cell_index(c: Coord<f64>) -> (f64, f64) {
    (c.x - 1.5, c.y - 1.5)
}

/// Inserts points so that no segment is longer than one cell: straight in grid space is curved
/// in lon/lat on projected grids.
fn densify(ring: &LineString<f64>) -> Vec<(f64, f64)> {
    let mut out = Vec::with_capacity(ring.0.len());
    for w in ring.0.windows(2) {
        let (a, b) = (to_cell_index(w[0]), to_cell_index(w[1]));
        let n = ((b.0 - a.0).abs().max((b.1 - a.1).abs())).ceil().max(1.0) as usize;
        for k in 0..n {
            let t = k as f64 / n as f64;
            out.push((a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)));
        }
    }
    if let Some(last) = ring.0.last() {
        out.push(to_cell_index(*last));
    }
    out
}

/// Lon/lat of a ring's vertices, longitudes made continuous (no jump over 180°). A ring that
/// winds once around a pole is closed along that pole's parallel of ±90°.
fn unwrapped_ring(grid: &Grid, ring: &LineString<f64>) -> Vec<Coord<f64>> {
    let mut out: Vec<Coord<f64>> = Vec::new();
    for (c, r) in densify(ring) {
        let (mut lon, lat) = grid.lonlat_of(c, r);
        if let Some(p) = out.last() {
            lon += 360.0 * ((p.x - lon) / 360.0).round();
        }
        out.push(Coord { x: lon, y: lat });
    }
    if let (Some(first), Some(last)) = (out.first().copied(), out.last().copied()) {
        let turns = ((last.x - first.x) / 360.0).round();
        if turns != 0.0 {
            let mean_lat = out.iter().map(|p| p.y).sum::<f64>() / out.len() as f64;
            let pole = 90f64.copysign(mean_lat);
            out.push(Coord { x: last.x, y: pole });
            out.push(Coord {
                x: first.x,
                y: pole,
            });
            out.push(first);
        }
    }
    out
}

/// Rounds to [`DECIMALS`] and drops repeated points; `None` when fewer than 3 distinct
/// vertices remain.
fn rounded(ring: &LineString<f64>) -> Option<LineString<f64>> {
    let mut pts: Vec<Coord<f64>> = Vec::with_capacity(ring.0.len());
    for p in &ring.0 {
        let q = Coord {
            x: (p.x * DECIMALS).round() / DECIMALS,
            y: (p.y * DECIMALS).round() / DECIMALS,
        };
        if pts.last() != Some(&q) {
            pts.push(q);
        }
    }
    if pts.len() > 1 && pts.first() == pts.last() {
        pts.pop();
    }
    (pts.len() >= 3).then(|| {
        let mut l = LineString::new(pts);
        l.close();
        l
    })
}

/// Takes an area in padded contour coordinates to RFC 7946 lon/lat polygons (see the module
/// notes): unwrapped, cut at ±180°, oriented, rounded. Rings that vanish at 1e-5° are dropped.
pub fn to_lonlat(grid: &Grid, area: &MultiPolygon<f64>) -> MultiPolygon<f64> {
    let mut out = Vec::new();
    for poly in area {
        let exterior = unwrapped_ring(grid, poly.exterior());
        let reference = exterior.first().map_or(0.0, |p| p.x);
        let holes: Vec<LineString<f64>> = poly
            .interiors()
            .iter()
            .map(|h| {
                let mut h = unwrapped_ring(grid, h);
                let shift =
                    360.0 * ((reference - h.first().map_or(reference, |p| p.x)) / 360.0).round();
                h.iter_mut().for_each(|p| p.x += shift);
                LineString::new(h)
            })
            .collect();
        let p = MultiPolygon::new(vec![Polygon::new(LineString::new(exterior), holes)]);
        let (lo, hi) = p
            .iter()
            .flat_map(|q| q.exterior().0.iter())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), c| {
                (lo.min(c.x), hi.max(c.x))
            });
        let pieces: Vec<MultiPolygon<f64>> = if lo >= -180.0 && hi <= 180.0 {
            vec![p]
        } else {
            // Cut into 360°-wide strips and bring each back to −180…180 (RFC 7946 §3.1.9).
            let first = ((lo + 180.0) / 360.0).floor() as i64;
            let last = ((hi + 180.0) / 360.0).ceil() as i64;
            (first..last)
                .map(|k| {
                    let west = -180.0 + 360.0 * k as f64;
                    let strip = geo::Rect::new(
                        Coord { x: west, y: -91.0 },
                        Coord {
                            x: west + 360.0,
                            y: 91.0,
                        },
                    )
                    .to_polygon();
                    let mut piece = p.intersection(&MultiPolygon::new(vec![strip]));
                    use geo::MapCoordsInPlace;
                    piece.map_coords_in_place(|c| Coord {
                        x: c.x - 360.0 * k as f64,
                        y: c.y,
                    });
                    piece
                })
                .collect()
        };
        for piece in pieces {
            for q in piece {
                let Some(ext) = rounded(q.exterior()) else {
                    continue;
                };
                let holes: Vec<LineString<f64>> =
                    q.interiors().iter().filter_map(rounded).collect();
                let poly = Polygon::new(ext, holes);
                if poly.unsigned_area() > 0.0 {
                    out.push(poly.orient(Direction::Default));
                }
            }
        }
    }
    MultiPolygon::new(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Georef};

    fn grid(nx: usize, ny: usize, gt: [f64; 6]) -> Grid {
        Grid::new(
            nx,
            ny,
            Georef {
                crs: Crs::Wgs84Geographic,
                geotransform: gt,
            },
        )
        .unwrap()
    }

    fn area_in_cells(g: &Grid, mp: &MultiPolygon<f64>) -> f64 {
        let gt = g.georef.geotransform;
        mp.unsigned_area() / (gt[1] * gt[5]).abs()
    }

    #[test]
    fn band_of_a_ramp_covers_the_cells_between_its_levels() {
        // Field = column index; band [2.5, 6.5) lies between x = 2.5 and 6.5 cell-centre units:
        // 4 columns wide, over all 8 rows (the padded data area reaches the grid's outer edge).
        let g = grid(10, 8, [0.0, 1.0, 0.0, 8.0, 0.0, -1.0]);
        let f: Vec<f32> = (0..80).map(|i| (i % 10) as f32).collect();
        let p = Padded::new(&g, &f, -1.0);
        let data = Padded::mask(&g, |i| !f[i].is_nan()).at_least(0.5).unwrap();
        let b = to_lonlat(&g, &band(&p, &data, 2.5, Some(6.5)).unwrap());
        assert!((area_in_cells(&g, &b) - 4.0 * 8.0).abs() < 1e-6, "{b:?}");
        let (lo, hi) = b.0[0]
            .exterior()
            .0
            .iter()
            .fold((99.0, -99.0), |(l, h), c| (c.x.min(l), c.x.max(h)));
        // Column 2.5 (cell-centre index) is longitude 3.0 here.
        assert_eq!((lo, hi), (3.0, 7.0));
        // RFC 7946 §3.1.6: exterior counter-clockwise (positive signed area).
        assert!(b.0[0].signed_area() > 0.0);
    }

    #[test]
    fn missing_cells_are_never_covered() {
        let g = grid(10, 8, [0.0, 1.0, 0.0, 8.0, 0.0, -1.0]);
        let mut f = vec![10f32; 80];
        for r in 2..5 {
            for c in 3..6 {
                f[r * 10 + c] = f32::NAN;
            }
        }
        let p = Padded::new(&g, &f, -1.0);
        let data = Padded::mask(&g, |i| !f[i].is_nan()).at_least(0.5).unwrap();
        let b = to_lonlat(&g, &band(&p, &data, 5.0, None).unwrap());
        use geo::Contains;
        for r in 2..5 {
            for c in 3..6 {
                let (lon, lat) = g.lonlat_of(c as f64, r as f64);
                assert!(!b.contains(&geo::Point::new(lon, lat)), "cell {c},{r}");
            }
        }
        // Marching squares on the 0/1 mask cut every corner by a half-cell diagonal (1/8 cell):
        // the hole (3 × 3 cells) gives back 4 × 1/8 at its corners, the grid's outer corners
        // lose 4 × 1/8: 80 − 9 + 0.5 − 0.5 cells remain.
        assert!(
            (area_in_cells(&g, &b) - 71.0).abs() < 1e-6,
            "{}",
            area_in_cells(&g, &b)
        );
        assert_eq!(b.0.len(), 1);
        assert_eq!(b.0[0].interiors().len(), 1);
        assert!(
            b.0[0].interiors()[0]
                .0
                .windows(2)
                .map(|w| w[0].x * w[1].y - w[1].x * w[0].y)
                .sum::<f64>()
                < 0.0,
            "holes clockwise"
        );
    }

    #[test]
    fn areas_crossing_the_antimeridian_are_cut_there() {
        // A lon/lat grid from 170°E to 190°E (= 170°W).
        let g = grid(20, 5, [170.0, 1.0, 0.0, 60.0, 0.0, -1.0]);
        let f = vec![1f32; 100];
        let p = Padded::new(&g, &f, 0.0);
        let data = Padded::mask(&g, |_| true).at_least(0.5).unwrap();
        let b = to_lonlat(&g, &band(&p, &data, 0.5, None).unwrap());
        assert_eq!(b.0.len(), 2, "{b:?}");
        for poly in &b {
            for c in poly.exterior() {
                assert!((-180.0..=180.0).contains(&c.x), "{c:?}");
            }
        }
        let total: f64 = b.unsigned_area();
        assert!((total - 100.0 + 0.5).abs() < 1e-6, "{total}");
    }
}
