//! Several members and method combinations: where each cell's and each town's spread comes
//! from (members, methods, or the track and the other axes; [`super::variance`]), each
//! member's weighted mean and its run as issued.
//!
//! A scenario of group g (member m, method combination k) weighs `W_g × p_s`: the group's
//! weight (the member's share of the members' weights × the combination's weight) times the
//! track-error prior's weight of its offsets, the same in every group.

use super::aligned::{track_explains, track_explains_cells};
use super::bust::TownDecision;
use super::value_at;
use super::variance::{parts, spread_layers, Group, Parts, SpreadLayers};
use crate::case::Case;
use crate::engine::Ensemble;
use crate::units::Units;

pub use super::variance::NO_SPREAD_MM;

/// What the groups of an ensemble say together, in mm of snow depth.
pub struct MemberSummary {
    /// Member names, in the case's order.
    pub names: Vec<String>,
    /// Each member's share of the members' weights.
    pub member_weights: Vec<f64>,
    /// Method-combination labels (`precip-type/snow-ratio`), in the case's order.
    pub options: Vec<String>,
    /// Each combination's weight.
    pub option_weights: Vec<f64>,
    /// The track-error prior's weight of each scenario (the same in every group).
    pub prior_weights: Vec<f64>,
    /// The snowfall's standard deviation and its parts, and the parts' shares.
    pub spread: SpreadLayers,
    /// Per member: its weighted mean snowfall over its methods and offsets (missing where its
    /// scenarios with data carry less than the minimum coverage of its weight).
    pub member_mean: Vec<Vec<f32>>,
    /// Per member: its run as issued (first method combination, offset 0).
    pub member_baseline: Vec<Vec<f32>>,
    /// Per cell, the share of the spread between the members' runs as issued that their track
    /// differences explain ([`super::aligned`]); `None` when the members are not aligned (the
    /// ensemble says why).
    pub track_explains: Option<Vec<f32>>,
    /// Per cell, the source with at least half the snowfall variance
    /// ([`crate::render::legend::SOURCE_CODES`]: 1 members, 2 methods, 3 track, 0 none, 4 no
    /// spread); NaN where the spread is missing.
    pub dominant: Vec<f32>,
    /// When the members are successive cycles of a model (every member has a reference time,
    /// all different): the members in time order, with their reference times.
    pub cycles: Option<Vec<(usize, chrono::DateTime<chrono::Utc>)>>,
    /// Per ranked town (in the order of `Summary::ranked`): the parts of its snowfall's variance
    /// and each member's baseline.
    pub towns: Vec<TownSpread>,
}

/// One town's spread across members, methods and the track.
#[derive(Clone, Debug)]
pub struct TownSpread {
    /// The variance and its parts, mm²; `None` where the coverage rule leaves it missing.
    pub parts: Option<Parts>,
    /// Each member's baseline snowfall, mm.
    pub baselines: Vec<f32>,
    /// The share of the spread between the members' baselines that their track differences
    /// explain ([`super::aligned`]; NaN where missing); `None` when the members are not aligned.
    pub track_explains: Option<f32>,
}

/// Summarises the groups of an ensemble: `prior` is the track-error prior's weight of each
/// scenario (the same in every group) and `ranked` the primary group's ranked towns (the rows).
pub fn summarise_members(
    case: &Case,
    e: &Ensemble,
    prior: &[f64],
    ranked: &[TownDecision],
) -> MemberSummary {
    let members = &case.inputs.members;
    let options = &case.physics.options;
    let per_group = prior.len();
    // Every (group, scenario) pair, group-major.
    let mut weights = Vec::with_capacity(e.groups.len() * per_group);
    let mut groups = Vec::with_capacity(weights.capacity());
    for g in &e.groups {
        for p in prior {
            weights.push(g.weight * p);
            groups.push(Group {
                member: g.member,
                method: g.option,
            });
        }
    }
    let field = |pair: usize| &e.groups[pair / per_group].run.totals[pair % per_group].snowfall;
    let cells = e.groups[0].run.grid.len();
    let min = case.summary.min_coverage;
    let spread = spread_layers(cells, &weights, &groups, min, |s, i| field(s)[i]);
    let member_mean = (0..members.len())
        .map(|m| {
            let mine: Vec<usize> = (0..weights.len())
                .filter(|&s| groups[s].member == m)
                .collect();
            let all: f64 = mine.iter().map(|&s| weights[s]).sum();
            (0..cells)
                .map(|i| {
                    let (mut sum, mut carried) = (0.0, 0.0);
                    for &s in &mine {
                        let x = field(s)[i];
                        if !x.is_nan() {
                            sum += weights[s] * x as f64;
                            carried += weights[s];
                        }
                    }
                    if carried > 0.0 && carried >= min * all - 1e-12 {
                        (sum / carried) as f32
                    } else {
                        f32::NAN
                    }
                })
                .collect()
        })
        .collect();
    let baseline_of = |m: usize| e.as_issued(m).map(|r| &r.totals[r.baseline].snowfall);
    let member_baseline: Vec<Vec<f32>> = (0..members.len())
        .map(|m| {
            baseline_of(m)
                .cloned()
                .unwrap_or_else(|| vec![f32::NAN; cells])
        })
        .collect();
    let member_sum: f64 = members.iter().map(|m| m.weight).sum();
    let member_weights: Vec<f64> = members.iter().map(|m| m.weight / member_sum).collect();
    let track_explains = e
        .alignment
        .as_ref()
        .ok()
        .map(|a| track_explains_cells(&member_baseline, &a.snowfall, &member_weights));
    let grid = &e.groups[0].run.grid;
    let towns = ranked
        .iter()
        .map(|t| {
            town_spread(
                t,
                e,
                (&weights, &groups, per_group),
                min,
                grid,
                &member_weights,
            )
        })
        .collect();
    let dominant = (0..cells)
        .map(|i| {
            let sd = spread.sd[0][i];
            let sh = [0, 1, 2].map(|k| spread.share[k][i]);
            if sd.is_nan() {
                f32::NAN
            } else if sd < NO_SPREAD_MM {
                4.0
            } else {
                sh.iter()
                    .position(|v| *v >= 0.5)
                    .map_or(0.0, |k| (k + 1) as f32)
            }
        })
        .collect();
    let references: Vec<Option<chrono::DateTime<chrono::Utc>>> = (0..members.len())
        .map(|m| e.as_issued(m).and_then(|r| r.reference))
        .collect();
    let cycles = cycles_of(&references);
    MemberSummary {
        cycles,
        dominant,
        names: members.iter().map(|m| m.name.clone()).collect(),
        member_weights,
        options: options.iter().map(|o| o.label()).collect(),
        option_weights: options.iter().map(|o| o.weight).collect(),
        prior_weights: prior.to_vec(),
        spread,
        member_mean,
        member_baseline,
        track_explains,
        towns,
    }
}

/// One town's parts by the grid's point rule, under the coverage rule of the cells: `scenarios`
/// are every (group, scenario) pair's weight and group, and the scenarios per group.
fn town_spread(
    t: &TownDecision,
    e: &Ensemble,
    (weights, groups, per_group): (&[f64], &[Group], usize),
    min: f64,
    grid: &crate::grid::Grid,
    member_weights: &[f64],
) -> TownSpread {
    let mut values = Vec::with_capacity(weights.len());
    let mut carried = 0.0;
    for (s, (&w, &g)) in weights.iter().zip(groups).enumerate() {
        let run = &e.groups[s / per_group].run;
        let x = value_at(grid, &run.totals[s % per_group].snowfall, t.lon, t.lat);
        if !x.is_nan() {
            carried += w;
            values.push((x as f64, w, g));
        }
    }
    let all: f64 = weights.iter().sum();
    let parts = (carried >= min * all - 1e-12)
        .then(|| parts(&values))
        .flatten();
    let baselines: Vec<f32> = (0..e.members())
        .map(|m| {
            e.as_issued(m).map_or(f32::NAN, |r| {
                value_at(grid, &r.totals[r.baseline].snowfall, t.lon, t.lat)
            })
        })
        .collect();
    let track_explains = e.alignment.as_ref().ok().map(|a| {
        let aligned: Vec<f32> = a
            .snowfall
            .iter()
            .map(|f| value_at(grid, f, t.lon, t.lat))
            .collect();
        track_explains(&baselines, &aligned, member_weights)
    });
    TownSpread {
        parts,
        baselines,
        track_explains,
    }
}

/// The members in time order when they are successive cycles: at least two, each with a
/// reference time, no two the same.
fn cycles_of(
    references: &[Option<chrono::DateTime<chrono::Utc>>],
) -> Option<Vec<(usize, chrono::DateTime<chrono::Utc>)>> {
    let mut v: Vec<(usize, chrono::DateTime<chrono::Utc>)> = references
        .iter()
        .enumerate()
        .map(|(i, r)| r.map(|t| (i, t)))
        .collect::<Option<_>>()?;
    v.sort_by_key(|&(_, t)| t);
    let distinct = v.windows(2).all(|w| w[0].1 < w[1].1);
    (v.len() >= 2 && distinct).then_some(v)
}

/// The run-to-run change of a town's snowfall as modelled, in words: each cycle's baseline in
/// time order and the change from the first to the last; `None` where a baseline is missing.
pub fn trend_words(
    cycles: &[(usize, chrono::DateTime<chrono::Utc>)],
    baselines_mm: &[f32],
    units: Units,
) -> Option<String> {
    let values: Vec<f32> = cycles
        .iter()
        .map(|&(m, _)| baselines_mm.get(m).copied().unwrap_or(f32::NAN))
        .collect();
    if values.iter().any(|v| v.is_nan()) {
        return None;
    }
    let su = units.snow_unit();
    let change = units.snow(values[values.len() - 1] - values[0]);
    let path: Vec<String> = cycles
        .iter()
        .zip(&values)
        .map(|((_, t), v)| format!("{} {:.1}", t.format("%dT%HZ"), units.snow(*v)))
        .collect();
    let how = if change.abs() < 0.05 {
        "unchanged".to_string()
    } else if change > 0.0 {
        format!("up {change:.1} {su}")
    } else {
        format!("down {:.1} {su}", -change)
    };
    Some(format!(
        "run to run, {how} over the last {} cycles ({} {su})",
        cycles.len(),
        path.join(" → ")
    ))
}

/// The change from the first cycle's baseline to the last's, mm (NaN where one is missing).
pub fn trend_mm(cycles: &[(usize, chrono::DateTime<chrono::Utc>)], baselines_mm: &[f32]) -> f32 {
    let at = |k: usize| baselines_mm.get(cycles[k].0).copied().unwrap_or(f32::NAN);
    at(cycles.len() - 1) - at(0)
}

/// Which source a share of at least half the variance names, in plain words; a mixed spread
/// gives the three shares. Nothing where the spread is missing or zero.
pub fn source_words(
    p: &Parts,
    units: Units,
    several_members: bool,
    several_methods: bool,
) -> String {
    let Some([m, k, t]) = p.shares() else {
        return String::new();
    };
    let sd = units.snow(p.total.sqrt() as f32);
    let su = units.snow_unit();
    let pct = |x: f64| format!("{:.0} %", 100.0 * x);
    let head = format!("spread σ {sd:.1} {su}");
    if m >= 0.5 {
        format!(
            "{head}: most of it is which model is right ({} between members), not the track ({})",
            pct(m),
            pct(t)
        )
    } else if k >= 0.5 {
        format!("{head}: most of it is how the column turns liquid into snow ({} between methods), not the track ({})", pct(k), pct(t))
    } else if t >= 0.5 {
        format!("{head}: most of it is where the low tracks ({} from the track offsets), not the models ({}) or methods ({})", pct(t), pct(m), pct(k))
    } else {
        let mut parts = Vec::new();
        if several_members {
            parts.push(format!("members {}", pct(m)));
        }
        if several_methods {
            parts.push(format!("methods {}", pct(k)));
        }
        parts.push(format!("track {}", pct(t)));
        format!("{head}: no single source dominates ({})", parts.join(", "))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cycles_in_time_order_and_their_trend() {
        use chrono::TimeZone;
        let t = |h: u32| Some(chrono::Utc.with_ymd_and_hms(2026, 1, 13, h, 0, 0).unwrap());
        // Listed out of order: sorted by reference time.
        let c = cycles_of(&[t(12), t(0), t(6)]).unwrap();
        assert_eq!(c.iter().map(|x| x.0).collect::<Vec<_>>(), [1, 2, 0]);
        // Two members of one cycle, or one without a time: not cycles.
        assert!(cycles_of(&[t(6), t(6)]).is_none());
        assert!(cycles_of(&[t(6), None]).is_none());
        assert!(cycles_of(&[t(6)]).is_none());
        // Baselines 180, 120, 150 mm for the members 0 (12Z), 1 (00Z), 2 (06Z): 12 → 15 → 18 cm.
        let b = [180.0, 120.0, 150.0];
        assert_eq!(trend_mm(&c, &b), 60.0);
        assert_eq!(
            trend_words(&c, &b, Units::Metric).unwrap(),
            "run to run, up 6.0 cm over the last 3 cycles (13T00Z 12.0 → 13T06Z 15.0 → 13T12Z 18.0 cm)"
        );
        assert!(trend_words(&c, &[180.0, f32::NAN, 150.0], Units::Metric).is_none());
    }

    #[test]
    fn the_words_name_the_dominant_source() {
        let p = Parts {
            total: 100.0,
            members: 70.0,
            methods: 10.0,
            within: 20.0,
        };
        let w = source_words(&p, Units::Metric, true, true);
        assert!(
            w.starts_with("spread σ 1.0 cm: most of it is which model is right (70 %"),
            "{w}"
        );
        let p = Parts {
            total: 100.0,
            members: 30.0,
            methods: 30.0,
            within: 40.0,
        };
        let w = source_words(&p, Units::Metric, true, true);
        assert!(
            w.contains("no single source dominates (members 30 %, methods 30 %, track 40 %)"),
            "{w}"
        );
    }
}
