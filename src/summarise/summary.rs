//! The summarise stage as one call: everything the layers, tables, maps and the manifest say
//! about a run, computed once from its per-scenario totals. `write` only serialises it.

use super::bust::{town_decisions, TownDecision};
use super::coverage::PriorCoverage;
use super::ice::ice_accretion;
use super::quantiles::{distribution, DistributionLayers};
use super::scope::{Needs, Scope};
use super::sensitivity::{flip_layers, sensitivity_layer, Axis, FlipLayers};
use super::types::{flip_cells, TypeFlip};
use super::weights::{scenario_weights, WeightsError};
use super::{spread, towns, Spread, TownSummary};
use crate::accumulate::period::Period;
use crate::case::Case;
use crate::engine::RunResult;

/// What a run's scenarios say together.
pub struct Summary {
    /// Normalised weight per scenario (the track-error prior).
    pub weights: Vec<f64>,
    /// Where the prior is known well enough to summarise.
    pub coverage: PriorCoverage,
    /// Snowfall over the scenarios with data, mm.
    pub snow_spread: Spread,
    /// Which axes the scenarios vary.
    pub scope: Scope,
    /// The period the totals cover (`None` for a run without steps).
    pub period: Option<Period>,
    /// The period in words, for descriptions and captions.
    pub period_words: String,
    /// Every town's totals per scenario.
    pub towns: Vec<TownSummary>,
    /// Per town, per scenario: the 1-based step of first measurable snow.
    pub onsets: Vec<Vec<Option<u32>>>,
    /// The weighted distributions, sensitivities and flips; `None` without track offsets,
    /// which they are all about.
    pub decisions: Option<Decisions>,
    /// Every town's decision numbers, ranked by bust score.
    pub ranked: Vec<TownDecision>,
    /// Where the dominant precipitation type differs between scenarios; `None` for a run of
    /// one scenario.
    pub type_flips: Option<Vec<Option<TypeFlip>>>,
    /// With several members or method combinations: where the spread comes from
    /// ([`super::members`]); `None` for a single run.
    pub members: Option<super::members::MemberSummary>,
}

/// The per-cell decision layers of a run with track offsets (mm, or mm per
/// [`super::sensitivity::PER_KM`] km).
pub struct Decisions {
    /// Snowfall: weighted mean, P10/P50/P90, probability of each snow threshold.
    pub snow: DistributionLayers,
    /// Ice accretion: the same, for each ice threshold.
    pub ice: DistributionLayers,
    /// Change of snowfall across the track; `None` without cross-track offsets.
    pub sensitivity_cross: Option<Vec<f32>>,
    /// Change of snowfall along the track; `None` without along-track offsets.
    pub sensitivity_along: Option<Vec<f32>>,
    /// The smallest offset at which the type or the amount flips.
    pub flip: FlipLayers,
}

impl Summary {
    /// The snowfall's min/max/range when the run has scenarios to compare.
    pub fn compared(&self) -> Option<&Spread> {
        self.scope
            .missing(Needs::Comparison)
            .is_none()
            .then_some(&self.snow_spread)
    }
}

/// Summarises an ensemble: the primary group's run as [`summarise`] does, and where the
/// spread across every group comes from.
pub fn summarise_ensemble(
    case: &Case,
    e: &crate::engine::Ensemble,
) -> Result<Summary, WeightsError> {
    let mut s = summarise(case, &e.groups[0].run)?;
    s.members = Some(super::members::summarise_members(
        case, e, &s.weights, &s.ranked,
    ));
    Ok(s)
}

/// Summarises a run under the case's prior, minimum coverage and thresholds.
pub fn summarise(case: &Case, r: &RunResult) -> Result<Summary, WeightsError> {
    let weights = scenario_weights(&case.summary.prior, &r.scenarios)?;
    let coverage = PriorCoverage::of(&r.totals, &weights, case.summary.min_coverage);
    let snowfall: Vec<&[f32]> = r.totals.iter().map(|t| t.snowfall.as_slice()).collect();
    let snow_spread = spread(&snowfall, &coverage);
    let period = Period::of(&r.valid_times);
    let scope = Scope::of(&r.scenarios);
    let snow_mm: Vec<f64> = case
        .summary
        .snow_thresholds
        .iter()
        .map(|t| case.output.units.snow_to_mm(*t))
        .collect();
    let ice_mm: Vec<f64> = case
        .summary
        .ice_thresholds
        .iter()
        .map(|t| case.output.units.liquid_to_mm(*t))
        .collect();
    let decisions = scope.track().then(|| {
        let min = coverage.min;
        let sensitivity = |needs, axis| {
            scope.missing(needs).is_none().then(|| {
                sensitivity_layer(&r.totals, &r.scenarios, r.baseline, axis, |t, i| {
                    t.snowfall[i]
                })
            })
        };
        Decisions {
            snow: distribution(&r.totals, &weights, |t, i| t.snowfall[i], &snow_mm, min),
            ice: distribution(&r.totals, &weights, ice_accretion, &ice_mm, min),
            sensitivity_cross: sensitivity(Needs::Cross, Axis::Cross),
            sensitivity_along: sensitivity(Needs::Along, Axis::Along),
            flip: flip_layers(&r.totals, &r.scenarios, r.baseline),
        }
    });
    let ranked = town_decisions(r, &weights, coverage.min, &snow_mm, &ice_mm);
    let onsets = r
        .towns
        .iter()
        .map(|t| {
            r.totals
                .iter()
                .map(|tot| crate::accumulate::onset_at(tot, &r.grid, t.lon, t.lat))
                .collect()
        })
        .collect();
    let type_flips = scope
        .missing(Needs::Comparison)
        .is_none()
        .then(|| flip_cells(r));
    Ok(Summary {
        towns: towns(r),
        type_flips,
        onsets,
        weights,
        coverage,
        snow_spread,
        scope,
        period,
        period_words: period.map_or_else(|| "no steps".into(), |p| p.words()),
        decisions,
        ranked,
        members: None,
    })
}
