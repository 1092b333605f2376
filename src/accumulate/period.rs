//! The period the totals cover: from the start of the first step to the valid time of the last.
//!
//! A step's precipitation is what fell during the step ending at its valid time, so the totals
//! begin one step length before the first valid time. The first step's length is not in the
//! fields; it is taken to be as long as the second ([`step_length`], the rule the engine uses to
//! turn amounts into rates). With a single step the start is unknown and only the end is named.

use chrono::{DateTime, Duration, Utc};

/// Length of step `k` of `times`: from the previous valid time; the first step as long as the
/// second; `None` for the only step of a single-step run.
pub fn step_length(times: &[DateTime<Utc>], k: usize) -> Option<Duration> {
    match k {
        0 => times.get(1).map(|t1| *t1 - times[0]),
        _ => Some(times[k] - times[k - 1]),
    }
}

/// The accumulation period of a run's totals.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub struct Period {
    /// Start of the first step (`None` when the run has one step, whose length is unknown).
    pub start: Option<DateTime<Utc>>,
    /// Valid time of the last step.
    pub end: DateTime<Utc>,
    /// Number of steps.
    pub steps: usize,
}

impl Period {
    /// The period of steps valid at `times` (in order); `None` without steps.
    ///
    /// ```
    /// use chrono::{TimeZone, Utc};
    /// use trackswing::accumulate::period::Period;
    /// let t = |h| Utc.with_ymd_and_hms(2026, 1, 14, h, 0, 0).unwrap();
    /// let p = Period::of(&[t(6), t(9), t(12)]).unwrap();
    /// assert_eq!(p.start, Some(t(3)));
    /// assert_eq!(p.words(), "2026-01-14 03:00 to 2026-01-14 12:00 UTC (9 h, 3 steps)");
    /// assert_eq!(p.iso(), "2026-01-14T03:00:00Z/2026-01-14T12:00:00Z");
    /// ```
    pub fn of(times: &[DateTime<Utc>]) -> Option<Self> {
        let end = *times.last()?;
        Some(Self {
            start: step_length(times, 0).map(|d| times[0] - d),
            end,
            steps: times.len(),
        })
    }

    /// In words, for descriptions, captions and the report.
    pub fn words(&self) -> String {
        let f = |t: &DateTime<Utc>| t.format("%Y-%m-%d %H:%M").to_string();
        match self.start {
            Some(s) => {
                let h = (self.end - s).num_minutes() as f64 / 60.0;
                format!(
                    "{} to {} UTC ({h} h, {} steps)",
                    f(&s),
                    f(&self.end),
                    self.steps
                )
            }
            None => format!(
                "the one step ending {} UTC (its start is not in the fields)",
                f(&self.end)
            ),
        }
    }

    /// As an ISO 8601 time interval (`start/end`; `../end`, open at the start as ISO 8601-2
    /// writes it, when the start is unknown), for metadata.
    pub fn iso(&self) -> String {
        let f = |t: &DateTime<Utc>| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
        format!(
            "{}/{}",
            self.start.as_ref().map_or("..".into(), f),
            f(&self.end)
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::TimeZone;

    #[test]
    fn one_step_names_only_its_end() {
        let t = Utc.with_ymd_and_hms(2026, 1, 14, 6, 0, 0).unwrap();
        let p = Period::of(&[t]).unwrap();
        assert_eq!(p.start, None);
        assert!(p.words().contains("ending 2026-01-14 06:00 UTC"));
        assert_eq!(p.iso(), "../2026-01-14T06:00:00Z");
        assert!(Period::of(&[]).is_none());
    }
}
