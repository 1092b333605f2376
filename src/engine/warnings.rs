//! What a run warns about once its totals are in: cells sampled beyond the grid edge, cells a
//! method could not diagnose, steps a timing offset left uncovered, and a step longer than the
//! one before it.

use super::distinct;
use crate::accumulate::Totals;
use crate::case::Case;
use crate::progress::Progress;
use crate::scenario::Scenario;
use chrono::{DateTime, Utc};

/// Warns about cells sampled beyond the grid edge, cells a method could not diagnose and steps
/// a timing offset left uncovered (scenarios with empty totals, outside a shard, are left out).
pub fn warn_about_totals(
    case: &Case,
    scenarios: &[Scenario],
    totals: &[Totals],
    steps: usize,
    n: usize,
    progress: &dyn Progress,
) {
    let run = totals.iter().filter(|t| !t.is_empty()).count();
    let cell_steps = (n * steps) as f64;
    // In shares of the map's cells the scenario's band lacks (not of cell-steps): what a user
    // opening the band sees. The summaries' share is the prior-coverage warning's.
    let edge: Vec<(usize, usize)> = totals
        .iter()
        .enumerate()
        .filter(|(_, t)| t.outside > 0)
        .map(|(i, t)| (i, t.snowfall.iter().filter(|v| v.is_nan()).count()))
        .collect();
    if let Some(&(worst, cells)) = edge.iter().max_by_key(|e| e.1) {
        progress.warn(&format!(
            "{} of {} scenarios took some values from beyond the grid edge (up to {:.1} % of the map's cells, at {}); those cells are nodata in those scenarios' bands",
            edge.len(),
            run,
            100.0 * cells as f64 / n.max(1) as f64,
            scenarios[worst].label()
        ));
    }
    let undefined: u64 = totals.iter().map(|t| t.undefined).sum();
    if undefined > 0 {
        progress.warn(&format!(
            "the {} method is undefined at {undefined} cell-steps over all scenarios ({:.2} %; e.g. ground above 850 hPa for partial thickness, where no 850–700 or 1000–500 hPa thickness exists); those cells are nodata in those scenarios",
            case.physics.methods.ptype.name(),
            100.0 * undefined as f64 / (cell_steps * run as f64)
        ));
    }
    for h in distinct(scenarios.iter().map(|s| s.timing_h)) {
        if let Some(t) = scenarios
            .iter()
            .zip(totals)
            .find(|(s, t)| s.timing_h == h && !t.is_empty())
            .map(|(_, t)| t)
            .filter(|t| t.uncovered_steps > 0)
        {
            progress.warn(&format!(
                "timing {h:+} h: {} of {} steps sample a time {} the model's steps; nothing is counted for them, so those scenarios' totals cover a shorter window",
                t.uncovered_steps,
                steps,
                if h > 0.0 { "before" } else { "after" }
            ));
        }
    }
}

/// A warning when a step is longer than the one before it: a step file left out of the case
/// (or a glob that missed one) loses that file's precipitation from every total without any
/// other sign, so a forecaster should look. Models that change their output interval (hourly,
/// then three-hourly) also trigger it, once, which is worth a glance too.
pub fn step_gap_warning(times: &[DateTime<Utc>]) -> Option<String> {
    let gaps: Vec<String> = times
        .windows(3)
        .enumerate()
        .filter(|(_, w)| w[2] - w[1] > w[1] - w[0])
        .map(|(i, w)| {
            format!(
                "step {} ({}) comes {} h after the step before it, the steps before it {} h apart",
                i + 3,
                w[2].format("%Y-%m-%dT%H:%MZ"),
                (w[2] - w[1]).num_minutes() as f64 / 60.0,
                (w[1] - w[0]).num_minutes() as f64 / 60.0
            )
        })
        .collect();
    (!gaps.is_empty()).then(|| {
        format!(
            "{}; if a step file is missing, its precipitation is missing from every total",
            gaps.join("; ")
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_longer_step_is_reported() {
        let t = |h: i64| DateTime::<Utc>::from_timestamp(h * 3600, 0).unwrap();
        assert_eq!(step_gap_warning(&[t(0), t(2), t(4), t(6)]), None);
        // Steps that get shorter are fine; a longer one is named with its lengths.
        assert_eq!(step_gap_warning(&[t(0), t(3), t(4), t(5)]), None);
        let w = step_gap_warning(&[t(0), t(2), t(4), t(8), t(10)]).unwrap();
        assert!(
            w.starts_with("step 4 (1970-01-01T08:00Z) comes 4 h after the step before it, the steps before it 2 h apart"),
            "{w}"
        );
    }
}
