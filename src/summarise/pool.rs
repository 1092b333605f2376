//! The scenarios a summary describes, as one weighted set. A run of one member with one method
//! combination is its own set, weighted by the track-error prior. A case of several members or
//! methods pools every group's scenarios: scenario s of group g weighs `W_g × p_s` (the group's
//! weight times the prior's), so the weighted mean, P10/P50/P90, the threshold probabilities,
//! min/max and the bust ranking describe every member, method and offset together.
//!
//! What compares offsets with each other (the sensitivity per 50 km, the flip distance) uses
//! the blend at each offset instead: the `W_g`-weighted mean of the groups' totals at that
//! offset, the change of the blended forecast as the track moves. A single run's per-offset
//! values are its own, unchanged.

use super::mixture::{blended_distribution, Mixture};
use super::names::{GroupName, ScenarioNames};
use super::quantiles::{distribution, exceedance, prepare, summary, DistributionLayers, Summary};
use super::sensitivity::CellTotals;
use crate::accumulate::Totals;
use crate::case::Case;
use crate::engine::{Ensemble, RunResult};
use chrono::{DateTime, Utc};

/// One group's part of the pool.
pub struct PoolGroup<'a> {
    /// Its totals per scenario (the offsets of the run, in the same order in every group).
    pub totals: &'a [Totals],
    /// Its weight (the groups' weights add up to 1).
    pub weight: f64,
    /// The valid time of each of its steps (its onsets are step numbers in these).
    pub valid_times: &'a [DateTime<Utc>],
}

/// Every scenario a summary describes, with its weight and its name.
pub struct Pool<'a> {
    /// The groups, group-major; one for a single run.
    pub groups: Vec<PoolGroup<'a>>,
    /// Every scenario's totals, group-major.
    pub totals: Vec<&'a Totals>,
    /// Every scenario's weight, group-major (they add up to 1).
    pub weights: Vec<f64>,
    /// Their names.
    pub names: ScenarioNames,
    /// The prior's weight of each offset (the same in every group).
    pub prior: Vec<f64>,
}

impl<'a> Pool<'a> {
    /// A single run under the prior `prior` (one weight per scenario).
    pub fn single(r: &'a RunResult, prior: &[f64]) -> Self {
        Self {
            groups: vec![PoolGroup {
                totals: &r.totals,
                weight: 1.0,
                valid_times: &r.valid_times,
            }],
            totals: r.totals.iter().collect(),
            weights: prior.to_vec(),
            names: ScenarioNames::single(&r.scenarios),
            prior: prior.to_vec(),
        }
    }

    /// Every group of an ensemble, each under the prior `prior`.
    pub fn ensemble(case: &Case, e: &'a Ensemble, prior: &[f64]) -> Self {
        let several_members = e.members() > 1;
        let options = &case.physics.options;
        let ptypes_vary = options
            .iter()
            .any(|o| o.methods.ptype != options[0].methods.ptype);
        let ratios_vary = options
            .iter()
            .any(|o| o.methods.slr != options[0].methods.slr);
        let names = e
            .groups
            .iter()
            .map(|g| {
                let m = options[g.option].methods;
                // Only the methods that vary name a group.
                let (methods, method_tag) = match (ptypes_vary, ratios_vary) {
                    (true, true) => (
                        format!("{}/{}", m.ptype.name(), m.slr.name()),
                        format!("{}_{}", m.ptype.name(), m.slr.name()),
                    ),
                    (true, false) => (
                        format!("{} precipitation type", m.ptype.name()),
                        m.ptype.name().to_string(),
                    ),
                    (false, true) => (
                        format!("{} snow ratio", m.slr.name()),
                        m.slr.name().to_string(),
                    ),
                    (false, false) => (String::new(), String::new()),
                };
                let member = &case.inputs.members[g.member].name;
                let (words, tag) = match (several_members, methods.is_empty()) {
                    (true, false) => (
                        format!("member '{member}' ({methods})"),
                        format!("{member}_{method_tag}"),
                    ),
                    (true, true) => (format!("member '{member}'"), member.clone()),
                    (false, _) => (format!("the {methods}"), method_tag),
                };
                GroupName { words, tag }
            })
            .collect();
        let primary = &e.groups[0].run;
        Self {
            groups: e
                .groups
                .iter()
                .map(|g| PoolGroup {
                    totals: &g.run.totals,
                    weight: g.weight,
                    valid_times: &g.run.valid_times,
                })
                .collect(),
            totals: e.groups.iter().flat_map(|g| g.run.totals.iter()).collect(),
            weights: e
                .groups
                .iter()
                .flat_map(|g| prior.iter().map(move |p| g.weight * p))
                .collect(),
            names: ScenarioNames::pooled(&primary.scenarios, names),
            prior: prior.to_vec(),
        }
    }

    /// The weighted distribution of `value(totals, cell)` at every cell: a run's own
    /// ([`distribution`]), or the blend of the groups' ([`blended_distribution`]).
    pub fn distribution(
        &self,
        value: impl Fn(&Totals, usize) -> f32 + Sync,
        thresholds: &[f64],
        min_coverage: f64,
    ) -> DistributionLayers {
        if self.groups.len() == 1 {
            return distribution(&self.totals, &self.weights, value, thresholds, min_coverage);
        }
        let gw: Vec<f64> = self.groups.iter().map(|g| g.weight).collect();
        blended_distribution(
            &self.totals,
            &self.prior,
            &gw,
            value,
            thresholds,
            min_coverage,
        )
    }

    /// The weighted summary of one place's values (one per pooled scenario) and its
    /// probability of reaching each threshold; `None` where the scenarios with a value carry
    /// under `min_coverage` of the weight.
    pub fn place(
        &self,
        values: &[f32],
        thresholds: &[f64],
        min_coverage: f64,
    ) -> Option<(Summary, Vec<f64>)> {
        if self.groups.len() == 1 {
            let mut pairs: Vec<(f64, f64)> = values
                .iter()
                .zip(&self.weights)
                .map(|(x, w)| (*x as f64, *w))
                .collect();
            prepare(&mut pairs, min_coverage)?;
            let p = thresholds.iter().map(|t| exceedance(&pairs, *t)).collect();
            return Some((summary(&pairs), p));
        }
        let n = self.per_group();
        let mut groups: Vec<Vec<(f64, f64)>> = (0..self.groups.len())
            .map(|g| {
                values[g * n..(g + 1) * n]
                    .iter()
                    .zip(&self.prior)
                    .map(|(x, w)| (*x as f64, *w))
                    .collect()
            })
            .collect();
        let gw: Vec<f64> = self.groups.iter().map(|g| g.weight).collect();
        let m = Mixture::new(&mut groups, &gw, min_coverage)?;
        let p = thresholds.iter().map(|t| m.exceedance(*t)).collect();
        Some((m.summary(), p))
    }

    /// Offset scenarios per group.
    pub fn per_group(&self) -> usize {
        self.groups.first().map_or(0, |g| g.totals.len())
    }

    /// The valid times of pooled scenario `k`'s steps.
    pub fn valid_times(&self, k: usize) -> &'a [DateTime<Utc>] {
        self.groups[k / self.per_group().max(1)].valid_times
    }

    /// The totals at offset scenario `k`, cell `i`: the run's own, or the weighted mean over
    /// the groups (missing where any group is).
    pub fn at_offset(&self, k: usize, i: usize) -> CellTotals {
        if let [one] = self.groups.as_slice() {
            return CellTotals::of(&one.totals[k], i);
        }
        self.blend(|g| CellTotals::of(&g.totals[k], i))
    }

    /// One place's per-offset totals from its per-pooled-scenario totals `per` (group-major):
    /// the run's own, or the weighted mean over the groups.
    pub fn offsets_of(&self, per: &[CellTotals]) -> Vec<CellTotals> {
        let n = self.per_group();
        if self.groups.len() == 1 {
            return per.to_vec();
        }
        (0..n)
            .map(|k| {
                let mut g = 0;
                self.blend(|_| {
                    let c = per[g * n + k];
                    g += 1;
                    c
                })
            })
            .collect()
    }

    /// The weighted mean over the groups of `value(group)`.
    fn blend(&self, mut value: impl FnMut(&PoolGroup<'a>) -> CellTotals) -> CellTotals {
        let mut out = CellTotals {
            liquid: 0.0,
            snow_liquid: 0.0,
            snowfall: 0.0,
            ice_pellets: 0.0,
            freezing_rain: 0.0,
        };
        for g in &self.groups {
            let c = value(g);
            let w = g.weight as f32;
            out.liquid += w * c.liquid;
            out.snow_liquid += w * c.snow_liquid;
            out.snowfall += w * c.snowfall;
            out.ice_pellets += w * c.ice_pellets;
            out.freezing_rain += w * c.freezing_rain;
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn totals(v: &[f32]) -> Totals {
        let mut t = Totals::new(1);
        t.liquid[0] = v[0];
        t.snow_liquid[0] = v[1];
        t.snowfall[0] = v[2];
        t
    }

    #[test]
    fn the_blend_at_an_offset_is_the_weighted_mean_of_the_groups_and_missing_stays_missing() {
        let a = [totals(&[10.0, 10.0, 100.0]), totals(&[10.0, 5.0, 40.0])];
        let b = [totals(&[20.0, 0.0, 0.0]), totals(&[f32::NAN, 0.0, 0.0])];
        let times = [];
        let pool = Pool {
            groups: vec![
                PoolGroup {
                    totals: &a,
                    weight: 0.75,
                    valid_times: &times,
                },
                PoolGroup {
                    totals: &b,
                    weight: 0.25,
                    valid_times: &times,
                },
            ],
            totals: a.iter().chain(&b).collect(),
            weights: vec![0.375, 0.375, 0.125, 0.125],
            names: ScenarioNames::single(&[]),
            prior: vec![0.5, 0.5],
        };
        let c = pool.at_offset(0, 0);
        assert_eq!((c.liquid, c.snow_liquid, c.snowfall), (12.5, 7.5, 75.0));
        assert!(pool.at_offset(1, 0).is_missing());
        let per: Vec<CellTotals> = pool.totals.iter().map(|t| CellTotals::of(t, 0)).collect();
        let off = pool.offsets_of(&per);
        assert_eq!(off.len(), 2);
        assert_eq!(off[0].snowfall, 75.0);
        assert!(off[1].is_missing());
    }
}
