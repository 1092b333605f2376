//! Rain–snow lines: the 50 % contour of each scenario's storm-total snow fraction, as GeoJSON
//! (RFC 7946: WGS 84 lon/lat, no "crs" member).
//!
//! Contours come from the `contour` crate (marching squares). The snow fraction is undefined
//! where under 0.1 mm fell; those cells are filled with 0 for the contouring and every vertex
//! whose surrounding cells include an undefined one is cut away, so lines run only where
//! precipitation fell and never trace the edge of the precipitation shield or of the grid.

use super::{write_text_atomic, Kind, WriteError, Written};
use crate::engine::RunResult;
use crate::grid::Grid;
use contour::ContourBuilder;
use geojson::{Feature, FeatureCollection, Geometry, GeometryValue};
use std::path::Path;

/// The snow fraction that separates "mostly snow" from "mostly rain or ice".
pub const RAIN_SNOW_FRACTION: f64 = 0.5;

use super::polygons::DECIMALS;

/// The rain–snow line of every scenario, in scenario order (the scenarios in parallel): the
/// lines file and the maps both draw them.
pub fn rain_snow_lines(r: &RunResult) -> Result<Vec<Vec<Vec<[f64; 2]>>>, WriteError> {
    use rayon::prelude::*;
    r.totals
        .par_iter()
        .map(|t| isolines(&r.grid, &t.snow_fraction(), RAIN_SNOW_FRACTION))
        .collect()
}

/// Lines where `field` crosses `level`, as lon/lat line strings, cut where `field` is undefined.
pub fn isolines(grid: &Grid, field: &[f32], level: f64) -> Result<Vec<Vec<[f64; 2]>>, WriteError> {
    let (nx, ny) = (grid.nx, grid.ny);
    let values: Vec<f64> = field
        .iter()
        .map(|v| if v.is_nan() { 0.0 } else { *v as f64 })
        .collect();
    let lines = ContourBuilder::new(nx, ny, true)
        .lines(&values, &[level])
        .map_err(|e| WriteError::Contour(format!("{e:?}")))?;
    // The builder puts grid value (col, row) at coordinate (col + 0.5, row + 0.5).
    let valid = |x: f64, y: f64| {
        let (c, r) = (x - 0.5, y - 0.5);
        if c < 0.0 || r < 0.0 || c > (nx - 1) as f64 || r > (ny - 1) as f64 {
            return false;
        }
        let (c0, r0) = (c.floor() as usize, r.floor() as usize);
        let (c1, r1) = ((c0 + 1).min(nx - 1), (r0 + 1).min(ny - 1));
        [(c0, r0), (c1, r0), (c0, r1), (c1, r1)]
            .iter()
            .all(|&(cc, rr)| !field[rr * nx + cc].is_nan())
    };
    let mut out = Vec::new();
    for line in lines {
        for ls in line.geometry().0.iter() {
            let mut piece: Vec<[f64; 2]> = Vec::new();
            for p in ls.0.iter() {
                if valid(p.x, p.y) {
                    let (lon, lat) = grid.lonlat_of(p.x - 0.5, p.y - 0.5);
                    piece.push([lon, lat]);
                } else {
                    out.extend(finish(std::mem::take(&mut piece)));
                }
            }
            out.extend(finish(piece));
        }
    }
    Ok(out)
}

/// Makes longitudes continuous, cuts the line where it crosses ±180° (RFC 7946 §3.1.9), brings
/// every piece into −180…180, rounds to 1e-5° and drops repeated points and pieces of one point.
fn finish(mut piece: Vec<[f64; 2]>) -> Vec<Vec<[f64; 2]>> {
    for i in 1..piece.len() {
        let prev = piece[i - 1][0];
        piece[i][0] += 360.0 * ((prev - piece[i][0]) / 360.0).round();
    }
    let strip = |lon: f64| ((lon + 180.0) / 360.0).floor();
    let mut parts: Vec<Vec<[f64; 2]>> = Vec::new();
    let mut cur: Vec<[f64; 2]> = Vec::new();
    for (i, &p) in piece.iter().enumerate() {
        if i > 0 {
            let a = piece[i - 1];
            let (ka, kb) = (strip(a[0]), strip(p[0]));
            if ka != kb {
                // Crossing at the strip boundary between them (one boundary: steps are < 180°).
                let edge = -180.0 + 360.0 * ka.max(kb);
                let t = (edge - a[0]) / (p[0] - a[0]);
                let lat = a[1] + t * (p[1] - a[1]);
                cur.push([edge - 360.0 * ka, lat]);
                parts.push(std::mem::take(&mut cur));
                cur.push([edge - 360.0 * kb, lat]);
            }
        }
        let k = strip(p[0]);
        cur.push([p[0] - 360.0 * k, p[1]]);
    }
    parts.push(cur);
    parts
        .into_iter()
        .map(|part| {
            let mut q: Vec<[f64; 2]> = Vec::with_capacity(part.len());
            for p in part {
                let r = [
                    (p[0] * DECIMALS).round() / DECIMALS,
                    (p[1] * DECIMALS).round() / DECIMALS,
                ];
                if q.last() != Some(&r) {
                    q.push(r);
                }
            }
            q
        })
        .filter(|q| q.len() >= 2)
        .collect()
}

/// Writes `rain_snow_lines.geojson`: one MultiLineString feature per scenario.
pub fn write_rain_snow_lines(
    dir: &Path,
    r: &RunResult,
    lines: &[Vec<Vec<[f64; 2]>>],
) -> Result<Written, WriteError> {
    let mut features = Vec::new();
    for (i, (s, lines)) in r.scenarios.iter().zip(lines).enumerate() {
        let lines = lines.clone();
        let mut props = super::scenario_properties(i, s);
        props.insert("snow_fraction".into(), RAIN_SNOW_FRACTION.into());
        let geometry = Geometry::new(GeometryValue::new_multi_line_string(lines));
        features.push(Feature {
            bbox: None,
            geometry: Some(geometry),
            id: None,
            properties: Some(props),
            foreign_members: None,
        });
    }
    let fc = FeatureCollection {
        bbox: None,
        features,
        foreign_members: None,
    };
    let name = "rain_snow_lines.geojson";
    write_text_atomic(dir, name, &fc.to_string())?;
    Ok(Written {
        file: name.into(),
        kind: Kind::Vector,
        units: "degrees (WGS 84 lon/lat)".into(),
        description: "Rain–snow line of every scenario: where 50 % of the storm's liquid falls as snow; one feature per track offset".into(),
        bands: Vec::new(),
        sha256: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::{Crs, Georef};

    #[test]
    fn line_lies_where_the_field_crosses_the_level() {
        let g = Grid::new(
            10,
            6,
            Georef {
                crs: Crs::Wgs84Geographic,
                geotransform: [0.0, 1.0, 0.0, 6.0, 0.0, -1.0],
            },
        )
        .unwrap();
        // Field = column index / 10: crosses 0.45 halfway between columns 4 and 5, i.e. at
        // cell-centre index 4.5, longitude 5.0.
        let f: Vec<f32> = (0..60).map(|i| (i % 10) as f32 / 10.0).collect();
        let lines = isolines(&g, &f, 0.45).unwrap();
        assert!(!lines.is_empty());
        for l in &lines {
            for p in l {
                assert!((p[0] - 5.0).abs() < 1e-9, "{p:?}");
                assert!(p[1] >= 0.5 - 1e-9 && p[1] <= 5.5 + 1e-9, "{p:?}");
            }
        }
    }

    #[test]
    fn lines_are_cut_at_the_antimeridian() {
        // 179.5°E to 180.5°E (= 179.5°W) at 60°N: one crossing, interpolated to ±180 at 60°N.
        let parts = finish(vec![[179.5, 60.0], [180.5, 60.0], [181.0, 61.0]]);
        assert_eq!(
            parts,
            vec![
                vec![[179.5, 60.0], [180.0, 60.0]],
                vec![[-180.0, 60.0], [-179.5, 60.0], [-179.0, 61.0]]
            ]
        );
        // Longitudes given as −180…180 that jump across the antimeridian are unwrapped first.
        let parts = finish(vec![[179.0, 0.0], [-179.0, 2.0]]);
        assert_eq!(parts.len(), 2);
        assert_eq!(parts[0], vec![[179.0, 0.0], [180.0, 1.0]]);
    }

    #[test]
    fn undefined_cells_cut_the_line() {
        let g = Grid::new(
            10,
            6,
            Georef {
                crs: Crs::Wgs84Geographic,
                geotransform: [0.0, 1.0, 0.0, 6.0, 0.0, -1.0],
            },
        )
        .unwrap();
        let mut f: Vec<f32> = (0..60).map(|i| (i % 10) as f32 / 10.0).collect();
        // Rows 0–2 have no precipitation: the line may only exist in rows 3–5 (lat 2.5…0.5).
        for v in f.iter_mut().take(30) {
            *v = f32::NAN;
        }
        let lines = isolines(&g, &f, 0.45).unwrap();
        assert!(!lines.is_empty());
        for p in lines.iter().flatten() {
            assert!(p[1] <= 2.5 + 1e-9, "{p:?}");
        }
    }
}
