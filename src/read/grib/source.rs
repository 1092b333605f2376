//! A case's fields chosen from GRIB2 files: the grid, the time steps, the isobaric levels and,
//! per step, which message gives each variable; then decoding step by step.
//!
//! Choice rules, so that a folder of operational files works without a list of names:
//! - the case grid is the grid holding the most isobaric temperatures (fields on other grids
//!   are not used, and a needed field found only on another grid is an error naming both);
//! - the steps are the distinct valid times of instantaneous isobaric temperatures;
//! - the levels are the isobaric levels where the first step has temperature, geopotential
//!   height (or geopotential) and humidity (relative, or specific turned into relative); every
//!   later step must have the same levels;
//! - 2 m temperature and 2 m humidity (relative, dew point or specific) at every step; terrain
//!   from geopotential height, geometric height or geopotential at the ground (type 1), or model
//!   terrain height 2/0/7, at any time;
//! - precipitation per step from accumulations (templates 4.8/4.11, process 1): a total over
//!   exactly the step, a chain of consecutive totals covering it, or the difference of two
//!   totals from a common start (running totals since the start, fixed buckets such as 0–6 h).
//!   The first step gets the total from the reference time when one ends there, and zero when
//!   it is the reference time itself.

use super::catalog::{Catalog, Entry};
use super::decode::decode;
use super::product::{short, Param, Surface};
use super::GribError;
use crate::diagnose::thermo::{rh_from_dewpoint, rh_from_specific, standard_pressure, G};
use crate::read::accumulation::{step_amount, Accumulation};
use crate::read::fields::{assemble, Labelled, StaticFields, StepFields, StepValues};
use crate::read::source::{Source, SourceError};
use chrono::{DateTime, Utc};
use std::path::PathBuf;

/// Humidity as found.
#[derive(Clone, Copy, Debug)]
enum Humidity {
    Relative(usize),
    Specific(usize),
    Dewpoint(usize),
}

#[derive(Clone, Debug)]
struct LevelPlan {
    t: usize,
    z: usize,
    z_is_geopotential: bool,
    hum: Humidity,
}

#[derive(Clone, Debug)]
struct StepPlan {
    valid: DateTime<Utc>,
    t_first: usize,
    levels: Vec<LevelPlan>,
    t2: usize,
    hum2: Humidity,
    psfc: Option<usize>,
    plus: Vec<usize>,
    minus: Vec<usize>,
    mslp: Option<usize>,
}

/// Fields of a case read from GRIB2 files.
pub struct GribSource {
    cat: Catalog,
    grid: usize,
    statics: StaticFields,
    plan: Vec<StepPlan>,
}

/// Most levels a column can hold (see `diagnose::ptype::MAX_LEVELS`).
const MAX_LEVELS: usize = crate::diagnose::ptype::MAX_LEVELS;
/// Precipitation differences down to this (kg m⁻²) are packing noise and become zero; below it
/// the totals do not chain. A coarser packing widens it: see [`GribSource::step`].
const PRECIP_NOISE: f32 = 0.05;

fn same_surface(a: &Surface, b: &Surface) -> bool {
    match (a, b) {
        (Surface::Isobaric(x), Surface::Isobaric(y)) => (x - y).abs() < 0.5,
        (Surface::AboveGround(x), Surface::AboveGround(y)) => (x - y).abs() < 1e-6,
        (Surface::Ground, Surface::Ground) | (Surface::MeanSeaLevel, Surface::MeanSeaLevel) => true,
        _ => false,
    }
}

/// The case's choices, made from a catalog; every check that `inspect` reports is one method.
pub struct Chooser<'a> {
    /// The fields.
    pub cat: &'a Catalog,
    /// The case grid.
    pub grid: usize,
}

impl<'a> Chooser<'a> {
    /// Picks the case grid: the one with the most isobaric temperatures.
    pub fn new(cat: &'a Catalog) -> Result<Self, GribError> {
        let mut counts = vec![0usize; cat.grids.len()];
        for e in &cat.entries {
            if let (Param::Temperature, Surface::Isobaric(_), None, Some(g)) =
                (e.param(), e.product.surface, &e.problem, e.grid)
            {
                counts[g] += 1;
            }
        }
        let best = counts.iter().enumerate().max_by_key(|(_, c)| **c);
        if counts.iter().filter(|c| **c > 0).count() > 1 {
            let first_on = |g: usize| {
                cat.entries
                    .iter()
                    .find(|e| {
                        e.grid == Some(g) && e.problem.is_none() && e.param() == Param::Temperature
                    })
                    .expect("counted")
            };
            let mut grids = counts
                .iter()
                .enumerate()
                .filter(|(_, c)| **c > 0)
                .map(|(g, _)| g);
            let (a, b) = (grids.next().expect("two"), grids.next().expect("two"));
            let (ea, eb) = (first_on(a), first_on(b));
            return Err(GribError::Missing {
                path: cat.files[eb.file].clone(),
                what: format!(
                    "message {} ({}) is on a different grid ({}) from {} ({}); every field of a case must share one grid",
                    eb.raw.message,
                    eb.product.label(),
                    grid_text(cat, Some(b)),
                    cat.origin(ea),
                    grid_text(cat, Some(a))
                ),
            });
        }
        match best {
            Some((g, c)) if *c > 0 => Ok(Self { cat, grid: g }),
            _ => Err(GribError::Missing {
                path: self_files(cat),
                what: format!(
                    "no readable temperature on isobaric levels (parameter 0/0/0 on fixed surface 100){}",
                    near_miss(cat, |e| e.param() == Param::Temperature
                        && matches!(e.product.surface, Surface::Isobaric(_)))
                ),
            }),
        }
    }

    fn usable(&self, e: &Entry) -> bool {
        e.problem.is_none() && e.grid == Some(self.grid)
    }

    /// First usable instantaneous field of `param` on `surface` valid at `valid`.
    fn find(&self, param: Param, surface: &Surface, valid: Option<DateTime<Utc>>) -> Option<usize> {
        self.cat.entries.iter().position(|e| {
            self.usable(e)
                && e.param() == param
                && e.product.statistical_process.is_none()
                && same_surface(&e.product.surface, surface)
                && valid.is_none_or(|v| e.product.valid == v)
        })
    }

    /// The text for a missing field: any entry that would match but cannot be used.
    fn why_missing(&self, param: Param, surface: &Surface, valid: Option<DateTime<Utc>>) -> String {
        let hit = self.cat.entries.iter().find(|e| {
            e.param() == param
                && same_surface(&e.product.surface, surface)
                && valid.is_none_or(|v| e.product.valid == v)
        });
        match hit {
            Some(e) => match &e.problem {
                Some(p) => format!("; {} holds it but {p}", self.cat.origin(e)),
                None if e.grid != Some(self.grid) => format!(
                    "; {} holds it on a different grid ({}), but every field of a case must share the grid of the isobaric temperatures ({})",
                    self.cat.origin(e),
                    grid_text(self.cat, e.grid),
                    grid_text(self.cat, Some(self.grid))
                ),
                None => String::new(),
            },
            None => String::new(),
        }
    }

    /// Valid times of the steps, in order.
    pub fn steps(&self) -> Vec<DateTime<Utc>> {
        let mut t: Vec<DateTime<Utc>> = self
            .cat
            .entries
            .iter()
            .filter(|e| {
                self.usable(e)
                    && e.param() == Param::Temperature
                    && e.product.statistical_process.is_none()
                    && matches!(e.product.surface, Surface::Isobaric(_))
            })
            .map(|e| e.product.valid)
            .collect();
        t.sort();
        t.dedup();
        t
    }

    /// A valid time whose isobaric temperatures the files hold but cannot be read would drop out
    /// of the steps unnoticed (and with it, hours of the storm): refuse it, naming the field.
    fn every_time_readable(&self, steps: &[DateTime<Utc>]) -> Result<(), GribError> {
        let lost = self.cat.entries.iter().find(|e| {
            e.problem.is_some()
                && e.param() == Param::Temperature
                && e.product.statistical_process.is_none()
                && matches!(e.product.surface, Surface::Isobaric(_))
                && !steps.contains(&e.product.valid)
        });
        match lost {
            Some(e) => Err(GribError::Missing {
                path: self.cat.files[e.file].clone(),
                what: format!(
                    "valid time {}: {} holds temperature there but {}; without it that valid time would drop out of the steps (remove the file to run without it)",
                    short(e.product.valid),
                    self.cat.origin(e),
                    e.problem.as_deref().unwrap_or("")
                ),
            }),
            None => Ok(()),
        }
    }

    fn missing(&self, valid: DateTime<Utc>, what: String) -> GribError {
        let path = self
            .cat
            .entries
            .iter()
            .find(|e| self.usable(e) && e.product.valid == valid)
            .map(|e| self.cat.files[e.file].clone())
            .unwrap_or_else(|| self_files(self.cat));
        GribError::Missing { path, what }
    }

    /// Levels complete at `valid`: (pressure, plan), highest pressure first.
    fn levels_at(&self, valid: DateTime<Utc>) -> Vec<(f64, Option<LevelPlan>)> {
        let mut ps: Vec<f64> = self
            .cat
            .entries
            .iter()
            .filter(|e| {
                self.usable(e) && e.param() == Param::Temperature && e.product.valid == valid
            })
            .filter_map(|e| match e.product.surface {
                Surface::Isobaric(p) if e.product.statistical_process.is_none() && p > 0.0 => {
                    Some(p)
                }
                _ => None,
            })
            .collect();
        ps.sort_by(|a, b| b.total_cmp(a));
        ps.dedup_by(|a, b| (*a - *b).abs() < 0.5);
        ps.into_iter()
            .map(|p| (p, self.level(p, valid).ok()))
            .collect()
    }

    fn level(&self, p: f64, valid: DateTime<Utc>) -> Result<LevelPlan, String> {
        let s = Surface::Isobaric(p);
        let t = self
            .find(Param::Temperature, &s, Some(valid))
            .ok_or_else(|| {
                format!(
                    "temperature{}",
                    self.why_missing(Param::Temperature, &s, Some(valid))
                )
            })?;
        let (z, z_is_geopotential) = match self.find(Param::GeopotentialHeight, &s, Some(valid)) {
            Some(z) => (z, false),
            None => match self.find(Param::Geopotential, &s, Some(valid)) {
                Some(z) => (z, true),
                None => {
                    return Err(format!(
                        "geopotential height (0/3/5) or geopotential (0/3/4){}",
                        self.why_missing(Param::GeopotentialHeight, &s, Some(valid))
                    ))
                }
            },
        };
        let hum = self.humidity(&s, valid).ok_or_else(|| {
            format!(
                "relative humidity (0/1/1) or specific humidity (0/1/0){}",
                self.why_missing(Param::RelativeHumidity, &s, Some(valid))
            )
        })?;
        Ok(LevelPlan {
            t,
            z,
            z_is_geopotential,
            hum,
        })
    }

    fn humidity(&self, s: &Surface, valid: DateTime<Utc>) -> Option<Humidity> {
        self.find(Param::RelativeHumidity, s, Some(valid))
            .map(Humidity::Relative)
            .or_else(|| {
                self.find(Param::Dewpoint, s, Some(valid))
                    .map(Humidity::Dewpoint)
            })
            .or_else(|| {
                self.find(Param::SpecificHumidity, s, Some(valid))
                    .map(Humidity::Specific)
            })
    }

    /// The isobaric levels of the case (Pa, highest pressure first) and any dropped because the
    /// first step lacks height or humidity there.
    pub fn levels(&self, steps: &[DateTime<Utc>]) -> Result<(Vec<f64>, Vec<String>), GribError> {
        let first = steps[0];
        let mut dropped = Vec::new();
        let mut levels = Vec::new();
        for (p, plan) in self.levels_at(first) {
            match plan {
                Some(_) => levels.push(p),
                None => dropped.push(format!("{} hPa", p / 100.0)),
            }
        }
        if levels.len() > MAX_LEVELS {
            for p in levels.drain(MAX_LEVELS..) {
                dropped.push(format!("{} hPa", p / 100.0));
            }
        }
        if levels.len() < 2 {
            let detail = self
                .levels_at(first)
                .first()
                .map(|(p, _)| match self.level(*p, first) {
                    Err(w) => format!("; at {} hPa there is no {w}", p / 100.0),
                    Ok(_) => String::new(),
                })
                .unwrap_or_default();
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

    /// Terrain: the first ground height found.
    pub fn terrain(&self) -> Result<(usize, f32), GribError> {
        for (param, scale) in [
            (Param::GeopotentialHeight, 1.0),
            (Param::GeometricHeight, 1.0),
            (Param::ModelTerrainHeight, 1.0),
            (Param::Geopotential, (1.0 / G) as f32),
        ] {
            if let Some(i) = self.find(param, &Surface::Ground, None) {
                return Ok((i, scale));
            }
        }
        Err(GribError::Missing {
            path: self_files(self.cat),
            what: format!(
                "no model terrain: geopotential height (0/3/5), geometric height (0/3/6) or geopotential (0/3/4) at the ground (fixed surface 1), or model terrain height (2/0/7){}",
                self.why_missing(Param::GeopotentialHeight, &Surface::Ground, None)
            ),
        })
    }

    /// The plan of step `k`.
    fn step(
        &self,
        steps: &[DateTime<Utc>],
        levels: &[f64],
        k: usize,
    ) -> Result<StepPlan, GribError> {
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
        let two = Surface::AboveGround(2.0);
        let t2 = self
            .find(Param::Temperature, &two, Some(valid))
            .ok_or_else(|| {
                at(format!(
                    "no 2 m temperature (0/0/0 at fixed surface 103, value 2 m){}",
                    self.why_missing(Param::Temperature, &two, Some(valid))
                ))
            })?;
        let hum2 = self.humidity(&two, valid).ok_or_else(|| {
            at(format!(
                "no 2 m humidity (relative 0/1/1, dew point 0/0/6 or specific 0/1/0 at fixed surface 103, value 2 m){}",
                self.why_missing(Param::RelativeHumidity, &two, Some(valid))
            ))
        })?;
        let (plus, minus) = self.precipitation(steps, k).map_err(at)?;
        Ok(StepPlan {
            valid,
            t_first: lv[0].t,
            levels: lv,
            t2,
            hum2,
            psfc: self.find(Param::Pressure, &Surface::Ground, Some(valid)),
            plus,
            minus,
            mslp: self.mslp(valid),
        })
    }

    /// Checks that step `k` has every field it needs (for `inspect`).
    pub fn step_check(
        &self,
        steps: &[DateTime<Utc>],
        levels: &[f64],
        k: usize,
    ) -> Result<(), GribError> {
        self.step(steps, levels, k).map(|_| ())
    }

    /// Sea-level pressure at `valid`.
    pub fn mslp(&self, valid: DateTime<Utc>) -> Option<usize> {
        self.find(
            Param::MeanSeaLevelPressure,
            &Surface::MeanSeaLevel,
            Some(valid),
        )
        .or_else(|| {
            self.cat.entries.iter().position(|e| {
                self.usable(e)
                    && e.param() == Param::MeanSeaLevelPressure
                    && e.product.statistical_process.is_none()
                    && e.product.valid == valid
            })
        })
    }

    /// Accumulations on the case grid: (start, end, entry).
    fn totals(&self) -> Vec<(DateTime<Utc>, DateTime<Utc>, usize)> {
        self.cat
            .entries
            .iter()
            .enumerate()
            .filter(|(_, e)| self.usable(e) && e.param() == Param::TotalPrecipitation)
            .filter_map(|(i, e)| e.product.window_start.map(|s| (s, e.product.valid, i)))
            .filter(|(s, v, _)| s < v)
            .collect()
    }

    /// Entries to add and subtract for step `k`'s precipitation.
    pub fn precipitation(
        &self,
        steps: &[DateTime<Utc>],
        k: usize,
    ) -> Result<(Vec<usize>, Vec<usize>), String> {
        let totals = self.totals();
        let end = steps[k];
        let list = |at: DateTime<Utc>| -> String {
            let v: Vec<String> = totals
                .iter()
                .filter(|(_, e, _)| *e == at)
                .map(|(s, e, i)| {
                    format!(
                        "{}…{} ({})",
                        short(*s),
                        short(*e),
                        self.cat.origin(&self.cat.entries[*i])
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
                .cat
                .entries
                .iter()
                .find(|e| self.usable(e) && e.product.valid == end)
                .map(|e| e.product.reference);
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
                    "no total precipitation (0/1/8, an accumulation in template 4.8) ending at the first valid time {}",
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

fn self_files(cat: &Catalog) -> PathBuf {
    match cat.files.as_slice() {
        [one] => one.clone(),
        [first, ..] => PathBuf::from(format!(
            "{} (and {} more files)",
            first.display(),
            cat.files.len() - 1
        )),
        [] => PathBuf::from("(no files)"),
    }
}

fn grid_text(cat: &Catalog, g: Option<usize>) -> String {
    match g.map(|g| &cat.grids[g].placement) {
        Some(Ok(p)) => p.grid.describe(),
        Some(Err(e)) => e.clone(),
        None => "unsupported grid".into(),
    }
}

fn near_miss(cat: &Catalog, pred: impl Fn(&Entry) -> bool) -> String {
    match cat.entries.iter().find(|e| pred(e) && e.problem.is_some()) {
        Some(e) => format!(
            "; {} holds one but {}",
            cat.origin(e),
            e.problem.as_deref().unwrap_or("")
        ),
        None => String::new(),
    }
}

impl GribSource {
    /// Scans `files`, chooses the case's fields and decodes the terrain; any needed field that
    /// is missing or unreadable is an error here, before the run starts. Fields not used are
    /// reported in one line through `warn`.
    pub fn open(files: &[PathBuf], warn: &dyn Fn(&str)) -> Result<Self, GribError> {
        let cat = Catalog::scan(files)?;
        let ch = Chooser::new(&cat)?;
        let steps = ch.steps();
        ch.every_time_readable(&steps)?;
        let (levels, dropped) = ch.levels(&steps)?;
        let plan = (0..steps.len())
            .map(|k| ch.step(&steps, &levels, k))
            .collect::<Result<Vec<_>, _>>()?;
        let (ti, scale) = ch.terrain()?;
        let grid_ix = ch.grid;
        let mut used = vec![false; cat.entries.len()];
        used[ti] = true;
        for s in &plan {
            for l in &s.levels {
                used[l.t] = true;
                used[l.z] = true;
                used[hum_index(l.hum)] = true;
            }
            used[s.t2] = true;
            used[hum_index(s.hum2)] = true;
            for i in s.plus.iter().chain(&s.minus).chain(&s.psfc).chain(&s.mslp) {
                used[*i] = true;
            }
        }
        let mut skipped = cat.skipped.clone();
        let unused = used.iter().filter(|u| !**u).count();
        if unused > 0 {
            *skipped
                .entry("fields of used parameters on other levels, times or grids".into())
                .or_default() += unused;
        }
        if !dropped.is_empty() {
            *skipped
                .entry(format!(
                    "incomplete isobaric levels dropped: {}",
                    dropped.join(", ")
                ))
                .or_default() += 1;
        }
        if !skipped.is_empty() {
            let total: usize = skipped.values().sum();
            let parts: Vec<String> = skipped.iter().map(|(k, v)| format!("{v} × {k}")).collect();
            warn(&format!(
                "GRIB2: {total} fields not used ({}); the case uses {} fields",
                parts.join("; "),
                used.iter().filter(|u| **u).count()
            ));
        }
        let placement = cat.grids[grid_ix]
            .placement
            .as_ref()
            .expect("the case grid is placed (entries with placement problems are not usable)")
            .clone();
        let te = &cat.entries[ti];
        let mut terrain = decode(
            &cat.files[te.file],
            &te.raw,
            placement.order.len(),
            &placement.order,
        )?;
        for v in &mut terrain {
            *v *= scale;
        }
        let tpath = cat.files[te.file].clone();
        crate::read::fields::check_range(
            &tpath,
            &format!("message {} ({})", te.raw.message, te.product.label()),
            &terrain,
            -500.0,
            9000.0,
            "expected metres above sea level",
        )
        .map_err(|e| GribError::Values(Box::new(e)))?;
        let statics = StaticFields {
            grid: placement.grid,
            terrain,
            path: tpath,
        };
        Ok(Self {
            cat,
            grid: grid_ix,
            statics,
            plan,
        })
    }

    fn values(&self, i: usize) -> Result<Vec<f32>, GribError> {
        let e = &self.cat.entries[i];
        let p = self.cat.grids[self.grid]
            .placement
            .as_ref()
            .expect("case grid placed");
        decode(&self.cat.files[e.file], &e.raw, p.order.len(), &p.order)
    }

    fn label(&self, i: usize) -> String {
        let e = &self.cat.entries[i];
        let field = if e.raw.field > 1 {
            format!(" field {}", e.raw.field)
        } else {
            String::new()
        };
        format!(
            "{} message {}{field} ({})",
            self.cat.files[e.file].display(),
            e.raw.message,
            e.product.label()
        )
    }

    /// Relative humidity (%) from the humidity found, at pressure `p` (Pa per cell).
    fn relative(
        &self,
        h: Humidity,
        t: &[f32],
        p: &dyn Fn(usize) -> f64,
        decoded: &mut Decoded,
    ) -> Result<Vec<f32>, GribError> {
        Ok(match h {
            Humidity::Relative(i) => decoded.take(self, i)?,
            Humidity::Dewpoint(i) => decoded
                .take(self, i)?
                .iter()
                .zip(t)
                .map(|(&td, &t)| {
                    // A dew point above the temperature is rounding: capped at saturation.
                    rh_from_dewpoint(f64::from(t), f64::from(td.min(t))) as f32
                })
                .collect(),
            Humidity::Specific(i) => decoded
                .take(self, i)?
                .iter()
                .zip(t)
                .enumerate()
                .map(|(c, (&q, &t))| rh_from_specific(f64::from(q), f64::from(t), p(c)) as f32)
                .collect(),
        })
    }
}

/// The fields of one step, decoded in parallel (one rayon task per field; the values do not
/// depend on the number of threads), handed out once each.
struct Decoded {
    /// Entry index and its values, until handed out.
    fields: Vec<(usize, Option<FieldValues>)>,
}

type FieldValues = Result<Vec<f32>, GribError>;

impl Decoded {
    fn all(src: &GribSource, need: Vec<usize>) -> Self {
        use rayon::prelude::*;
        let values: Vec<FieldValues> = need.par_iter().map(|&i| src.values(i)).collect();
        Self {
            fields: need.into_iter().zip(values.into_iter().map(Some)).collect(),
        }
    }

    /// The values of entry `i` (decoded again should a step use one entry twice).
    fn take(&mut self, src: &GribSource, i: usize) -> Result<Vec<f32>, GribError> {
        match self.fields.iter_mut().find(|(j, _)| *j == i) {
            Some((_, slot @ Some(_))) => slot.take().expect("just matched"),
            _ => src.values(i),
        }
    }
}

fn hum_index(h: Humidity) -> usize {
    match h {
        Humidity::Relative(i) | Humidity::Specific(i) | Humidity::Dewpoint(i) => i,
    }
}

impl Source for GribSource {
    fn statics(&self) -> &StaticFields {
        &self.statics
    }

    fn step_count(&self) -> usize {
        self.plan.len()
    }

    fn valid_time(&self, k: usize) -> Option<DateTime<Utc>> {
        self.plan.get(k).map(|s| s.valid)
    }

    fn step_reusing(&self, k: usize, reuse: Vec<f32>) -> Result<StepFields, SourceError> {
        let s = &self.plan[k];
        let mut need: Vec<usize> = s
            .levels
            .iter()
            .flat_map(|l| [l.t, l.z, hum_index(l.hum)])
            .chain([s.t2, hum_index(s.hum2)])
            .chain(s.psfc)
            .chain(s.plus.iter().chain(&s.minus).copied())
            .collect();
        need.sort_unstable();
        need.dedup();
        let mut decoded = Decoded::all(self, need);
        let levels_pa: Vec<f64> = s
            .levels
            .iter()
            .map(|l| match self.cat.entries[l.t].product.surface {
                Surface::Isobaric(p) => p,
                _ => unreachable!("levels are isobaric"),
            })
            .collect();
        let mut owned: Vec<[(String, Vec<f32>); 3]> = Vec::with_capacity(s.levels.len());
        for (l, &p) in s.levels.iter().zip(&levels_pa) {
            let t = decoded.take(self, l.t)?;
            let mut z = decoded.take(self, l.z)?;
            if l.z_is_geopotential {
                for v in &mut z {
                    *v /= G as f32;
                }
            }
            let rh = self.relative(l.hum, &t, &|_| p, &mut decoded)?;
            owned.push([
                (self.label(l.t), t),
                (self.label(l.z), z),
                (self.label(hum_index(l.hum)), rh),
            ]);
        }
        let t2 = decoded.take(self, s.t2)?;
        let psfc = s.psfc.map(|i| decoded.take(self, i)).transpose()?;
        let terrain = &self.statics.terrain;
        let p_at = |c: usize| match &psfc {
            Some(p) => f64::from(p[c]),
            None => standard_pressure(f64::from(terrain[c])),
        };
        let rh2 = self.relative(s.hum2, &t2, &p_at, &mut decoded)?;
        let n = terrain.len();
        let mut precip = vec![0f32; n];
        for &i in &s.plus {
            for (a, v) in precip.iter_mut().zip(decoded.take(self, i)?) {
                *a += v;
            }
        }
        for &i in &s.minus {
            for (a, v) in precip.iter_mut().zip(decoded.take(self, i)?) {
                *a -= v;
            }
        }
        // Each decoded total lies within half its packing step of the value packed, so the
        // difference of totals may fall that far below zero without anything being wrong.
        let noise = s
            .plus
            .iter()
            .chain(&s.minus)
            .map(|&i| 0.5 * self.cat.entries[i].quantum)
            .sum::<f64>()
            .max(f64::from(PRECIP_NOISE)) as f32
            * 1.001;
        if let Some((c, v)) = precip.iter().enumerate().find(|(_, v)| **v < -noise) {
            return Err(GribError::Missing {
                path: self.cat.files[self.cat.entries[s.plus[0]].file].clone(),
                what: match s.minus.first() {
                    Some(&m) => format!(
                        "step {} (valid {}): the precipitation totals do not chain: {} minus {} is {v} kg m-2 at cell {c} (a later total smaller than an earlier one from the same start)",
                        k + 1,
                        short(s.valid),
                        self.label(s.plus[0]),
                        self.label(m)
                    ),
                    None => format!(
                        "step {} (valid {}): precipitation {} is {v} kg m-2 at cell {c}; an amount cannot be negative",
                        k + 1,
                        short(s.valid),
                        s.plus.iter().map(|&i| self.label(i)).collect::<Vec<_>>().join(" + ")
                    ),
                },
            }
            .into());
        }
        for v in &mut precip {
            if *v < 0.0 {
                *v = 0.0;
            }
        }
        let precip_label = match s.plus.first() {
            Some(&i) => self.label(i),
            None => "precipitation (zero at the reference time)".into(),
        };
        let values = StepValues {
            levels_pa,
            levels: owned
                .iter()
                .map(|[t, z, rh]| {
                    [
                        Labelled {
                            label: t.0.clone(),
                            values: &t.1,
                        },
                        Labelled {
                            label: z.0.clone(),
                            values: &z.1,
                        },
                        Labelled {
                            label: rh.0.clone(),
                            values: &rh.1,
                        },
                    ]
                })
                .collect(),
            t2: Labelled {
                label: self.label(s.t2),
                values: &t2,
            },
            rh2: Labelled {
                label: self.label(hum_index(s.hum2)),
                values: &rh2,
            },
            precip: Labelled {
                label: precip_label,
                values: &precip,
            },
        };
        let path = self.cat.files[self.cat.entries[s.t_first].file].clone();
        Ok(assemble(&path, s.valid, values, terrain, reuse)?)
    }

    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError> {
        match self.plan[k].mslp {
            Some(i) => Ok(Some(self.values(i)?)),
            None => Ok(None),
        }
    }

    fn inputs(&self) -> Vec<PathBuf> {
        self.cat.files.clone()
    }
}

/// Sea-level pressure (Pa, row-major, row 0 north) per valid time, in time order.
pub type PressureSeries = Vec<(DateTime<Utc>, Vec<f32>)>;

/// Sea-level pressure at every valid time found in `files`, on the grid holding the most of
/// it, for the track finder: the grid and (valid time, Pa) in time order.
pub fn mslp_series(files: &[PathBuf]) -> Result<(crate::grid::Grid, PressureSeries), GribError> {
    let cat = Catalog::scan(files)?;
    let is_mslp = |e: &Entry| {
        e.param() == Param::MeanSeaLevelPressure
            && e.problem.is_none()
            && e.product.statistical_process.is_none()
    };
    let mut counts = vec![0usize; cat.grids.len()];
    for e in cat.entries.iter().filter(|e| is_mslp(e)) {
        if let Some(g) = e.grid {
            counts[g] += 1;
        }
    }
    let Some((g, _)) = counts
        .iter()
        .enumerate()
        .filter(|(_, c)| **c > 0)
        .max_by_key(|(_, c)| **c)
    else {
        return Err(GribError::Missing {
            path: self_files(&cat),
            what: format!(
                "no readable mean sea-level pressure (parameter 0/3/1){}",
                near_miss(&cat, |e| e.param() == Param::MeanSeaLevelPressure)
            ),
        });
    };
    let placement = cat.grids[g]
        .placement
        .as_ref()
        .expect("usable entries are placed");
    let mut seen = Vec::new();
    let mut out = Vec::new();
    for e in cat
        .entries
        .iter()
        .filter(|e| is_mslp(e) && e.grid == Some(g))
    {
        if seen.contains(&e.product.valid) {
            continue;
        }
        seen.push(e.product.valid);
        let v = decode(
            &cat.files[e.file],
            &e.raw,
            placement.order.len(),
            &placement.order,
        )?;
        out.push((e.product.valid, v));
    }
    out.sort_by_key(|(t, _)| *t);
    Ok((placement.grid.clone(), out))
}
