//! A finished run as verification reads it back from its output folder: the scenarios with
//! every axis and weight (from `manifest.json`, or for several members from the band metadata
//! of `snowfall_by_member_scenario.tif`), the per-scenario snowfall stack, the run as issued
//! (`snowfall_baseline.tif`), the grid rebuilt from the GeoTIFFs' georeferencing, the snow unit
//! and thresholds. Nothing of the run is recomputed.

use super::VerifyError;
use crate::geotiff::{read_geotiff, Raster};
use crate::grid::Grid;
use crate::units::Units;
use serde_json::Value;
use std::path::Path;

/// One scenario of the run: its axes, what it is in words and its weight.
#[derive(Clone, Debug, PartialEq)]
pub struct ScenarioAxes {
    /// Offset across the track, km, positive to the left of the motion.
    pub cross_km: f64,
    /// Offset along the track, km, positive ahead.
    pub along_km: f64,
    /// Time offset, h, positive when the storm comes later.
    pub timing_h: f64,
    /// Factor on the precipitation.
    pub intensity: f64,
    /// Temperature bias, K.
    pub warm_bias_k: f64,
    /// The member, in a run of several members or methods.
    pub member: Option<String>,
    /// Precipitation-type method, in a run of several members or methods.
    pub precip_type: Option<String>,
    /// Snow-to-liquid ratio method, in a run of several members or methods.
    pub snow_ratio: Option<String>,
    /// In words (the stack's band description without its leading "snowfall, ").
    pub label: String,
    /// Weight in the run's weighted summaries (adding up to 1 over the scenarios).
    pub weight: f64,
}

/// What verification needs of a finished run.
pub struct FinishedRun {
    /// The output grid.
    pub grid: Grid,
    /// The run's output units; every snow value here is in `units.snow_unit()`.
    pub units: Units,
    /// Every scenario, in the order of the stack's bands.
    pub scenarios: Vec<ScenarioAxes>,
    /// Snowfall per scenario (output snow units, NaN = missing).
    pub stack: Vec<Vec<f32>>,
    /// The run as issued (output snow units).
    pub baseline: Vec<f32>,
    /// The snow thresholds of the exceedance layers, output snow units.
    pub thresholds: Vec<f64>,
    /// Least share of the weight with data for a weighted summary (the run's `min_coverage`).
    pub min_coverage: f64,
    /// The stack file read (for the outputs' descriptions).
    pub stack_file: &'static str,
}

fn raster(dir: &Path, file: &str) -> Result<Raster, VerifyError> {
    let path = dir.join(file);
    read_geotiff(&path).map_err(|e| VerifyError::Run {
        path,
        what: e.to_string(),
    })
}

fn band_item<'a>(items: &'a [(String, String)], key: &str) -> Option<&'a str> {
    items
        .iter()
        .find(|(k, _)| k == key)
        .map(|(_, v)| v.as_str())
}

/// Reads the run in `dir`.
pub fn read_run(dir: &Path) -> Result<FinishedRun, VerifyError> {
    let mpath = dir.join(crate::write::folder::MANIFEST);
    let missing = |field: &str| VerifyError::Manifest {
        path: mpath.clone(),
        field: field.to_string(),
    };
    let text = std::fs::read_to_string(&mpath).map_err(|e| VerifyError::Run {
        path: mpath.clone(),
        what: e.to_string(),
    })?;
    let m: Value = serde_json::from_str(&text).map_err(|e| VerifyError::Run {
        path: mpath.clone(),
        what: format!("not JSON: {e}"),
    })?;
    if m.get("trackswing_version").is_none() {
        return Err(missing("trackswing_version"));
    }
    let units = m["units"]
        .as_str()
        .and_then(Units::parse)
        .ok_or_else(|| missing("units"))?;
    let numbers = |v: &Value, field: &str| -> Result<Vec<f64>, VerifyError> {
        v.as_array()
            .and_then(|a| a.iter().map(Value::as_f64).collect::<Option<Vec<f64>>>())
            .ok_or_else(|| missing(field))
    };
    let thresholds = numbers(
        &m["decisions"]["snow_thresholds"],
        "decisions.snow_thresholds",
    )?;
    let min_coverage = m["decisions"]["min_coverage"]
        .as_f64()
        .ok_or_else(|| missing("decisions.min_coverage"))?;
    let several = m.get("ensemble").is_some_and(|e| !e.is_null());
    let stack_file = if several {
        "snowfall_by_member_scenario.tif"
    } else {
        "snowfall_by_scenario.tif"
    };
    let stack = raster(dir, stack_file)?;
    let base = raster(dir, "snowfall_baseline.tif")?;
    let stack_path = dir.join(stack_file);
    let bad_band = |band: usize, what: String| VerifyError::Run {
        path: stack_path.clone(),
        what: format!("band {}: {what}", band + 1),
    };
    if (base.width, base.height, base.georef) != (stack.width, stack.height, stack.georef) {
        return Err(VerifyError::Run {
            path: dir.join("snowfall_baseline.tif"),
            what: format!("not on the grid of {stack_file}"),
        });
    }
    let listed = m["scenarios"]
        .as_array()
        .ok_or_else(|| missing("scenarios"))?;
    if !several && listed.len() != stack.bands.len() {
        return Err(VerifyError::Run {
            path: stack_path.clone(),
            what: format!(
                "{} bands, but the manifest lists {} scenarios",
                stack.bands.len(),
                listed.len()
            ),
        });
    }
    let mut scenarios = Vec::with_capacity(stack.bands.len());
    for (b, items) in stack.band_metadata.iter().enumerate() {
        let axis = |key: &str| -> Result<f64, VerifyError> {
            band_item(items, key)
                .and_then(|v| v.parse::<f64>().ok())
                .ok_or_else(|| bad_band(b, format!("no number '{key}' in its metadata")))
        };
        let text = |key: &str| -> Result<Option<String>, VerifyError> {
            if !several {
                return Ok(None);
            }
            band_item(items, key)
                .map(|v| Some(v.to_string()))
                .ok_or_else(|| bad_band(b, format!("no '{key}' in its metadata")))
        };
        let weight = if several {
            axis("weight")?
        } else {
            listed[b]["weight"]
                .as_f64()
                .ok_or_else(|| missing(&format!("scenarios[{b}].weight")))?
        };
        let description = stack.descriptions.get(b).cloned().unwrap_or_default();
        scenarios.push(ScenarioAxes {
            cross_km: axis("cross_km")?,
            along_km: axis("along_km")?,
            timing_h: axis("timing_h")?,
            intensity: axis("intensity")?,
            warm_bias_k: axis("warm_bias_k")?,
            member: text("member")?,
            precip_type: text("precip_type")?,
            snow_ratio: text("snow_ratio")?,
            label: description
                .strip_prefix("snowfall, ")
                .unwrap_or(&description)
                .to_string(),
            weight,
        });
    }
    if scenarios.len() != stack.bands.len() {
        return Err(VerifyError::Run {
            path: stack_path,
            what: "band metadata missing".into(),
        });
    }
    let total: f64 = scenarios.iter().map(|s| s.weight).sum();
    if total.is_nan()
        || total <= 0.0
        || scenarios
            .iter()
            .any(|s| s.weight.is_nan() || s.weight < 0.0)
    {
        return Err(VerifyError::Run {
            path: stack_path,
            what: "the scenarios' weights are not positive numbers".into(),
        });
    }
    for s in &mut scenarios {
        s.weight /= total;
    }
    let grid =
        Grid::new(stack.width, stack.height, stack.georef).map_err(|e| VerifyError::Run {
            path: dir.join(stack_file),
            what: e.to_string(),
        })?;
    let baseline = base.bands.into_iter().next().unwrap_or_default();
    Ok(FinishedRun {
        grid,
        units,
        scenarios,
        stack: stack.bands,
        baseline,
        thresholds,
        min_coverage,
        stack_file,
    })
}
