//! Polygon layers of where the precipitation type is uncertain, as RFC 7946 GeoJSON:
//! - `transition_zones.geojson`: per scenario, where 10–90 % of the storm's liquid falls as snow
//!   (the mixed zone around the rain–snow line);
//! - `flip_zone.geojson`: where the dominant precipitation type (the largest of snow, ice
//!   pellets, freezing rain and rain, by liquid equivalent) differs between at least two
//!   scenarios.
//!
//! Flip-zone design: one MultiPolygon feature per pattern (type dominant in the model as issued,
//! set of types dominant in some scenario), e.g. "baseline snow; snow, ice pellets and rain
//! occur". Patterns are few (at most 5 × 11), so every polygon keeps a meaning a GIS can colour
//! by, and each feature carries, for every type, the smallest and largest number of scenarios in
//! which it dominates at any of the feature's cells. In a scenario where less than 0.1 mm fell at
//! a cell, that cell has no type in that scenario; a cell missing in any scenario is left out.
//! Flip polygons follow cell edges (0.5 contour of the pattern's 0/1 mask, see `polygons.rs`).

use super::polygons::{band, to_lonlat, Padded};
use super::{write_text_atomic, Kind, WriteError, Written};
use crate::engine::RunResult;
use crate::summarise::types::{Pattern, TypeFlip, TYPES};
use geojson::{Feature, FeatureCollection, Geometry, JsonObject};
use rayon::prelude::*;
use std::path::Path;

/// Snow fraction bounds of the transition zone.
pub const TRANSITION: (f64, f64) = (0.1, 0.9);

pub(crate) fn feature(geometry: &geo::MultiPolygon<f64>, props: JsonObject) -> Feature {
    Feature {
        bbox: None,
        geometry: Some(Geometry::new(geojson::GeometryValue::from(geometry))),
        id: None,
        properties: Some(props),
        foreign_members: None,
    }
}

pub(crate) fn collection(features: Vec<Feature>) -> String {
    FeatureCollection {
        bbox: None,
        features,
        foreign_members: None,
    }
    .to_string()
}

/// Writes `transition_zones.geojson`: one feature per scenario.
pub fn write_transition_zones(dir: &Path, r: &RunResult) -> Result<Written, WriteError> {
    let features: Vec<Feature> = r
        .scenarios
        .par_iter()
        .zip(&r.totals)
        .enumerate()
        .map(|(i, (s, t))| {
            let f = t.snow_fraction();
            let data = Padded::mask(&r.grid, |k| !f[k].is_nan()).at_least(0.5)?;
            let field = Padded::new(&r.grid, &f, -1.0);
            let zone = band(&field, &data, TRANSITION.0, Some(TRANSITION.1))?;
            let mut props = super::scenario_properties(i, s);
            props.insert("snow_fraction_min".into(), TRANSITION.0.into());
            props.insert("snow_fraction_max".into(), TRANSITION.1.into());
            Ok(feature(&to_lonlat(&r.grid, &zone), props))
        })
        .collect::<Result<_, WriteError>>()?;
    let name = "transition_zones.geojson";
    write_text_atomic(dir, name, &collection(features))?;
    Ok(Written {
        file: name.into(),
        kind: Kind::Vector,
        units: "snow fraction 0.1–0.9 (polygons, WGS 84 lon/lat)".into(),
        description: "Mixed-precipitation zone of every scenario: where 10–90 % of the storm's liquid falls as snow; one feature per track offset".into(),
        bands: Vec::new(),
        sha256: None,
    })
}

/// Writes `flip_zone.geojson` (see the module notes for the design).
pub fn write_flip_zone(
    dir: &Path,
    r: &RunResult,
    cells: &[Option<TypeFlip>],
) -> Result<Written, WriteError> {
    let mut patterns: Vec<Pattern> = cells.iter().flatten().map(|(p, _)| *p).collect();
    patterns.sort_unstable();
    patterns.dedup();
    let n = r.scenarios.len();
    let features: Vec<Feature> = patterns
        .par_iter()
        .map(|&pattern| {
            let area = Padded::mask(&r.grid, |i| cells[i].is_some_and(|(p, _)| p == pattern))
                .at_least(0.5)?;
            let mut lo = [u16::MAX; 4];
            let mut hi = [0u16; 4];
            let mut count = 0usize;
            for (_, c) in cells.iter().flatten().filter(|(p, _)| *p == pattern) {
                count += 1;
                for k in 0..4 {
                    lo[k] = lo[k].min(c[k]);
                    hi[k] = hi[k].max(c[k]);
                }
            }
            let (base, set) = pattern;
            let types: Vec<&str> = (0..4)
                .filter(|k| set & (1 << k) != 0)
                .map(|k| TYPES[k])
                .collect();
            let mut props = JsonObject::new();
            props.insert(
                "baseline_type".into(),
                TYPES.get(base).copied().unwrap_or("none").into(),
            );
            props.insert("types".into(), types.join(",").into());
            props.insert("type_count".into(), types.len().into());
            props.insert("cells".into(), count.into());
            props.insert("scenarios".into(), n.into());
            for k in 0..4 {
                props.insert(format!("{}_scenarios_min", TYPES[k]), lo[k].into());
                props.insert(format!("{}_scenarios_max", TYPES[k]), hi[k].into());
            }
            Ok(feature(&to_lonlat(&r.grid, &area), props))
        })
        .collect::<Result<_, WriteError>>()?;
    let name = "flip_zone.geojson";
    write_text_atomic(dir, name, &collection(features))?;
    Ok(Written {
        file: name.into(),
        kind: Kind::Vector,
        units: "scenario counts (polygons, WGS 84 lon/lat)".into(),
        description: "Where the dominant precipitation type differs between scenarios; one feature per (baseline type, set of types) pattern, with the number of scenarios of each type".into(),
        bands: Vec::new(),
        sha256: None,
    })
}
