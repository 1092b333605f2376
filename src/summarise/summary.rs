//! The summarise stage as one call: everything the layers, tables, maps and the manifest say
//! about a run, computed once from its per-scenario totals. `write` only serialises it.

use super::bust::{town_decisions, TownDecision};
use super::coverage::PriorCoverage;
use super::ice::ice_accretion;
use super::names::ScenarioNames;
use super::pool::Pool;
use super::quantiles::DistributionLayers;
use super::scope::{Needs, Scope};
use super::sensitivity::{flip_layers, sensitivity_layer, Axis, FlipLayers};
use super::types::{flip_cells, TypeFlip};
use super::weights::{scenario_weights, TrackPrior, WeightsError};
use super::{spread, towns_in, Spread, TownSummary};
use crate::accumulate::period::Period;
use crate::case::Case;
use crate::engine::RunResult;

/// What a run's scenarios say together.
pub struct Summary {
    /// The track-error prior the weights come from (at the run's lead time when the case sets
    /// it from a track-error verification).
    pub prior: crate::summarise::weights::TrackPrior,
    /// Normalised weight per offset scenario (the track-error prior).
    pub weights: Vec<f64>,
    /// Weight of every summarised scenario (the prior's in a single run; every group's
    /// scenarios, `W_g × p_s`, in an ensemble, [`super::pool`]).
    pub pooled_weights: Vec<f64>,
    /// Names of the summarised scenarios, which `towns`, `onsets` and `ranked[..].snowfall`
    /// index.
    pub names: ScenarioNames,
    /// The valid times of each group's steps (one group in a single run): the onsets are step
    /// numbers in the times of their scenario's group.
    pub group_times: Vec<Vec<chrono::DateTime<chrono::Utc>>>,
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

/// How the descriptions of the pooled summaries name what they are over: a run's track
/// offsets, or every group's scenarios ([`super::pool`]).
#[derive(Clone, Copy, Debug)]
pub struct PoolWords {
    /// What the weighted summaries are over.
    pub over: &'static str,
    /// What weighs them.
    pub weighted_by: &'static str,
    /// The weight that a quantile's share is of.
    pub weight: &'static str,
    /// The weight a cell's coverage is a share of.
    pub weight_long: &'static str,
    /// Where the sensitivities are taken.
    pub at_origin: &'static str,
    /// What the flip is of ("" for a run's own totals).
    pub of_blend: &'static str,
}

impl PoolWords {
    /// The words of a run of one member with one method combination.
    pub const SINGLE: PoolWords = PoolWords {
        over: "the track offsets",
        weighted_by: "the track-error prior",
        weight: "the prior's weight",
        weight_long: "the track-error prior's weight",
        at_origin: "at the model as issued",
        of_blend: "",
    };
    /// The words of an ensemble.
    pub const POOLED: PoolWords = PoolWords {
        over: "every member, method combination and track offset",
        weighted_by: "member weight × method weight × the track-error prior",
        weight: "the blended weight",
        weight_long: "the blended weight (member × method × track-error prior)",
        at_origin: "at offset 0 of the blend of every member and method combination (their weighted mean at each offset)",
        of_blend: " of the blend of every member and method combination (their weighted mean at each offset)",
    };
}

impl Summary {
    /// How descriptions name what the weighted summaries are over.
    pub fn words(&self) -> PoolWords {
        if self.names.is_pooled() {
            PoolWords::POOLED
        } else {
            PoolWords::SINGLE
        }
    }

    /// The valid times of summarised scenario `k`'s steps.
    pub fn valid_times(&self, k: usize) -> &[chrono::DateTime<chrono::Utc>] {
        let per_group = self.names.len() / self.group_times.len().max(1);
        &self.group_times[k / per_group.max(1)]
    }

    /// The snowfall's min/max/range when the run has scenarios to compare.
    pub fn compared(&self) -> Option<&Spread> {
        self.scope
            .missing(Needs::Comparison)
            .is_none()
            .then_some(&self.snow_spread)
    }
}

/// Summarises an ensemble: every summary pools the scenarios of every group under weights
/// `W_g × p_s` ([`super::pool`]), and [`super::members`] says where the spread comes from.
/// The layers of the run as issued (baseline, per-scenario stack, rain–snow lines) stay the
/// primary group's.
pub fn summarise_ensemble(
    case: &Case,
    e: &crate::engine::Ensemble,
) -> Result<Summary, WeightsError> {
    let primary = &e.groups[0].run;
    let track_prior = prior_of_run(case, primary)?;
    let prior = scenario_weights(&track_prior, &primary.scenarios)?;
    let pool = Pool::ensemble(case, e, &prior);
    let mut s = summarise_pool(case, primary, (track_prior, prior), &pool);
    s.members = Some(super::members::summarise_members(
        case, e, &s.weights, &s.ranked,
    ));
    Ok(s)
}

/// Summarises a run under the case's prior, minimum coverage and thresholds.
pub fn summarise(case: &Case, r: &RunResult) -> Result<Summary, WeightsError> {
    let track_prior = prior_of_run(case, r)?;
    let prior = scenario_weights(&track_prior, &r.scenarios)?;
    let pool = Pool::single(r, &prior);
    Ok(summarise_pool(case, r, (track_prior, prior.clone()), &pool))
}

/// The case's prior, or, when the case reads it from a track-error verification, the prior at
/// the lead time of run `r` ([`super::lead_prior`]).
fn prior_of_run(case: &Case, r: &RunResult) -> Result<TrackPrior, WeightsError> {
    match &case.summary.track_error {
        Some(te) => te.at(r.reference, &r.valid_times),
        None => Ok(case.summary.prior.clone()),
    }
}

/// Summarises the scenarios of `pool`; `r` gives the grid, the towns, the offsets and the
/// run as issued, `prior` the prior and its weight of each offset.
fn summarise_pool(
    case: &Case,
    r: &RunResult,
    (track_prior, prior): (TrackPrior, Vec<f64>),
    pool: &Pool<'_>,
) -> Summary {
    let coverage = PriorCoverage::of(&pool.totals, &pool.weights, case.summary.min_coverage);
    let snowfall: Vec<&[f32]> = pool.totals.iter().map(|t| t.snowfall.as_slice()).collect();
    let snow_spread = spread(&snowfall, &coverage);
    let period = Period::of(&r.valid_times);
    let scope = Scope::of(pool.names.scenarios());
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
    let n = r.grid.len();
    let decisions = scope.track().then(|| {
        let min = coverage.min;
        let sensitivity = |needs, axis| {
            scope.missing(needs).is_none().then(|| {
                sensitivity_layer(n, &r.scenarios, r.baseline, axis, |k, i| {
                    pool.at_offset(k, i).snowfall
                })
            })
        };
        Decisions {
            snow: pool.distribution(|t, i| t.snowfall[i], &snow_mm, min),
            ice: pool.distribution(ice_accretion, &ice_mm, min),
            sensitivity_cross: sensitivity(Needs::Cross, Axis::Cross),
            sensitivity_along: sensitivity(Needs::Along, Axis::Along),
            flip: flip_layers(n, &r.scenarios, r.baseline, |k, i| pool.at_offset(k, i)),
        }
    });
    let ranked = town_decisions(r, pool, coverage.min, &snow_mm, &ice_mm);
    let onsets = r
        .towns
        .iter()
        .map(|t| {
            pool.totals
                .iter()
                .map(|tot| crate::accumulate::onset_at(tot, &r.grid, t.lon, t.lat))
                .collect()
        })
        .collect();
    let type_flips = scope
        .missing(Needs::Comparison)
        .is_none()
        .then(|| flip_cells(n, &pool.totals, r.baseline));
    Summary {
        towns: towns_in(&r.grid, &r.towns, &pool.totals),
        type_flips,
        onsets,
        prior: track_prior,
        weights: prior,
        pooled_weights: pool.weights.clone(),
        names: pool.names.clone(),
        group_times: pool.groups.iter().map(|g| g.valid_times.to_vec()).collect(),
        coverage,
        snow_spread,
        scope,
        period,
        period_words: period.map_or_else(|| "no steps".into(), |p| p.words()),
        decisions,
        ranked,
        members: None,
    }
}
