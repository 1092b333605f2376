//! Where a field's values lie: the grid definition (Section 3) turned into a [`Grid`] in the
//! crate's orientation, and the order that takes GRIB's scanning order to it.
//!
//! Templates read (WMO-No. 306, Vol. I.2, code table 3.1): 3.0 latitude/longitude, 3.20 polar
//! stereographic, 3.30 Lambert conformal. The Earth's shape comes from code table 3.2.
//!
//! Scanning mode (flag table 3.4): bit 1 set = points run −i (east to west); bit 2 set = rows
//! run +j (south to north); bit 3 set = adjacent points are consecutive in j (columns stored
//! one after another); bit 4 set = adjacent rows alternate direction. Whatever the file's order,
//! the grid here has row 0 at the north (top) and column 0 at the west, longitudes in −180…180
//! where the grid allows (a global grid stored 0…360 is rotated to start at −180; a regional
//! grid across the antimeridian keeps longitudes above 180).

use crate::geotiff::{Crs, Datum, Georef, Projected, Projection};
use crate::grid::{Grid, GridError};
use grib::def::grib2::{GridDefinitionTemplate, Section3};
use grib::TryFromSlice;

/// The grid of one field as GRIB describes it (angles in degrees, lengths in metres).
#[derive(Clone, Debug, PartialEq)]
pub enum GridSpec {
    /// Template 3.0.
    LatLon {
        /// Points along a parallel and along a meridian.
        ni: usize,
        /// Points along a meridian.
        nj: usize,
        /// First grid point.
        la1: f64,
        /// First grid point.
        lo1: f64,
        /// Last grid point.
        la2: f64,
        /// Increments.
        di: f64,
        /// Increments.
        dj: f64,
        /// Flag table 3.4.
        scan: u8,
    },
    /// Templates 3.30 (`map` Lambert conformal) and 3.20 (polar stereographic).
    Map {
        /// Points along x.
        ni: usize,
        /// Points along y.
        nj: usize,
        /// First grid point.
        la1: f64,
        /// First grid point.
        lo1: f64,
        /// Grid lengths, m.
        dx: f64,
        /// Grid lengths, m.
        dy: f64,
        /// Flag table 3.4.
        scan: u8,
        /// The projection and its Earth, with no false origin (GRIB places the grid by its
        /// first point).
        crs: Projected,
    },
}

/// A grid template or option this reader does not place.
#[derive(Clone, Debug, PartialEq)]
pub struct Unplaced(pub String);

const MISSING_U32: u32 = u32::MAX;

fn scaled(factor: u8, value: u32) -> Option<f64> {
    (factor != u8::MAX && value != MISSING_U32)
        .then(|| f64::from(value) / 10f64.powi(i32::from(factor)))
}

/// The Earth of code table 3.2, as the datum the grid's CRS is written with (see
/// [`Datum::from_axes`]: ellipsoids other than WGS 84 and GRS 80 are not placed).
fn earth(shape: &grib::def::grib2::template::param_set::EarthShape) -> Result<Datum, Unplaced> {
    let sphere = |r: f64| Datum::Sphere { radius_m: r };
    let given = |f: u8, v: u32, what: &str| {
        scaled(f, v)
            .ok_or_else(|| Unplaced(format!("earth shape {}: {what} is missing", shape.shape)))
    };
    let axes = |a: f64, b: f64| {
        Datum::from_axes(a, b).map_err(|e| Unplaced(format!("earth shape {}, {e}", shape.shape)))
    };
    Ok(match shape.shape {
        0 => sphere(6_367_470.0),
        1 => sphere(given(
            shape.spherical_earth_radius.scale_factor,
            shape.spherical_earth_radius.scaled_value,
            "the radius",
        )?),
        2 => axes(6_378_160.0, 6_378_160.0 * (1.0 - 1.0 / 297.0))?,
        3 | 7 => {
            let k = if shape.shape == 3 { 1000.0 } else { 1.0 };
            axes(
                k * given(
                    shape.major_axis.scale_factor,
                    shape.major_axis.scaled_value,
                    "the major axis",
                )?,
                k * given(
                    shape.minor_axis.scale_factor,
                    shape.minor_axis.scaled_value,
                    "the minor axis",
                )?,
            )?
        }
        4 => axes(6_378_137.0, 6_378_137.0 * (1.0 - 1.0 / 298.257_222_101))?,
        5 => Datum::Wgs84,
        6 => sphere(6_371_229.0),
        8 => sphere(6_371_200.0),
        s => return Err(Unplaced(format!("earth shape {s} of code table 3.2"))),
    })
}

/// Degrees from GRIB's signed micro-degrees.
fn micro(v: i64) -> f64 {
    v as f64 * 1e-6
}

/// Reads Section 3. `Err` names what is not supported (the field can then be skipped).
pub fn grid_spec(sect3: &[u8]) -> Result<GridSpec, Unplaced> {
    if sect3.len() < 14 {
        return Err(Unplaced("Section 3 is shorter than 14 octets".into()));
    }
    let template = u16::from_be_bytes([sect3[12], sect3[13]]);
    if sect3[5] != 0 {
        return Err(Unplaced(format!(
            "grid defined by a predetermined grid number (source {} of code table 3.0)",
            sect3[5]
        )));
    }
    if sect3[10] != 0 {
        return Err(Unplaced(
            "quasi-regular grid (list of points per row)".into(),
        ));
    }
    let s3 = Section3::try_from_slice(sect3, &mut 0)
        .map_err(|_| Unplaced(format!("grid definition template 3.{template}")))?;
    // Octets 7–10: the number of data points, which a regular grid's Ni × Nj must equal.
    let points = u64::from(u32::from_be_bytes([sect3[6], sect3[7], sect3[8], sect3[9]]));
    let check_points = |ni: u32, nj: u32| {
        if u64::from(ni) * u64::from(nj) == points {
            Ok(())
        } else {
            Err(Unplaced(format!(
                "a grid whose Ni × Nj = {ni} × {nj} differs from the {points} data points Section 3 declares (a damaged message)"
            )))
        }
    };
    let check_scan = |scan: u8| {
        if scan & 0x0f != 0 {
            Err(Unplaced(format!(
                "scanning mode {scan:#010b} with offset rows or columns (flag table 3.4 bits 5–8)"
            )))
        } else {
            Ok(scan)
        }
    };
    match &s3.payload.template {
        GridDefinitionTemplate::_3_0(t) => check_points(t.lat_lon.grid.ni, t.lat_lon.grid.nj)?,
        GridDefinitionTemplate::_3_30(t) => check_points(t.ni, t.nj)?,
        GridDefinitionTemplate::_3_20(t) => check_points(t.ni, t.nj)?,
        _ => {}
    }
    match &s3.payload.template {
        GridDefinitionTemplate::_3_0(t) => {
            let g = &t.lat_lon.grid;
            let unit = if g.initial_production_domain_basic_angle == 0
                || g.initial_production_domain_basic_angle == MISSING_U32
            {
                1e-6
            } else {
                f64::from(g.initial_production_domain_basic_angle)
                    / f64::from(g.basic_angle_subdivisions)
            };
            let (ni, nj) = (g.ni as usize, g.nj as usize);
            let la1 = f64::from(g.first_point_lat) * unit;
            let lo1 = f64::from(g.first_point_lon) * unit;
            let la2 = f64::from(g.last_point_lat) * unit;
            let lo2 = f64::from(g.last_point_lon) * unit;
            let scan = check_scan(t.lat_lon.scanning_mode.0)?;
            let di = if t.lat_lon.i_direction_inc != MISSING_U32 {
                f64::from(t.lat_lon.i_direction_inc) * unit
            } else {
                let span = if scan & 0x80 == 0 {
                    lo2 - lo1
                } else {
                    lo1 - lo2
                };
                span.rem_euclid(360.0) / (ni.max(2) - 1) as f64
            };
            let dj = if t.lat_lon.j_direction_inc != MISSING_U32 {
                f64::from(t.lat_lon.j_direction_inc) * unit
            } else {
                (la2 - la1).abs() / (nj.max(2) - 1) as f64
            };
            Ok(GridSpec::LatLon {
                ni,
                nj,
                la1,
                lo1,
                la2,
                di,
                dj,
                scan,
            })
        }
        GridDefinitionTemplate::_3_30(t) => Ok(GridSpec::Map {
            ni: t.ni as usize,
            nj: t.nj as usize,
            la1: micro(i64::from(t.first_point_lat)),
            lo1: micro(i64::from(t.first_point_lon)),
            dx: f64::from(t.dx) * 1e-3,
            dy: f64::from(t.dy) * 1e-3,
            scan: check_scan(t.scanning_mode.0)?,
            crs: Projected {
                datum: earth(&t.earth_shape)?,
                projection: Projection::LambertConformal2Sp {
                    lat_1: micro(i64::from(t.latin1)),
                    lat_2: micro(i64::from(t.latin2)),
                    lat_0: micro(i64::from(t.lad)),
                    lon_0: lon180(micro(i64::from(t.lov))),
                },
                false_easting_m: 0.0,
                false_northing_m: 0.0,
            },
        }),
        GridDefinitionTemplate::_3_20(t) => Ok(GridSpec::Map {
            ni: t.ni as usize,
            nj: t.nj as usize,
            la1: micro(i64::from(t.first_point_lat)),
            lo1: micro(i64::from(t.first_point_lon)),
            dx: f64::from(t.dx) * 1e-3,
            dy: f64::from(t.dy) * 1e-3,
            scan: check_scan(t.scanning_mode.0)?,
            crs: Projected {
                datum: earth(&t.earth_shape)?,
                // The projection centre flag (bit 1 clear: north pole on the plane) chooses the
                // pole; the CRS carries it as the sign of the latitude of true scale.
                projection: Projection::PolarStereographic {
                    lat_ts: if t.projection_centre.0 & 0x80 == 0 {
                        micro(i64::from(t.lad)).abs()
                    } else {
                        -micro(i64::from(t.lad)).abs()
                    },
                    lon_0: lon180(micro(i64::from(t.lov))),
                },
                false_easting_m: 0.0,
                false_northing_m: 0.0,
            },
        }),
        _ => Err(Unplaced(format!("grid definition template 3.{template}"))),
    }
}

/// A longitude in −180…180.
fn lon180(lon: f64) -> f64 {
    let l = (lon + 180.0).rem_euclid(360.0) - 180.0;
    if l == -180.0 && lon > 0.0 {
        180.0
    } else {
        l
    }
}

/// A grid in the crate's orientation and, for every cell (row-major, row 0 north), the index of
/// its value in the field's decoded (scanning-order) values.
#[derive(Clone, Debug)]
pub struct Placement {
    /// The grid.
    pub grid: Grid,
    /// `order[cell]` is the scanning-order index of `cell`.
    pub order: Vec<u32>,
}

impl GridSpec {
    /// Points along x and y.
    pub fn shape(&self) -> (usize, usize) {
        match self {
            Self::LatLon { ni, nj, .. } | Self::Map { ni, nj, .. } => (*ni, *nj),
        }
    }

    fn scan(&self) -> u8 {
        match self {
            Self::LatLon { scan, .. } | Self::Map { scan, .. } => *scan,
        }
    }

    /// Builds the grid and the reordering.
    pub fn place(&self) -> Result<Placement, GridError> {
        let (ni, nj) = self.shape();
        if ni < 2 || nj < 2 {
            return Err(GridError::TooSmall { nx: ni, ny: nj });
        }
        let scan = self.scan();
        let minus_i = scan & 0x80 != 0;
        let plus_j = scan & 0x40 != 0;
        let (grid, rotate) = match self {
            Self::LatLon {
                la1,
                lo1,
                la2,
                di,
                dj,
                ..
            } => {
                let west = if minus_i {
                    lo1 - (ni - 1) as f64 * di
                } else {
                    *lo1
                };
                let north = la1.max(*la2);
                let mut w = (west + 180.0).rem_euclid(360.0) - 180.0;
                let global = ((ni as f64) * di - 360.0).abs() < 0.5 * di;
                let mut rotate = 0usize;
                if global {
                    // First column whose longitude reaches 180°: it and those after wrap.
                    if let Some(c0) = (0..ni).find(|&c| w + c as f64 * di >= 180.0 - 1e-9) {
                        rotate = c0;
                        w = w + c0 as f64 * di - 360.0;
                    }
                }
                let gt = [w - di / 2.0, *di, 0.0, north + dj / 2.0, 0.0, -dj];
                let georef = Georef {
                    crs: Crs::Wgs84Geographic,
                    geotransform: gt,
                };
                (Grid::new(ni, nj, georef)?, rotate)
            }
            Self::Map {
                la1,
                lo1,
                dx,
                dy,
                crs,
                ..
            } => {
                let (x1, y1) = crs
                    .project(lon180(*lo1), *la1)
                    .map_err(GridError::Projection)?;
                let west = if minus_i {
                    x1 - (ni - 1) as f64 * dx
                } else {
                    x1
                };
                let north = if plus_j {
                    y1 + (nj - 1) as f64 * dy
                } else {
                    y1
                };
                let gt = [west - dx / 2.0, *dx, 0.0, north + dy / 2.0, 0.0, -dy];
                let georef = Georef {
                    crs: Crs::Projected(*crs),
                    geotransform: gt,
                };
                (Grid::new(ni, nj, georef)?, 0)
            }
        };
        let n = ni * nj;
        let mut order = vec![0u32; n];
        let j_consecutive = scan & 0x20 != 0;
        let alternate = scan & 0x10 != 0;
        for s in 0..n {
            let (mut i, mut j) = if j_consecutive {
                (s / nj, s % nj)
            } else {
                (s % ni, s / ni)
            };
            if alternate {
                if j_consecutive && i % 2 == 1 {
                    j = nj - 1 - j;
                } else if !j_consecutive && j % 2 == 1 {
                    i = ni - 1 - i;
                }
            }
            let col = if minus_i { ni - 1 - i } else { i };
            let row = if plus_j { nj - 1 - j } else { j };
            let col = (col + ni - rotate) % ni;
            order[row * ni + col] = s as u32;
        }
        Ok(Placement { grid, order })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 3×2 lat/lon grid (columns 10, 11, 12°E; rows 51°N north, 50°N south).
    fn spec(scan: u8) -> GridSpec {
        let (la1, lo1) = (
            if scan & 0x40 != 0 { 50.0 } else { 51.0 },
            if scan & 0x80 != 0 { 12.0 } else { 10.0 },
        );
        GridSpec::LatLon {
            ni: 3,
            nj: 2,
            la1,
            lo1,
            la2: if scan & 0x40 != 0 { 51.0 } else { 50.0 },
            di: 1.0,
            dj: 1.0,
            scan,
        }
    }

    #[test]
    fn every_scanning_mode_lands_on_north_up_west_first() {
        // The file order of the six points per flag table 3.4 (WMO-No. 306), written out by
        // hand as (column, row) of the north-up grid: NW=(0,0) … SE=(2,1).
        let cases: [(u8, [(usize, usize); 6]); 6] = [
            (0x00, [(0, 0), (1, 0), (2, 0), (0, 1), (1, 1), (2, 1)]),
            (0x40, [(0, 1), (1, 1), (2, 1), (0, 0), (1, 0), (2, 0)]),
            (0x80, [(2, 0), (1, 0), (0, 0), (2, 1), (1, 1), (0, 1)]),
            (0x20, [(0, 0), (0, 1), (1, 0), (1, 1), (2, 0), (2, 1)]),
            (0x60, [(0, 1), (0, 0), (1, 1), (1, 0), (2, 1), (2, 0)]),
            // Boustrophedon: the second row runs back east to west.
            (0x10, [(0, 0), (1, 0), (2, 0), (2, 1), (1, 1), (0, 1)]),
        ];
        for (scan, file_order) in cases {
            let p = spec(scan).place().unwrap();
            for (s, (c, r)) in file_order.iter().enumerate() {
                assert_eq!(p.order[r * 3 + c] as usize, s, "scan {scan:#04x}");
            }
            assert_eq!(p.grid.lon()[0], 10.0, "scan {scan:#04x}");
            assert_eq!(p.grid.lat()[0], 51.0, "scan {scan:#04x}");
        }
    }

    #[test]
    fn offset_rows_are_refused() {
        use crate::demo::grib2::{message, BitMap, FieldDef, GridDef};
        // Flag table 3.4 bit 5: points within odd rows are offset (a staggered grid).
        let grid = GridDef::LatLon {
            ni: 3,
            nj: 2,
            la1: 51.0,
            lo1: 10.0,
            di: 1.0,
            dj: 1.0,
            scan: 0x08,
        };
        let v = [1.0f32; 6];
        let m = message(
            &grid,
            &[FieldDef {
                param: (0, 0, 0),
                surface: (1, 0, 0),
                reference: chrono::Utc::now(),
                forecast_hours: 0,
                accumulation_hours: None,
                decimal_scale: 0,
                values: &v,
                bitmap: BitMap::Auto,
            }],
        );
        // Section 1 of the writer is 21 octets, after the 16 of Section 0.
        let len = u32::from_be_bytes(m[37..41].try_into().unwrap()) as usize;
        let e = grid_spec(&m[37..37 + len]).unwrap_err();
        assert!(e.0.contains("offset rows"), "{}", e.0);
    }
}
