//! Track error of past forecasts: how far the analysed low sat from the forecast low, across and
//! along the forecast motion, by lead time — the verification that sets the σ (and centre) of the
//! track-error prior ([`crate::summarise::weights`]).
//!
//! [`decompose`] splits each position error geodesically into cross- and along-track
//! kilometres, [`bins`] summarises them by lead-time bin (bias and σ with confidence intervals),
//! [`files`] writes `track_error.csv` and `track_error_summary.csv` and reads the summary back
//! for a case's `[weights] from_track_error`.

pub mod bins;
pub mod decompose;
pub mod files;

use crate::read::track::Track;
use chrono::{DateTime, Utc};

/// One past forecast and what happened.
#[derive(Clone, Debug)]
pub struct PastCase {
    /// Its name in `track_error.csv`.
    pub name: String,
    /// The forecast track.
    pub forecast: Track,
    /// The analysed (observed) track of the same storm.
    pub analysis: Track,
    /// The forecast's reference time: leads are counted from it.
    pub reference: DateTime<Utc>,
}

/// The verification of several past cases: every matched error, case by case in time order,
/// and their summary by lead-time bins of `bin_h` hours (> 0).
pub fn verify(
    cases: &[PastCase],
    bin_h: f64,
) -> (Vec<decompose::PositionError>, Vec<bins::LeadBin>) {
    let errors: Vec<_> = cases
        .iter()
        .flat_map(|c| decompose::case_errors(&c.name, &c.forecast, &c.analysis, c.reference))
        .collect();
    let bins = bins::lead_bins(&errors, bin_h);
    (errors, bins)
}
