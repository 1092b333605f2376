//! Bust-prone towns: each town's weighted distribution, flip and sensitivity, a bust score to
//! rank by, and one plain-language sentence computed from the numbers.
//!
//! **Bust score** = (P90 − P10) / max(baseline, 5 cm), both in snow depth. P90 − P10 is the
//! spread of the outcomes under the track-error prior: weighted, so the most extreme
//! offsets (which set min and max) do not dominate. Dividing by the modelled amount expresses
//! the spread as a share of what is being forecast: 20 cm of spread on a 5 cm forecast is a
//! bust, on a 60 cm forecast a detail. The 5 cm floor ([`SCORE_FLOOR_MM`]) keeps places with a
//! trace forecast from topping the list on small absolute swings. A score of 1 means the likely
//! range is as wide as the forecast itself.

use super::ice::ice_accretion;
use super::names::ScenarioNames;
use super::pool::Pool;
use super::quantiles::Summary;
use super::sensitivity::{
    by_distance, difference, flip_search, stencil, Axis, CellTotals, FlipKind, FlipSearch, Ptype,
};
use crate::accumulate::Totals;
use crate::engine::RunResult;
use crate::grid::Grid;
use crate::scenario::Scenario;
use crate::units::Units;

/// Floor of the baseline in the bust score, mm of snow depth (5 cm).
pub const SCORE_FLOOR_MM: f64 = 50.0;

/// Changes of snowfall smaller than this (mm, 1 cm) are not worth a clause in the sentence.
const NOTABLE_MM: f32 = 10.0;

/// The (up to four) grid cells and bilinear weights that give a town's value
/// ([`Grid::bilinear_at`], the rule of the towns table).
#[derive(Clone, Debug)]
struct TownPoint {
    cells: Vec<(usize, f32)>,
}

impl TownPoint {
    fn new(grid: &Grid, lon: f64, lat: f64) -> Option<Self> {
        let cells = grid
            .bilinear_at(lon, lat)?
            .weighted()
            .map(|(i, w)| (i, w as f32))
            .collect();
        Some(Self { cells })
    }

    fn sample(&self, value: impl Fn(usize) -> f32) -> f32 {
        self.cells.iter().map(|&(i, w)| w * value(i)).sum()
    }

    fn totals(&self, t: &Totals) -> CellTotals {
        CellTotals {
            liquid: self.sample(|i| t.liquid[i]),
            snow_liquid: self.sample(|i| t.snow_liquid[i]),
            snowfall: self.sample(|i| t.snowfall[i]),
            ice_pellets: self.sample(|i| t.ice_pellets[i]),
            freezing_rain: self.sample(|i| t.freezing_rain[i]),
        }
    }
}

/// One town's decision numbers (snow depth and ice in mm).
#[derive(Clone, Debug)]
pub struct TownDecision {
    /// Name.
    pub name: String,
    /// Latitude.
    pub lat: f64,
    /// Longitude.
    pub lon: f64,
    /// Totals as modelled.
    pub baseline: CellTotals,
    /// Snowfall per scenario, mm.
    pub snowfall: Vec<f32>,
    /// Weighted mean and P10/P50/P90 of snowfall over the scenarios with data (`None` where
    /// they carry under the minimum share of the prior, [`super::coverage`]).
    pub snow: Option<Summary>,
    /// `P(snowfall ≥ threshold)` per threshold (NaN when missing).
    pub snow_exceedance: Vec<f64>,
    /// Smallest and largest snowfall over the scenarios and the scenarios giving them.
    pub extremes: Option<Extremes>,
    /// Ice accretion as modelled, mm.
    pub ice_baseline: f32,
    /// Weighted mean and P10/P50/P90 of ice accretion.
    pub ice: Option<Summary>,
    /// Probability of ice accretion reaching each ice threshold.
    pub ice_exceedance: Vec<f64>,
    /// The nearest flip.
    pub flip: FlipSearch,
    /// How far the first measurable snow (0.1 mm of liquid as snow in a step) moves over the
    /// scenarios, hours relative to the model as issued: (earliest, latest); NaN when it never
    /// snows measurably as modelled. Scenarios in which it never begins are left out.
    pub onset_shift_h: (f64, f64),
    /// Snowfall sensitivity across the track, mm per 50 km (positive: more if the low tracks left).
    pub sensitivity_cross: f32,
    /// Snowfall sensitivity along the track, mm per 50 km (positive: more if the low runs ahead).
    pub sensitivity_along: f32,
    /// The bust score (NaN when missing).
    pub score: f64,
}

/// Smallest and largest snowfall of a town.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Extremes {
    /// Smallest, mm.
    pub min: f32,
    /// Its scenario.
    pub argmin: usize,
    /// Largest, mm.
    pub max: f32,
    /// Its scenario.
    pub argmax: usize,
}

/// The bust score of a town (see the module notes). NaN when any input is missing.
///
/// ```
/// use trackswing::summarise::bust::bust_score;
/// assert_eq!(bust_score(20.0, 220.0, 100.0), 2.0); // 20 cm spread on a 10 cm forecast
/// assert_eq!(bust_score(0.0, 100.0, 0.0), 2.0);    // the 5 cm floor
/// ```
pub fn bust_score(p10_mm: f64, p90_mm: f64, baseline_mm: f64) -> f64 {
    (p90_mm - p10_mm) / baseline_mm.max(SCORE_FLOOR_MM)
}

/// Every town's decision numbers, ranked: highest bust score first, missing last, ties by name.
/// `snow_thresholds_mm` are snow depths and `ice_thresholds_mm` ice accretions, in mm.
///
/// `r` gives the grid, the towns and the offsets (the primary run's in an ensemble) and `pool`
/// the scenarios summarised ([`super::pool`]): the distributions, extremes and onsets pool
/// every scenario; the flip and the sensitivities use the blend at each offset; the baseline is
/// the run as issued.
pub fn town_decisions(
    r: &RunResult,
    pool: &Pool<'_>,
    min_coverage: f64,
    snow_thresholds_mm: &[f64],
    ice_thresholds_mm: &[f64],
) -> Vec<TownDecision> {
    let order = by_distance(&r.scenarios);
    let cross = stencil(&r.scenarios, r.baseline, Axis::Cross);
    let along = stencil(&r.scenarios, r.baseline, Axis::Along);
    let mut out: Vec<TownDecision> = r
        .towns
        .iter()
        .map(|t| {
            let point = TownPoint::new(&r.grid, t.lon, t.lat);
            let per: Vec<CellTotals> = pool
                .totals
                .iter()
                .map(|tot| match &point {
                    Some(p) => p.totals(tot),
                    None => CellTotals {
                        liquid: f32::NAN,
                        snow_liquid: f32::NAN,
                        snowfall: f32::NAN,
                        ice_pellets: f32::NAN,
                        freezing_rain: f32::NAN,
                    },
                })
                .collect();
            let ice: Vec<f32> = pool
                .totals
                .iter()
                .map(|tot| {
                    point
                        .as_ref()
                        .map_or(f32::NAN, |p| p.sample(|i| ice_accretion(tot, i)))
                })
                .collect();
            let snowfall: Vec<f32> = per.iter().map(|c| c.snowfall).collect();
            let snow_blend = pool.place(&snowfall, snow_thresholds_mm, min_coverage);
            let snow = snow_blend.as_ref().map(|b| b.0);
            let snow_exceedance = exceedances(snow_blend.as_ref(), snow_thresholds_mm);
            let ice_blend = pool.place(&ice, ice_thresholds_mm, min_coverage);
            let ice_exceedance = exceedances(ice_blend.as_ref(), ice_thresholds_mm);
            // Over the scenarios with data, where the coverage rule summarises the town.
            let extremes = snow.and_then(|_| extremes(&snowfall));
            let base = per[r.baseline];
            let offsets = pool.offsets_of(&per);
            let flip = flip_search(&r.scenarios, &order, &offsets[r.baseline], |k| offsets[k]);
            let diff = |st: &Option<super::sensitivity::Stencil>| {
                st.as_ref()
                    .map_or(f32::NAN, |s| difference(s, |k| offsets[k].snowfall))
            };
            let score = snow.map_or(f64::NAN, |s| {
                bust_score(s.quantiles[0], s.quantiles[2], base.snowfall as f64)
            });
            let (sensitivity_cross, sensitivity_along) = (diff(&cross), diff(&along));
            let onset_shift_h = onset_shift_hours(r, pool, t.lon, t.lat);
            TownDecision {
                name: t.name.clone(),
                lat: t.lat,
                lon: t.lon,
                onset_shift_h,
                baseline: base,
                ice_baseline: ice[r.baseline],
                ice: ice_blend.map(|b| b.0),
                ice_exceedance,
                snowfall,
                snow,
                snow_exceedance,
                extremes,
                flip,
                sensitivity_cross,
                sensitivity_along,
                score,
            }
        })
        .collect();
    out.sort_by(|a, b| match (a.score.is_nan(), b.score.is_nan()) {
        (true, true) => a.name.cmp(&b.name),
        (true, false) => std::cmp::Ordering::Greater,
        (false, true) => std::cmp::Ordering::Less,
        _ => b
            .score
            .total_cmp(&a.score)
            .then_with(|| a.name.cmp(&b.name)),
    });
    out
}

/// The probabilities of reaching each threshold from a place's summary (NaN where missing).
fn exceedances(blend: Option<&(Summary, Vec<f64>)>, thresholds: &[f64]) -> Vec<f64> {
    blend.map_or_else(|| vec![f64::NAN; thresholds.len()], |b| b.1.clone())
}

/// Smallest and largest of the values that are not missing (`None` when all are).
fn extremes(v: &[f32]) -> Option<Extremes> {
    let first = v.iter().position(|x| !x.is_nan())?;
    let (mut argmin, mut argmax) = (first, first);
    for (i, x) in v.iter().enumerate() {
        if *x < v[argmin] {
            argmin = i;
        }
        if *x > v[argmax] {
            argmax = i;
        }
    }
    Some(Extremes {
        min: v[argmin],
        argmin,
        max: v[argmax],
        argmax,
    })
}

/// A snow depth for a sentence: whole units from 10 up, one decimal below, "no snow" for what
/// rounds to zero.
pub fn snow_words(mm: f64, units: Units) -> String {
    let v = units.snow(mm as f32) as f64;
    let u = units.snow_unit();
    if v >= 9.95 {
        format!("{v:.0} {u}")
    } else if v >= 0.05 {
        format!("{v:.1} {u}")
    } else {
        "no snow".to_string()
    }
}

/// The nearest scenario (by distance from the baseline; ties: the more extreme value) whose
/// snowfall is at or beyond `bound` on the given side.
fn nearest_reaching(
    snowfall: &[f32],
    scenarios: &[Scenario],
    bound: f64,
    low_side: bool,
) -> Option<usize> {
    let reaches = |v: f32| {
        if low_side {
            v as f64 <= bound
        } else {
            v as f64 >= bound
        }
    };
    let dist = |k: usize| scenarios[k].cross_km.hypot(scenarios[k].along_km);
    (0..snowfall.len().min(scenarios.len()))
        .filter(|&k| super::sensitivity::track_only(&scenarios[k]) && reaches(snowfall[k]))
        .min_by(|&a, &b| {
            dist(a).total_cmp(&dist(b)).then_with(|| {
                let (x, y) = (snowfall[a], snowfall[b]);
                if low_side {
                    x.total_cmp(&y)
                } else {
                    y.total_cmp(&x)
                }
            })
        })
}

/// One plain-language sentence from a town's numbers, e.g. "18 cm as modelled; 4.0 cm or less
/// if the low tracks 40 km left; turns mostly to rain with the low 40 km left; 0.5–24 cm over
/// all offsets run." The low and high clauses name the nearest offset that brings the town to
/// its P10 (or below) and its P90 (or above): how little track error it takes to reach the
/// ends of the P10–P90 spread.
///
/// `names` names the scenarios of `t.snowfall` (pooled over groups in an ensemble: then the
/// low and high clauses name the member or methods too); the flip is at an offset of the blend.
pub fn sentence(t: &TownDecision, names: &ScenarioNames, units: Units) -> String {
    let scenarios = names.scenarios();
    let pooled = names.is_pooled();
    let (Some(s), Some(x)) = (t.snow, t.extremes) else {
        return "Missing in some track offsets (near the grid edge or where the model has no data), so no spread is given.".to_string();
    };
    let base = t.baseline.snowfall as f64;
    let mut parts = vec![match names.group_words(0) {
        // In an ensemble the run as issued is the primary group's.
        Some(g) => format!("{} as modelled by {g}", snow_words(base, units)),
        None => format!("{} as modelled", snow_words(base, units)),
    }];
    if let Some(ty) = t.baseline.dominant().filter(|p| *p != Ptype::Snow) {
        parts[0].push_str(&format!(" (mostly {})", ty.words()));
    }
    let (p10, p90) = (s.quantiles[0], s.quantiles[2]);
    if base - p10 >= NOTABLE_MM as f64 {
        if let Some(k) = nearest_reaching(&t.snowfall, scenarios, p10, true) {
            let amount = snow_words(p10, units);
            let amount = if amount == "no snow" {
                amount
            } else {
                format!("{amount} or less")
            };
            parts.push(if pooled {
                format!("{amount} in {}", in_group(names, k, units))
            } else {
                format!(
                    "{amount} if the low tracks {}",
                    scenarios[k].in_words_in(units)
                )
            });
        }
    }
    if p90 - base >= NOTABLE_MM as f64 {
        if let Some(k) = nearest_reaching(&t.snowfall, scenarios, p90, false) {
            parts.push(if pooled {
                format!(
                    "{} or more in {}",
                    snow_words(p90, units),
                    in_group(names, k, units)
                )
            } else {
                format!(
                    "{} or more if it tracks {}",
                    snow_words(p90, units),
                    scenarios[k].in_words_in(units)
                )
            });
        }
    }
    match t.flip {
        FlipSearch::Flip(f) => {
            let at = scenarios[f.scenario].in_words_in(units);
            let blend = if pooled { "the blend " } else { "" };
            parts.push(
                blend.to_string()
                    + &match (f.kind, f.to) {
                        (FlipKind::Type, Some(to)) => {
                            format!("turns mostly to {} with the low {at}", to.words())
                        }
                        (FlipKind::Halves, _) | (FlipKind::Type, None) => {
                            format!("halves with the low {at}")
                        }
                        (FlipKind::Doubles, _) => format!("doubles with the low {at}"),
                    },
            );
        }
        FlipSearch::Never => {
            let far = scenarios
                .iter()
                .map(|s| s.cross_km.hypot(s.along_km))
                .fold(0.0, f64::max);
            parts.push(format!(
                "no change of type, halving or doubling within the offsets run (up to {}){}",
                units.distance(far.round()),
                if pooled { " in the blend" } else { "" }
            ));
        }
        FlipSearch::Missing => {}
    }
    let hi = snow_words(x.max as f64, units);
    let over = if pooled {
        "all members, methods and offsets run"
    } else {
        "all offsets run"
    };
    if hi == "no snow" {
        parts.push(if pooled {
            format!("no snow in any of {over}")
        } else {
            "no snow in any offset run".to_string()
        });
        return parts.join("; ") + ".";
    }
    let lo = snow_words(x.min as f64, units);
    let lo = if lo == "no snow" {
        "0".to_string()
    } else {
        lo.trim_end_matches(units.snow_unit())
            .trim_end()
            .to_string()
    };
    parts.push(format!("{lo}–{hi} over {over}"));
    parts.join("; ") + "."
}

/// Pooled scenario `k` as the place of a low or high clause: `member 'north' as modelled`,
/// `member 'north' with the low 40 km left`.
fn in_group(names: &ScenarioNames, k: usize, units: Units) -> String {
    let s = names.scenario(k);
    let group = names.group_words(k).unwrap_or_default();
    if s.is_baseline() {
        format!("{group} as modelled")
    } else {
        format!("{group} with the low {}", s.in_words_in(units))
    }
}

/// Earliest and latest onset of measurable snow over the scenarios, hours relative to the
/// baseline's onset (NaN, NaN when the baseline never reaches it).
fn onset_shift_hours(r: &RunResult, pool: &Pool<'_>, lon: f64, lat: f64) -> (f64, f64) {
    // Each scenario's onset is a step of its own group, whose steps may be other times.
    let onset = |s: usize| {
        crate::accumulate::onset_at(pool.totals[s], &r.grid, lon, lat)
            .map(|k| pool.valid_times(s)[k as usize - 1])
    };
    let Some(base) = onset(r.baseline) else {
        return (f64::NAN, f64::NAN);
    };
    let shifts: Vec<f64> = (0..pool.totals.len())
        .filter_map(onset)
        .map(|t| (t - base).num_minutes() as f64 / 60.0)
        .collect();
    let lo = shifts.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = shifts.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    (lo, hi)
}

#[cfg(test)]
mod tests {
    use super::super::quantiles::{prepare, summary};
    use super::*;

    fn decision(base: f32, snowfall: Vec<f32>, flip: FlipSearch) -> TownDecision {
        let mut pairs: Vec<(f64, f64)> = snowfall.iter().map(|v| (*v as f64, 1.0)).collect();
        prepare(&mut pairs, 1.0).unwrap();
        TownDecision {
            name: "T".into(),
            lat: 0.0,
            lon: 0.0,
            onset_shift_h: (f64::NAN, f64::NAN),
            baseline: CellTotals {
                liquid: 18.0,
                snow_liquid: 18.0,
                snowfall: base,
                ice_pellets: 0.0,
                freezing_rain: 0.0,
            },
            extremes: extremes(&snowfall),
            snow: Some(summary(&pairs)),
            snowfall,
            snow_exceedance: vec![],
            ice_baseline: 0.0,
            ice: None,
            ice_exceedance: vec![],
            flip,
            sensitivity_cross: 0.0,
            sensitivity_along: 0.0,
            score: 0.0,
        }
    }

    #[test]
    fn sentence_reads_the_numbers() {
        // Five offsets −40…40 km with equal weights; snowfall 200, 190, 180, 60, 40 mm.
        // Hazen positions 0.1…0.9: P10 = 40 mm (reached first at +40 km), P90 = 200 mm
        // (reached first at −40 km).
        let sc = crate::scenario::scenario_set(&[-40.0, -20.0, 0.0, 20.0, 40.0], &[0.0]);
        let flip = FlipSearch::Flip(super::super::sensitivity::Flip {
            distance_km: 20.0,
            scenario: 3,
            cross_km: 20.0,
            along_km: 0.0,
            kind: FlipKind::Type,
            to: Some(Ptype::Rain),
            snowfall: 60.0,
        });
        let t = decision(180.0, vec![200.0, 190.0, 180.0, 60.0, 40.0], flip);
        assert_eq!(
            sentence(&t, &ScenarioNames::single(&sc), Units::Metric),
            "18 cm as modelled; 4.0 cm or less if the low tracks 40 km left; 20 cm or more if it tracks 40 km right; turns mostly to rain with the low 20 km left; 4.0–20 cm over all offsets run."
        );
        let t = decision(
            180.0,
            vec![185.0, 182.0, 180.0, 178.0, 175.0],
            FlipSearch::Never,
        );
        let s = sentence(&t, &ScenarioNames::single(&sc), Units::Us);
        assert_eq!(
            s,
            "7.1 in as modelled; no change of type, halving or doubling within the offsets run (up to 40 km (25 mi)); 6.9–7.3 in over all offsets run."
        );
        // No snow anywhere: no range to give (it once read "0–no snow").
        let t = decision(0.0, vec![0.0; 5], FlipSearch::Never);
        let s = sentence(&t, &ScenarioNames::single(&sc), Units::Metric);
        assert!(s.ends_with("; no snow in any offset run."), "{s}");
        assert!(!s.contains('–'), "{s}");
    }

    #[test]
    fn score_ranks_relative_spread() {
        // 10 cm forecast, likely 2–22 cm: spread 20 cm = 2× the forecast.
        assert_eq!(bust_score(20.0, 220.0, 100.0), 2.0);
        // 60 cm forecast with the same spread: a third.
        assert!((bust_score(500.0, 700.0, 600.0) - 1.0 / 3.0).abs() < 1e-12);
        assert!(bust_score(f64::NAN, 1.0, 1.0).is_nan());
    }
}
