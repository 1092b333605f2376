//! Stage 2, shift: where each cell's storm-attached values come from when the track moves.
//!
//! For a scenario at one step the storm is displaced by a vector D (east, north km) — the
//! scenario's offset turned into the track's local frame at that time. Cell x receives the values
//! found at x − w(r)·D, where r is the distance from x to the displaced low centre and w tapers
//! from 1 inside the core radius to 0 at the outer radius (a cosine taper, smooth in r), so the
//! storm moves while the far field stays put. Values are sampled bilinearly. Ground-attached
//! fields (terrain) are not moved; the 2 m temperature is corrected for the difference between
//! the source and target ground heights in [`crate::diagnose`].
//!
//! The displacement in grid cells uses each cell's precomputed metric ([`crate::grid::CellMetric`]);
//! the distance to the centre uses the same local metric (flat-Earth within the taper region: the
//! error grows with the square of r/R, about 1 % at 700 km; a smooth taper weight tolerates it),
//! while the displaced centre itself is an exact geodesic destination (see
//! [`crate::read::Track::shifted_centre`]).

use crate::grid::{CellMetric, Grid};

pub mod explicit;
pub use explicit::ExplicitShifts;

/// How the displacement is spread around the low centre.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Taper {
    /// Full displacement within this distance of the displaced centre, km.
    pub core_radius_km: f64,
    /// No displacement beyond this distance, km.
    pub outer_radius_km: f64,
}

impl Taper {
    /// Weight of the displacement at distance `r_km` from the displaced centre: 1 inside the core,
    /// `½(1 + cos(π·(r − core)/(outer − core)))` between the radii, 0 outside.
    ///
    /// ```
    /// let t = trackswing::shift::Taper { core_radius_km: 100.0, outer_radius_km: 300.0 };
    /// assert_eq!(t.weight(50.0), 1.0);
    /// assert!((t.weight(200.0) - 0.5).abs() < 1e-6);
    /// assert_eq!(t.weight(400.0), 0.0);
    /// ```
    pub fn weight(&self, r_km: f32) -> f32 {
        let core = self.core_radius_km as f32;
        let outer = self.outer_radius_km as f32;
        if r_km <= core {
            1.0
        } else if r_km >= outer {
            0.0
        } else {
            0.5 * (1.0 + (std::f32::consts::PI * (r_km - core) / (outer - core)).cos())
        }
    }
}

/// One scenario's displacement at one step.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepShift {
    /// Displaced low centre, degrees.
    pub centre_lon: f64,
    /// Displaced low centre, degrees.
    pub centre_lat: f64,
    /// Displacement towards the east, km.
    pub east_km: f64,
    /// Displacement towards the north, km.
    pub north_km: f64,
}

impl StepShift {
    /// No displacement (the model as issued, or a step outside the track).
    pub fn none() -> Self {
        Self {
            centre_lon: 0.0,
            centre_lat: 0.0,
            east_km: 0.0,
            north_km: 0.0,
        }
    }

    /// True when nothing moves.
    pub fn is_none(&self) -> bool {
        self.east_km == 0.0 && self.north_km == 0.0
    }
}

/// Fractional (column, row) from which cell (`col`, `row`) takes its storm-attached values.
#[inline]
pub fn source_index(
    col: usize,
    row: usize,
    lon: f64,
    lat: f64,
    m: &CellMetric,
    shift: &StepShift,
    taper: &Taper,
) -> (f32, f32) {
    let mut dlon = (lon - shift.centre_lon) as f32;
    if dlon > 180.0 {
        dlon -= 360.0;
    } else if dlon < -180.0 {
        dlon += 360.0;
    }
    let de = dlon * m.km_per_deg_lon;
    let dn = (lat - shift.centre_lat) as f32 * m.km_per_deg_lat;
    let w = taper.weight((de * de + dn * dn).sqrt());
    let (e, n) = (w * shift.east_km as f32, w * shift.north_km as f32);
    (
        col as f32 - (m.col_per_km_east * e + m.col_per_km_north * n),
        row as f32 - (m.row_per_km_east * e + m.row_per_km_north * n),
    )
}

/// Bilinear weights of a fractional (`col`, `row`): the top-left neighbour's (column, row) and
/// the fractions towards the next column and row. `None` outside the cell-centre hull.
#[inline]
pub fn bilinear_weights(grid: &Grid, col: f32, row: f32) -> Option<(usize, usize, f32, f32)> {
    let (nx, ny) = (grid.nx, grid.ny);
    if !(col >= 0.0 && row >= 0.0 && col <= (nx - 1) as f32 && row <= (ny - 1) as f32) {
        return None;
    }
    let i0 = (col as usize).min(nx - 2);
    let j0 = (row as usize).min(ny - 2);
    Some((i0, j0, col - i0 as f32, row - j0 as f32))
}

/// Bilinear sample of variable `var` of `nvar` interleaved values at precomputed weights.
#[inline]
pub fn sample_one(
    columns: &[f32],
    nvar: usize,
    nx: usize,
    (i0, j0, fx, fy): (usize, usize, f32, f32),
    var: usize,
) -> f32 {
    let at = |di: usize, dj: usize| columns[((j0 + dj) * nx + i0 + di) * nvar + var];
    let top = if fx > 0.0 {
        at(0, 0) + fx * (at(1, 0) - at(0, 0))
    } else {
        at(0, 0)
    };
    if fy > 0.0 {
        let bottom = if fx > 0.0 {
            at(0, 1) + fx * (at(1, 1) - at(0, 1))
        } else {
            at(0, 1)
        };
        top + fy * (bottom - top)
    } else {
        top
    }
}

/// Bilinear sample of all `nvar` interleaved values at fractional (`col`, `row`) into `out`.
/// Returns false (and leaves `out` untouched) when the point lies outside the cell-centre hull.
/// Neighbours with zero weight are not read, so a point exactly on a cell takes that cell's
/// values unchanged even next to missing data.
#[inline]
pub fn sample_bilinear(
    columns: &[f32],
    nvar: usize,
    grid: &Grid,
    col: f32,
    row: f32,
    out: &mut [f32],
) -> bool {
    match bilinear_weights(grid, col, row) {
        Some(w) => {
            sample_at(columns, nvar, grid.nx, w, out);
            true
        }
        None => false,
    }
}

/// [`sample_bilinear`] at precomputed weights; written as straight loops over the variables so
/// the compiler vectorises them.
#[inline]
pub fn sample_at(
    columns: &[f32],
    nvar: usize,
    nx: usize,
    (i0, j0, fx, fy): (usize, usize, f32, f32),
    out: &mut [f32],
) {
    let base = |di: usize, dj: usize| ((j0 + dj) * nx + i0 + di) * nvar;
    let out = &mut out[..nvar];
    let a = &columns[base(0, 0)..base(0, 0) + nvar];
    match (fx > 0.0, fy > 0.0) {
        (false, false) => out.copy_from_slice(a),
        (true, false) => {
            let b = &columns[base(1, 0)..base(1, 0) + nvar];
            for v in 0..nvar {
                out[v] = a[v] + fx * (b[v] - a[v]);
            }
        }
        (false, true) => {
            let c = &columns[base(0, 1)..base(0, 1) + nvar];
            for v in 0..nvar {
                out[v] = a[v] + fy * (c[v] - a[v]);
            }
        }
        (true, true) => {
            let b = &columns[base(1, 0)..base(1, 0) + nvar];
            let c = &columns[base(0, 1)..base(0, 1) + nvar];
            let d = &columns[base(1, 1)..base(1, 1) + nvar];
            for v in 0..nvar {
                let top = a[v] + fx * (b[v] - a[v]);
                let bottom = c[v] + fx * (d[v] - c[v]);
                out[v] = top + fy * (bottom - top);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Georef};

    fn grid() -> Grid {
        Grid::new(
            5,
            4,
            Georef {
                crs: Crs::Wgs84Geographic,
                geotransform: [0.0, 1.0, 0.0, 4.0, 0.0, -1.0],
            },
        )
        .unwrap()
    }

    #[test]
    fn bilinear_reproduces_a_plane_and_refuses_outside() {
        let g = grid();
        // Two variables per cell: a plane 2·col + 3·row + 1, and a constant.
        let mut cols = Vec::new();
        for r in 0..4 {
            for c in 0..5 {
                cols.push(2.0 * c as f32 + 3.0 * r as f32 + 1.0);
                cols.push(7.0);
            }
        }
        let mut out = [0.0f32; 2];
        assert!(sample_bilinear(&cols, 2, &g, 1.25, 2.5, &mut out));
        assert!((out[0] - (2.0 * 1.25 + 3.0 * 2.5 + 1.0)).abs() < 1e-5);
        assert!((out[1] - 7.0).abs() < 1e-6);
        assert!(sample_bilinear(&cols, 2, &g, 4.0, 3.0, &mut out));
        assert_eq!(out[0], 2.0 * 4.0 + 3.0 * 3.0 + 1.0);
        assert!(!sample_bilinear(&cols, 2, &g, -0.01, 1.0, &mut out));
        assert!(!sample_bilinear(&cols, 2, &g, 1.0, 3.01, &mut out));
        assert!(!sample_bilinear(&cols, 2, &g, f32::NAN, 1.0, &mut out));
    }

    #[test]
    fn exact_cell_ignores_missing_neighbours() {
        let g = grid();
        let mut cols = vec![1.0f32; 20];
        cols[1] = f32::NAN;
        let mut out = [0.0f32; 1];
        assert!(sample_bilinear(&cols, 1, &g, 0.0, 0.0, &mut out));
        assert_eq!(out[0], 1.0);
        assert!(sample_bilinear(&cols, 1, &g, 0.5, 0.0, &mut out));
        assert!(out[0].is_nan(), "missing data must stay missing");
    }

    #[test]
    fn taper_is_continuous_and_monotone() {
        let t = Taper {
            core_radius_km: 200.0,
            outer_radius_km: 800.0,
        };
        let mut prev = 1.0;
        for k in 0..1000 {
            let w = t.weight(k as f32);
            assert!(w <= prev + 1e-7 && (prev - w) < 0.01);
            prev = w;
        }
    }

    #[test]
    fn zero_shift_keeps_the_cell() {
        let g = grid();
        let m = g.metric()[7];
        let t = Taper {
            core_radius_km: 1.0,
            outer_radius_km: 2.0,
        };
        let (c, r) = source_index(2, 1, g.lon()[7], g.lat()[7], &m, &StepShift::none(), &t);
        assert_eq!((c, r), (2.0, 1.0));
    }
}
