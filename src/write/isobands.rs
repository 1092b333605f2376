//! Snowfall isobands (filled contours) of the model as issued and of the largest total over all
//! offsets, as RFC 7946 GeoJSON: `snowfall_bands_baseline.geojson`, `snowfall_bands_max.geojson`.
//!
//! One MultiPolygon feature per band `[lower, upper)` of the case's thresholds (in the output
//! units), the last band open above. Bands are contoured with linear interpolation between cell
//! centres and clipped to the cells with data (`polygons.rs`), so adjacent bands share their
//! boundaries and no band covers a missing cell. Each feature carries the `fill` colour and the
//! `label` of its class in the maps' snowfall legend (`render/legend.rs`), for styling in a GIS.

use super::polygons::{band, to_lonlat, Padded};
use super::zones::{collection, feature};
use super::{write_text_atomic, Kind, WriteError, Written};
use crate::grid::Grid;
use crate::render::legend;
use crate::units::Units;
use geojson::{Feature, JsonObject};
use rayon::prelude::*;
use std::path::Path;

/// Isobands of `field` (output units, NaN missing) at `thresholds` (increasing).
pub fn isobands(
    grid: &Grid,
    field: &[f32],
    thresholds: &[f64],
    unit: &str,
) -> Result<Vec<Feature>, WriteError> {
    let data = Padded::mask(grid, |i| !field[i].is_nan()).at_least(0.5)?;
    let below = thresholds.first().copied().unwrap_or(0.0) - 1.0;
    let padded = Padded::new(grid, field, below);
    // Band k is class k + 1 of the maps' snowfall legend (class 0 is "under the first").
    let classes = legend::snow_classes(thresholds, unit);
    thresholds
        .par_iter()
        .enumerate()
        .map(|(k, &lower)| {
            let upper = thresholds.get(k + 1).copied();
            let area = band(&padded, &data, lower, upper)?;
            let mut props = JsonObject::new();
            props.insert("lower".into(), lower.into());
            props.insert(
                "upper".into(),
                upper.map_or(serde_json::Value::Null, Into::into),
            );
            props.insert("units".into(), unit.into());
            let label = match upper {
                Some(_) => classes.labels[k + 1].clone(),
                None => format!("{} {unit} or more", legend::threshold_text(lower)),
            };
            props.insert("label".into(), label.into());
            props.insert("fill".into(), legend::hex(classes.colours[k + 1]).into());
            Ok(feature(&to_lonlat(grid, &area), props))
        })
        .collect()
}

/// Writes one isoband file.
pub fn write_snowfall_bands(
    dir: &Path,
    grid: &Grid,
    name: &str,
    what: &str,
    field_mm: &[f32],
    units: Units,
    thresholds: &[f64],
) -> Result<Written, WriteError> {
    let field: Vec<f32> = field_mm.iter().map(|v| units.snow(*v)).collect();
    let unit = units.snow_unit();
    let features = isobands(grid, &field, thresholds, unit)?;
    write_text_atomic(dir, name, &collection(features))?;
    Ok(Written {
        file: name.into(),
        kind: Kind::Vector,
        units: format!("{unit} (polygons, WGS 84 lon/lat)"),
        description: format!(
            "Snowfall bands of {what} at {} {unit}; one feature per band",
            thresholds
                .iter()
                .map(|t| t.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
        bands: Vec::new(),
        sha256: None,
    })
}
