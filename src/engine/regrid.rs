//! A member on another grid: its totals resampled onto the output grid, so that members are
//! compared cell by cell.
//!
//! Every member runs on its own grid (its track offsets are in km, so shifting it there is as
//! right physically as anywhere, and cheaper than resampling its inputs); only what it computed
//! is then carried over, once per member:
//!
//! - **amounts** (liquid, snow liquid, snowfall, ice pellets, freezing rain, water carried to dry
//!   air) by first-order conservative remapping (Jones 1999, the first-order scheme; overlaps
//!   measured by subdivision rather than by its line integrals): a target cell takes the mean of the source cells under it, each weighted by the
//!   share of the target cell's area it covers, so the area-integral of an amount is kept. The
//!   shares are measured by dividing each target cell into n × n equal parts in its own index
//!   space and finding the source cell under each part's centre ([`Remap::new`] says how n is
//!   chosen). A constant field comes out exactly the constant; the area-integral of any field
//!   over a region inside both grids is kept within [`CONSERVATION_TOLERANCE`].
//! - **terrain** and other continuous fields bilinearly ([`Grid::bilinear_at`]) at the target
//!   cell's centre.
//! - **onset** (a step index, not an amount) from the nearest source cell: the source cell under
//!   the target cell's centre. It stays an index into the member's own valid times.
//!
//! Missing data stays missing: a target cell any part of which lies outside the member's grid,
//! or on a missing source cell, is missing (NaN) — never filled, never zero.

use super::RunResult;
use crate::accumulate::Totals;
use crate::grid::Grid;

/// Least number of parts per side a target cell is divided into.
pub const MIN_PARTS: usize = 8;
/// Most parts per side (a target cell 16 times coarser than the source's already gets 64).
pub const MAX_PARTS: usize = 64;
/// Parts per side for each source cell's width that a target cell spans: a coarse target
/// cell then samples every source cell under it about 4 × 4 times.
const PARTS_PER_SOURCE_CELL: f64 = 4.0;

/// The relative error within which the area-integral of an amount over a region inside both
/// grids is kept (measured in this file's tests: below 0.2 % for grids of similar and of 2–3
/// times different spacing, across lat/lon and Lambert conformal; stated with margin).
pub const CONSERVATION_TOLERANCE: f64 = 0.005;

/// One target row's mapping: per cell the number of its parts' entries, the entries, and the
/// source cell under its centre.
type RowMap = (Vec<u32>, Vec<(u32, f32)>, Vec<u32>);

/// How a source grid's cells map onto a target grid's, computed once per member.
pub struct Remap {
    /// Per target cell, its parts' range in `parts` (`starts[j]..starts[j + 1]`); an empty
    /// range marks a target cell not wholly inside the source grid.
    starts: Vec<u32>,
    /// (source cell, share of the target cell's area it covers), the shares of one target cell
    /// adding up to 1.
    parts: Vec<(u32, f32)>,
    /// The source cell under each target cell's centre (`u32::MAX` where none is).
    nearest: Vec<u32>,
    /// Parts per side each target cell was divided into.
    pub parts_per_side: usize,
}

impl Remap {
    /// The mapping from `source` onto `target`. A target cell is divided into n × n parts,
    /// n = 4 × (the target cell's width in source cells), at least [`MIN_PARTS`] and at most
    /// [`MAX_PARTS`], the widths compared by the cells' areas at the two grids' centres.
    pub fn new(source: &Grid, target: &Grid) -> Self {
        use rayon::prelude::*;
        let mid = |g: &Grid| (g.ny / 2) * g.nx + g.nx / 2;
        let ratio = (target.cell_area_km2(mid(target)) / source.cell_area_km2(mid(source))).sqrt();
        let n = ((PARTS_PER_SOURCE_CELL * ratio).ceil() as usize).clamp(MIN_PARTS, MAX_PARTS);
        // Rows in parallel, each a pure function of the two grids, gathered in row order: the
        // mapping is the same whatever the number of threads.
        let rows: Vec<RowMap> = (0..target.ny)
            .into_par_iter()
            .map(|row| {
                let mut counts = Vec::with_capacity(target.nx);
                let mut parts = Vec::with_capacity(target.nx);
                let mut nearest = Vec::with_capacity(target.nx);
                let mut mine = Vec::new();
                for col in 0..target.nx {
                    let j = row * target.nx + col;
                    if shares(source, target, (col, row), n, &mut mine) {
                        parts.extend_from_slice(&mine);
                        counts.push(mine.len() as u32);
                    } else {
                        counts.push(0);
                    }
                    let (lon, lat) = (target.lon()[j], target.lat()[j]);
                    nearest.push(source.cell_at(lon, lat).map_or(u32::MAX, |s| s as u32));
                }
                (counts, parts, nearest)
            })
            .collect();
        let mut starts = Vec::with_capacity(target.len() + 1);
        let mut parts = Vec::with_capacity(rows.iter().map(|r| r.1.len()).sum());
        let mut nearest = Vec::with_capacity(target.len());
        let mut total = 0u32;
        starts.push(total);
        for (c, p, k) in rows {
            for m in c {
                total += m;
                starts.push(total);
            }
            parts.extend(p);
            nearest.extend(k);
        }
        Self {
            starts,
            parts,
            nearest,
            parts_per_side: n,
        }
    }

    /// Number of target cells.
    pub fn len(&self) -> usize {
        self.nearest.len()
    }

    /// True for a target grid without cells (never, for grids built by [`Grid::new`]).
    pub fn is_empty(&self) -> bool {
        self.nearest.is_empty()
    }

    /// How many target cells lie wholly inside the source grid.
    pub fn covered(&self) -> usize {
        self.starts.windows(2).filter(|w| w[1] > w[0]).count()
    }

    /// An amount conservatively remapped: each target cell the area-weighted mean of the
    /// source cells under it; NaN where the cell is not wholly inside the source grid or any
    /// source cell under it is missing.
    pub fn conservative(&self, field: &[f32]) -> Vec<f32> {
        self.starts
            .windows(2)
            .map(|w| {
                let mine = &self.parts[w[0] as usize..w[1] as usize];
                if mine.is_empty() {
                    return f32::NAN;
                }
                mine.iter()
                    .map(|&(s, a)| a as f64 * field[s as usize] as f64)
                    .sum::<f64>() as f32
            })
            .collect()
    }

    /// Onset steps from the source cell under each target centre; 0 (never) where `liquid`,
    /// the remapped amount, is missing, as for a missing cell of a run.
    pub fn onset(&self, onset: &[u32], liquid: &[f32]) -> Vec<u32> {
        self.nearest
            .iter()
            .zip(liquid)
            .map(|(&s, l)| {
                if s == u32::MAX || l.is_nan() {
                    0
                } else {
                    onset[s as usize]
                }
            })
            .collect()
    }

    /// One scenario's totals on the target grid; the counters (cell-steps outside, uncovered
    /// steps, undiagnosed cell-steps) stay the member's own.
    pub fn totals(&self, t: &Totals) -> Totals {
        let liquid = self.conservative(&t.liquid);
        Totals {
            onset: self.onset(&t.onset, &liquid),
            snow_liquid: self.conservative(&t.snow_liquid),
            snowfall: self.conservative(&t.snowfall),
            ice_pellets: self.conservative(&t.ice_pellets),
            freezing_rain: self.conservative(&t.freezing_rain),
            carried: self.conservative(&t.carried),
            liquid,
            outside: t.outside,
            uncovered_steps: t.uncovered_steps,
            undefined: t.undefined,
        }
    }
}

/// The source cells under target cell (`col`, `row`) and the share of its area each covers,
/// from `n` × `n` equal parts, into `out`; false when a part lies outside the source grid.
fn shares(
    source: &Grid,
    target: &Grid,
    (col, row): (usize, usize),
    n: usize,
    out: &mut Vec<(u32, f32)>,
) -> bool {
    out.clear();
    let inv = 1.0 / n as f64;
    for a in 0..n {
        for b in 0..n {
            let c = col as f64 - 0.5 + (b as f64 + 0.5) * inv;
            let r = row as f64 - 0.5 + (a as f64 + 0.5) * inv;
            let (lon, lat) = target.lonlat_of(c, r);
            let Some(s) = source.cell_at(lon, lat) else {
                return false;
            };
            let s = s as u32;
            // Counted in whole parts (exact in f32), divided once at the end.
            match out.iter_mut().find(|p| p.0 == s) {
                Some(p) => p.1 += 1.0,
                None => out.push((s, 1.0)),
            }
        }
    }
    let all = (n * n) as f32;
    out.iter_mut().for_each(|p| p.1 /= all);
    true
}

/// A continuous field on `source` bilinearly interpolated at every cell centre of `target`
/// (NaN outside the source's cell-centre hull or next to a missing source cell).
pub fn bilinear(source: &Grid, target: &Grid, field: &[f32]) -> Vec<f32> {
    (0..target.len())
        .map(|j| {
            source
                .bilinear_at(target.lon()[j], target.lat()[j])
                .map_or(f32::NAN, |b| b.sample(field))
        })
        .collect()
}

/// A member's run carried onto the output grid `target` by `remap` (made from the run's grid
/// onto `target`): its totals per scenario and its terrain resampled, its grid the target; its
/// valid times, track and towns its own.
pub fn onto(mut run: RunResult, target: &Grid, remap: &Remap) -> RunResult {
    run.totals = run.totals.iter().map(|t| remap.totals(t)).collect();
    run.terrain = bilinear(&run.grid, target, &run.terrain);
    run.grid = target.clone();
    run
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Datum, Georef, Projected, Projection};

    fn latlon(west: f64, north: f64, d: (f64, f64), n: (usize, usize)) -> Grid {
        let georef = Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [west, d.0, 0.0, north, 0.0, -d.1],
        };
        Grid::new(n.0, n.1, georef).unwrap()
    }

    fn lambert(x0: f64, y0: f64, d: f64, n: (usize, usize)) -> Grid {
        let georef = Georef {
            crs: Crs::Projected(Projected {
                datum: Datum::Wgs84,
                projection: Projection::LambertConformal2Sp {
                    lat_1: 40.0,
                    lat_2: 50.0,
                    lat_0: 45.0,
                    lon_0: 10.0,
                },
                false_easting_m: 0.0,
                false_northing_m: 0.0,
            }),
            geotransform: [x0, d, 0.0, y0, 0.0, -d],
        };
        Grid::new(n.0, n.1, georef).unwrap()
    }

    /// Σ value × cell area over the cells with a value, km² × unit.
    fn integral(g: &Grid, v: &[f32]) -> f64 {
        v.iter()
            .enumerate()
            .filter(|(_, x)| !x.is_nan())
            .map(|(i, x)| *x as f64 * g.cell_area_km2(i))
            .sum()
    }

    /// A field that is linear in lon and lat inside a lon/lat box and 0 outside: its support
    /// lies inside both grids, so the whole-grid integrals compare the same region.
    fn ramp(g: &Grid, bx: (f64, f64, f64, f64)) -> Vec<f32> {
        (0..g.len())
            .map(|i| {
                let (lo, la) = (g.lon()[i], g.lat()[i]);
                if lo > bx.0 && lo < bx.2 && la > bx.1 && la < bx.3 {
                    (5.0 + 2.0 * (lo - bx.0) + 3.0 * (la - bx.1)) as f32
                } else {
                    0.0
                }
            })
            .collect()
    }

    fn relative_error(source: &Grid, target: &Grid) -> f64 {
        let bx = (8.3, 43.2, 11.7, 46.1);
        let v = ramp(source, bx);
        let r = Remap::new(source, target);
        let out = r.conservative(&v);
        let (a, b) = (integral(source, &v), integral(target, &out));
        (b - a).abs() / a
    }

    #[test]
    fn a_constant_comes_out_exactly_and_the_same_grid_is_the_identity() {
        // A property of any weighted mean whose weights add up to 1 (mathematical fact).
        let s = latlon(6.0, 48.0, (0.15, 0.1), (60, 60));
        let t = lambert(-250_000.0, 180_000.0, 12_000.0, (40, 30));
        let r = Remap::new(&s, &t);
        let out = r.conservative(&vec![7.25; s.len()]);
        assert!(r.covered() > 1000, "{} cells covered", r.covered());
        for (j, v) in out.iter().enumerate() {
            assert!(v.is_nan() || (*v - 7.25).abs() < 1e-5, "cell {j}: {v}");
        }
        let v: Vec<f32> = (0..s.len()).map(|i| i as f32 * 0.37).collect();
        assert_eq!(Remap::new(&s, &s).conservative(&v), v);
    }

    #[test]
    fn the_area_integral_is_kept_within_the_stated_tolerance() {
        // The integral of a field is a property of the field, not of the grid it is on
        // (mathematical fact): remapped conservatively it must stay within the tolerance.
        let s = latlon(6.0, 48.0, (0.15, 0.1), (60, 60));
        let cases = [
            (
                "finer lat/lon, shifted",
                latlon(6.03, 48.04, (0.1, 0.07), (80, 80)),
            ),
            (
                "coarser lat/lon, shifted",
                latlon(5.93, 48.08, (0.37, 0.23), (25, 25)),
            ),
            (
                "Lambert 12 km",
                lambert(-300_000.0, 240_000.0, 12_000.0, (50, 40)),
            ),
            (
                "Lambert 3 km",
                lambert(-300_000.0, 240_000.0, 3_000.0, (200, 160)),
            ),
        ];
        for (what, t) in &cases {
            let e = relative_error(&s, t);
            assert!(e < CONSERVATION_TOLERANCE, "{what}: relative error {e:.2e}");
        }
        // And from a Lambert grid onto lat/lon.
        let e = relative_error(&cases[2].1, &s);
        assert!(e < CONSERVATION_TOLERANCE, "Lambert → lat/lon: {e:.2e}");
    }

    #[test]
    fn the_mapping_is_the_same_on_any_number_of_threads() {
        let s = latlon(6.0, 48.0, (0.15, 0.1), (60, 60));
        let t = lambert(-300_000.0, 240_000.0, 12_000.0, (50, 40));
        let on = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| Remap::new(&s, &t))
        };
        let (a, b) = (on(1), on(3));
        assert_eq!(a.starts, b.starts);
        assert_eq!(a.parts, b.parts);
        assert_eq!(a.nearest, b.nearest);
    }

    #[test]
    fn cells_outside_or_on_missing_data_are_missing_never_zero() {
        let s = latlon(6.0, 48.0, (0.1, 0.1), (20, 20));
        // Half of the target lies east of the source.
        let t = latlon(7.0, 48.0, (0.1, 0.1), (20, 20));
        let r = Remap::new(&s, &t);
        let mut v = vec![1.0; s.len()];
        v[5 * 20 + 15] = f32::NAN;
        let out = r.conservative(&v);
        assert_eq!(r.covered(), 200);
        // Column 9 of the target is column 19 of the source; column 10 lies outside it.
        assert_eq!(out[9], 1.0);
        assert!(out[10].is_nan());
        // Source column 15, row 5 is target column 5, row 5.
        assert!(out[5 * 20 + 5].is_nan());
        assert_eq!(out[5 * 20 + 4], 1.0);
        // Terrain: in row 5, target column 8's centre is inside the source's centres; column 10's beyond.
        let b = bilinear(&s, &t, &vec![250.0; s.len()]);
        assert_eq!(b[5 * 20 + 8], 250.0);
        assert!(b[5 * 20 + 10].is_nan());
    }
}
