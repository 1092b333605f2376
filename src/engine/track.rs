//! The storm's track in a run: read from the case's file or found in the model's sea-level
//! pressure, and each scenario's displacement from it at a step.

use super::EngineError;
use crate::case::Case;
use crate::progress::Progress;
use crate::read::source::Source;
use crate::read::track_finder::{find_track, to_track, FinderError};
use crate::read::{read_track, Track};
use crate::scenario::Scenario;
use crate::shift::StepShift;
use chrono::{DateTime, Utc};
use std::path::Path;

/// The case's track: read from its file, found in the model's sea-level pressure
/// (`track = "find"`), or none.
pub fn case_track(
    case: &Case,
    source: &dyn Source,
    progress: &dyn Progress,
) -> Result<Option<Track>, EngineError> {
    Ok(match &case.member().track {
        Some(p) => Some(read_track(p)?),
        None if case.member().find_track => {
            Some(found_track(source, &case.member().terrain, progress)?)
        }
        None => None,
    })
}

/// The track followed in the model's sea-level pressure (`track = "find"`).
fn found_track(
    source: &dyn Source,
    first_file: &std::path::Path,
    progress: &dyn Progress,
) -> Result<Track, EngineError> {
    let grid = &source.statics().grid;
    let mut steps = Vec::with_capacity(source.step_count());
    for k in 0..source.step_count() {
        let valid = match source.valid_time(k) {
            Some(v) => v,
            None => source.step(k)?.valid,
        };
        let p = source.mslp(k)?.ok_or_else(|| EngineError::Finder {
            path: first_file.to_path_buf(),
            source: FinderError::NoPressure {
                step: k + 1,
                valid: valid.to_rfc3339(),
            },
        })?;
        steps.push((valid, p));
    }
    let (found, lost) = find_track(grid, &steps, None).map_err(|source| EngineError::Finder {
        path: first_file.to_path_buf(),
        source,
    })?;
    if let Some(k) = lost {
        progress.warn(&format!(
            "the track finder lost the low after step {k} of {}",
            steps.len()
        ));
    }
    if found.len() < 2 {
        return Err(EngineError::Finder {
            path: first_file.to_path_buf(),
            source: FinderError::NoStart(
                "the low was found at one step only; a track needs two positions".into(),
            ),
        });
    }
    Ok(to_track(&found, first_file.to_path_buf()))
}

/// The displacement of scenario `s` when its fields are the model's at `at` (output step `k`,
/// 0-based, read from `file`).
pub fn scenario_shift(
    track: Option<&Track>,
    s: &Scenario,
    at: DateTime<Utc>,
    k: usize,
    file: &Path,
) -> Result<StepShift, EngineError> {
    if !s.is_displaced() {
        return Ok(StepShift::none());
    }
    let t = track.expect("case checks a track exists for offsets");
    let ((lon, lat), (e, nn)) = t
        .shifted_centre(at, s.cross_km, s.along_km)
        .ok_or_else(|| {
            let (a, b) = t.span();
            EngineError::TrackTooShort {
                path: t.source.clone(),
                what: format!(
                    "the track runs {}…{} but step {} ({}) needs it at {} (its valid time less any timing offset)",
                    a.to_rfc3339(),
                    b.to_rfc3339(),
                    k + 1,
                    file.display(),
                    at.to_rfc3339()
                ),
            }
        })?;
    Ok(StepShift {
        centre_lon: lon,
        centre_lat: lat,
        east_km: e,
        north_km: nn,
    })
}
