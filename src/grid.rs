//! The model grid: cell-centre coordinates and the local metric of every cell.
//!
//! Conventions that trip people, fixed here for the whole crate:
//! - data are row-major, `index = row * nx + col`, row 0 is the **north** edge (as GeoTIFF stores it);
//! - a cell's value belongs to its centre; the geotransform gives the outer corner of the top-left
//!   cell (pixel-is-area), so the centre of cell (col, row) is `gt[0] + (col + 0.5)·gt[1]`,
//!   `gt[3] + (row + 0.5)·gt[5]`;
//! - longitudes and latitudes are WGS 84 degrees, longitude first.
//!
//! The metric (km per degree and the Jacobian from east/north kilometres to grid cells) is computed
//! once per run, so the per-scenario kernel runs no trigonometry.

use crate::geotiff::{Crs, Georef, Projector, WGS84_A, WGS84_F};

/// Kilometres per degree of longitude and of latitude at geodetic latitude `lat_deg` on WGS 84.
///
/// Uses the prime-vertical radius N and the meridional radius M (e.g. Snyder 1987, *Map
/// Projections — A Working Manual*, USGS PP 1395, eqs. 4-18 and 4-20): one degree of longitude
/// spans `N·cos φ·π/180`, one degree of latitude `M·π/180`.
///
/// ```
/// let (kx, ky) = trackswing::grid::km_per_degree(0.0);
/// assert!((kx - 111.319).abs() < 1e-3); // equatorial degree of longitude, a·π/180
/// assert!((ky - 110.574).abs() < 1e-3); // meridional degree at the equator
/// ```
pub fn km_per_degree(lat_deg: f64) -> (f64, f64) {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let phi = lat_deg.to_radians();
    let s2 = phi.sin() * phi.sin();
    let w = (1.0 - e2 * s2).sqrt();
    let n = WGS84_A / w;
    let m = WGS84_A * (1.0 - e2) / (w * w * w);
    let k = std::f64::consts::PI / 180.0 / 1000.0;
    (n * phi.cos() * k, m * k)
}

/// The local metric of one cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CellMetric {
    /// km per degree of longitude at the cell centre.
    pub km_per_deg_lon: f32,
    /// km per degree of latitude at the cell centre.
    pub km_per_deg_lat: f32,
    /// Grid columns per km towards the east.
    pub col_per_km_east: f32,
    /// Grid columns per km towards the north.
    pub col_per_km_north: f32,
    /// Grid rows per km towards the east.
    pub row_per_km_east: f32,
    /// Grid rows per km towards the north (negative on a north-up grid: rows grow southward).
    pub row_per_km_north: f32,
}

/// A spacing for people: rounded to 9 significant digits so 0.39999999999999997 reads 0.4.
fn tidy(v: f64) -> f64 {
    if v == 0.0 || !v.is_finite() {
        return v;
    }
    let k = 10f64.powi(8 - v.abs().log10().floor() as i32);
    (v * k).round() / k
}

/// A model grid with its georeferencing, cell-centre coordinates and per-cell metric.
#[derive(Clone, Debug)]
pub struct Grid {
    /// Columns (west → east).
    pub nx: usize,
    /// Rows (north → south).
    pub ny: usize,
    /// How the grid sits on the Earth; written unchanged into every output GeoTIFF. For a
    /// projected grid the geotransform is in the projection's metres. GRIB2 grids on lat/lon or
    /// on a map projection (templates 3.0, 3.30, 3.20; WMO-No. 306 Vol. I.2) keep their CRS
    /// here, so the layers are written on the grid as it came.
    pub georef: Georef,
    /// The transforms of a projected `georef.crs`; `None` on lat/lon.
    projector: Option<Projector>,
    lon: Vec<f64>,
    lat: Vec<f64>,
    metric: Vec<CellMetric>,
}

/// The cells around a point and their bilinear weights (see [`Grid::bilinear_at`]): cell
/// indices (row-major) with weights in 0…1 summing to 1, north-west, north-east, south-west,
/// south-east. A cell of weight 0 does not count: a point on a cell centre or on the line
/// between two takes its value from those cells alone.
///
/// Missing data: the value at the point is missing (NaN) when any cell of positive weight is
/// missing — a point is never filled from its neighbours' data alone.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bilinear {
    /// (cell index, weight) of the four neighbours.
    pub cells: [(usize, f64); 4],
}

impl Bilinear {
    /// The neighbours that count: those of positive weight.
    pub fn weighted(&self) -> impl Iterator<Item = (usize, f64)> + '_ {
        self.cells.iter().copied().filter(|&(_, w)| w > 0.0)
    }

    /// The weighted sum of `value(slot, cell)` over the neighbours that count (NaN when any is
    /// NaN); `slot` is the neighbour's place in [`Bilinear::cells`], `cell` its cell index.
    pub fn combine(&self, value: impl Fn(usize, usize) -> f64) -> f64 {
        self.cells
            .iter()
            .enumerate()
            .filter(|(_, &(_, w))| w > 0.0)
            .map(|(j, &(i, w))| w * value(j, i))
            .sum()
    }

    /// The field's value at the point (NaN when any neighbour that counts is missing).
    pub fn sample(&self, field: &[f32]) -> f32 {
        self.combine(|_, i| field[i] as f64) as f32
    }

    /// The neighbour of largest weight (the cell centre nearest the point in index space; the
    /// first of equals), for what is a time and not interpolated, such as an onset step.
    pub fn nearest(&self) -> usize {
        self.cells[self.nearest_slot()].0
    }

    /// The place in [`Bilinear::cells`] of [`Bilinear::nearest`].
    pub fn nearest_slot(&self) -> usize {
        (1..4).fold(0, |a, j| {
            if self.cells[j].1 > self.cells[a].1 {
                j
            } else {
                a
            }
        })
    }
}

/// Why a grid cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum GridError {
    /// The geotransform is rotated or has a zero or reversed step.
    #[error("the grid must be north-up with positive column spacing and negative row spacing in its geotransform (got {0:?})")]
    NotNorthUp([f64; 6]),
    /// Fewer than 2×2 cells.
    #[error("the grid has {nx}×{ny} cells; at least 2×2 are needed")]
    TooSmall {
        /// Columns.
        nx: usize,
        /// Rows.
        ny: usize,
    },
    /// The projection could not be set up or does not cover the grid.
    #[error("map projection: {0}")]
    Projection(String),
    /// More cells than any model grid trackswing is meant for (see [`MAX_CELLS`]).
    #[error("the grid has {nx}×{ny} cells, more than the {max} trackswing handles; is the size in the file right?")]
    TooLarge {
        /// Columns.
        nx: usize,
        /// Rows.
        ny: usize,
        /// The limit.
        max: usize,
    },
}

/// The most cells a grid may have: 2²⁶ (67 million), some 2.7 GB for the grid's coordinates and
/// metric alone. A 1 km grid over a continent has about 15 million cells and a 0.1° global grid
/// 6.5 million; anything larger is taken to be a corrupted size field, refused before any
/// allocation.
pub const MAX_CELLS: usize = 1 << 26;

/// A grid of at least 2×2 and at most [`MAX_CELLS`] cells, north-up.
fn check_shape(nx: usize, ny: usize, gt: [f64; 6]) -> Result<(), GridError> {
    if nx < 2 || ny < 2 {
        return Err(GridError::TooSmall { nx, ny });
    }
    if nx.saturating_mul(ny) > MAX_CELLS {
        return Err(GridError::TooLarge {
            nx,
            ny,
            max: MAX_CELLS,
        });
    }
    if gt[2] != 0.0 || gt[4] != 0.0 || gt[1] <= 0.0 || gt[5] >= 0.0 {
        return Err(GridError::NotNorthUp(gt));
    }
    Ok(())
}

/// Distance of the finite differences that give a projected grid's metric, km: small against a
/// grid length, large against rounding of metre coordinates.
const METRIC_STEP_KM: f64 = 0.5;

impl Grid {
    /// Builds the grid and its metric from a georeference: on lat/lon, or on a projected CRS
    /// whose transforms [`Projector`] supports (otherwise [`GridError::Projection`] says why).
    pub fn new(nx: usize, ny: usize, georef: Georef) -> Result<Self, GridError> {
        let gt = georef.geotransform;
        check_shape(nx, ny, gt)?;
        let n = nx * ny;
        let mut lon = Vec::with_capacity(n);
        let mut lat = Vec::with_capacity(n);
        let mut metric = Vec::with_capacity(n);
        match georef.crs {
            Crs::Projected(p) => {
                let pj = Projector::new(&p).map_err(GridError::Projection)?;
                return Self::projected(nx, ny, georef, pj);
            }
            // A model's spherical Earth is taken as WGS 84 for lon/lat, as for GRIB2 grids.
            Crs::Wgs84Geographic | Crs::GeographicSphere { .. } => {
                for row in 0..ny {
                    let la = gt[3] + (row as f64 + 0.5) * gt[5];
                    let (kx, ky) = km_per_degree(la);
                    let m = CellMetric {
                        km_per_deg_lon: kx as f32,
                        km_per_deg_lat: ky as f32,
                        col_per_km_east: (1.0 / (kx * gt[1])) as f32,
                        col_per_km_north: 0.0,
                        row_per_km_east: 0.0,
                        row_per_km_north: (1.0 / (ky * gt[5])) as f32,
                    };
                    for col in 0..nx {
                        lon.push(gt[0] + (col as f64 + 0.5) * gt[1]);
                        lat.push(la);
                        metric.push(m);
                    }
                }
            }
        }
        Ok(Self {
            nx,
            ny,
            georef,
            projector: None,
            lon,
            lat,
            metric,
        })
    }

    /// The grid on a map projection: `georef`'s geotransform is north-up in projected metres
    /// (GDAL's convention, outer corner of the top-left cell). Every cell centre's lon/lat comes
    /// from the inverse projection, and its metric from central differences of the forward
    /// projection over ±[`METRIC_STEP_KM`] east and north of the centre — once per run, so the
    /// shift kernel runs no projection.
    fn projected(nx: usize, ny: usize, georef: Georef, pj: Projector) -> Result<Self, GridError> {
        let gt = georef.geotransform;
        let n = nx * ny;
        let mut lon = Vec::with_capacity(n);
        let mut lat = Vec::with_capacity(n);
        let mut metric = Vec::with_capacity(n);
        let h = METRIC_STEP_KM;
        for row in 0..ny {
            for col in 0..nx {
                let x = gt[0] + (col as f64 + 0.5) * gt[1];
                let y = gt[3] + (row as f64 + 0.5) * gt[5];
                let (lo, la) = pj.inverse(x, y);
                if !(lo.is_finite() && la.is_finite()) {
                    return Err(GridError::Projection(format!(
                        "cell ({col}, {row}) at x = {x} m, y = {y} m has no lon/lat"
                    )));
                }
                let (kx, ky) = km_per_degree(la);
                let (xe, ye) = pj.forward(lo + h / kx, la);
                let (xw, yw) = pj.forward(lo - h / kx, la);
                let (xn, yn) = pj.forward(lo, la + h / ky);
                let (xs, ys) = pj.forward(lo, la - h / ky);
                // Metres per km east / north in projected x and y.
                let (dxe, dye) = ((xe - xw) / (2.0 * h), (ye - yw) / (2.0 * h));
                let (dxn, dyn_) = ((xn - xs) / (2.0 * h), (yn - ys) / (2.0 * h));
                let m = CellMetric {
                    km_per_deg_lon: kx as f32,
                    km_per_deg_lat: ky as f32,
                    col_per_km_east: (dxe / gt[1]) as f32,
                    col_per_km_north: (dxn / gt[1]) as f32,
                    row_per_km_east: (dye / gt[5]) as f32,
                    row_per_km_north: (dyn_ / gt[5]) as f32,
                };
                if ![dxe, dye, dxn, dyn_].iter().all(|v| v.is_finite()) {
                    return Err(GridError::Projection(format!(
                        "no local metric at cell ({col}, {row}), {lo:.4}°E {la:.4}°N"
                    )));
                }
                lon.push(lo);
                lat.push(la);
                metric.push(m);
            }
        }
        Ok(Self {
            nx,
            ny,
            georef,
            projector: Some(pj),
            lon,
            lat,
            metric,
        })
    }

    /// True when the grid is on a map projection rather than lat/lon.
    pub fn is_projected(&self) -> bool {
        self.projector.is_some()
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.nx * self.ny
    }

    /// True when the grid has no cells (never, for a grid built by [`Grid::new`]).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Longitude of every cell centre, degrees.
    pub fn lon(&self) -> &[f64] {
        &self.lon
    }

    /// Latitude of every cell centre, degrees.
    pub fn lat(&self) -> &[f64] {
        &self.lat
    }

    /// The metric of every cell.
    pub fn metric(&self) -> &[CellMetric] {
        &self.metric
    }

    /// True when the grid is on lat/lon and its columns span the full 360° of longitude (a
    /// global grid, on −180…180° or 0…360°): the last column's eastern neighbour is then the
    /// first column, and a point between their centres lies inside the grid.
    ///
    /// ```
    /// use trackswing::geotiff::{Crs, Georef};
    /// let georef = Georef { crs: Crs::Wgs84Geographic, geotransform: [-181.25, 2.5, 0.0, 90.0, 0.0, -2.5] };
    /// assert!(trackswing::grid::Grid::new(144, 72, georef).unwrap().wraps());
    /// ```
    pub fn wraps(&self) -> bool {
        let dx = self.georef.geotransform[1];
        // Half a thousandth of a cell: spacings written with a few decimals (0.1°, 0.25°) sum
        // to 360° within rounding.
        self.projector.is_none() && (self.nx as f64 * dx - 360.0).abs() < 5e-4 * dx
    }

    /// Fractional (column, row) of a lon/lat point, in cell-centre index space (0.0 is the centre
    /// of the first column). `None` when the point lies outside the cell-centre hull. On a
    /// lat/lon grid, longitudes are taken modulo 360° so a point given as −170° falls on a grid
    /// running 150°…230°; on a grid that [wraps](Grid::wraps) the column is in `0 ≤ col < nx`,
    /// a column past `nx − 1` lying between the last column and the first.
    pub fn index_of(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let (col, row) = self.fractional_index(lon, lat);
        let last_col = if self.wraps() { self.nx } else { self.nx - 1 };
        let inside =
            col >= 0.0 && row >= 0.0 && col <= last_col as f64 && row <= (self.ny - 1) as f64;
        inside.then_some((col, row))
    }

    /// The cell whose area holds a lon/lat point (pixel-is-area: a cell reaches half a cell
    /// beyond its centre on every side), as a row-major index; `None` outside the grid's outer
    /// edges. On a grid that [wraps](Grid::wraps) every longitude is inside.
    ///
    /// ```
    /// use trackswing::geotiff::{Crs, Georef};
    /// let georef = Georef { crs: Crs::Wgs84Geographic, geotransform: [0.0, 1.0, 0.0, 2.0, 0.0, -1.0] };
    /// let grid = trackswing::grid::Grid::new(2, 2, georef).unwrap();
    /// // The outer corner of the south-east cell is inside it; a hair beyond is outside.
    /// assert_eq!(grid.cell_at(1.99, 0.01), Some(3));
    /// assert_eq!(grid.cell_at(2.01, 0.01), None);
    /// ```
    pub fn cell_at(&self, lon: f64, lat: f64) -> Option<usize> {
        let (col, row) = self.fractional_index(lon, lat);
        let (c, r) = ((col + 0.5).floor(), (row + 0.5).floor());
        if !(c.is_finite() && r.is_finite()) || r < 0.0 || r >= self.ny as f64 {
            return None;
        }
        let c = if self.wraps() {
            c.rem_euclid(self.nx as f64)
        } else if c < 0.0 || c >= self.nx as f64 {
            return None;
        } else {
            c
        };
        Some(r as usize * self.nx + c as usize)
    }

    /// Area of cell `i` on the Earth, km²: the inverse of the determinant of the metric's
    /// Jacobian from east/north km to columns/rows, so the area at the cell centre times one
    /// cell (exact to first order in the cell's size, for lat/lon and projected grids alike).
    pub fn cell_area_km2(&self, i: usize) -> f64 {
        let m = &self.metric[i];
        let det = m.col_per_km_east as f64 * m.row_per_km_north as f64
            - m.col_per_km_north as f64 * m.row_per_km_east as f64;
        1.0 / det.abs()
    }

    /// Fractional (column, row) of a lon/lat point in cell-centre index space, wherever it
    /// lies (columns of a grid that wraps in `0 ≤ col < nx`).
    fn fractional_index(&self, lon: f64, lat: f64) -> (f64, f64) {
        let gt = self.georef.geotransform;
        let wraps = self.wraps();
        match &self.projector {
            None if wraps => {
                let col = ((lon - gt[0]) / gt[1] - 0.5).rem_euclid(self.nx as f64);
                // rem_euclid may round up to nx itself for a point a hair west of column 0.
                let col = if col >= self.nx as f64 { 0.0 } else { col };
                (col, (lat - gt[3]) / gt[5] - 0.5)
            }
            None => {
                let mut col = (lon - gt[0]) / gt[1] - 0.5;
                let period = 360.0 / gt[1];
                if col < -0.5 && col + period <= self.nx as f64 {
                    col += period;
                } else if col > self.nx as f64 - 0.5 && col - period >= -0.5 {
                    col -= period;
                }
                (col, (lat - gt[3]) / gt[5] - 0.5)
            }
            Some(p) => {
                let (x, y) = p.forward(lon, lat);
                ((x - gt[0]) / gt[1] - 0.5, (y - gt[3]) / gt[5] - 0.5)
            }
        }
    }

    /// The four cell centres around a lon/lat point and their bilinear weights: the one rule
    /// by which every value at a point (towns table, bust table, onsets, sounding) is taken
    /// from the grid. `None` outside the cell-centre hull; on a grid that [wraps](Grid::wraps)
    /// a point east of the last column is interpolated between the last and the first column.
    ///
    /// ```
    /// use trackswing::geotiff::{Crs, Georef};
    /// let georef = Georef { crs: Crs::Wgs84Geographic, geotransform: [0.0, 1.0, 0.0, 2.0, 0.0, -1.0] };
    /// let grid = trackswing::grid::Grid::new(2, 2, georef).unwrap();
    /// // Centres at lon 0.5, 1.5 and lat 1.5, 0.5: a quarter of the way east, half way south.
    /// let b = grid.bilinear_at(0.75, 1.0).unwrap();
    /// assert_eq!(b.sample(&[0.0, 4.0, 8.0, 12.0]), 5.0);
    /// ```
    pub fn bilinear_at(&self, lon: f64, lat: f64) -> Option<Bilinear> {
        let (c, r) = self.index_of(lon, lat)?;
        let (nx, ny) = (self.nx, self.ny);
        let (c0, c1) = if self.wraps() {
            let c0 = (c.floor() as usize).min(nx - 1);
            (c0, (c0 + 1) % nx)
        } else {
            let c0 = (c.floor() as usize).min(nx - 2);
            (c0, c0 + 1)
        };
        let r0 = (r.floor() as usize).min(ny - 2);
        let (fx, fy) = (c - c0 as f64, r - r0 as f64);
        Some(Bilinear {
            cells: [
                (r0 * nx + c0, (1.0 - fx) * (1.0 - fy)),
                (r0 * nx + c1, fx * (1.0 - fy)),
                ((r0 + 1) * nx + c0, (1.0 - fx) * fy),
                ((r0 + 1) * nx + c1, fx * fy),
            ],
        })
    }

    /// Lon/lat of a fractional (column, row) in cell-centre index space.
    pub fn lonlat_of(&self, col: f64, row: f64) -> (f64, f64) {
        let gt = self.georef.geotransform;
        let (x, y) = (gt[0] + (col + 0.5) * gt[1], gt[3] + (row + 0.5) * gt[5]);
        match &self.projector {
            None => (x, y),
            Some(p) => p.inverse(x, y),
        }
    }

    /// True when both grids have the same size and georeference.
    pub fn same_as(&self, other: &Grid) -> bool {
        self.nx == other.nx && self.ny == other.ny && self.georef == other.georef
    }

    /// One line: size, projection and spacing, e.g. for messages and `trackswing inspect`.
    pub fn describe(&self) -> String {
        let gt = self.georef.geotransform;
        match &self.georef.crs {
            Crs::Wgs84Geographic | Crs::GeographicSphere { .. } => format!(
                "{}×{} cells on lat/lon, {}° × {}°, cell centres lon {:.4}…{:.4}, lat {:.4}…{:.4}",
                self.nx,
                self.ny,
                tidy(gt[1]),
                tidy(-gt[5]),
                gt[0] + 0.5 * gt[1],
                gt[0] + (self.nx as f64 - 0.5) * gt[1],
                gt[3] + (self.ny as f64 - 0.5) * gt[5],
                gt[3] + 0.5 * gt[5],
            ),
            Crs::Projected(m) => format!(
                "{}×{} cells of {} m × {} m, {}, x {:.1}…{:.1} m, y {:.1}…{:.1} m",
                self.nx,
                self.ny,
                tidy(gt[1]),
                tidy(-gt[5]),
                m.describe(),
                gt[0],
                gt[0] + self.nx as f64 * gt[1],
                gt[3] + self.ny as f64 * gt[5],
                gt[3],
            ),
        }
    }

    /// The block of `rows` rows from `first_row` and `cols` columns from `first_col` as a grid
    /// of its own, with the geotransform moved to the block's corner. On a grid that
    /// [`Grid::wraps`], columns past the last continue with the first, their longitudes
    /// 360° on, and every longitude is moved by `lon_shift` (a multiple of 360°), so the block's
    /// longitudes increase monotonically (170…190 across the antimeridian). Coordinates and
    /// metric are copied from this grid, not recomputed, so a cell's numbers are the same bits
    /// in the block as in the whole grid.
    pub fn window(
        &self,
        first_row: usize,
        rows: usize,
        first_col: usize,
        cols: usize,
        lon_shift: f64,
    ) -> Result<Grid, GridError> {
        let gt = self.georef.geotransform;
        let geotransform = [
            gt[0] + first_col as f64 * gt[1] + lon_shift,
            gt[1],
            0.0,
            gt[3] + first_row as f64 * gt[5],
            0.0,
            gt[5],
        ];
        check_shape(cols, rows, geotransform)?;
        let n = rows * cols;
        let (mut lon, mut lat, mut metric) = (
            Vec::with_capacity(n),
            Vec::with_capacity(n),
            Vec::with_capacity(n),
        );
        for row in first_row..first_row + rows {
            for j in 0..cols {
                let c = first_col + j;
                let (c, turn) = (c % self.nx, (c / self.nx) as f64 * 360.0);
                let i = row * self.nx + c;
                lon.push(self.lon[i] + turn + lon_shift);
                lat.push(self.lat[i]);
                metric.push(self.metric[i]);
            }
        }
        Ok(Self {
            nx: cols,
            ny: rows,
            georef: Georef {
                crs: self.georef.crs,
                geotransform,
            },
            projector: self.projector.clone(),
            lon,
            lat,
            metric,
        })
    }

    /// The lon/lat box of the cell centres, (west, south, east, north), degrees.
    pub fn lonlat_bounds(&self) -> (f64, f64, f64, f64) {
        let fold = |a: (f64, f64, f64, f64), (lo, la): (&f64, &f64)| {
            (a.0.min(*lo), a.1.min(*la), a.2.max(*lo), a.3.max(*la))
        };
        self.lon.iter().zip(&self.lat).fold(
            (
                f64::INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NEG_INFINITY,
            ),
            fold,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo::{Distance, Geodesic, Point};

    fn demo_grid() -> Grid {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [10.0, 0.1, 0.0, 50.0, 0.0, -0.1],
        };
        Grid::new(40, 30, georef).unwrap()
    }

    #[test]
    fn metric_matches_geodesic_over_one_cell() {
        // Reference: Karney (2013) geodesics as implemented in geo's `Geodesic` (geographiclib-rs).
        for lat in [0.0, 30.0, 45.0, 60.0, 75.0] {
            let (kx, ky) = km_per_degree(lat);
            let d = 0.01;
            let east = Geodesic.distance(Point::new(0.0, lat), Point::new(d, lat)) / 1000.0 / d;
            let north = Geodesic.distance(
                Point::new(0.0, lat - d / 2.0),
                Point::new(0.0, lat + d / 2.0),
            ) / 1000.0
                / d;
            assert!((kx - east).abs() / east < 1e-6, "lat {lat}: {kx} vs {east}");
            assert!(
                (ky - north).abs() / north < 1e-6,
                "lat {lat}: {ky} vs {north}"
            );
        }
    }

    #[test]
    fn index_and_lonlat_are_inverse() {
        let g = demo_grid();
        let (lon, lat) = g.lonlat_of(3.25, 7.5);
        let (c, r) = g.index_of(lon, lat).unwrap();
        assert!((c - 3.25).abs() < 1e-9 && (r - 7.5).abs() < 1e-9);
        assert_eq!(g.lon()[0], 10.05);
        assert!((g.lat()[0] - 49.95).abs() < 1e-12);
        assert!(g.index_of(9.0, 45.0).is_none());
        // One km north is a negative row step on a north-up grid.
        assert!(g.metric()[0].row_per_km_north < 0.0);
    }

    #[test]
    fn rotated_grid_is_refused() {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [10.0, 0.1, 0.01, 50.0, 0.0, -0.1],
        };
        assert!(matches!(
            Grid::new(4, 4, georef),
            Err(GridError::NotNorthUp(_))
        ));
    }
}
