//! Which field of a model's files to read for each need of a case, for every reader.
//!
//! A reader lists what its files hold as a [`Catalogue`] of [`Field`]s (quantity, level, valid
//! time, accumulation window, where it lives), in the order of its own list, and asks a
//! [`Chooser`]: the GRIB2 reader from its messages, the GDAL reader from its bands. The rules,
//! so that a folder of operational files works without a list of names:
//! - the steps are the distinct valid times of instantaneous isobaric temperatures; a valid
//!   time whose isobaric temperature is held but cannot be read is refused (it would drop out);
//! - the levels are the isobaric levels where the first step has temperature, geopotential
//!   height (or geopotential) and humidity (relative, dew point or specific, in that order);
//!   every later step must have the same levels;
//! - 2 m temperature and 2 m humidity at every step, surface pressure where there is one;
//!   terrain from geopotential height, geometric height, model terrain height or geopotential
//!   at the ground, at any time;
//! - precipitation per step: an amount for exactly the step, else from accumulations through
//!   [`step_amount`]; the first step gets the total from the reference time when one ends there,
//!   and zero when it is the reference time itself.
//!
//! A missing field is a [`Missing`] naming the file, the field (in the reader's words,
//! [`Names`]) and, when the files hold it but it cannot be used, why.

pub mod catalogue;
mod choice;

pub use catalogue::{Catalogue, Field, Level, Missing, Names, Quantity, Unusable, Window};
pub use choice::{Height, Humidity, LevelChoice, StepChoice};

use crate::read::accumulation::{step_amount, Accumulation};
use catalogue::short;
use chrono::{DateTime, Utc};

/// Most levels a column can hold (see `diagnose::ptype::MAX_LEVELS`).
const MAX_LEVELS: usize = crate::diagnose::ptype::MAX_LEVELS;

/// The case's choices, made from a catalogue.
pub struct Chooser<'a> {
    /// The fields.
    pub cat: &'a Catalogue,
}

impl<'a> Chooser<'a> {
    /// A chooser over `cat`.
    pub fn new(cat: &'a Catalogue) -> Self {
        Self { cat }
    }

    fn usable(&self) -> impl Iterator<Item = (usize, &'a Field)> {
        self.cat
            .fields
            .iter()
            .enumerate()
            .filter(|(_, f)| f.unusable.is_none())
    }

    /// First usable instantaneous field of `q` on `level` valid at `valid` (any time if `None`).
    fn find(&self, q: Quantity, level: &Level, valid: Option<DateTime<Utc>>) -> Option<usize> {
        self.usable()
            .find(|(_, f)| {
                f.quantity == q
                    && f.window == Window::Instant
                    && f.level.same(level)
                    && valid.is_none_or(|v| f.valid == Some(v))
            })
            .map(|(i, _)| i)
    }

    /// The text for a missing field: any field that would match but cannot be used.
    fn why_missing(&self, q: Quantity, level: &Level, valid: Option<DateTime<Utc>>) -> String {
        let hit = self.cat.fields.iter().find(|f| {
            f.quantity == q && f.level.same(level) && valid.is_none_or(|v| f.valid == Some(v))
        });
        match hit.and_then(|f| f.unusable.as_ref().map(|u| (f, u))) {
            Some((f, Unusable::Problem(p))) => format!("; {} holds it but {p}", f.origin),
            Some((f, Unusable::OtherGrid(g))) => format!(
                "; {} holds it on a different grid ({g}), but every field of a case must share the grid of the isobaric temperatures ({})",
                f.origin, self.cat.grid
            ),
            None => String::new(),
        }
    }

    fn is_isobaric_temperature(f: &Field) -> bool {
        f.quantity == Quantity::Temperature
            && f.window == Window::Instant
            && matches!(f.level, Level::Isobaric(_))
    }

    /// Valid times of the steps, in order. A valid time whose isobaric temperatures the files
    /// hold but cannot be read would drop out of the steps unnoticed (and with it, hours of the
    /// storm): it is refused, naming the field.
    pub fn steps(&self) -> Result<Vec<DateTime<Utc>>, Missing> {
        let mut t: Vec<DateTime<Utc>> = self
            .usable()
            .filter(|(_, f)| Self::is_isobaric_temperature(f))
            .filter_map(|(_, f)| f.valid)
            .collect();
        t.sort();
        t.dedup();
        if t.is_empty() {
            let near = self
                .cat
                .fields
                .iter()
                .filter(|f| f.quantity == Quantity::Temperature)
                .filter(|f| matches!(f.level, Level::Isobaric(_)))
                .find_map(|f| match &f.unusable {
                    Some(Unusable::Problem(p)) => Some(format!("; {} holds one but {p}", f.origin)),
                    _ => None,
                })
                .unwrap_or_default();
            return Err(Missing {
                path: self.cat.files.clone(),
                what: format!("no readable {}{near}", self.cat.names.isobaric_temperature),
            });
        }
        let lost = self
            .cat
            .fields
            .iter()
            .find_map(|f| match (&f.unusable, f.valid) {
                (Some(Unusable::Problem(p)), Some(v))
                    if Self::is_isobaric_temperature(f) && !t.contains(&v) =>
                {
                    Some((f, p, v))
                }
                _ => None,
            });
        match lost {
            Some((f, p, v)) => Err(Missing {
                path: f.path.clone(),
                what: format!(
                    "valid time {}: {} holds temperature there but {p}; without it that valid time would drop out of the steps (remove the file to run without it)",
                    short(v),
                    f.origin,
                ),
            }),
            None => Ok(t),
        }
    }

    fn missing(&self, valid: DateTime<Utc>, what: String) -> Missing {
        let path = self
            .usable()
            .find(|(_, f)| f.valid == Some(valid))
            .map(|(_, f)| f.path.clone())
            .unwrap_or_else(|| self.cat.files.clone());
        Missing { path, what }
    }

    /// Levels with temperature at `valid`: (pressure, its fields or what is missing), highest
    /// pressure first.
    fn levels_at(&self, valid: DateTime<Utc>) -> Vec<(f64, Result<LevelChoice, String>)> {
        let mut ps: Vec<f64> = self
            .usable()
            .filter(|(_, f)| Self::is_isobaric_temperature(f) && f.valid == Some(valid))
            .filter_map(|(_, f)| match f.level {
                Level::Isobaric(p) if p > 0.0 => Some(p),
                _ => None,
            })
            .collect();
        ps.sort_by(|a, b| b.total_cmp(a));
        ps.dedup_by(|a, b| (*a - *b).abs() < 0.5);
        ps.into_iter().map(|p| (p, self.level(p, valid))).collect()
    }

    fn level(&self, p: f64, valid: DateTime<Utc>) -> Result<LevelChoice, String> {
        let names = &self.cat.names;
        let l = Level::Isobaric(p);
        let at = Some(valid);
        let t = self.find(Quantity::Temperature, &l, at).ok_or_else(|| {
            let why = self.why_missing(Quantity::Temperature, &l, at);
            format!("{}{why}", names.temperature)
        })?;
        let z = match self.find(Quantity::GeopotentialHeight, &l, at) {
            Some(field) => Height {
                field,
                geopotential: false,
            },
            None => match self.find(Quantity::Geopotential, &l, at) {
                Some(field) => Height {
                    field,
                    geopotential: true,
                },
                None => {
                    let why = self.why_missing(Quantity::GeopotentialHeight, &l, at);
                    return Err(format!("{}{why}", names.height));
                }
            },
        };
        let hum = self.humidity(&l, valid).ok_or_else(|| {
            let why = self.why_missing(Quantity::RelativeHumidity, &l, at);
            format!("{}{why}", names.humidity)
        })?;
        Ok(LevelChoice {
            pressure: p,
            t,
            z,
            hum,
        })
    }

    fn humidity(&self, level: &Level, valid: DateTime<Utc>) -> Option<Humidity> {
        let at = |q| self.find(q, level, Some(valid));
        at(Quantity::RelativeHumidity)
            .map(Humidity::Relative)
            .or_else(|| at(Quantity::Dewpoint).map(Humidity::Dewpoint))
            .or_else(|| at(Quantity::SpecificHumidity).map(Humidity::Specific))
    }

    /// The isobaric levels of the case (Pa, highest pressure first) and any dropped because the
    /// first step lacks height or humidity there.
    pub fn levels(&self, steps: &[DateTime<Utc>]) -> Result<(Vec<f64>, Vec<String>), Missing> {
        let first = steps[0];
        let at_first = self.levels_at(first);
        let mut dropped = Vec::new();
        let mut levels = Vec::new();
        for (p, choice) in &at_first {
            match choice {
                Ok(_) => levels.push(*p),
                Err(_) => dropped.push(format!("{} hPa", p / 100.0)),
            }
        }
        if levels.len() > MAX_LEVELS {
            for p in levels.drain(MAX_LEVELS..) {
                dropped.push(format!("{} hPa", p / 100.0));
            }
        }
        if levels.len() < 2 {
            let detail = match at_first.first() {
                Some((p, Err(w))) => format!("; at {} hPa there is no {w}", p / 100.0),
                _ => String::new(),
            };
            return Err(self.missing(
                first,
                format!(
                    "step 1 (valid {}): {} isobaric level(s) have temperature, height and humidity; at least two are needed{detail}",
                    short(first),
                    levels.len()
                ),
            ));
        }
        Ok((levels, dropped))
    }

    /// Terrain: the first ground height found, and whether it is geopotential.
    pub fn terrain(&self) -> Result<Height, Missing> {
        for (q, geopotential) in [
            (Quantity::GeopotentialHeight, false),
            (Quantity::GeometricHeight, false),
            (Quantity::TerrainHeight, false),
            (Quantity::Geopotential, true),
        ] {
            if let Some(field) = self.find(q, &Level::Ground, None) {
                return Ok(Height {
                    field,
                    geopotential,
                });
            }
        }
        Err(Missing {
            path: self.cat.files.clone(),
            what: format!(
                "no model terrain: {}{}",
                self.cat.names.terrain,
                self.why_missing(Quantity::GeopotentialHeight, &Level::Ground, None)
            ),
        })
    }

    /// The fields of step `k`.
    pub fn step(
        &self,
        steps: &[DateTime<Utc>],
        levels: &[f64],
        k: usize,
    ) -> Result<StepChoice, Missing> {
        let names = &self.cat.names;
        let valid = steps[k];
        let at = |what: String| {
            self.missing(
                valid,
                format!("step {} (valid {}): {what}", k + 1, short(valid)),
            )
        };
        let mut lv = Vec::with_capacity(levels.len());
        for &p in levels {
            lv.push(self.level(p, valid).map_err(|w| {
                at(format!(
                    "no {w} at {} hPa; the first step has this level, and every step needs the same levels",
                    p / 100.0
                ))
            })?);
        }
        let two = Level::AboveGround(2.0);
        let t2 = self
            .find(Quantity::Temperature, &two, Some(valid))
            .ok_or_else(|| {
                at(format!(
                    "no {}{}",
                    names.temperature_2m,
                    self.why_missing(Quantity::Temperature, &two, Some(valid))
                ))
            })?;
        let hum2 = self.humidity(&two, valid).ok_or_else(|| {
            at(format!(
                "no {}{}",
                names.humidity_2m,
                self.why_missing(Quantity::RelativeHumidity, &two, Some(valid))
            ))
        })?;
        let (plus, minus) = self.precipitation(steps, k).map_err(at)?;
        Ok(StepChoice {
            valid,
            levels: lv,
            t2,
            hum2,
            psfc: self.find(Quantity::Pressure, &Level::Ground, Some(valid)),
            plus,
            minus,
            mslp: self.mslp(valid),
        })
    }

    /// Sea-level pressure at `valid`: at mean sea level, else on any level.
    pub fn mslp(&self, valid: DateTime<Utc>) -> Option<usize> {
        self.find(Quantity::Mslp, &Level::MeanSeaLevel, Some(valid))
            .or_else(|| {
                self.usable()
                    .find(|(_, f)| {
                        f.quantity == Quantity::Mslp
                            && f.window == Window::Instant
                            && f.valid == Some(valid)
                    })
                    .map(|(i, _)| i)
            })
    }

    /// Accumulations: (start, end, field).
    fn totals(&self) -> Vec<(DateTime<Utc>, DateTime<Utc>, usize)> {
        self.usable()
            .filter(|(_, f)| f.quantity == Quantity::Precipitation)
            .filter_map(|(i, f)| match (f.window, f.valid) {
                (Window::Since(s), Some(v)) if s < v => Some((s, v, i)),
                _ => None,
            })
            .collect()
    }

    /// Fields to add and subtract for step `k`'s precipitation.
    fn precipitation(
        &self,
        steps: &[DateTime<Utc>],
        k: usize,
    ) -> Result<(Vec<usize>, Vec<usize>), String> {
        let end = steps[k];
        if let Some((i, _)) = self.usable().find(|(_, f)| {
            f.quantity == Quantity::Precipitation
                && f.window == Window::Step
                && f.valid == Some(end)
        }) {
            return Ok((vec![i], vec![]));
        }
        let totals = self.totals();
        let list = |at: DateTime<Utc>| -> String {
            let v: Vec<String> = totals
                .iter()
                .filter(|(_, e, _)| *e == at)
                .map(|(s, e, i)| {
                    format!(
                        "{}…{} ({})",
                        short(*s),
                        short(*e),
                        self.cat.fields[*i].origin
                    )
                })
                .collect();
            if v.is_empty() {
                "none".into()
            } else {
                v.join(", ")
            }
        };
        if k == 0 {
            let reference = self
                .usable()
                .filter(|(_, f)| f.valid == Some(end))
                .find_map(|(_, f)| f.reference);
            if reference == Some(end) {
                return Ok((vec![], vec![]));
            }
            let from_ref = totals
                .iter()
                .find(|(s, e, _)| *e == end && Some(*s) == reference)
                .or_else(|| totals.iter().find(|(_, e, _)| *e == end));
            return match from_ref {
                Some((_, _, i)) => Ok((vec![*i], vec![])),
                None => Err(format!(
                    "no {} ending at the first valid time {}",
                    self.cat.names.first_precipitation,
                    short(end)
                )),
            };
        }
        let prev = steps[k - 1];
        let windows: Vec<Accumulation<usize>> = totals
            .iter()
            .map(|&(start, end, id)| Accumulation { start, end, id })
            .collect();
        if let Some(found) = step_amount(&windows, prev, end) {
            return Ok(found);
        }
        Err(format!(
            "the precipitation totals do not chain: none covers {}…{}, nor do two totals from a common start end at {} and {} (totals ending at {}: {}; ending at {}: {})",
            short(prev),
            short(end),
            short(prev),
            short(end),
            short(end),
            list(end),
            short(prev),
            list(prev)
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::TimeZone;
    use std::path::PathBuf;

    fn h(h: u32) -> DateTime<Utc> {
        Utc.with_ymd_and_hms(2026, 1, 10, h, 0, 0).unwrap()
    }

    fn field(quantity: Quantity, level: Level, valid: u32, window: Window) -> Field {
        Field {
            quantity,
            level,
            valid: Some(h(valid)),
            window,
            reference: Some(h(0)),
            unusable: None,
            path: PathBuf::from("f.grib2"),
            origin: format!("f.grib2: {quantity:?} at {level:?}, {valid} h"),
        }
    }

    const NAMES: Names = Names {
        isobaric_temperature: "T on isobaric levels",
        temperature: "T",
        height: "Z",
        humidity: "RH",
        temperature_2m: "T2",
        humidity_2m: "RH2",
        terrain: "HGT",
        first_precipitation: "APCP",
    };

    /// Two levels at 0 h and 3 h: temperature, geopotential at 850 hPa but geopotential height
    /// at 700 hPa, dew point and relative humidity at 850 hPa, specific humidity at 700 hPa.
    fn case() -> Vec<Field> {
        use Quantity::*;
        let (p850, p700, two) = (
            Level::Isobaric(85_000.0),
            Level::Isobaric(70_000.0),
            Level::AboveGround(2.0),
        );
        let mut f = vec![field(Geopotential, Level::Ground, 0, Window::Instant)];
        for t in [0, 3] {
            f.extend([
                field(Temperature, p700, t, Window::Instant),
                field(Temperature, p850, t, Window::Instant),
                field(Geopotential, p850, t, Window::Instant),
                field(GeopotentialHeight, p700, t, Window::Instant),
                field(Dewpoint, p850, t, Window::Instant),
                field(RelativeHumidity, p850, t, Window::Instant),
                field(SpecificHumidity, p700, t, Window::Instant),
                field(Temperature, two, t, Window::Instant),
                field(SpecificHumidity, two, t, Window::Instant),
                field(Precipitation, Level::Ground, t, Window::Since(h(0))),
            ]);
        }
        f
    }

    fn catalogue(fields: Vec<Field>) -> Catalogue {
        Catalogue {
            fields,
            files: PathBuf::from("f.grib2"),
            grid: "the case grid".into(),
            names: NAMES,
        }
    }

    #[test]
    fn each_need_gets_the_field_the_rules_name() {
        let cat = catalogue(case());
        let ch = Chooser::new(&cat);
        let steps = ch.steps().unwrap();
        assert_eq!(steps, vec![h(0), h(3)]);
        let (levels, dropped) = ch.levels(&steps).unwrap();
        assert_eq!(levels, vec![85_000.0, 70_000.0]);
        assert!(dropped.is_empty());
        let s = ch.step(&steps, &levels, 1).unwrap();
        let (l850, l700) = (s.levels[0], s.levels[1]);
        // Geopotential only where there is no geopotential height; relative humidity before
        // dew point before specific humidity.
        assert_eq!((l850.z.field, l850.z.geopotential), (13, true));
        assert_eq!((l700.z.field, l700.z.geopotential), (14, false));
        assert!(matches!(l850.hum, Humidity::Relative(16)));
        assert!(matches!(l700.hum, Humidity::Specific(17)));
        assert!(matches!(s.hum2, Humidity::Specific(19)));
        // The step's amount is the 0–3 h total; the first step is the reference time: zero.
        assert_eq!((s.plus.clone(), s.minus.clone()), (vec![20], vec![]));
        let first = ch.step(&steps, &levels, 0).unwrap();
        assert!(first.plus.is_empty() && first.minus.is_empty());
        let terrain = ch.terrain().unwrap();
        assert_eq!((terrain.field, terrain.geopotential), (0, true));
        assert_eq!(s.reads(), vec![12, 13, 16, 11, 14, 17, 18, 19, 20]);
    }

    #[test]
    fn a_field_that_cannot_be_used_is_named_in_the_message() {
        let mut fields = case();
        // The 3 h temperature at 700 hPa cannot be read, so the 3 h step lacks that level.
        fields[11].unusable = Some(Unusable::Problem("its packing is not supported".into()));
        let cat = catalogue(fields.clone());
        let ch = Chooser::new(&cat);
        let steps = ch.steps().unwrap();
        let (levels, _) = ch.levels(&steps).unwrap();
        let e = ch.step(&steps, &levels, 1).unwrap_err().to_string();
        assert!(
            e.starts_with("f.grib2: step 2 (valid 2026-01-10T03:00Z): no T; "),
            "{e}"
        );
        assert!(e.contains("70000"), "{e}");
        assert!(
            e.contains("holds it but its packing is not supported"),
            "{e}"
        );
        assert!(
            e.ends_with(
                "at 700 hPa; the first step has this level, and every step needs the same levels"
            ),
            "{e}"
        );
        // Unreadable at every level of a time: that time would drop out of the steps.
        fields[12].unusable = Some(Unusable::Problem("its packing is not supported".into()));
        let cat = catalogue(fields);
        let e = Chooser::new(&cat).steps().unwrap_err().to_string();
        assert!(
            e.contains("valid time 2026-01-10T03:00Z") && e.contains("drop out"),
            "{e}"
        );
    }
}
