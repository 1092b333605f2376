//! How fast a total changes with the track, and how far the track must move before the
//! forecast changes character (the flip distance).
//!
//! **Sensitivity** at the model as issued, per [`PER_KM`] km of offset, signed so that a positive
//! value means "moving the track this way brings more": across the track the derivative with
//! respect to the cross-track offset (positive = the low tracks further left), along the track
//! with respect to the along-track offset (positive = the low runs ahead). It is the centred
//! difference between the nearest offsets either side of zero on that axis (the other offset
//! zero), one-sided (against the baseline) where only one side was run, and missing where the
//! axis has no offsets.
//!
//! Both compare only scenarios that move the track (timing, intensity and temperature held as
//! modelled).
//!
//! **Flip distance**: the smallest distance `√(cross² + along²)` of a scenario in which the cell
//! (a) changes its dominant precipitation type (both with at least 0.1 mm of liquid), or
//! (b) has half or (c) twice the baseline snowfall, comparing the snowfalls each floored at
//! [`FLIP_FLOOR_MM`] (1 cm) so that a trace does not "double". Missing where the baseline or a
//! scenario nearer than the flip is missing; "never" where nothing flips within the offsets run.
//! Between two scenarios at the same distance that both flip, the one with the larger change of
//! snowfall wins (then the earlier scenario), so the reported direction is the one that matters.

use crate::accumulate::{Totals, MEASURABLE_LIQUID};
use crate::scenario::Scenario;
use serde::Serialize;

/// Sensitivities are given per this many km of offset.
pub const PER_KM: f64 = 50.0;

/// Snowfall floor for the halving/doubling test, mm of snow depth (1 cm).
pub const FLIP_FLOOR_MM: f64 = 10.0;

/// Scenarios closer than this in distance (km) are at the same distance.
const SAME_DISTANCE_KM: f64 = 1e-6;

/// Dominant precipitation type.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Ptype {
    /// Snow.
    Snow,
    /// Ice pellets (sleet).
    IcePellets,
    /// Freezing rain.
    FreezingRain,
    /// Rain.
    Rain,
}

impl Ptype {
    /// Plain words.
    pub fn words(&self) -> &'static str {
        match self {
            Self::Snow => "snow",
            Self::IcePellets => "sleet",
            Self::FreezingRain => "freezing rain",
            Self::Rain => "rain",
        }
    }
}

/// One cell's (or town's) storm totals in one scenario, mm.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CellTotals {
    /// All precipitation, liquid equivalent.
    pub liquid: f32,
    /// Liquid that fell as snow.
    pub snow_liquid: f32,
    /// Snow depth.
    pub snowfall: f32,
    /// Liquid that fell as ice pellets.
    pub ice_pellets: f32,
    /// Liquid that fell as freezing rain.
    pub freezing_rain: f32,
}

impl CellTotals {
    /// Cell `i` of a scenario's totals.
    pub fn of(t: &Totals, i: usize) -> Self {
        Self {
            liquid: t.liquid[i],
            snow_liquid: t.snow_liquid[i],
            snowfall: t.snowfall[i],
            ice_pellets: t.ice_pellets[i],
            freezing_rain: t.freezing_rain[i],
        }
    }

    /// True when any total is missing.
    pub fn is_missing(&self) -> bool {
        [
            self.liquid,
            self.snow_liquid,
            self.snowfall,
            self.ice_pellets,
            self.freezing_rain,
        ]
        .iter()
        .any(|v| v.is_nan())
    }

    /// The type with the largest share of the liquid; `None` below measurable precipitation.
    /// Ties go to the first of snow, sleet, freezing rain, rain.
    pub fn dominant(&self) -> Option<Ptype> {
        if self.is_missing() || self.liquid < MEASURABLE_LIQUID {
            return None;
        }
        let rain = self.liquid - self.snow_liquid - self.ice_pellets - self.freezing_rain;
        let parts = [
            (Ptype::Snow, self.snow_liquid),
            (Ptype::IcePellets, self.ice_pellets),
            (Ptype::FreezingRain, self.freezing_rain),
            (Ptype::Rain, rain),
        ];
        let mut best = parts[0];
        for p in &parts[1..] {
            if p.1 > best.1 {
                best = *p;
            }
        }
        Some(best.0)
    }
}

/// What changed at the flip.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FlipKind {
    /// The dominant type changed.
    Type,
    /// Snowfall halved.
    Halves,
    /// Snowfall doubled.
    Doubles,
}

impl FlipKind {
    /// Code of the `flip_distance.tif` band "what flips": 1 type, 2 halves, 3 doubles (0 means
    /// nothing flips within the offsets run).
    pub fn code(&self) -> f32 {
        match self {
            Self::Type => 1.0,
            Self::Halves => 2.0,
            Self::Doubles => 3.0,
        }
    }
}

/// The nearest scenario in which the forecast changes character.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Flip {
    /// Its distance from the baseline, km.
    pub distance_km: f64,
    /// Index of the scenario.
    pub scenario: usize,
    /// Its cross-track offset, km.
    pub cross_km: f64,
    /// Its along-track offset, km.
    pub along_km: f64,
    /// What changed.
    pub kind: FlipKind,
    /// The dominant type there.
    pub to: Option<Ptype>,
    /// Its snowfall, mm.
    pub snowfall: f32,
}

/// Result of the flip search at one place.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum FlipSearch {
    /// A flip within the offsets run.
    Flip(Flip),
    /// Nothing flips within the offsets run.
    Never,
    /// Some needed value is missing.
    Missing,
}

/// True when a scenario differs from the model as issued only by its track offset (no timing,
/// intensity or temperature change): the scenarios the track products compare.
pub fn track_only(s: &Scenario) -> bool {
    Scenario {
        cross_km: 0.0,
        along_km: 0.0,
        ..*s
    }
    .is_baseline()
}

/// The track-only, non-baseline scenarios ordered by distance from the baseline (then by
/// index).
pub fn by_distance(scenarios: &[Scenario]) -> Vec<(usize, f64)> {
    let mut v: Vec<(usize, f64)> = scenarios
        .iter()
        .enumerate()
        .filter(|(_, s)| track_only(s) && !s.is_baseline())
        .map(|(i, s)| (i, s.cross_km.hypot(s.along_km)))
        .collect();
    v.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    v
}

fn flip_kind(base: &CellTotals, other: &CellTotals) -> Option<FlipKind> {
    if let (Some(a), Some(b)) = (base.dominant(), other.dominant()) {
        if a != b {
            return Some(FlipKind::Type);
        }
    }
    let ratio =
        (other.snowfall as f64).max(FLIP_FLOOR_MM) / (base.snowfall as f64).max(FLIP_FLOOR_MM);
    if ratio <= 0.5 {
        Some(FlipKind::Halves)
    } else if ratio >= 2.0 {
        Some(FlipKind::Doubles)
    } else {
        None
    }
}

/// The flip at one place: `value(k)` gives scenario k's totals there, `order` comes from
/// [`by_distance`].
pub fn flip_search(
    scenarios: &[Scenario],
    order: &[(usize, f64)],
    base: &CellTotals,
    value: impl Fn(usize) -> CellTotals,
) -> FlipSearch {
    if base.is_missing() {
        return FlipSearch::Missing;
    }
    let mut found: Option<(Flip, f64)> = None;
    for &(k, d) in order {
        if let Some((f, _)) = &found {
            if d - f.distance_km > SAME_DISTANCE_KM {
                break;
            }
        }
        let c = value(k);
        if c.is_missing() {
            if found.is_none() {
                return FlipSearch::Missing;
            }
            continue;
        }
        if let Some(kind) = flip_kind(base, &c) {
            let change = (c.snowfall - base.snowfall).abs() as f64;
            if found.as_ref().is_none_or(|(_, best)| change > *best) {
                found = Some((
                    Flip {
                        distance_km: d,
                        scenario: k,
                        cross_km: scenarios[k].cross_km,
                        along_km: scenarios[k].along_km,
                        kind,
                        to: c.dominant(),
                        snowfall: c.snowfall,
                    },
                    change,
                ));
            }
        }
    }
    found.map_or(FlipSearch::Never, |(f, _)| FlipSearch::Flip(f))
}

/// Per-cell flip layers.
#[derive(Clone, Debug)]
pub struct FlipLayers {
    /// Flip distance, km (NaN: never or missing).
    pub distance_km: Vec<f32>,
    /// Cross-track offset of the flip, km.
    pub cross_km: Vec<f32>,
    /// Along-track offset of the flip, km.
    pub along_km: Vec<f32>,
    /// What flips: [`FlipKind::code`], 0 where nothing flips, NaN where missing.
    pub kind: Vec<f32>,
}

/// The flip at every cell of `n`: `cell(k, i)` gives offset scenario k's totals at cell i.
pub fn flip_layers(
    n: usize,
    scenarios: &[Scenario],
    baseline: usize,
    cell: impl Fn(usize, usize) -> CellTotals,
) -> FlipLayers {
    let order = by_distance(scenarios);
    let mut out = FlipLayers {
        distance_km: vec![f32::NAN; n],
        cross_km: vec![f32::NAN; n],
        along_km: vec![f32::NAN; n],
        kind: vec![f32::NAN; n],
    };
    for i in 0..n {
        let base = cell(baseline, i);
        match flip_search(scenarios, &order, &base, |k| cell(k, i)) {
            FlipSearch::Flip(f) => {
                out.distance_km[i] = f.distance_km as f32;
                out.cross_km[i] = f.cross_km as f32;
                out.along_km[i] = f.along_km as f32;
                out.kind[i] = f.kind.code();
            }
            FlipSearch::Never => out.kind[i] = 0.0,
            FlipSearch::Missing => {}
        }
    }
    out
}

/// An axis of track offset.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Axis {
    /// Across the track (positive left).
    Cross,
    /// Along the track (positive ahead).
    Along,
}

/// Which scenarios a finite difference uses: the nearest offsets below and above zero on the
/// axis, the other offset zero, as (scenario index, offset km).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Stencil {
    /// Nearest negative offset.
    pub minus: Option<(usize, f64)>,
    /// Nearest positive offset.
    pub plus: Option<(usize, f64)>,
    /// The baseline.
    pub baseline: usize,
}

/// The stencil of an axis, `None` when the run has no offsets on it.
pub fn stencil(scenarios: &[Scenario], baseline: usize, axis: Axis) -> Option<Stencil> {
    let on_axis = scenarios.iter().enumerate().filter_map(|(i, s)| {
        let (x, other) = match axis {
            Axis::Cross => (s.cross_km, s.along_km),
            Axis::Along => (s.along_km, s.cross_km),
        };
        (track_only(s) && other == 0.0 && x != 0.0).then_some((i, x))
    });
    let mut minus: Option<(usize, f64)> = None;
    let mut plus: Option<(usize, f64)> = None;
    for (i, x) in on_axis {
        if x < 0.0 && minus.is_none_or(|m| x > m.1) {
            minus = Some((i, x));
        }
        if x > 0.0 && plus.is_none_or(|p| x < p.1) {
            plus = Some((i, x));
        }
    }
    (minus.is_some() || plus.is_some()).then_some(Stencil {
        minus,
        plus,
        baseline,
    })
}

/// The finite difference of one place's values, per [`PER_KM`] km.
pub fn difference(st: &Stencil, value: impl Fn(usize) -> f32) -> f32 {
    let (lo, hi) = match (st.minus, st.plus) {
        (Some(m), Some(p)) => (m, p),
        (Some(m), None) => (m, (st.baseline, 0.0)),
        (None, Some(p)) => ((st.baseline, 0.0), p),
        (None, None) => return f32::NAN,
    };
    let (a, b) = (value(lo.0) as f64, value(hi.0) as f64);
    ((b - a) / (hi.1 - lo.1) * PER_KM) as f32
}

/// Per-cell sensitivity along `axis` of `value(k, i)` (offset scenario k, cell i of `n`), per
/// [`PER_KM`] km (all NaN without offsets on the axis).
pub fn sensitivity_layer(
    n: usize,
    scenarios: &[Scenario],
    baseline: usize,
    axis: Axis,
    value: impl Fn(usize, usize) -> f32,
) -> Vec<f32> {
    match stencil(scenarios, baseline, axis) {
        None => vec![f32::NAN; n],
        Some(st) => (0..n).map(|i| difference(&st, |k| value(k, i))).collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::scenario_set;

    fn snow_cell(snowfall: f32, snow_share: f32) -> CellTotals {
        let liquid = 10.0;
        CellTotals {
            liquid,
            snow_liquid: liquid * snow_share,
            snowfall,
            ice_pellets: 0.0,
            freezing_rain: 0.0,
        }
    }

    #[test]
    fn centred_and_one_sided_differences() {
        // S(c) = 3·c mm per km on −20, −10, 0, 10, 20: the derivative is 150 mm per 50 km.
        let s = scenario_set(&[-20.0, -10.0, 0.0, 10.0, 20.0], &[0.0]);
        let b = s.iter().position(Scenario::is_baseline).unwrap();
        let st = stencil(&s, b, Axis::Cross).unwrap();
        assert_eq!(st.minus.map(|m| m.1), Some(-10.0));
        assert_eq!(st.plus.map(|p| p.1), Some(10.0));
        let d = difference(&st, |k| 3.0 * s[k].cross_km as f32);
        assert!((d - 150.0).abs() < 1e-4);
        assert!(stencil(&s, b, Axis::Along).is_none());
        // One side only: S = c² on 0, 10, 30 gives (100 − 0)/10 per km = 500 per 50 km.
        let s = scenario_set(&[0.0, 10.0, 30.0], &[0.0]);
        let st = stencil(&s, 0, Axis::Cross).unwrap();
        let d = difference(&st, |k| (s[k].cross_km * s[k].cross_km) as f32);
        assert!((d - 500.0).abs() < 1e-3);
    }

    #[test]
    fn flip_by_type_by_halving_and_never() {
        let s = scenario_set(&[-40.0, -20.0, 0.0, 20.0, 40.0], &[0.0]);
        let order = by_distance(&s);
        let base = snow_cell(100.0, 1.0);
        // To the left (positive cross) snow turns to rain at 40 km; to the right the snowfall
        // halves at 20 km: the nearer one wins.
        let f = flip_search(&s, &order, &base, |k| match s[k].cross_km {
            x if x >= 40.0 => snow_cell(0.0, 0.0),
            x if x <= -20.0 => snow_cell(45.0, 1.0),
            _ => snow_cell(95.0, 1.0),
        });
        let FlipSearch::Flip(f) = f else {
            panic!("{f:?}")
        };
        assert_eq!(
            (f.distance_km, f.cross_km, f.kind),
            (20.0, -20.0, FlipKind::Halves)
        );
        // A trace that grows to 1.5 cm has not doubled (floor 1 cm); one that grows to 2 cm has.
        let trace = snow_cell(1.0, 1.0);
        assert_eq!(
            flip_search(&s, &order, &trace, |_| snow_cell(15.0, 1.0)),
            FlipSearch::Never
        );
        let FlipSearch::Flip(f) = flip_search(&s, &order, &trace, |_| snow_cell(20.0, 1.0)) else {
            panic!()
        };
        assert_eq!(f.kind, FlipKind::Doubles);
        // Both sides flip at 20 km: the larger change of snowfall wins.
        let FlipSearch::Flip(f) = flip_search(&s, &order, &base, |k| match s[k].cross_km {
            x if x > 0.0 => snow_cell(5.0, 0.2),
            _ => snow_cell(40.0, 1.0),
        }) else {
            panic!()
        };
        assert_eq!(
            (f.cross_km, f.kind, f.to),
            (20.0, FlipKind::Type, Some(Ptype::Rain))
        );
        // A missing scenario before any flip makes the answer unknown.
        let mut m = snow_cell(100.0, 1.0);
        m.snowfall = f32::NAN;
        assert_eq!(flip_search(&s, &order, &base, |_| m), FlipSearch::Missing);
    }

    #[test]
    fn dominant_type_needs_measurable_precipitation() {
        let mut c = snow_cell(0.0, 0.0);
        assert_eq!(c.dominant(), Some(Ptype::Rain));
        c.freezing_rain = 6.0;
        assert_eq!(c.dominant(), Some(Ptype::FreezingRain));
        c.liquid = 0.05;
        assert_eq!(c.dominant(), None);
    }
}
