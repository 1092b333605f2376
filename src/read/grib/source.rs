//! A case's fields from GRIB2 files: the case grid, the catalog's entries handed to the shared
//! [`crate::read::choose`] rules, then decoding step by step.
//!
//! The case grid is the grid holding the most isobaric temperatures; fields on other grids are
//! not used, and a needed field found only on another grid is an error naming both.
//! Accumulations are totals of templates 4.8/4.11 with process 1 (from the forecast's start
//! time to the end of the interval).

use super::catalog::{Catalog, Entry};
use super::decode::decode;
use super::product::{Param, Surface};
use super::GribError;
use crate::diagnose::thermo::{standard_pressure, G};
use crate::read::choose::catalogue::short;
use crate::read::choose::{
    Catalogue, Chooser, Field, Humidity, Level, Names, Quantity, StepChoice, Unusable, Window,
};
use crate::read::fields::{assemble, Labelled, StaticFields, StepFields, StepValues};
use crate::read::source::{Source, SourceError};
use chrono::{DateTime, Utc};
use std::path::PathBuf;

/// Fields of a case read from GRIB2 files.
pub struct GribSource {
    cat: Catalog,
    grid: usize,
    statics: StaticFields,
    plan: Vec<StepChoice>,
}

/// Precipitation differences down to this (kg m⁻²) are packing noise and become zero; below it
/// the totals do not chain. A coarser packing widens it: see `GribSource::step_reusing`.
const PRECIP_NOISE: f32 = 0.05;

/// How GRIB2 names the fields a case needs: by WMO parameter (discipline/category/number) and
/// fixed surface, as the code tables do.
const NAMES: Names = Names {
    isobaric_temperature: "temperature on isobaric levels (parameter 0/0/0 on fixed surface 100)",
    temperature: "temperature",
    height: "geopotential height (0/3/5) or geopotential (0/3/4)",
    humidity: "relative humidity (0/1/1) or specific humidity (0/1/0)",
    temperature_2m: "2 m temperature (0/0/0 at fixed surface 103, value 2 m)",
    humidity_2m: "2 m humidity (relative 0/1/1, dew point 0/0/6 or specific 0/1/0 at fixed surface 103, value 2 m)",
    terrain: "geopotential height (0/3/5), geometric height (0/3/6) or geopotential (0/3/4) at the ground (fixed surface 1), or model terrain height (2/0/7)",
    first_precipitation: "total precipitation (0/1/8, an accumulation in template 4.8)",
};

/// The case grid: the one holding the most isobaric temperatures (`None` when none does).
/// Fields on two grids are refused, naming both: a case has one grid.
fn case_grid(cat: &Catalog) -> Result<Option<usize>, GribError> {
    let mut counts = vec![0usize; cat.grids.len()];
    for e in &cat.entries {
        if let (Param::Temperature, Surface::Isobaric(_), None, Some(g)) =
            (e.param(), e.product.surface, &e.problem, e.grid)
        {
            counts[g] += 1;
        }
    }
    let mut grids = counts
        .iter()
        .enumerate()
        .filter(|(_, c)| **c > 0)
        .map(|(g, _)| g);
    if let (Some(a), Some(b)) = (grids.next(), grids.next()) {
        let first_on = |g: usize| {
            cat.entries
                .iter()
                .find(|e| {
                    e.grid == Some(g) && e.problem.is_none() && e.param() == Param::Temperature
                })
                .expect("counted")
        };
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
    Ok(counts.iter().position(|c| *c > 0))
}

/// The catalog's entries as the chooser sees them, in the same order, with the case grid
/// (`None` when no grid holds an isobaric temperature: then no field is usable, and the
/// chooser says so).
pub fn catalogue(cat: &Catalog) -> Result<(Option<usize>, Catalogue), GribError> {
    let grid = case_grid(cat)?;
    let fields = cat
        .entries
        .iter()
        .map(|e| Field {
            quantity: match e.param() {
                Param::Temperature => Quantity::Temperature,
                Param::Dewpoint => Quantity::Dewpoint,
                Param::SpecificHumidity => Quantity::SpecificHumidity,
                Param::RelativeHumidity => Quantity::RelativeHumidity,
                Param::TotalPrecipitation => Quantity::Precipitation,
                Param::Pressure => Quantity::Pressure,
                Param::MeanSeaLevelPressure => Quantity::Mslp,
                Param::Geopotential => Quantity::Geopotential,
                Param::GeopotentialHeight => Quantity::GeopotentialHeight,
                Param::GeometricHeight => Quantity::GeometricHeight,
                Param::ModelTerrainHeight => Quantity::TerrainHeight,
            },
            level: match e.product.surface {
                Surface::Isobaric(p) => Level::Isobaric(p),
                Surface::AboveGround(h) => Level::AboveGround(h),
                Surface::Ground => Level::Ground,
                Surface::MeanSeaLevel => Level::MeanSeaLevel,
                Surface::Other(..) => Level::Other,
            },
            valid: Some(e.product.valid),
            window: match (e.product.statistical_process, e.product.window_start) {
                (None, _) => Window::Instant,
                (Some(_), Some(start)) => Window::Since(start),
                (Some(_), None) => Window::Statistic,
            },
            reference: Some(e.product.reference),
            unusable: match &e.problem {
                Some(p) => Some(Unusable::Problem(p.clone())),
                None if e.grid != grid => Some(Unusable::OtherGrid(grid_text(cat, e.grid))),
                None => None,
            },
            path: cat.files[e.file].clone(),
            origin: cat.origin(e),
        })
        .collect();
    Ok((
        grid,
        Catalogue {
            fields,
            files: self_files(cat),
            grid: grid_text(cat, grid),
            names: NAMES,
        },
    ))
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
        Self::open_member(files, None, warn)
    }

    /// Opens the fields of one ensemble member, `perturbation` (templates 4.1/4.11): fields of
    /// other members are left aside. With `None`, files holding several members are refused
    /// ([`GribError::Ensemble`]) rather than mixed.
    pub fn open_member(
        files: &[PathBuf],
        perturbation: Option<u8>,
        warn: &dyn Fn(&str),
    ) -> Result<Self, GribError> {
        let mut cat = Catalog::scan(files)?;
        let found = perturbations_in(&cat);
        match perturbation {
            Some(p) => cat.keep_member(p),
            None if found.len() > 1 => {
                return Err(GribError::Ensemble {
                    path: files[0].clone(),
                    count: found.len(),
                    numbers: numbers_text(&found),
                })
            }
            None => {}
        }
        let (grid, fields) = catalogue(&cat)?;
        let ch = Chooser::new(&fields);
        let steps = ch.steps()?;
        let (levels, dropped) = ch.levels(&steps)?;
        let plan = (0..steps.len())
            .map(|k| ch.step(&steps, &levels, k))
            .collect::<Result<Vec<_>, _>>()?;
        let terrain_field = ch.terrain()?;
        let ti = terrain_field.field;
        let grid_ix = grid.expect("the steps are isobaric temperatures on the case grid");
        let mut used = vec![false; cat.entries.len()];
        used[ti] = true;
        for s in &plan {
            for i in s.reads().into_iter().chain(s.mslp) {
                used[i] = true;
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
        if terrain_field.geopotential {
            let scale = (1.0 / G) as f32;
            for v in &mut terrain {
                *v *= scale;
            }
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
        Ok(h.relative(decoded.take(self, h.field())?, t, p))
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
        let mut need = s.reads();
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
            let mut z = decoded.take(self, l.z.field)?;
            if l.z.geopotential {
                for v in &mut z {
                    *v /= G as f32;
                }
            }
            let rh = self.relative(l.hum, &t, &|_| p, &mut decoded)?;
            owned.push([
                (self.label(l.t), t),
                (self.label(l.z.field), z),
                (self.label(l.hum.field()), rh),
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
                label: self.label(s.hum2.field()),
                values: &rh2,
            },
            precip: Labelled {
                label: precip_label,
                values: &precip,
            },
        };
        let path = self.cat.files[self.cat.entries[s.levels[0].t].file].clone();
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
    fn reference_time(&self) -> Option<DateTime<Utc>> {
        // The cycle of the first step's fields (a run's fields share it).
        let first = self.plan.first()?.reads().into_iter().next()?;
        Some(self.cat.entries[first].product.reference)
    }
}

/// The ensemble perturbation numbers of the fields of used parameters, sorted (empty for
/// files without ensemble templates).
pub(crate) fn perturbations_in(cat: &Catalog) -> Vec<u8> {
    let mut v: Vec<u8> = cat
        .entries
        .iter()
        .filter(|e| e.product.param.is_some())
        .filter_map(|e| e.product.member)
        .collect();
    v.sort_unstable();
    v.dedup();
    v
}

/// `0, 1, 2` (the first and last ten of a long list).
pub(crate) fn numbers_text(v: &[u8]) -> String {
    let all: Vec<String> = v.iter().map(|n| n.to_string()).collect();
    if all.len() <= 20 {
        all.join(", ")
    } else {
        format!(
            "{}, …, {}",
            all[..10].join(", "),
            all[all.len() - 10..].join(", ")
        )
    }
}

/// The ensemble members in GRIB2 files: their perturbation numbers (templates 4.1/4.11),
/// sorted; empty when the files hold no ensemble fields.
pub fn perturbations(files: &[PathBuf]) -> Result<Vec<u8>, GribError> {
    Ok(perturbations_in(&Catalog::scan(files)?))
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
