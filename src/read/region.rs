//! A lon/lat box to read and compute instead of the whole model grid (`--region W,S,E,N`,
//! `region = [W, S, E, N]` in a case): [`Region`] is the box as asked, [`Window`] the block of
//! the model grid's own rows and columns that covers it, and [`RegionSource`] hands the engine
//! that block of every field, so nothing downstream knows the grid was larger.
//!
//! Which cells the window holds:
//! - on a lat/lon grid, the rows and columns whose centres lie in the box (edges included);
//!   on a grid that goes once around the Earth (0…360° or −180…180°) the columns wrap across
//!   the grid's seam, and the window's longitudes keep increasing (170…190 across the
//!   antimeridian), so a GIS sees one contiguous raster;
//! - on a projected grid (Lambert, polar stereographic), the bounding block of the cells whose
//!   centres lie in the box (a box in lon/lat is curved on the map, so a few cells of the block
//!   lie outside it).
//!
//! The window is a grid like any other: a shifted scenario whose cell samples from beyond the
//! window's edge counts as sampling beyond the grid edge (missing, and counted in the run's
//! warnings), exactly as at the model grid's own edge. No margin is read: a result never depends
//! on fields the user did not ask for, and the warning says where the edge cut in.

use crate::grid::{Grid, GridError};

/// Why a region cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum RegionError {
    /// The text or numbers do not make a box.
    #[error("{field} {text}: {what}")]
    Bad {
        /// Where it was given: `--region` or the case file's `region`.
        field: String,
        /// The value as given.
        text: String,
        /// What is wrong and what was expected.
        what: String,
    },
    /// The box holds no cell centre of the grid, or too few.
    #[error("{field} {what}")]
    Misses {
        /// Where it was given.
        field: String,
        /// The box, what it covers, and the grid's size and cell-centre extent.
        what: String,
    },
    /// The window could not be made a grid.
    #[error("{field}: {source}")]
    Grid {
        /// Where it was given.
        field: String,
        /// The cause.
        source: GridError,
    },
}

impl RegionError {
    /// True when the region came from the command line (a bad option, exit code 2) rather than
    /// from a case file (bad input).
    pub fn from_flag(&self) -> bool {
        let (Self::Bad { field, .. } | Self::Misses { field, .. } | Self::Grid { field, .. }) =
            self;
        field.starts_with("--")
    }
}

/// A lon/lat box, degrees: west, south, east, north edges. West greater than east is a box
/// across the antimeridian (170,40,-170,60).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Region {
    /// West edge, degrees east.
    pub west: f64,
    /// South edge, degrees north.
    pub south: f64,
    /// East edge, degrees east.
    pub east: f64,
    /// North edge, degrees north.
    pub north: f64,
}

impl std::fmt::Display for Region {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{},{},{},{}",
            self.west, self.south, self.east, self.north
        )
    }
}

impl Region {
    /// Parses `W,S,E,N` (degrees); `field` names where it was given, for the error.
    ///
    /// ```
    /// use trackswing::read::region::Region;
    /// let r = Region::parse("170,40,-170,60", "--region").unwrap();
    /// assert_eq!(r.width(), 20.0);
    /// assert!(Region::parse("10,50,20,40", "--region").is_err()); // south above north
    /// ```
    pub fn parse(text: &str, field: &str) -> Result<Self, RegionError> {
        let v: Vec<f64> = text
            .split(',')
            .map(|p| p.trim().parse::<f64>())
            .collect::<Result<_, _>>()
            .map_err(|_| RegionError::Bad {
                field: field.into(),
                text: text.into(),
                what: "expected four numbers W,S,E,N in degrees, e.g. -80,35,-60,50".into(),
            })?;
        let [west, south, east, north] = v[..] else {
            return Err(RegionError::Bad {
                field: field.into(),
                text: text.into(),
                what: format!("expected four numbers W,S,E,N in degrees, got {}", v.len()),
            });
        };
        Self::new([west, south, east, north], field)
    }

    /// Checks a box given as `[W, S, E, N]`, degrees.
    pub fn new([west, south, east, north]: [f64; 4], field: &str) -> Result<Self, RegionError> {
        let r = Self {
            west,
            south,
            east,
            north,
        };
        let bad = |what: String| RegionError::Bad {
            field: field.into(),
            text: r.to_string(),
            what,
        };
        if ![west, south, east, north].iter().all(|v| v.is_finite()) {
            return Err(bad("every edge must be a finite number of degrees".into()));
        }
        if !(-90.0..=90.0).contains(&south) || !(-90.0..=90.0).contains(&north) {
            return Err(bad("south and north must lie within −90…90°".into()));
        }
        if south >= north {
            return Err(bad(format!(
                "south ({south}) must be less than north ({north})"
            )));
        }
        if !(-360.0..=360.0).contains(&west) || !(-360.0..=360.0).contains(&east) {
            return Err(bad("west and east must lie within −360…360°".into()));
        }
        // West above east is read as a box across the antimeridian only when that box is
        // narrower than half the Earth: 170,…,-170 is 20° wide; 10,…,5 is refused rather than
        // read as 355° of longitude.
        if west >= east && west - east < 180.0 {
            return Err(bad(format!(
                "west ({west}) must be less than east ({east}); a box across the antimeridian is written west > east, e.g. 170,40,-170,60"
            )));
        }
        if r.width() > 360.0 {
            return Err(bad(format!(
                "the box spans {}° of longitude, more than the Earth's 360°",
                r.width()
            )));
        }
        Ok(r)
    }

    /// Width in longitude, degrees (across the antimeridian when west > east).
    pub fn width(&self) -> f64 {
        if self.west < self.east {
            self.east - self.west
        } else {
            self.east + 360.0 - self.west
        }
    }

    /// True when a point's latitude lies in the box and its longitude, taken modulo 360°, too.
    fn holds(&self, lon: f64, lat: f64) -> bool {
        (self.south..=self.north).contains(&lat)
            && (lon - self.west).rem_euclid(360.0) <= self.width()
    }
}

/// True when a lat/lon cell centred at `lat` with rows `dlat` apart reaches past a pole: a row
/// centred at ±90° on a global grid, whose cells no GeoTIFF can place (their edge would lie at
/// ±91.25° on a 2.5° grid) and which are one point each.
pub fn passes_pole(lat: f64, dlat: f64) -> bool {
    lat.abs() + dlat.abs() / 2.0 > 90.0 + 1e-9
}

/// Rows of a lat/lon grid whose cells reach past a pole; 0 on projected grids.
pub fn pole_rows(grid: &Grid) -> usize {
    if grid.is_projected() {
        return 0;
    }
    let gt = grid.georef.geotransform;
    (0..grid.ny)
        .filter(|&r| passes_pole(gt[3] + (r as f64 + 0.5) * gt[5], gt[5]))
        .count()
}

/// The box a lat/lon grid covers, edges of its cells, for a window of the whole grid.
pub fn whole(grid: &Grid) -> Option<Region> {
    if grid.is_projected() {
        return None;
    }
    let gt = grid.georef.geotransform;
    Region::new(
        [gt[0], -90.0, gt[0] + grid.nx as f64 * gt[1], 90.0],
        "the model grid",
    )
    .ok()
}

/// The model grid a window was cut from, for the manifest.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ModelGrid {
    /// Columns.
    pub columns: usize,
    /// Rows.
    pub rows: usize,
    /// GDAL geotransform (outer corner of the top-left cell).
    pub geotransform: [f64; 6],
    /// One line: size, projection and spacing.
    pub description: String,
}

/// The block of the model grid's rows and columns that a [`Region`] reads.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Window {
    /// The box asked for.
    pub region: Region,
    /// First row of the model grid in the window (0 is the north edge).
    pub first_row: usize,
    /// Rows in the window.
    pub rows: usize,
    /// First column of the model grid in the window (0 is the west edge).
    pub first_col: usize,
    /// Columns in the window; on a grid going around the Earth they may run past the model
    /// grid's last column and continue with its first.
    pub cols: usize,
    /// True when the window's columns continue across the model grid's seam.
    pub wraps: bool,
    /// Degrees added to the model grid's longitudes (a multiple of 360) so the window's start in
    /// the box's own longitudes.
    pub lon_shift_deg: f64,
    /// The grid the window was cut from.
    pub model_grid: ModelGrid,
}

impl Window {
    /// The window of `grid` that covers `region`; `field` names where the region was given.
    pub fn of(region: Region, grid: &Grid, field: &str) -> Result<Self, RegionError> {
        let misses = |what: String| {
            let (w, so, e, n) = grid.lonlat_bounds();
            RegionError::Misses {
                field: field.into(),
                what: format!(
                    "{region}: {what}; the model grid is {}, cell centres lon {w:.3}…{e:.3}, lat {so:.3}…{n:.3}",
                    grid.describe()
                ),
            }
        };
        let gt = grid.georef.geotransform;
        let (first_row, rows, first_col, cols, lon_shift) = if grid.is_projected() {
            let inside = (0..grid.len()).filter(|&i| region.holds(grid.lon()[i], grid.lat()[i]));
            let mut b = (usize::MAX, 0, usize::MAX, 0);
            for i in inside {
                let (r, c) = (i / grid.nx, i % grid.nx);
                b = (b.0.min(r), b.1.max(r), b.2.min(c), b.3.max(c));
            }
            if b.0 == usize::MAX {
                return Err(misses("no cell centre of the grid lies in the box".into()));
            }
            (b.0, b.1 - b.0 + 1, b.2, b.3 - b.2 + 1, 0.0)
        } else {
            let centre_lat = |r: usize| gt[3] + (r as f64 + 0.5) * gt[5];
            let in_rows: Vec<usize> = (0..grid.ny)
                .filter(|&r| (region.south..=region.north).contains(&centre_lat(r)))
                .filter(|&r| !passes_pole(centre_lat(r), gt[5]))
                .collect();
            let (Some(&first_row), Some(&last_row)) = (in_rows.first(), in_rows.last()) else {
                return Err(misses(
                    "no row of cell centres lies between its south and north edges".into(),
                ));
            };
            let centre_lon = |c: usize| gt[0] + (c as f64 + 0.5) * gt[1];
            let (first_col, cols, lon_shift) = if grid.wraps() {
                // Every column's distance east of the west edge, modulo 360°: the columns in
                // the box run on from the one nearest the west edge, around the seam if need be.
                let east_of_west = |c: usize| (centre_lon(c) - region.west).rem_euclid(360.0);
                let cols = (0..grid.nx)
                    .filter(|&c| east_of_west(c) <= region.width())
                    .count();
                let first = (0..grid.nx)
                    .min_by(|&a, &b| east_of_west(a).total_cmp(&east_of_west(b)))
                    .expect("a grid has columns");
                let shift = region.west + east_of_west(first) - centre_lon(first);
                (first, cols, (shift / 360.0).round() * 360.0)
            } else {
                // A regional grid: the box moved by whole turns onto the grid's longitudes.
                [-360.0, 0.0, 360.0]
                    .iter()
                    .map(|turn| {
                        let (w, e) = (region.west + turn, region.west + region.width() + turn);
                        let cols: Vec<usize> = (0..grid.nx)
                            .filter(|&c| (w..=e).contains(&centre_lon(c)))
                            .collect();
                        (cols.first().copied().unwrap_or(0), cols.len(), 0.0)
                    })
                    .max_by_key(|&(_, n, _)| n)
                    .expect("three candidates")
            };
            if cols == 0 {
                return Err(misses(
                    "no column of cell centres lies between its west and east edges".into(),
                ));
            }
            (
                first_row,
                last_row - first_row + 1,
                first_col,
                cols,
                lon_shift,
            )
        };
        if rows < 2 || cols < 2 {
            return Err(misses(format!(
                "it covers {cols}×{rows} cell centres; at least 2×2 are needed"
            )));
        }
        Ok(Self {
            region,
            first_row,
            rows,
            first_col,
            cols,
            wraps: first_col + cols > grid.nx,
            lon_shift_deg: lon_shift,
            model_grid: ModelGrid {
                columns: grid.nx,
                rows: grid.ny,
                geotransform: gt,
                description: grid.describe(),
            },
        })
    }

    /// The window's cells of a row-major field of `nvar` values per cell on the model grid,
    /// appended to `out` (cleared first).
    pub fn cut_into(&self, full: &[f32], nvar: usize, out: &mut Vec<f32>) {
        let nx = self.model_grid.columns;
        out.clear();
        out.reserve(self.rows * self.cols * nvar);
        for row in self.first_row..self.first_row + self.rows {
            let mut c = self.first_col;
            let mut left = self.cols;
            while left > 0 {
                // The longest run of columns before the seam, copied in one piece.
                let run = left.min(nx - c);
                let start = (row * nx + c) * nvar;
                out.extend_from_slice(&full[start..start + run * nvar]);
                left -= run;
                c = 0;
            }
        }
    }

    /// [`Window::cut_into`] into a new vector.
    pub fn cut(&self, full: &[f32], nvar: usize) -> Vec<f32> {
        let mut out = Vec::new();
        self.cut_into(full, nvar, &mut out);
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Georef};

    /// A 2.5° global grid, columns −180…180 (edges), 73 rows of centres 90…−90 would pass the
    /// poles, so rows are 72 between edges 90 and −90.
    fn global(west_edge: f64) -> Grid {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [west_edge, 2.5, 0.0, 90.0, 0.0, -2.5],
        };
        Grid::new(144, 72, georef).unwrap()
    }

    #[test]
    fn antimeridian_window_on_a_minus_180_grid_has_increasing_longitudes() {
        let g = global(-180.0);
        let r = Region::parse("170,40,-170,60", "--region").unwrap();
        let w = Window::of(r, &g, "--region").unwrap();
        // Centres 171.25, 173.75, …, 188.75: 8 columns; rows with centres 58.75…41.25: 8.
        assert_eq!((w.cols, w.rows), (8, 8));
        assert!(w.wraps);
        let sub = g
            .window(w.first_row, w.rows, w.first_col, w.cols, w.lon_shift_deg)
            .unwrap();
        let lons: Vec<f64> = sub.lon()[..8].to_vec();
        assert_eq!(lons[0], 171.25);
        assert_eq!(lons[7], 188.75);
        assert!(lons.windows(2).all(|p| p[1] > p[0]));
        assert_eq!(sub.georef.geotransform[0], 170.0);
    }

    #[test]
    fn seam_window_on_a_0_360_grid_starts_at_the_west_edge() {
        let g = global(0.0);
        let r = Region::parse("-10,-5,10,5", "region").unwrap();
        let w = Window::of(r, &g, "region").unwrap();
        assert_eq!((w.first_col, w.cols, w.rows), (140, 8, 4));
        assert_eq!(w.lon_shift_deg, -360.0);
        let sub = g
            .window(w.first_row, w.rows, w.first_col, w.cols, w.lon_shift_deg)
            .unwrap();
        assert_eq!(sub.lon()[0], -8.75);
        assert_eq!(sub.lon()[7], 8.75);
        // Cut values follow the same columns: column index as the value.
        let full: Vec<f32> = (0..g.len()).map(|i| (i % g.nx) as f32).collect();
        let cut = w.cut(&full, 1);
        assert_eq!(&cut[..8], &[140.0, 141.0, 142.0, 143.0, 0.0, 1.0, 2.0, 3.0]);
    }

    #[test]
    fn bad_boxes_are_refused_with_the_reason() {
        for (text, says) in [
            ("1,2,3", "four numbers"),
            ("10,50,20,40", "south (50) must be less than north (40)"),
            ("20,40,10,50", "west (20) must be less than east (10)"),
            ("10,40,10,50", "west (10) must be less than east (10)"),
            ("a,40,10,50", "four numbers"),
            ("10,-95,20,50", "−90…90"),
        ] {
            let e = Region::parse(text, "--region").unwrap_err().to_string();
            assert!(e.contains(says), "{text}: {e}");
        }
        let g = global(-180.0);
        let r = Region::parse("10,91.5,20,92", "--region");
        assert!(r.is_err());
        let e = Window::of(
            Region::parse("10,89,20,90", "region").unwrap(),
            &g,
            "region",
        )
        .unwrap_err();
        assert!(!e.from_flag());
        assert!(e.to_string().contains("no row of cell centres"), "{e}");
    }

    #[test]
    fn regional_grid_window_takes_centres_in_the_box() {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [10.0, 0.1, 0.0, 50.0, 0.0, -0.1],
        };
        let g = Grid::new(40, 30, georef).unwrap();
        let w = Window::of(
            Region::parse("10.5,48,11,49", "--region").unwrap(),
            &g,
            "--region",
        )
        .unwrap();
        // Centres 10.55…10.95 (5 columns from 5); 48.95…48.05 (10 rows from 10).
        assert_eq!((w.first_col, w.cols, w.first_row, w.rows), (5, 5, 10, 10));
        assert!(!w.wraps);
        let e = Window::of(
            Region::parse("20,48,21,49", "--region").unwrap(),
            &g,
            "--region",
        )
        .unwrap_err();
        assert!(e.from_flag());
        let text = e.to_string();
        assert!(
            text.contains("--region 20,48,21,49") && text.contains("lon 10.050…13.950"),
            "{text}"
        );
    }

    #[test]
    fn projected_window_is_the_bounding_block_of_the_centres_in_the_box() {
        use crate::geotiff::{Datum, Projected, Projection};
        let gt = [-1_250_000.0, 25_000.0, 0.0, 1_000_000.0, 0.0, -25_000.0];
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
            geotransform: gt,
        };
        let g = Grid::new(100, 80, georef).unwrap();
        let r = Region::parse("-25,42,-15,48", "--region").unwrap();
        let w = Window::of(r, &g, "--region").unwrap();
        let inside = |i: usize| r.holds(g.lon()[i], g.lat()[i]);
        let rows = w.first_row..w.first_row + w.rows;
        let cols = w.first_col..w.first_col + w.cols;
        // Every centre in the box is in the block, and every edge row and column of the block
        // holds one.
        for i in (0..g.len()).filter(|&i| inside(i)) {
            assert!(
                rows.contains(&(i / g.nx)) && cols.contains(&(i % g.nx)),
                "cell {i}"
            );
        }
        for row in [rows.start, rows.end - 1] {
            assert!(cols.clone().any(|c| inside(row * g.nx + c)), "row {row}");
        }
        for col in [cols.start, cols.end - 1] {
            assert!(rows.clone().any(|r| inside(r * g.nx + col)), "col {col}");
        }
        // The projection's origin (20°W, 45°N) is x = y = 0 m by the definition of lat_0 and
        // lon_0 (Snyder 1987, eq. 15-1 to 15-4): between columns 49 and 50 and rows 39 and 40.
        assert!(
            cols.contains(&49) && cols.contains(&50) && rows.contains(&39) && rows.contains(&40)
        );
        let sub = g
            .window(w.first_row, w.rows, w.first_col, w.cols, w.lon_shift_deg)
            .unwrap();
        assert_eq!(
            sub.georef.geotransform[0],
            gt[0] + w.first_col as f64 * gt[1]
        );
        let first = w.first_row * g.nx + w.first_col;
        assert_eq!(
            (sub.lon()[0], sub.lat()[0]),
            (g.lon()[first], g.lat()[first])
        );
        assert_eq!(sub.metric()[0], g.metric()[first]);
    }
}
