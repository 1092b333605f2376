//! Where a step is wet, and which cells a scenario step can pass over: the wet-cell index of a
//! step ([`WetRows`]) and, per scenario step, the dry screen (`DryScreen`) that skips cells
//! whose source point cannot come near any wet cell — exact, and most cell-steps are dry.

use crate::grid::Grid;
use crate::shift::StepShift;
use rayon::prelude::*;

/// Where a step's precipitation is not zero (or is missing): the engine passes over a cell
/// without sampling it when no source point the shift can give it comes near any such cell,
/// which is exact (such a cell is dry in that scenario) and saves the sampling of the dry
/// majority of cell-steps.
#[derive(Clone, Debug)]
pub struct WetRows {
    /// First and last column with precipitation of each row; `(u32::MAX, 0)` when none.
    spans: Vec<(u32, u32)>,
    /// Summed-area table of the wet cells, (nx + 1) × (ny + 1): entry (r, c) counts the wet
    /// cells in rows above r and columns left of c, so any rectangle's count takes four reads.
    sat: Vec<u32>,
    /// Per cell (column i, row j): 1 when any of the bilinear neighbours (i, j), (i + 1, j),
    /// (i, j + 1), (i + 1, j + 1) is wet, so a source point whose top-left neighbour is a 0
    /// samples exactly zero precipitation.
    near: Vec<u8>,
    pub(super) nx: usize,
}

impl WetRows {
    /// The wet cells of interleaved `columns` (`nvar` values per cell, precipitation at
    /// `precip`) on a grid `nx` cells wide.
    pub fn of(columns: &[f32], nvar: usize, precip: usize, nx: usize) -> Self {
        let ny = columns.len() / (nx * nvar);
        let w = nx + 1;
        let wet = |i: usize, j: usize| columns[(j * nx + i) * nvar + precip] != 0.0;
        // Rows in parallel: each row's running count (into the table's next row), its span and
        // its cells' neighbourhood flags; then the rows' counts are summed down the columns.
        let mut sat = vec![0u32; w * (ny + 1)];
        let mut near = vec![0u8; nx * ny];
        let spans: Vec<(u32, u32)> = sat[w..]
            .par_chunks_mut(w)
            .zip(near.par_chunks_mut(nx))
            .enumerate()
            .map(|(j, (counts, near))| {
                let mut run = 0u32;
                let (mut first, mut last) = (u32::MAX, 0u32);
                let j1 = (j + 1).min(ny - 1);
                for i in 0..nx {
                    if wet(i, j) {
                        run += 1;
                        first = first.min(i as u32);
                        last = i as u32;
                    }
                    counts[i + 1] = run;
                    let i1 = (i + 1).min(nx - 1);
                    near[i] = u8::from(wet(i, j) || wet(i1, j) || wet(i, j1) || wet(i1, j1));
                }
                (first, last)
            })
            .collect();
        for r in 1..=ny {
            let (above, here) = sat.split_at_mut(r * w);
            for (h, a) in here[..w].iter_mut().zip(&above[(r - 1) * w..]) {
                *h += *a;
            }
        }
        Self {
            spans,
            sat,
            near,
            nx,
        }
    }

    /// False when every bilinear neighbour of a source point with top-left neighbour (`i`, `j`)
    /// is dry.
    #[inline]
    pub(super) fn near(&self, i: usize, j: usize) -> bool {
        self.near[j * self.nx + i] != 0
    }

    /// Wet cells in rows `r0..=r1` and columns `c0..=c1`.
    #[inline]
    fn count(&self, r0: usize, r1: usize, c0: usize, c1: usize) -> u32 {
        let w = self.nx + 1;
        let s = &self.sat;
        s[(r1 + 1) * w + c1 + 1]
            .wrapping_sub(s[r0 * w + c1 + 1])
            .wrapping_sub(s[(r1 + 1) * w + c0])
            .wrapping_add(s[r0 * w + c0])
    }

    /// The hull of the wet spans of rows `rows`, widened by `widen` columns; `None` when all
    /// those rows are dry.
    fn hull(&self, rows: std::ops::RangeInclusive<usize>, widen: usize) -> Option<(usize, usize)> {
        let (lo, hi) = self.spans[rows]
            .iter()
            .fold((u32::MAX, 0), |(lo, hi), &(a, b)| (lo.min(a), hi.max(b)));
        (lo <= hi).then(|| ((lo as usize).saturating_sub(widen), hi as usize + widen))
    }
}

/// How far, in columns and rows, a source point can lie from its cell under `shift`: the
/// displacement's components times the largest columns and rows per km anywhere on the grid
/// (the taper weight is at most 1), plus one for the bilinear neighbour and rounding.
fn reach(grid_reach: &GridReach, shift: &StepShift) -> (usize, usize) {
    let (e, n) = (shift.east_km.abs(), shift.north_km.abs());
    let cols = e * grid_reach.cols_per_km_east + n * grid_reach.cols_per_km_north;
    let rows = e * grid_reach.rows_per_km_east + n * grid_reach.rows_per_km_north;
    (cols.ceil() as usize + 1, rows.ceil() as usize + 1)
}

/// Where, relative to its cell, a source point can lie under `shift`: (columns to the left,
/// columns to the right, rows above, rows below) of the cell, the bilinear neighbour and a
/// margin for rounding included. The source lies at x − w·D with the taper weight w in 0–1, so
/// it stays on the side of the cell the displacement points away from: a box one-sided along
/// the shift, where [`reach`] is symmetric. The metric terms range over the grid's intervals.
fn reach_box(grid_reach: &GridReach, shift: &StepShift) -> (usize, usize, usize, usize) {
    let (e, n) = (shift.east_km, shift.north_km);
    // The interval of a·e + b·n over a ∈ [a0, a1], b ∈ [b0, b1], times w in 0–1 (so zero is
    // always in it).
    let span = |(a0, a1): (f64, f64), (b0, b1): (f64, f64)| {
        let (x0, x1) = if e >= 0.0 {
            (a0 * e, a1 * e)
        } else {
            (a1 * e, a0 * e)
        };
        let (y0, y1) = if n >= 0.0 {
            (b0 * n, b1 * n)
        } else {
            (b1 * n, b0 * n)
        };
        ((x0 + y0).min(0.0), (x1 + y1).max(0.0))
    };
    let (c_lo, c_hi) = span(grid_reach.col_east, grid_reach.col_north);
    let (r_lo, r_hi) = span(grid_reach.row_east, grid_reach.row_north);
    // The source column is c − d with d in [c_lo, c_hi]; it reads its column and the next.
    (
        c_hi.ceil() as usize + 1,
        (-c_lo).ceil() as usize + 2,
        r_hi.ceil() as usize + 1,
        (-r_lo).ceil() as usize + 2,
    )
}

/// A grid's metric terms, once per run: the largest magnitudes and the signed ranges.
#[derive(Clone, Copy, Debug)]
pub struct GridReach {
    cols_per_km_east: f64,
    cols_per_km_north: f64,
    rows_per_km_east: f64,
    rows_per_km_north: f64,
    col_east: (f64, f64),
    col_north: (f64, f64),
    row_east: (f64, f64),
    row_north: (f64, f64),
}

impl GridReach {
    /// Of `grid`.
    pub fn of(grid: &Grid) -> Self {
        let widen = |(lo, hi): (f64, f64), v: f32| (lo.min(f64::from(v)), hi.max(f64::from(v)));
        let empty = (f64::INFINITY, f64::NEG_INFINITY);
        grid.metric().iter().fold(
            GridReach {
                cols_per_km_east: 0.0,
                cols_per_km_north: 0.0,
                rows_per_km_east: 0.0,
                rows_per_km_north: 0.0,
                col_east: empty,
                col_north: empty,
                row_east: empty,
                row_north: empty,
            },
            |r, m| GridReach {
                cols_per_km_east: r.cols_per_km_east.max(f64::from(m.col_per_km_east.abs())),
                cols_per_km_north: r.cols_per_km_north.max(f64::from(m.col_per_km_north.abs())),
                rows_per_km_east: r.rows_per_km_east.max(f64::from(m.row_per_km_east.abs())),
                rows_per_km_north: r.rows_per_km_north.max(f64::from(m.row_per_km_north.abs())),
                col_east: widen(r.col_east, m.col_per_km_east),
                col_north: widen(r.col_north, m.col_per_km_north),
                row_east: widen(r.row_east, m.row_per_km_east),
                row_north: widen(r.row_north, m.row_per_km_north),
            },
        )
    }
}

/// For one scenario step: per row, the columns that must be sampled; any other cell is certainly
/// dry in this scenario step and its source point lies inside the grid.
pub(super) struct DryScreen<'a> {
    wet: [Option<&'a WetRows>; 2],
    reach: (usize, usize),
    /// [`reach_box`] of the shift.
    boxed: (usize, usize, usize, usize),
    nx: usize,
    ny: usize,
    row: usize,
    /// For `row`: every column must be sampled (`None`), or those of the wet hull.
    hull: Option<Option<(usize, usize)>>,
}

impl<'a> DryScreen<'a> {
    pub(super) fn new(
        grid: &Grid,
        grid_reach: &GridReach,
        wet: [Option<&'a WetRows>; 2],
        shift: &StepShift,
    ) -> Self {
        Self {
            wet,
            reach: reach(grid_reach, shift),
            boxed: reach_box(grid_reach, shift),
            nx: grid.nx,
            ny: grid.ny,
            row: usize::MAX,
            hull: None,
        }
    }

    /// True when cell (`col`, `row`) is certainly dry in this scenario step: every source
    /// point the shift can give it lies inside the grid and away from all precipitation.
    #[cfg(test)]
    pub(super) fn is_dry(&mut self, col: usize, row: usize) -> bool {
        let (spans, n) = self.open_spans(row);
        !spans[..n].iter().any(|&(a, b)| (a..b).contains(&col)) || self.boxed_dry(col, row)
    }

    /// The columns of `row` that the first stage (the rows' wet hull widened by the reach)
    /// cannot pass over, as up to three sorted, disjoint ranges `[a, b)`: the west margin, the
    /// hull, the east margin. Every other cell of the row is certainly dry.
    #[inline]
    pub(super) fn open_spans(&mut self, row: usize) -> ([(usize, usize); 3], usize) {
        let (rc, rr) = self.reach;
        let nx = self.nx;
        if row != self.row {
            self.row = row;
            self.hull = (row >= rr && row + rr < self.ny).then(|| {
                let rows = row - rr..=row + rr;
                self.wet
                    .iter()
                    .flatten()
                    .filter_map(|w| w.hull(rows.clone(), rc))
                    .reduce(|(a, b), (c, d)| (a.min(c), b.max(d)))
            });
        }
        let mut parts = match self.hull {
            // Rows within reach of the north or south edge: always sampled.
            None => [(0, nx), (nx, nx), (nx, nx)],
            Some(hull) => [
                (0, rc.min(nx)),
                hull.map_or((nx, nx), |(lo, hi)| (lo.min(nx), (hi + 1).min(nx))),
                (nx.saturating_sub(rc), nx),
            ],
        };
        parts.sort_unstable();
        let mut out = [(0, 0); 3];
        let mut n = 0;
        for (a, b) in parts {
            if a >= b {
                continue;
            }
            if n > 0 && a <= out[n - 1].1 {
                out[n - 1].1 = out[n - 1].1.max(b);
            } else {
                out[n] = (a, b);
                n += 1;
            }
        }
        (out, n)
    }

    /// The second stage, for a cell the first could not pass over: true when no wet cell lies
    /// in the box its source point can reach, and that box lies inside the grid.
    #[inline]
    pub(super) fn boxed_dry(&self, col: usize, row: usize) -> bool {
        let (left, right, up, down) = self.boxed;
        col >= left
            && col + right < self.nx
            && row >= up
            && row + down < self.ny
            && self
                .wet
                .iter()
                .flatten()
                .all(|w| w.count(row - up, row + down, col - left, col + right) == 0)
    }
}
