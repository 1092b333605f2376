//! What a run's scenarios can say: which track axes were run, and why a layer that needs a
//! missing axis is not computed.
//!
//! A run with only the zero offset on an axis knows nothing about that axis: a sensitivity of
//! zero, a flip "nowhere within the offsets" or a range of 0 cm would read as reassurance where
//! nothing was computed. Such layers are not written; the run lists them, with the reason, in
//! manifest.json (`not_computed`), report.html and the terminal.

use crate::scenario::Scenario;
use serde::Serialize;

/// The axes a run's scenarios vary.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Scope {
    /// Some scenario has a cross-track offset other than 0.
    pub cross: bool,
    /// Some scenario has an along-track offset other than 0.
    pub along: bool,
    /// Number of scenarios (1: only the model as issued).
    pub scenarios: usize,
}

/// What a layer needs from the scenarios.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Needs {
    /// Cross-track offsets.
    Cross,
    /// Along-track offsets.
    Along,
    /// Track offsets on either axis (the prior, percentiles, flips, bust scores).
    Track,
    /// More than one scenario (min/max/range and what differs between scenarios).
    Comparison,
}

/// A layer a run did not write, and why.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct NotComputed {
    /// The file it would have been.
    pub layer: String,
    /// Why it was not computed.
    pub reason: String,
}

/// Why a run without track offsets writes no track-risk layer, in the words every output uses.
pub const NO_TRACK_OFFSETS: &str =
    "no track offsets were run (cross and along both 0 km): these scenarios say nothing about track risk";

impl Scope {
    /// The scope of a scenario set.
    ///
    /// ```
    /// use trackswing::scenario::scenario_set;
    /// use trackswing::summarise::scope::{Needs, Scope};
    /// let s = Scope::of(&scenario_set(&[0.0], &[-50.0, 0.0, 50.0]));
    /// assert!(s.along && !s.cross && s.track());
    /// assert!(s.missing(Needs::Cross).is_some() && s.missing(Needs::Track).is_none());
    /// ```
    pub fn of(scenarios: &[Scenario]) -> Self {
        Self {
            cross: scenarios.iter().any(|s| s.cross_km != 0.0),
            along: scenarios.iter().any(|s| s.along_km != 0.0),
            scenarios: scenarios.len(),
        }
    }

    /// Whether any track offset was run.
    pub fn track(&self) -> bool {
        self.cross || self.along
    }

    /// Why a layer that needs `n` cannot be computed; `None` when it can.
    pub fn missing(&self, n: Needs) -> Option<&'static str> {
        match n {
            Needs::Cross if !self.cross => Some(
                "no cross-track offsets were run (only 0 km): how the snowfall changes across the track is unknown",
            ),
            Needs::Along if !self.along => Some(
                "no along-track offsets were run (only 0 km): how the snowfall changes along the track is unknown",
            ),
            Needs::Track if !self.track() => Some(NO_TRACK_OFFSETS),
            Needs::Comparison if self.scenarios < 2 => Some(
                "only the model as issued was run: there is no other scenario to compare it with",
            ),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::scenario_set;

    #[test]
    fn only_the_model_as_issued_misses_everything() {
        let s = Scope::of(&scenario_set(&[0.0], &[0.0]));
        assert!(!s.track());
        for n in [Needs::Cross, Needs::Along, Needs::Track, Needs::Comparison] {
            assert!(s.missing(n).is_some(), "{n:?}");
        }
        let full = Scope::of(&scenario_set(&[-10.0, 0.0, 10.0], &[-10.0, 0.0, 10.0]));
        for n in [Needs::Cross, Needs::Along, Needs::Track, Needs::Comparison] {
            assert!(full.missing(n).is_none(), "{n:?}");
        }
    }
}
