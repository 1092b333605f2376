//! The comparison itself: every report against the run's weighted scenario distribution at its
//! place (CRPS, PIT, P10–P90, the scenario closest to it), every scenario against all reports
//! (MAE, bias, RMSE), and the summary over the reports (mean CRPS and its skill against the run
//! as issued, the share inside P10–P90, Brier scores, the best scenario and those within one
//! standard error of it). All values are in the run's snow units.
//!
//! Several members or methods: the scenarios of every member × method × offset are pooled into
//! one weighted sample (each weighing member × method × track-error prior, as the stack's band
//! metadata gives), and its percentiles are the weighted sample's
//! ([`crate::summarise::quantiles`]), not the run's mixture of groups
//! ([`crate::summarise::mixture`]): the P10/P50/P90 here can differ slightly from towns.csv
//! for such a run; the mean, the exceedance probabilities and CRPS are the same either way.

use super::reports::Report;
use super::run::FinishedRun;
use super::scores::{brier, crps, pit};
use crate::summarise::quantiles::{exceedance, prepare, summary};
use crate::summarise::value_at;
use rand::{RngExt, SeedableRng};

/// Seed of the random numbers that place a PIT within a tie (one draw per scored report, in
/// the file's order), so a verification is repeatable.
pub const PIT_SEED: u64 = 20_261_205;

/// Expected share of observations inside P10–P90 for a calibrated forecast.
pub const EXPECTED_INSIDE: f64 = 0.8;

/// One report scored against the run.
#[derive(Clone, Debug)]
pub struct Scored {
    /// The report.
    pub report: Report,
    /// Observed, in the run's snow units.
    pub observed: f64,
    /// The run as issued at the report.
    pub issued: f64,
    /// Weighted mean over the scenarios.
    pub mean: f64,
    /// P10, P50, P90.
    pub quantiles: [f64; 3],
    /// Randomised PIT (0–1).
    pub pit: f64,
    /// CRPS of the weighted scenario distribution.
    pub crps: f64,
    /// Index of the scenario closest to the observation (the heaviest of equals, then the first).
    pub best: usize,
    /// That scenario's value minus the observation.
    pub best_error: f64,
    /// Every scenario's value at the report (NaN where it has none).
    pub values: Vec<f64>,
    /// The (value, weight) pairs with a value, sorted by value.
    pub pairs: Vec<(f64, f64)>,
}

/// A report that could not be scored, with the reason.
#[derive(Clone, Debug)]
pub struct Skipped {
    /// The report.
    pub report: Report,
    /// Why, in words.
    pub reason: String,
}

/// One scenario against every scored report where it has a value.
#[derive(Clone, Copy, Debug)]
pub struct ScenarioScore {
    /// Index in the run's scenarios.
    pub index: usize,
    /// Reports where it has a value.
    pub n: usize,
    /// Mean absolute error.
    pub mae: f64,
    /// Mean of model − observed.
    pub bias: f64,
    /// Root-mean-square error.
    pub rmse: f64,
    /// Standard error of the MAE: the standard deviation of the absolute errors over √n.
    pub mae_se: f64,
}

/// Brier scores of one threshold's probabilities.
#[derive(Clone, Copy, Debug, serde::Serialize)]
pub struct ThresholdScore {
    /// The threshold, run's snow units; the event is "observed ≥ threshold".
    pub threshold: f64,
    /// Brier score of the scenarios' probability P(X ≥ threshold).
    pub brier: f64,
    /// Brier score of the run as issued (probability 1 or 0).
    pub brier_issued: f64,
    /// Share of the reports at or above the threshold.
    pub observed_share: f64,
}

/// Everything verification finds.
pub struct Assessment {
    /// Scored reports, in the file's order.
    pub scored: Vec<Scored>,
    /// Reports left out.
    pub skipped: Vec<Skipped>,
    /// Scenarios, best first: those with a value at every scored report by MAE, then the others.
    pub scenarios: Vec<ScenarioScore>,
    /// Mean CRPS over the scored reports.
    pub mean_crps: f64,
    /// MAE of the run as issued (its CRPS, a single value's).
    pub issued_mae: f64,
    /// 1 − mean CRPS / MAE as issued.
    pub crps_skill: f64,
    /// Share of reports with P10 ≤ observed ≤ P90.
    pub inside_p10_p90: f64,
    /// Brier scores per threshold.
    pub thresholds: Vec<ThresholdScore>,
    /// The best scenario's index (the first of `scenarios`), if any report was scored.
    pub best: Option<usize>,
    /// The scenarios whose MAE is within one standard error of the best's, best first.
    pub within_one_se: Vec<usize>,
}

/// Scores `reports` against `run`.
pub fn assess(run: &FinishedRun, reports: &[Report]) -> Assessment {
    let mm_per_unit = run.units.snow_to_mm(1.0);
    let mut rng = rand_pcg::Pcg64::seed_from_u64(PIT_SEED);
    let mut scored = Vec::new();
    let mut skipped = Vec::new();
    for r in reports {
        let skip = |reason: String| Skipped {
            report: r.clone(),
            reason,
        };
        if run.grid.bilinear_at(r.lon, r.lat).is_none() {
            skipped.push(skip("outside the run's grid".into()));
            continue;
        }
        let issued = value_at(&run.grid, &run.baseline, r.lon, r.lat) as f64;
        if issued.is_nan() {
            skipped.push(skip("the run as issued has no data here (nodata)".into()));
            continue;
        }
        let values: Vec<f64> = run
            .stack
            .iter()
            .map(|band| value_at(&run.grid, band, r.lon, r.lat) as f64)
            .collect();
        let mut pairs: Vec<(f64, f64)> = values
            .iter()
            .zip(&run.scenarios)
            .map(|(v, s)| (*v, s.weight))
            .collect();
        if prepare(&mut pairs, run.min_coverage).is_none() {
            skipped.push(skip(format!(
                "the scenarios with data here carry under {:.0} % of the weight (the run's min_coverage; nodata in its summaries)",
                run.min_coverage * 100.0
            )));
            continue;
        }
        let observed = r.snow_mm / mm_per_unit;
        let s = summary(&pairs);
        let u: f64 = rng.random();
        let (best, best_error) = values
            .iter()
            .enumerate()
            .filter(|(_, v)| !v.is_nan())
            .map(|(k, v)| (k, v - observed))
            .min_by(|a, b| {
                a.1.abs()
                    .total_cmp(&b.1.abs())
                    .then(
                        run.scenarios[b.0]
                            .weight
                            .total_cmp(&run.scenarios[a.0].weight),
                    )
                    .then(a.0.cmp(&b.0))
            })
            .unwrap_or((0, f64::NAN));
        scored.push(Scored {
            report: r.clone(),
            observed,
            issued,
            mean: s.mean,
            quantiles: s.quantiles,
            pit: pit(&pairs, observed, u),
            crps: crps(&pairs, observed),
            best,
            best_error,
            values,
            pairs,
        });
    }
    let n = scored.len() as f64;
    let mean_of = |f: &dyn Fn(&Scored) -> f64| scored.iter().map(f).sum::<f64>() / n;
    let mean_crps = mean_of(&|s| s.crps);
    let issued_mae = mean_of(&|s| (s.issued - s.observed).abs());
    let inside = mean_of(&|s| {
        f64::from(u8::from(
            s.quantiles[0] <= s.observed && s.observed <= s.quantiles[2],
        ))
    });
    let thresholds = run
        .thresholds
        .iter()
        .map(|&t| {
            let probs: Vec<(f64, bool)> = scored
                .iter()
                .map(|s| (exceedance(&s.pairs, t), s.observed >= t))
                .collect();
            let issued: Vec<(f64, bool)> = scored
                .iter()
                .map(|s| (f64::from(u8::from(s.issued >= t)), s.observed >= t))
                .collect();
            ThresholdScore {
                threshold: t,
                brier: brier(&probs),
                brier_issued: brier(&issued),
                observed_share: mean_of(&|s| f64::from(u8::from(s.observed >= t))),
            }
        })
        .collect();
    let scenarios = scenario_scores(run.scenarios.len(), &scored);
    let best = scenarios.first().filter(|s| s.n > 0).map(|s| s.index);
    let full = scored.len();
    let within_one_se = match scenarios.first() {
        Some(b) if b.n > 0 => scenarios
            .iter()
            // One report gives no standard error: only the equals of the best are within.
            .filter(|s| {
                s.n == full && s.mae <= b.mae + if b.mae_se.is_nan() { 0.0 } else { b.mae_se }
            })
            .map(|s| s.index)
            .collect(),
        _ => Vec::new(),
    };
    Assessment {
        mean_crps,
        issued_mae,
        crps_skill: 1.0 - mean_crps / issued_mae,
        inside_p10_p90: inside,
        thresholds,
        best,
        within_one_se,
        scenarios,
        scored,
        skipped,
    }
}

/// MAE, bias and RMSE of every scenario, best first: scenarios with a value at every scored
/// report by MAE (then by index), then the others the same way.
fn scenario_scores(count: usize, scored: &[Scored]) -> Vec<ScenarioScore> {
    let mut out: Vec<ScenarioScore> = (0..count)
        .map(|k| {
            let errors: Vec<f64> = scored
                .iter()
                .map(|s| s.values[k] - s.observed)
                .filter(|e| !e.is_nan())
                .collect();
            let n = errors.len();
            let m = n as f64;
            let mae = errors.iter().map(|e| e.abs()).sum::<f64>() / m;
            let var = if n > 1 {
                errors.iter().map(|e| (e.abs() - mae).powi(2)).sum::<f64>() / (m - 1.0)
            } else {
                f64::NAN
            };
            ScenarioScore {
                index: k,
                n,
                mae,
                bias: errors.iter().sum::<f64>() / m,
                rmse: (errors.iter().map(|e| e * e).sum::<f64>() / m).sqrt(),
                mae_se: (var / m).sqrt(),
            }
        })
        .collect();
    let full = scored.len();
    out.sort_by(|a, b| {
        (b.n == full)
            .cmp(&(a.n == full))
            .then(a.mae.total_cmp(&b.mae))
            .then(a.index.cmp(&b.index))
    });
    out
}
