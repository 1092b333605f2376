//! The towns table (CSV) and points (GeoJSON) with every scenario's snowfall.

use super::{write_text_atomic, Kind, WriteError, Written};
use crate::summarise::names::ScenarioNames;
use crate::summarise::TownSummary;
use crate::units::Units;
use geojson::{Feature, FeatureCollection, Geometry, JsonObject};
use std::path::Path;

/// Makes a text cell safe for spreadsheets: a leading `=`, `+`, `-` or `@` would be run as a
/// formula, so such text gets a leading apostrophe (OWASP "CSV injection" guidance).
pub fn spreadsheet_safe(s: &str) -> String {
    if s.starts_with(['=', '+', '-', '@', '\t', '\r']) {
        format!("'{s}")
    } else {
        s.to_string()
    }
}

fn num(v: f32, decimals: usize) -> String {
    if v.is_finite() {
        format!("{v:.decimals$}")
    } else {
        String::new()
    }
}

/// Column name of scenario k's snowfall, e.g. `snow_cm_c+20_a-50` (other axes appended when
/// not neutral, see [`crate::scenario::Scenario::tag`]; prefixed by the member or methods in
/// an ensemble, [`ScenarioNames::tag`]).
fn scenario_column(names: &ScenarioNames, k: usize, unit: &str) -> String {
    format!("snow_{unit}_{}", names.tag(k))
}

/// Column name of scenario k's onset step, e.g. `onset_step_c+20_a-50`.
fn onset_column(names: &ScenarioNames, k: usize) -> String {
    format!("onset_step_{}", names.tag(k))
}

/// When snow begins at each town.
pub struct Onsets<'a> {
    /// Per town (in the towns' order), per scenario: the 1-based step of first measurable snow.
    pub steps: &'a [Vec<Option<u32>>],
    /// The valid time of every step of scenario k (its group's steps, in an ensemble).
    pub valid_times: &'a dyn Fn(usize) -> &'a [chrono::DateTime<chrono::Utc>],
}

/// How a town's values come from the grid, in the words of the towns outputs' descriptions
/// ([`crate::grid::Grid::bilinear_at`]; `trackswing sounding` follows the same rule).
pub const POINT_RULE: &str = "A town's totals are bilinear from the four grid cell centres around it (across the antimeridian on a grid that spans 360° of longitude), missing when any of them with weight is missing; its onset is that of the cell of largest weight. Towns outside the grid are left out, with a warning.";

/// Writes `towns.csv` and `towns.geojson`.
pub fn write_towns(
    dir: &Path,
    towns: &[TownSummary],
    names: &ScenarioNames,
    baseline: usize,
    units: Units,
    onsets: &Onsets<'_>,
) -> Result<Vec<Written>, WriteError> {
    let u = units.snow_unit();
    // Scenario s's onset step k as its valid time.
    let time_of = |s: usize, k: u32| (onsets.valid_times)(s)[k as usize - 1];
    let text_of = |t: Option<chrono::DateTime<chrono::Utc>>| {
        t.map(|t| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true))
            .unwrap_or_default()
    };
    let mut header = vec![
        "name".to_string(),
        "lat".into(),
        "lon".into(),
        format!("baseline_{u}"),
        format!("min_{u}"),
        format!("max_{u}"),
        format!("range_{u}"),
        "min_offset".into(),
        "max_offset".into(),
        "baseline_snow_fraction".into(),
    ];
    header.extend((0..names.len()).map(|k| scenario_column(names, k, u)));
    header.extend(
        [
            "baseline_onset_utc",
            "earliest_onset_utc",
            "latest_onset_utc",
        ]
        .map(String::from),
    );
    header.extend((0..names.len()).map(|k| onset_column(names, k)));
    let mut w = csv::Writer::from_writer(Vec::new());
    let csv_err = |e: csv::Error| WriteError::Io {
        path: dir.join("towns.csv"),
        source: std::io::Error::other(e.to_string()),
    };
    w.write_record(&header).map_err(csv_err)?;
    let mut features = Vec::new();
    for (ti, t) in towns.iter().enumerate() {
        let missing = t.min.is_nan();
        let steps = &onsets.steps[ti];
        let times = steps
            .iter()
            .enumerate()
            .filter_map(|(s, k)| k.map(|k| time_of(s, k)));
        let earliest = times.clone().min();
        let latest = times.max();
        let mut row = vec![
            spreadsheet_safe(&t.name),
            format!("{:.5}", t.lat),
            format!("{:.5}", t.lon),
            num(units.snow(t.snowfall[baseline]), 1),
            num(units.snow(t.min), 1),
            num(units.snow(t.max), 1),
            num(units.snow(t.range()), 1),
            if missing {
                String::new()
            } else {
                names.words(t.argmin, units)
            },
            if missing {
                String::new()
            } else {
                names.words(t.argmax, units)
            },
            num(t.snow_fraction[baseline], 2),
        ];
        row.extend(t.snowfall.iter().map(|v| num(units.snow(*v), 1)));
        row.extend([
            text_of(steps[baseline].map(|k| time_of(baseline, k))),
            text_of(earliest),
            text_of(latest),
        ]);
        row.extend(
            steps
                .iter()
                .map(|k| k.map(|k| k.to_string()).unwrap_or_default()),
        );
        w.write_record(&row).map_err(csv_err)?;

        let mut p = JsonObject::new();
        p.insert("name".into(), t.name.clone().into());
        let mut put = |k: String, v: f32| {
            let val = if v.is_finite() {
                serde_json::Value::from(((v as f64) * 10.0).round() / 10.0)
            } else {
                serde_json::Value::Null
            };
            p.insert(k, val);
        };
        put(format!("baseline_{u}"), units.snow(t.snowfall[baseline]));
        put(format!("min_{u}"), units.snow(t.min));
        put(format!("max_{u}"), units.snow(t.max));
        put(format!("range_{u}"), units.snow(t.range()));
        for (k, v) in t.snowfall.iter().enumerate() {
            put(scenario_column(names, k, u), units.snow(*v));
        }
        let json_time = |t: Option<chrono::DateTime<chrono::Utc>>| {
            t.map_or(serde_json::Value::Null, |t| {
                t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true).into()
            })
        };
        for (name, v) in [
            (
                "baseline_onset_utc",
                steps[baseline].map(|k| time_of(baseline, k)),
            ),
            ("earliest_onset_utc", earliest),
            ("latest_onset_utc", latest),
        ] {
            p.insert(name.into(), json_time(v));
        }
        for (s, k) in steps.iter().enumerate() {
            p.insert(
                onset_column(names, s),
                k.map_or(serde_json::Value::Null, Into::into),
            );
        }
        let frac = t.snow_fraction[baseline];
        p.insert(
            "baseline_snow_fraction".into(),
            if frac.is_finite() {
                (((frac as f64) * 100.0).round() / 100.0).into()
            } else {
                serde_json::Value::Null
            },
        );
        features.push(point_feature(t.lon, t.lat, p));
    }
    write_table_and_points(dir, "towns", w, features)?;
    Ok(vec![
        Written {
            file: "towns.csv".into(),
            kind: Kind::Table,
            units: format!("snowfall in {u}; lat/lon in degrees; fractions 0–1; onset as RFC 3339 UTC times and 1-based step numbers"),
            description: format!("Every town's snowfall for every scenario, with its baseline, smallest, largest and range, and when measurable snow (0.1 mm of liquid in a step) begins in each scenario. {POINT_RULE}"),
            bands: Vec::new(),
            sha256: None,
        },
        Written {
            file: "towns.geojson".into(),
            kind: Kind::Vector,
            units: format!("snowfall in {u}"),
            description: format!("Towns as points with the same values as towns.csv. {POINT_RULE}"),
            bands: Vec::new(),
            sha256: None,
        },
    ])
}

/// A town as an RFC 7946 point feature, coordinates rounded to 1e-5° (about 1 m).
pub(super) fn point_feature(lon: f64, lat: f64, properties: JsonObject) -> Feature {
    Feature {
        bbox: None,
        geometry: Some(Geometry::new_point([
            (lon * 1e5).round() / 1e5,
            (lat * 1e5).round() / 1e5,
        ])),
        id: None,
        properties: Some(properties),
        foreign_members: None,
    }
}

/// Writes a finished CSV as `<stem>.csv` and its points as `<stem>.geojson`, each atomically.
pub(super) fn write_table_and_points(
    dir: &Path,
    stem: &str,
    table: csv::Writer<Vec<u8>>,
    features: Vec<Feature>,
) -> Result<(), WriteError> {
    let csv_name = format!("{stem}.csv");
    let bytes = table.into_inner().map_err(|e| WriteError::Io {
        path: dir.join(&csv_name),
        source: std::io::Error::other(e.to_string()),
    })?;
    let text = String::from_utf8(bytes).expect("csv writes the UTF-8 it was given");
    write_text_atomic(dir, &csv_name, &text)?;
    let fc = FeatureCollection {
        bbox: None,
        features,
        foreign_members: None,
    };
    write_text_atomic(dir, &format!("{stem}.geojson"), &fc.to_string())?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::Scenario;

    #[test]
    fn formulas_are_neutralised() {
        assert_eq!(spreadsheet_safe("=HYPERLINK(1)"), "'=HYPERLINK(1)");
        assert_eq!(spreadsheet_safe("-2+3"), "'-2+3");
        assert_eq!(spreadsheet_safe("Alder Ford"), "Alder Ford");
    }

    #[test]
    fn scenario_columns_carry_both_offsets() {
        let s = Scenario::offset(20.0, -50.0);
        let t = Scenario { timing_h: 3.0, ..s };
        let names = ScenarioNames::single(&[s, t]);
        assert_eq!(scenario_column(&names, 0, "cm"), "snow_cm_c+20_a-50");
        assert_eq!(onset_column(&names, 0), "onset_step_c+20_a-50");
        assert_eq!(scenario_column(&names, 1, "in"), "snow_in_c+20_a-50_t+3");
    }
}
