//! `manifest.json`: every file written, with kind, units and description; the scenarios; the
//! settings; and a SHA-256 of every input, so an analyst can tell two runs apart. Written last.

use super::{write_text_atomic, WriteError, Written};
use crate::case::Case;
use crate::engine::RunResult;
use serde::Serialize;
use sha2::{Digest, Sha256};
use std::path::Path;

#[derive(Serialize)]
struct Input {
    role: String,
    path: String,
    sha256: String,
}

#[derive(Serialize)]
struct ScenarioEntry {
    band: usize,
    cross_km: f64,
    along_km: f64,
    timing_h: f64,
    intensity: f64,
    warm_bias_k: f64,
    label: String,
    baseline: bool,
    /// Normalised weight under the track-error prior.
    weight: f64,
}

#[derive(Serialize)]
struct Manifest<'a> {
    trackswing_version: &'a str,
    caution: &'a str,
    title: &'a str,
    case_file: String,
    member: &'a str,
    written_utc: String,
    crs: &'a str,
    grid: serde_json::Value,
    units: crate::case::Units,
    methods: &'a crate::diagnose::Methods,
    taper: &'a crate::shift::Taper,
    steps: Vec<String>,
    scenarios: Vec<ScenarioEntry>,
    files: &'a [Written],
    inputs: Vec<Input>,
    decisions: serde_json::Value,
}

fn sha256_of(path: &Path) -> Result<String, WriteError> {
    let bytes = std::fs::read(path).map_err(|source| WriteError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    Ok(format!("{:x}", Sha256::digest(&bytes)))
}

/// Writes `manifest.json` describing `files` (which must already be in place).
pub fn write_manifest(
    dir: &Path,
    case: &Case,
    r: &RunResult,
    files: &[Written],
) -> Result<(), WriteError> {
    let mut inputs = vec![Input {
        role: "case".into(),
        path: case.path.display().to_string(),
        sha256: sha256_of(&case.path)?,
    }];
    let mut add = |role: &str, p: &Path| -> Result<(), WriteError> {
        inputs.push(Input {
            role: role.into(),
            path: p.display().to_string(),
            sha256: sha256_of(p)?,
        });
        Ok(())
    };
    add("terrain", &case.member.terrain)?;
    for s in &case.member.steps {
        add("step", s)?;
    }
    if let Some(t) = &case.member.track {
        add("track", t)?;
    }
    if let Some(t) = &case.towns {
        add("towns", t)?;
    }
    let weights = crate::summarise::weights::scenario_weights(&case.prior, &r.scenarios)?;
    let decisions = serde_json::json!({
        "track_error_prior": &case.prior,
        "track_error_prior_note": "σ (or the explicit weights) should come from the user's own verification of track error at this lead time; the defaults are examples, not a climatology",
        "snow_thresholds": &case.snow_thresholds,
        "snow_threshold_units": case.units.snow_unit(),
        "ice_thresholds": &case.ice_thresholds,
        "ice_threshold_units": case.units.liquid_unit(),
        "ice_accretion": format!("{} × freezing-rain liquid (median flat-surface ratio, Sanders & Barjenbruch 2016)", crate::diagnose::slr::FREEZING_RAIN_ACCRETION_RATIO),
        "quantiles": "weighted empirical CDF with each scenario at the middle of its step, linear between scenario values, clamped to the smallest/largest (Hyndman & Fan 1996 definition 5 when weights are equal)",
        "exceedance": "P(X ≥ threshold): the weight of the scenarios at or above the threshold",
        "sensitivity": format!("change per {} km of offset at offset 0: centred difference of the nearest offsets either side, one-sided where only one side was run", crate::summarise::sensitivity::PER_KM),
        "flip": format!("smallest √(cross² + along²) at which the dominant type changes or the snowfall halves or doubles, snowfalls floored at {} mm", crate::summarise::sensitivity::FLIP_FLOOR_MM),
        "bust_score": format!("(P90 − P10) / max(baseline, {} mm of snow)", crate::summarise::bust::SCORE_FLOOR_MM),
    });
    let gt = r.grid.georef.geotransform;
    let m = Manifest {
        trackswing_version: env!("CARGO_PKG_VERSION"),
        caution: crate::CAUTION,
        title: &case.title,
        case_file: case.path.display().to_string(),
        member: &case.member.name,
        written_utc: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        crs: "EPSG:4326",
        grid: serde_json::json!({"columns": r.grid.nx, "rows": r.grid.ny, "geotransform": gt}),
        units: case.units,
        methods: &case.methods,
        taper: &case.taper,
        steps: r.valid_times.iter().map(|t| t.to_rfc3339()).collect(),
        scenarios: r
            .scenarios
            .iter()
            .enumerate()
            .map(|(i, s)| ScenarioEntry {
                band: i + 1,
                cross_km: s.cross_km,
                along_km: s.along_km,
                timing_h: s.timing_h,
                intensity: s.intensity,
                warm_bias_k: s.warm_bias_k,
                label: s.label(),
                baseline: s.is_baseline(),
                weight: weights[i],
            })
            .collect(),
        files,
        inputs,
        decisions,
    };
    let text = serde_json::to_string_pretty(&m).expect("manifest serialises");
    write_text_atomic(dir, "manifest.json", &(text + "\n"))?;
    Ok(())
}
