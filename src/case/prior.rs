//! The `[weights]` section: the track-error prior from the case file and the σ flags.

use super::schema::WeightsFile;
use super::Overrides;
use crate::summarise::lead_prior::TrackErrorPrior;
use crate::summarise::weights::{read_weights_csv, TrackPrior};
use std::path::Path;

/// The prior from `[weights]` and the σ flags (which win, and select the Gaussian), and the
/// track-error verification it is taken from at the run's lead time, when `from_track_error`
/// names one (the σ flags win over it too). Errors name the field.
pub(super) fn resolve_prior(
    dir: &Path,
    w: &WeightsFile,
    over: &Overrides,
) -> Result<(TrackPrior, Option<TrackErrorPrior>), (String, String)> {
    let sigma_flags = over.cross_sigma.is_some() || over.along_sigma.is_some();
    let track_error = match &w.from_track_error {
        Some(_)
            if w.explicit.is_some()
                || w.explicit_file.is_some()
                || w.cross_sigma_km.is_some()
                || w.along_sigma_km.is_some() =>
        {
            return Err((
                "weights.from_track_error".into(),
                "give either from_track_error or σ (cross_sigma_km, along_sigma_km) or explicit weights, not both".into(),
            ))
        }
        Some(f) if !sigma_flags => {
            let source = dir.join(f);
            let bins = crate::track_error::files::read_summary(&source)
                .map_err(|e| ("weights.from_track_error".to_string(), e.to_string()))?;
            if bins.is_empty() {
                return Err((
                    "weights.from_track_error".into(),
                    format!("{}: no lead-time bins; expected the summary `trackswing track-error` writes", source.display()),
                ));
            }
            Some(TrackErrorPrior { source, bins })
        }
        _ => None,
    };
    let explicit = match (&w.explicit, &w.explicit_file) {
        (Some(_), Some(_)) => {
            return Err((
                "weights".into(),
                "give either explicit or explicit_file, not both".into(),
            ))
        }
        (Some(list), None) => Some(TrackPrior::Explicit {
            source: "case file".into(),
            weights: list.clone(),
        }),
        (None, Some(f)) => {
            let p = dir.join(f);
            let weights = read_weights_csv(&p).map_err(|e| {
                (
                    "weights.explicit_file".to_string(),
                    format!("{}: {e}", p.display()),
                )
            })?;
            Some(TrackPrior::Explicit {
                source: p.display().to_string(),
                weights,
            })
        }
        (None, None) => None,
    };
    if explicit.is_some() && (w.cross_sigma_km.is_some() || w.along_sigma_km.is_some()) {
        return Err((
            "weights".into(),
            "give either σ (cross_sigma_km, along_sigma_km) or explicit weights, not both".into(),
        ));
    }
    let prior = match explicit {
        Some(e) if !sigma_flags => e,
        _ => TrackPrior::Gaussian {
            cross_sigma_km: over
                .cross_sigma
                .or(w.cross_sigma_km)
                .unwrap_or(crate::summarise::weights::EXAMPLE_CROSS_SIGMA_KM),
            along_sigma_km: over
                .along_sigma
                .or(w.along_sigma_km)
                .unwrap_or(crate::summarise::weights::EXAMPLE_ALONG_SIGMA_KM),
            cross_mean_km: 0.0,
            along_mean_km: 0.0,
            basis: None,
        },
    };
    Ok((prior, track_error))
}
