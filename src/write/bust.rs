//! The bust-prone towns: `towns_bust.csv` (ranked, spreadsheet-safe) and `towns_bust.geojson`
//! (RFC 7946 points with the same values).
//!
//! Onset timing is in towns.csv (baseline, earliest and latest onset); this table does not
//! repeat it.

use super::towns::spreadsheet_safe;
use super::{Kind, WriteError, Written};
use crate::render::legend::threshold_text;
use crate::summarise::aligned::explains_words;
use crate::summarise::bust::{sentence, TownDecision};
use crate::summarise::members::{source_words, trend_mm, trend_words, MemberSummary, TownSpread};
use crate::summarise::names::ScenarioNames;
use crate::summarise::sensitivity::{FlipKind, FlipSearch};
use crate::units::Units;
use geojson::JsonObject;
use serde_json::Value;
use std::path::Path;

/// One cell of the table: text, or a number with its decimals (empty when missing).
enum Cell {
    Text(String),
    Num(f64, usize),
}

impl Cell {
    fn csv(&self) -> String {
        match self {
            Cell::Text(s) => spreadsheet_safe(s),
            Cell::Num(v, d) if v.is_finite() => format!("{v:.d$}"),
            Cell::Num(..) => String::new(),
        }
    }
    fn json(&self) -> Value {
        match self {
            Cell::Text(s) if s.is_empty() => Value::Null,
            Cell::Text(s) => s.clone().into(),
            Cell::Num(v, 0) if v.is_finite() => (v.round() as i64).into(),
            Cell::Num(v, d) if v.is_finite() => {
                let f = 10f64.powi(*d as i32);
                ((v * f).round() / f).into()
            }
            Cell::Num(..) => Value::Null,
        }
    }
}

/// What flips, in words, for the table.
pub fn flip_words(f: &FlipSearch) -> &'static str {
    match f {
        FlipSearch::Flip(x) => match x.kind {
            FlipKind::Type => "type changes",
            FlipKind::Halves => "snowfall halves",
            FlipKind::Doubles => "snowfall doubles",
        },
        FlipSearch::Never => "nothing within the offsets run",
        FlipSearch::Missing => "",
    }
}

/// The columns and values of one ranked town.
#[allow(clippy::too_many_arguments)]
fn row(
    rank: usize,
    t: &TownDecision,
    names: &ScenarioNames,
    units: Units,
    thresholds: &[f64],
    ice_thresholds: &[f64],
    spread: Option<(&TownSpread, &MemberSummary)>,
) -> Vec<(String, Cell)> {
    let su = units.snow_unit();
    let lu = units.liquid_unit();
    let snow = |mm: f64| Cell::Num(units.snow(mm as f32) as f64, 1);
    let q = |k: usize| t.snow.map_or(f64::NAN, |s| s.quantiles[k]);
    let (min, max) = t
        .extremes
        .map_or((f64::NAN, f64::NAN), |x| (x.min as f64, x.max as f64));
    let flip = match t.flip {
        FlipSearch::Flip(f) => Some(f),
        _ => None,
    };
    let mut v = vec![
        ("rank".to_string(), Cell::Num(rank as f64, 0)),
        ("name".into(), Cell::Text(t.name.clone())),
        ("lat".into(), Cell::Num(t.lat, 5)),
        ("lon".into(), Cell::Num(t.lon, 5)),
        ("bust_score".into(), Cell::Num(t.score, 2)),
        (format!("baseline_{su}"), snow(t.baseline.snowfall as f64)),
        (
            format!("mean_{su}"),
            snow(t.snow.map_or(f64::NAN, |s| s.mean)),
        ),
        (format!("p10_{su}"), snow(q(0))),
        (format!("p50_{su}"), snow(q(1))),
        (format!("p90_{su}"), snow(q(2))),
        (format!("min_{su}"), snow(min)),
        (format!("max_{su}"), snow(max)),
        (format!("range_{su}"), snow(max - min)),
        (
            "baseline_type".into(),
            Cell::Text(t.baseline.dominant().map_or("", |p| p.words()).to_string()),
        ),
        (
            "flip_km".into(),
            Cell::Num(flip.map_or(f64::NAN, |f| f.distance_km), 1),
        ),
        (
            // US units: the same distance in international miles, next to the km.
            if units == Units::Us {
                "flip_mi".into()
            } else {
                String::new()
            },
            Cell::Num(flip.map_or(f64::NAN, |f| f.distance_km / 1.609_344), 1),
        ),
        (
            "flip_cross_km".into(),
            Cell::Num(flip.map_or(f64::NAN, |f| f.cross_km), 1),
        ),
        (
            "flip_along_km".into(),
            Cell::Num(flip.map_or(f64::NAN, |f| f.along_km), 1),
        ),
        (
            "flip_direction".into(),
            Cell::Text(flip.map_or(String::new(), |f| {
                names.scenario(f.scenario).in_words_in(units)
            })),
        ),
        ("flip_what".into(), Cell::Text(flip_words(&t.flip).into())),
        (
            "onset_earliest_shift_h".into(),
            Cell::Num(t.onset_shift_h.0, 1),
        ),
        (
            "onset_latest_shift_h".into(),
            Cell::Num(t.onset_shift_h.1, 1),
        ),
        (
            "flip_to_type".into(),
            Cell::Text(
                flip.and_then(|f| f.to)
                    .map_or("", |p| p.words())
                    .to_string(),
            ),
        ),
        (
            format!("change_{su}_per_50km_left"),
            Cell::Num(units.snow(t.sensitivity_cross) as f64, 1),
        ),
        (
            format!("change_{su}_per_50km_ahead"),
            Cell::Num(units.snow(t.sensitivity_along) as f64, 1),
        ),
    ];
    for (th, p) in thresholds.iter().zip(&t.snow_exceedance) {
        v.push((
            format!("p_snow_ge_{}{su}", threshold_text(*th)),
            Cell::Num(*p, 2),
        ));
    }
    // Ice in inches needs hundredths: the thresholds start at 0.05 in.
    let ice_digits = if units == Units::Us { 2 } else { 1 };
    let ice = |mm: f64| Cell::Num(units.liquid(mm as f32) as f64, ice_digits);
    v.push((format!("ice_baseline_{lu}"), ice(t.ice_baseline as f64)));
    v.push((
        format!("ice_mean_{lu}"),
        ice(t.ice.map_or(f64::NAN, |s| s.mean)),
    ));
    for (k, name) in ["p10", "p50", "p90"].iter().enumerate() {
        v.push((
            format!("ice_{name}_{lu}"),
            ice(t.ice.map_or(f64::NAN, |s| s.quantiles[k])),
        ));
    }
    for (th, p) in ice_thresholds.iter().zip(&t.ice_exceedance) {
        v.push((
            format!("p_ice_ge_{}{lu}", threshold_text(*th)),
            Cell::Num(*p, 2),
        ));
    }
    let mut words = sentence(t, names, units);
    if let Some((ts, m)) = spread {
        // Where the spread comes from, over every member, method and offset.
        let p = ts.parts;
        let share = |k: usize| p.and_then(|p| p.shares()).map_or(f64::NAN, |s| s[k]);
        v.push((
            format!("sd_total_{su}"),
            snow(p.map_or(f64::NAN, |p| p.total.sqrt())),
        ));
        v.push(("share_members".into(), Cell::Num(share(0), 2)));
        v.push(("share_methods".into(), Cell::Num(share(1), 2)));
        v.push(("share_track".into(), Cell::Num(share(2), 2)));
        for (name, b) in m.names.iter().zip(&ts.baselines) {
            v.push((format!("baseline_{su}_{name}"), snow(*b as f64)));
        }
        if let Some(x) = ts.track_explains {
            v.push(("track_explains_members".into(), Cell::Num(x as f64, 2)));
        }
        if let Some(p) = &p {
            let w = source_words(p, units, m.names.len() > 1, m.options.len() > 1);
            if !w.is_empty() {
                words = format!("{words} Across members and methods, {w}.");
            }
        }
        if let Some(w) = ts.track_explains.and_then(explains_words) {
            words = format!("{words} Between the members' runs as issued, {w}.");
        }
        if let Some(cycles) = &m.cycles {
            // Successive cycles of one model: the run-to-run change as modelled.
            v.push((
                format!("cycle_trend_{su}"),
                snow(trend_mm(cycles, &ts.baselines) as f64),
            ));
            if let Some(w) = trend_words(cycles, &ts.baselines, units) {
                words = format!("{words} As modelled, {w}.");
            }
        }
    }
    v.push(("summary".into(), Cell::Text(words)));
    // Columns named only in some units (flip_mi).
    v.retain(|(name, _)| !name.is_empty());
    v
}

/// The files [`write_towns_bust`] writes.
pub const FILES: [&str; 2] = ["towns_bust.csv", "towns_bust.geojson"];

/// Writes `towns_bust.csv` and `towns_bust.geojson` for towns already ranked.
pub fn write_towns_bust(
    dir: &Path,
    ranked: &[TownDecision],
    names: &ScenarioNames,
    units: Units,
    snow_thresholds: &[f64],
    ice_thresholds: &[f64],
    members: Option<&MemberSummary>,
) -> Result<Vec<Written>, WriteError> {
    let csv_err = |e: csv::Error| WriteError::Io {
        path: dir.join("towns_bust.csv"),
        source: std::io::Error::other(e.to_string()),
    };
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut features = Vec::new();
    let nothing = members.map(|m| TownSpread {
        parts: None,
        baselines: vec![f32::NAN; m.names.len()],
        track_explains: m.track_explains.as_ref().map(|_| f32::NAN),
    });
    let header_only = row(
        0,
        &placeholder(names.len(), snow_thresholds.len(), ice_thresholds.len()),
        names,
        units,
        snow_thresholds,
        ice_thresholds,
        nothing.as_ref().zip(members),
    );
    w.write_record(header_only.iter().map(|(k, _)| k))
        .map_err(csv_err)?;
    for (i, t) in ranked.iter().enumerate() {
        let spread = members.and_then(|m| m.towns.get(i).map(|ts| (ts, m)));
        let cells = row(
            i + 1,
            t,
            names,
            units,
            snow_thresholds,
            ice_thresholds,
            spread,
        );
        w.write_record(cells.iter().map(|(_, c)| c.csv()))
            .map_err(csv_err)?;
        let mut p = JsonObject::new();
        for (k, c) in &cells {
            if k != "lat" && k != "lon" {
                p.insert(k.clone(), c.json());
            }
        }
        features.push(super::towns::point_feature(t.lon, t.lat, p));
    }
    super::towns::write_table_and_points(dir, "towns_bust", w, features)?;
    let su = units.snow_unit();
    Ok(vec![
        Written {
            file: "towns_bust.csv".into(),
            kind: Kind::Table,
            units: format!("snowfall in {su}, ice in {}, offsets in km, probabilities 0–1", units.liquid_unit()),
            description: "Bust-prone towns, ranked by bust score (P90 − P10 over the baseline, the baseline floored at 5 cm): weighted percentiles, flip distance and direction, sensitivity, and a sentence in plain words".into(),
            bands: Vec::new(),
            sha256: None,
        },
        Written {
            file: "towns_bust.geojson".into(),
            kind: Kind::Vector,
            units: format!("snowfall in {su}"),
            description: "The bust-prone towns as points with the same values as towns_bust.csv".into(),
            bands: Vec::new(),
            sha256: None,
        },
    ])
}

/// A town with every value missing, to name the columns when there are no towns.
fn placeholder(n: usize, thresholds: usize, ice_thresholds: usize) -> TownDecision {
    use crate::summarise::sensitivity::CellTotals;
    TownDecision {
        name: String::new(),
        lat: f64::NAN,
        lon: f64::NAN,
        onset_shift_h: (f64::NAN, f64::NAN),
        baseline: CellTotals {
            liquid: f32::NAN,
            snow_liquid: f32::NAN,
            snowfall: f32::NAN,
            ice_pellets: f32::NAN,
            freezing_rain: f32::NAN,
        },
        snowfall: vec![f32::NAN; n],
        snow: None,
        snow_exceedance: vec![f64::NAN; thresholds],
        extremes: None,
        ice_baseline: f32::NAN,
        ice: None,
        ice_exceedance: vec![f64::NAN; ice_thresholds],
        flip: FlipSearch::Missing,
        sensitivity_cross: f32::NAN,
        sensitivity_along: f32::NAN,
        score: f64::NAN,
    }
}
