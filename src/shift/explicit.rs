//! A displacement given step by step rather than from a scenario's cross/along offsets: the
//! storm of one member moved at every valid time onto another track (the members' weighted mean
//! track, [`crate::engine::align`]).

use super::StepShift;
use chrono::{DateTime, Utc};

/// One [`StepShift`] per valid time. At a time it does not list the storm is not moved.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ExplicitShifts {
    /// Valid time and the displacement at it (the displaced centre and the vector, km).
    pub steps: Vec<(DateTime<Utc>, StepShift)>,
}

impl ExplicitShifts {
    /// The displacement at valid time `t`; none when `t` is not listed.
    ///
    /// ```
    /// use chrono::{TimeZone, Utc};
    /// use trackswing::shift::{ExplicitShifts, StepShift};
    /// let t = Utc.with_ymd_and_hms(2026, 1, 14, 6, 0, 0).unwrap();
    /// let d = StepShift { centre_lon: -30.0, centre_lat: 47.0, east_km: 12.0, north_km: -30.0 };
    /// let x = ExplicitShifts { steps: vec![(t, d)] };
    /// assert_eq!(x.at(t), d);
    /// assert!(x.at(t + chrono::Duration::hours(1)).is_none());
    /// ```
    pub fn at(&self, t: DateTime<Utc>) -> StepShift {
        self.steps
            .iter()
            .find(|(at, _)| *at == t)
            .map_or_else(StepShift::none, |(_, s)| *s)
    }
}
