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

use crate::geotiff::{Crs, Georef};

/// WGS 84 semi-major axis, m (NIMA TR8350.2, table 3.1).
pub const WGS84_A: f64 = 6_378_137.0;
/// WGS 84 flattening (NIMA TR8350.2, table 3.1).
pub const WGS84_F: f64 = 1.0 / 298.257_223_563;

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

/// A model grid with its georeferencing, cell-centre coordinates and per-cell metric.
#[derive(Clone, Debug)]
pub struct Grid {
    /// Columns (west → east).
    pub nx: usize,
    /// Rows (north → south).
    pub ny: usize,
    /// How the grid sits on the Earth; written unchanged into every output GeoTIFF.
    pub georef: Georef,
    lon: Vec<f64>,
    lat: Vec<f64>,
    metric: Vec<CellMetric>,
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
}

impl Grid {
    /// Builds the grid and its metric from a GeoTIFF georeference.
    pub fn new(nx: usize, ny: usize, georef: Georef) -> Result<Self, GridError> {
        if nx < 2 || ny < 2 {
            return Err(GridError::TooSmall { nx, ny });
        }
        let gt = georef.geotransform;
        if gt[2] != 0.0 || gt[4] != 0.0 || gt[1] <= 0.0 || gt[5] >= 0.0 {
            return Err(GridError::NotNorthUp(gt));
        }
        let n = nx * ny;
        let mut lon = Vec::with_capacity(n);
        let mut lat = Vec::with_capacity(n);
        let mut metric = Vec::with_capacity(n);
        match georef.crs {
            Crs::Wgs84Geographic => {
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
            lon,
            lat,
            metric,
        })
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

    /// Fractional (column, row) of a lon/lat point, in cell-centre index space (0.0 is the centre
    /// of the first column). `None` when the point lies outside the cell-centre hull.
    pub fn index_of(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let gt = self.georef.geotransform;
        match self.georef.crs {
            Crs::Wgs84Geographic => {
                let col = (lon - gt[0]) / gt[1] - 0.5;
                let row = (lat - gt[3]) / gt[5] - 0.5;
                let inside = col >= 0.0
                    && row >= 0.0
                    && col <= (self.nx - 1) as f64
                    && row <= (self.ny - 1) as f64;
                inside.then_some((col, row))
            }
        }
    }

    /// Lon/lat of a fractional (column, row) in cell-centre index space.
    pub fn lonlat_of(&self, col: f64, row: f64) -> (f64, f64) {
        let gt = self.georef.geotransform;
        match self.georef.crs {
            Crs::Wgs84Geographic => (gt[0] + (col + 0.5) * gt[1], gt[3] + (row + 0.5) * gt[5]),
        }
    }

    /// True when both grids have the same size and georeference.
    pub fn same_as(&self, other: &Grid) -> bool {
        self.nx == other.nx && self.ny == other.ny && self.georef == other.georef
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
