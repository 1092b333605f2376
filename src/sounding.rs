//! The point sounding view: a point's shifted profile at one step, what every method makes of
//! it, and the point's totals up to that step.
//!
//! [`sounding`] runs the engine's own per-cell kernel ([`crate::engine::accumulate_cell`]) for
//! each of the four cells around the point and one scenario over steps 1…N, and interpolates
//! their totals by the grid's one point rule ([`crate::grid::Grid::bilinear_at`]), so the
//! totals it reports are those of towns.csv for the same point and scenario. The profile shown
//! is the column of the cell of largest weight. By default the step shown is the one with the
//! most precipitation at the point. [`Sounding`] prints as an aligned plain-text table (its
//! `Display`) and serialises to JSON.

use crate::accumulate::Totals;
use crate::case::Case;
use crate::diagnose::ptype::{bourgouin_rule, energy_areas, Layer, MAX_LEVELS};
use crate::diagnose::subcloud::SubCloud;
use crate::diagnose::thermo::{dewpoint_from_rh, T_FREEZE};
use crate::diagnose::{ColumnStep, Methods, Profile, PtypeMethod, SlrMethod};
use crate::engine::{
    accumulate_cell, case_track, cell_column, hours, sample_column, scenario_shift, CellStep,
    EngineError, Sampled, SourceAt, StepWindow,
};
use crate::grid::Bilinear;
use crate::progress::Silent;
use crate::read::open_member as open_source;
use crate::scenario::Scenario;
use serde::Serialize;
use std::fmt;

/// Why a sounding cannot be made.
#[derive(Debug, thiserror::Error)]
pub enum SoundingError {
    /// Reading or running the case failed.
    #[error(transparent)]
    Engine(#[from] EngineError),
    /// The point lies outside the grid.
    #[error("--at {lat},{lon}: the point lies outside the grid ({extent})")]
    Outside {
        /// Latitude.
        lat: f64,
        /// Longitude.
        lon: f64,
        /// The grid's extent.
        extent: String,
    },
    /// No such step.
    #[error("--step {step}: the case has steps 1…{steps}")]
    Step {
        /// The step asked for.
        step: usize,
        /// Steps in the case.
        steps: usize,
    },
}

/// What to show.
#[derive(Clone, Copy, Debug)]
pub struct SoundingRequest {
    /// Latitude, degrees north.
    pub lat: f64,
    /// Longitude, degrees east.
    pub lon: f64,
    /// 1-based step (default: the step with the most precipitation at the point).
    pub step: Option<usize>,
    /// The scenario.
    pub scenario: Scenario,
}

/// One point of the profile.
#[derive(Clone, Debug, Serialize)]
pub struct Level {
    /// `surface` (the 2 m values at the cell's ground) or `isobaric`.
    pub kind: &'static str,
    /// Pressure, hPa.
    pub p_hpa: f64,
    /// Geopotential height, m.
    pub z_m: f64,
    /// Temperature as diagnosed (after warm-layer bias and sub-cloud cooling), °C.
    pub t_c: f64,
    /// Dewpoint (Bolton 1980), °C.
    pub td_c: f64,
    /// Isobaric wet-bulb, °C.
    pub tw_c: f64,
    /// Relative humidity over water, %.
    pub rh_pct: f64,
    /// Temperature change applied to the model's value (bias and cooling), K.
    pub dt_k: f64,
    /// Sub-cloud weight, 0–1 (1 below the cloud base, 0 in cloud).
    pub below_cloud: f64,
}

/// One warm or cold layer of the energy-area method.
#[derive(Clone, Debug, Serialize)]
pub struct EnergyLayer {
    /// Base, hPa.
    pub p_bottom_hpa: f64,
    /// Top, hPa.
    pub p_top_hpa: f64,
    /// Energy area, J/kg (positive: melting; negative: refreezing).
    pub area_j_per_kg: f64,
}

/// The partial thicknesses, m (NaN, or null in JSON, where a level is below ground or absent).
#[derive(Clone, Debug, Serialize)]
pub struct Thicknesses {
    /// 1000–850 hPa.
    pub t1000_850_m: f64,
    /// 850–700 hPa.
    pub t850_700_m: f64,
    /// 1000–500 hPa.
    pub t1000_500_m: f64,
    /// The low-level thickness the partial-thickness rules read: 1000–850 hPa, or where the
    /// ground is above 1000 hPa the layer from the ground to 850 hPa at its own mean
    /// temperature ([`Profile::low_level_thickness`]).
    pub low_level_m: f64,
}

/// What the energy-area and surface-logistic methods read beyond the fractions.
#[derive(Clone, Debug, Serialize)]
pub struct Decided {
    /// The Bourgouin (2000) rule that decides the energy-area type, in words (empty when the
    /// profile is out of the method's domain).
    pub energy_area_rule: String,
    /// Warmest wet-bulb above the ground up to 500 hPa, °C (surface-logistic's melting layer).
    pub warmest_wet_bulb_aloft_c: f64,
    /// Coldest temperature between the ground and that point, °C (where melted snow refreezes).
    pub coldest_below_c: f64,
}

/// One precipitation-type method's fractions.
#[derive(Clone, Debug, Serialize)]
pub struct MethodFractions {
    /// Method name.
    pub method: &'static str,
    /// The run's method.
    pub in_use: bool,
    /// Snow share.
    pub snow: f64,
    /// Ice-pellet share.
    pub ice_pellets: f64,
    /// Freezing-rain share.
    pub freezing_rain: f64,
    /// Rain share.
    pub rain: f64,
}

/// One snow-ratio method's ratio.
#[derive(Clone, Debug, Serialize)]
pub struct MethodRatio {
    /// Method name.
    pub method: &'static str,
    /// The run's method.
    pub in_use: bool,
    /// Snow depth per liquid depth.
    pub ratio: f64,
}

/// Dry air below the cloud at this step.
#[derive(Clone, Debug, Serialize)]
pub struct DryAir {
    /// The correction is on.
    pub enabled: bool,
    /// Water needed to saturate the sub-cloud layer, mm.
    pub deficit_mm: f64,
    /// Water given up to it so far, mm.
    pub carried_mm: f64,
    /// Share of the deficit met, 0–1.
    pub met: f64,
}

/// The cell's totals from step 1 to this step, under the run's methods.
#[derive(Clone, Debug, Serialize)]
pub struct TotalsToStep {
    /// Liquid reaching the ground, mm.
    pub liquid_mm: f64,
    /// Of which snow, mm of liquid.
    pub snow_liquid_mm: f64,
    /// Snowfall, cm.
    pub snowfall_cm: f64,
    /// Ice pellets, mm of liquid.
    pub ice_pellets_mm: f64,
    /// Ice-pellet depth, mm.
    pub ice_pellet_depth_mm: f64,
    /// Freezing rain, mm of liquid.
    pub freezing_rain_mm: f64,
    /// Flat ice accretion, mm.
    pub ice_accretion_mm: f64,
    /// First step with measurable snow (≥ 0.1 mm liquid in a step), if any.
    pub onset_step: Option<u32>,
    /// Its valid time.
    pub onset_time: Option<String>,
    /// Steps skipped because the scenario's time lay outside the model's steps.
    pub uncovered_steps: u32,
}

/// One of the four cells whose totals give the point's (bilinear, [`crate::grid::Grid::bilinear_at`]).
#[derive(Clone, Debug, Serialize)]
pub struct NeighbourCell {
    /// Column and row, 0-based.
    pub cell: [usize; 2],
    /// Its centre, degrees.
    pub lat: f64,
    /// Its centre, degrees.
    pub lon: f64,
    /// Bilinear weight, 0–1 (the four sum to 1; a cell of weight 0 does not count).
    pub weight: f64,
    /// Its liquid from step 1 to the step shown, mm (NaN, null in JSON, where missing).
    pub liquid_mm: f64,
    /// Its snowfall from step 1 to the step shown, cm.
    pub snowfall_cm: f64,
}

/// How the step shown was chosen.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StepChoice {
    /// Asked for with `--step`.
    Requested,
    /// The step with the most precipitation at the point (weighted over the four cells).
    Wettest,
    /// No precipitation at the point at any step: the last step.
    LastDry,
}

/// A point sounding.
#[derive(Clone, Debug, Serialize)]
pub struct Sounding {
    /// Case title.
    pub title: String,
    /// The member shown.
    pub member: String,
    /// Requested latitude.
    pub lat: f64,
    /// Requested longitude.
    pub lon: f64,
    /// The four surrounding cells and their weights: the totals are theirs, interpolated.
    pub cells: Vec<NeighbourCell>,
    /// The cell whose profile is shown (the one of largest weight): column and row, 0-based.
    pub cell: [usize; 2],
    /// Its centre, degrees.
    pub cell_lat: f64,
    /// Its centre, degrees.
    pub cell_lon: f64,
    /// Its terrain height, m.
    pub ground_m: f64,
    /// The step shown, 1-based.
    pub step: usize,
    /// How it was chosen.
    pub step_choice: StepChoice,
    /// Precipitation at the point in every step, mm, as the scenario's fields give it before
    /// any dry air below the cloud takes its share (NaN, null in JSON, where not covered).
    pub step_precip_mm: Vec<f64>,
    /// Steps in the case.
    pub steps: usize,
    /// Valid time of the step.
    pub valid_time: String,
    /// Model time the scenario's fields come from (none when outside the model's steps).
    pub sampled_time: Option<String>,
    /// The scenario.
    pub scenario: Scenario,
    /// Its label.
    pub scenario_label: String,
    /// The run's methods.
    pub methods: Methods,
    /// The profile, from the ground upward (empty when the step is not covered or the column is
    /// missing).
    pub levels: Vec<Level>,
    /// Warm and cold layers up to 500 hPa, from the ground upward.
    pub energy_areas: Vec<EnergyLayer>,
    /// Partial thicknesses.
    pub thickness: Thicknesses,
    /// Every precipitation-type method on this profile.
    pub ptype: Vec<MethodFractions>,
    /// Which rules decided the type.
    pub decided: Decided,
    /// Every snow-ratio method on this profile.
    pub snow_ratio: Vec<MethodRatio>,
    /// Dry air below the cloud.
    pub dry_air: DryAir,
    /// Precipitation leaving the cloud this step, mm.
    pub falling_mm: f64,
    /// Of which reaching the ground, mm.
    pub reaching_ground_mm: f64,
    /// Totals to this step.
    pub totals: TotalsToStep,
}

/// What one pass of the kernel over the four cells leaves.
struct Pass {
    /// Totals of the four cells, in [`Bilinear::cells`] order.
    totals: Totals,
    /// The shown cell's last column.
    last: Option<Last>,
    /// The shown cell's diagnosed profile at its last step.
    profile: Profile,
    /// Precipitation at the point per step run, mm.
    precip: Vec<f64>,
}

/// Runs the engine's kernel for the four cells of `b` and scenario `s` over steps 1…`upto`.
fn pass(
    case: &Case,
    source: &dyn crate::read::source::Source,
    track: Option<&crate::read::Track>,
    b: &Bilinear,
    shown: usize,
    s: &Scenario,
    upto: usize,
) -> Result<(Pass, Vec<chrono::DateTime<chrono::Utc>>), SoundingError> {
    let grid = &source.statics().grid;
    let terrain = &source.statics().terrain;
    let methods = case.physics.methods;
    let mut window = StepWindow::new(source);
    let mut totals = Totals::new(b.cells.len());
    let mut buf = vec![0.0f32; 0];
    let mut later = vec![0.0f32; 0];
    let mut profile = Profile::empty();
    let mut scratch = Profile::empty();
    let mut last: Option<Last> = None;
    let mut precip = Vec::with_capacity(upto);
    for k in 0..upto {
        window.load_through(k)?;
        let at = window.times[k] - hours(s.timing_h);
        let Some(sample) = window.sample(at)? else {
            totals.uncovered_steps += 1;
            last = None;
            precip.push(f64::NAN);
            continue;
        };
        let file = window.fields(k).path.clone();
        let shift = scenario_shift(track, s, at, k, &file)?;
        let layout = window.layout().clone();
        let nvar = layout.nvar();
        buf.resize(nvar, 0.0);
        later.resize(nvar, 0.0);
        let input = window.scenario_step(k, sample, shift, s);
        let mut falling_at = [f64::NAN; 4];
        for (j, &(c, _)) in b.cells.iter().enumerate() {
            let mut rows = totals.rows_mut(j, j + 1);
            let column = if rows.liquid[0].is_nan() {
                None
            } else {
                match cell_column(
                    grid,
                    &input,
                    nvar,
                    layout.precip(),
                    c,
                    &case.physics.taper,
                    &mut buf,
                    &mut later,
                ) {
                    Sampled::Outside => {
                        rows.set_missing(0);
                        None
                    }
                    Sampled::Dry => {
                        falling_at[j] = 0.0;
                        // Nothing falls: the totals stand; show the column all the same.
                        sample_column(
                            grid,
                            &input,
                            nvar,
                            c,
                            &case.physics.taper,
                            &mut buf,
                            &mut later,
                        )
                        .then_some((0.0, None))
                    }
                    Sampled::Falling(falling, w) => {
                        falling_at[j] = falling;
                        let cell = CellStep {
                            col: &buf,
                            falling,
                            ground_m: terrain[c],
                            warm_bias_k: s.warm_bias_k,
                            step: (k + 1) as u32,
                            source: Some(SourceAt {
                                input: &input,
                                w,
                                nx: grid.nx,
                            }),
                        };
                        let done = accumulate_cell(
                            &cell,
                            &layout,
                            &methods,
                            &mut rows,
                            0,
                            if j == shown {
                                &mut profile
                            } else {
                                &mut scratch
                            },
                            &mut SubCloud::empty(),
                        )
                        .ok()
                        .flatten();
                        Some((falling, done))
                    }
                }
            };
            if j == shown {
                last = column.map(|(falling, done)| Last {
                    at,
                    falling,
                    done,
                    col: buf.clone(),
                    layout: layout.clone(),
                });
            }
        }
        precip.push(b.combine(|j, _| falling_at[j]));
        window.forget_before(sample.index.min(k));
    }
    Ok((
        Pass {
            totals,
            last,
            profile,
            precip,
        },
        window.times.clone(),
    ))
}

/// The step with the most precipitation at the point (the first of equals), or `None` when
/// nothing fell there at any step.
fn wettest(precip: &[f64]) -> Option<usize> {
    let mut best: Option<(usize, f64)> = None;
    for (k, &p) in precip.iter().enumerate() {
        if p > 0.0 && best.is_none_or(|(_, b)| p > b) {
            best = Some((k, p));
        }
    }
    best.map(|(k, _)| k + 1)
}

/// Makes the sounding for `req` under `case`'s methods.
///
/// The point's totals are interpolated from those of the four surrounding cells, each run
/// through the engine's own kernel, by the rule of the towns table
/// ([`crate::grid::Grid::bilinear_at`]), so the same town and scenario give the same totals
/// here and in towns.csv. The profile shown is that of the cell of largest weight; the onset is
/// that cell's, as in towns.csv.
pub fn sounding(case: &Case, req: &SoundingRequest) -> Result<Sounding, SoundingError> {
    let source = open_source(case.member(), case.inputs.region.as_ref(), &|_: &str| {})
        .map_err(EngineError::from)?;
    let statics = source.statics();
    let grid = statics.grid.clone();
    let b = grid
        .bilinear_at(req.lon, req.lat)
        .ok_or_else(|| SoundingError::Outside {
            lat: req.lat,
            lon: req.lon,
            extent: crate::engine::extent(&grid),
        })?;
    let shown = b.nearest_slot();
    let c = b.cells[shown].0;
    let (ci, ri) = (c % grid.nx, c / grid.nx);
    let (cell_lon, cell_lat) = grid.lonlat_of(ci as f64, ri as f64);
    let steps = source.step_count();
    if let Some(step) = req.step {
        if !(1..=steps).contains(&step) {
            return Err(SoundingError::Step { step, steps });
        }
    }
    let track = case_track(case, source.as_ref(), &Silent)?;
    let s = req.scenario;
    let methods = case.physics.methods;
    let ground = statics.terrain[c];
    let run = |upto| pass(case, source.as_ref(), track.as_ref(), &b, shown, &s, upto);
    let (step, step_choice, (done, times), step_precip) = match req.step {
        Some(step) => {
            let (all, _) = run(steps)?;
            (step, StepChoice::Requested, run(step)?, all.precip)
        }
        None => {
            let all = run(steps)?;
            let precip = all.0.precip.clone();
            match wettest(&precip) {
                Some(k) if k < steps => (k, StepChoice::Wettest, run(k)?, precip),
                Some(k) => (k, StepChoice::Wettest, all, precip),
                None => (steps, StepChoice::LastDry, all, precip),
            }
        }
    };
    let Pass {
        totals,
        last,
        profile,
        ..
    } = done;
    let valid_time = rfc3339(times[step - 1]);
    let onset =
        (!totals.liquid[shown].is_nan() && totals.onset[shown] > 0).then_some(totals.onset[shown]);
    let t = &totals;
    // As f32 first, as the towns table holds it, so both print the same digits.
    let at_point = |field: &[f32]| b.combine(|j, _| field[j] as f64) as f32 as f64;
    let totals_out = TotalsToStep {
        liquid_mm: at_point(&t.liquid),
        snow_liquid_mm: at_point(&t.snow_liquid),
        snowfall_cm: at_point(&t.snowfall) / 10.0,
        ice_pellets_mm: at_point(&t.ice_pellets),
        ice_pellet_depth_mm: at_point(&t.ice_pellet_depth()),
        freezing_rain_mm: at_point(&t.freezing_rain),
        ice_accretion_mm: at_point(&t.ice_accretion()),
        onset_step: onset,
        onset_time: onset.map(|k| rfc3339(times[k as usize - 1])),
        uncovered_steps: t.uncovered_steps,
    };
    let cells = b
        .cells
        .iter()
        .enumerate()
        .map(|(j, &(i, weight))| {
            let (col, row) = (i % grid.nx, i / grid.nx);
            let (lon, lat) = grid.lonlat_of(col as f64, row as f64);
            NeighbourCell {
                cell: [col, row],
                lat,
                lon,
                weight,
                liquid_mm: t.liquid[j] as f64,
                snowfall_cm: t.snowfall[j] as f64 / 10.0,
            }
        })
        .collect();
    let mut out = Sounding {
        title: case.title.clone(),
        member: case.member().name.clone(),
        lat: req.lat,
        lon: req.lon,
        cells,
        cell: [ci, ri],
        cell_lat,
        cell_lon,
        ground_m: ground as f64,
        step,
        step_choice,
        step_precip_mm: step_precip,
        steps,
        valid_time,
        sampled_time: last.as_ref().map(|l| rfc3339(l.at)),
        scenario: s,
        scenario_label: s.label(),
        methods,
        levels: Vec::new(),
        energy_areas: Vec::new(),
        thickness: Thicknesses {
            t1000_850_m: f64::NAN,
            t850_700_m: f64::NAN,
            t1000_500_m: f64::NAN,
            low_level_m: f64::NAN,
        },
        ptype: Vec::new(),
        decided: Decided {
            energy_area_rule: String::new(),
            warmest_wet_bulb_aloft_c: f64::NAN,
            coldest_below_c: f64::NAN,
        },
        snow_ratio: Vec::new(),
        dry_air: DryAir {
            enabled: methods.dry_air,
            deficit_mm: f64::NAN,
            carried_mm: t.carried[shown] as f64,
            met: f64::NAN,
        },
        falling_mm: f64::NAN,
        reaching_ground_mm: f64::NAN,
        totals: totals_out,
    };
    if let Some(l) = last {
        describe(
            &mut out,
            &l,
            &methods,
            ground,
            s.warm_bias_k,
            case,
            &profile,
        );
    }
    Ok(out)
}

/// The last step's column, as the kernel saw it.
struct Last {
    at: chrono::DateTime<chrono::Utc>,
    falling: f64,
    done: Option<ColumnStep>,
    col: Vec<f32>,
    layout: crate::read::StepLayout,
}

fn describe(
    out: &mut Sounding,
    l: &Last,
    methods: &Methods,
    ground: f32,
    warm_bias_k: f64,
    case: &Case,
    diagnosed: &Profile,
) {
    // The profile before any sub-cloud cooling: the sub-cloud weights the kernel used.
    let Some(before) = Profile::build(
        &l.col,
        &l.layout,
        ground,
        methods.lapse_rate_k_per_m,
        warm_bias_k,
    ) else {
        return;
    };
    let mut profile = match &l.done {
        Some(_) => *diagnosed,
        None => before,
    };
    out.falling_mm = l.falling;
    let sub = SubCloud::of(&before);
    // The kernel leaves the humidity as it was when the methods never read it: the humidity
    // shown is that of the cooled layer all the same.
    if let Some(d) = l
        .done
        .as_ref()
        .filter(|d| d.met > 0.0 && !methods.read_humidity())
    {
        let mut cooled = before;
        sub.cool(&mut cooled, d.met);
        profile.rh[..profile.n].copy_from_slice(&cooled.rh[..profile.n]);
    }
    match &l.done {
        Some(d) => {
            out.reaching_ground_mm = d.reaching_ground;
            out.dry_air.deficit_mm = d.deficit;
            out.dry_air.met = d.met;
        }
        None => {
            out.reaching_ground_mm = 0.0;
            if methods.dry_air {
                out.dry_air.deficit_mm = sub.deficit;
                out.dry_air.met = if sub.deficit > 0.0 {
                    (out.dry_air.carried_mm / sub.deficit).min(1.0)
                } else {
                    1.0
                };
            }
        }
    }
    for i in 0..profile.n {
        let below = if i < sub.points { sub.weight[i] } else { 0.0 };
        out.levels.push(Level {
            kind: if i == 0 { "surface" } else { "isobaric" },
            p_hpa: profile.p[i] / 100.0,
            z_m: profile.z[i],
            t_c: profile.t[i] - T_FREEZE,
            td_c: dewpoint_from_rh(profile.t[i], profile.rh[i]) - T_FREEZE,
            tw_c: profile.wet_bulb(i) - T_FREEZE,
            rh_pct: profile.rh[i],
            dt_k: profile.dt[i],
            below_cloud: below,
        });
    }
    let mut layers = [Layer::default(); MAX_LEVELS];
    let n = energy_areas(
        profile.pressures(),
        profile.temperatures(),
        crate::diagnose::profile::PROFILE_TOP_PA,
        &mut layers,
    );
    out.energy_areas = layers[..n]
        .iter()
        .map(|x| EnergyLayer {
            p_bottom_hpa: x.p_bottom / 100.0,
            p_top_hpa: x.p_top / 100.0,
            area_j_per_kg: x.area,
        })
        .collect();
    let [a, b, c] = profile.partial_thicknesses();
    out.thickness = Thicknesses {
        t1000_850_m: a,
        t850_700_m: b,
        t1000_500_m: c,
        low_level_m: profile.low_level_thickness(),
    };
    let (tw_aloft, cold_below) = profile.warmest_wet_bulb_aloft();
    out.decided = Decided {
        energy_area_rule: bourgouin_rule(profile.pressures(), profile.temperatures())
            .map(|r| r.to_string())
            .unwrap_or_default(),
        warmest_wet_bulb_aloft_c: tw_aloft - T_FREEZE,
        coldest_below_c: cold_below - T_FREEZE,
    };
    out.ptype = PtypeMethod::ALL
        .iter()
        .map(|&m| {
            let f = profile.ptype(m);
            MethodFractions {
                method: m.name(),
                in_use: m == methods.ptype,
                snow: f.snow,
                ice_pellets: f.ice_pellets,
                freezing_rain: f.freezing_rain,
                rain: f.rain,
            }
        })
        .collect();
    let fixed = match methods.slr {
        SlrMethod::Fixed(r) => r,
        _ => case.physics.fixed_ratio,
    };
    out.snow_ratio = [
        SlrMethod::Fixed(fixed),
        SlrMethod::MaxColumnTemperature,
        SlrMethod::GrowthZone,
    ]
    .iter()
    .map(|&m| MethodRatio {
        method: m.name(),
        in_use: m.name() == methods.slr.name(),
        ratio: profile.snow_ratio(m),
    })
    .collect();
}

/// A number or a dash for NaN, right-aligned in `w` characters with `d` decimals.
fn cell(v: f64, w: usize, d: usize) -> String {
    if v.is_finite() {
        format!("{v:>w$.d$}")
    } else {
        format!("{:>w$}", "—")
    }
}

fn ns(lat: f64) -> String {
    format!("{:.3}°{}", lat.abs(), if lat >= 0.0 { "N" } else { "S" })
}

fn ew(lon: f64) -> String {
    format!("{:.3}°{}", lon.abs(), if lon >= 0.0 { "E" } else { "W" })
}

impl fmt::Display for Sounding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "trackswing sounding: {} (member {})",
            self.title, self.member
        )?;
        writeln!(
            f,
            "point {} {}: totals bilinear from the four surrounding cell centres (as in towns.csv):",
            ns(self.lat),
            ew(self.lon),
        )?;
        for n in &self.cells {
            writeln!(
                f,
                "  column {:>4}, row {:>4} ({} {})  weight {:.3}  liquid {} mm, snowfall {} cm",
                n.cell[0],
                n.cell[1],
                ns(n.lat),
                ew(n.lon),
                n.weight,
                cell(n.liquid_mm, 0, 1).trim(),
                cell(n.snowfall_cm, 0, 1).trim()
            )?;
        }
        writeln!(
            f,
            "profile of the cell of largest weight: column {}, row {} ({} {}), ground {:.0} m",
            self.cell[0],
            self.cell[1],
            ns(self.cell_lat),
            ew(self.cell_lon),
            self.ground_m
        )?;
        let why = match self.step_choice {
            StepChoice::Requested => "as asked".to_string(),
            StepChoice::Wettest => format!(
                "the wettest at this point, {} mm",
                cell(self.step_precip_mm[self.step - 1], 0, 1).trim()
            ),
            StepChoice::LastDry => "the last: no precipitation at this point at any step".into(),
        };
        writeln!(
            f,
            "step {} of {} ({why}), valid {}; scenario: {} ({})",
            self.step,
            self.steps,
            self.valid_time,
            self.scenario.in_words(),
            self.scenario_label
        )?;
        let m = &self.methods;
        writeln!(
            f,
            "methods in use: precipitation type {}, snow ratio {}, dry air below the cloud {}",
            m.ptype.name(),
            m.slr.name(),
            if m.dry_air { "on" } else { "off" }
        )?;
        match &self.sampled_time {
            None => writeln!(
                f,
                "\nthis step's time lies outside the model's steps: nothing is counted for it"
            )?,
            Some(at) => {
                writeln!(f, "fields from the model at {at}")?;
                if self.levels.is_empty() {
                    writeln!(f, "\nthe column is missing at this step")?;
                }
            }
        }
        if !self.levels.is_empty() {
            writeln!(f, "\nprofile (cut at the ground; T after bias and sub-cloud cooling; Tw isobaric wet-bulb):")?;
            writeln!(
                f,
                "  {:>8} {:>7} {:>7} {:>7} {:>7} {:>6} {:>6} {:>6}",
                "p (hPa)", "z (m)", "T (°C)", "Td (°C)", "Tw (°C)", "RH (%)", "ΔT (K)", "below"
            )?;
            for l in self.levels.iter().rev() {
                writeln!(
                    f,
                    "  {} {} {} {} {} {} {} {}{}",
                    cell(l.p_hpa, 8, 1),
                    cell(l.z_m, 7, 0),
                    cell(l.t_c, 7, 1),
                    cell(l.td_c, 7, 1),
                    cell(l.tw_c, 7, 1),
                    cell(l.rh_pct, 6, 0),
                    cell(l.dt_k, 6, 2),
                    cell(l.below_cloud, 6, 2),
                    if l.kind == "surface" {
                        "  ground (2 m)"
                    } else {
                        ""
                    }
                )?;
            }
            writeln!(
                f,
                "  (below: sub-cloud weight, 1 below the cloud base, 0 in cloud)"
            )?;
            writeln!(
                f,
                "\nenergy areas to 500 hPa (Bourgouin 2000), from the ground up:"
            )?;
            writeln!(
                f,
                "  {:>12} {:>10} {:>12}",
                "bottom (hPa)", "top (hPa)", "area (J/kg)"
            )?;
            for e in &self.energy_areas {
                writeln!(
                    f,
                    "  {} {} {}  {}",
                    cell(e.p_bottom_hpa, 12, 1),
                    cell(e.p_top_hpa, 10, 1),
                    cell(e.area_j_per_kg, 12, 1),
                    if e.area_j_per_kg > 0.0 {
                        "warm"
                    } else {
                        "cold"
                    }
                )?;
            }
            let t = &self.thickness;
            writeln!(
                f,
                "\nthickness (m; — where a level is below ground or absent): 1000–850 hPa {}, 850–700 hPa {}, 1000–500 hPa {}",
                cell(t.t1000_850_m, 0, 0).trim(),
                cell(t.t850_700_m, 0, 0).trim(),
                cell(t.t1000_500_m, 0, 0).trim()
            )?;
            if t.t1000_850_m.is_nan() && t.low_level_m.is_finite() {
                writeln!(
                    f,
                    "  ground above 1000 hPa: the partial-thickness rules read the ground–850 hPa layer at its mean temperature as 1000–850 hPa {} m",
                    cell(t.low_level_m, 0, 0).trim()
                )?;
            }
            writeln!(f, "\nprecipitation type (fractions, 0–1; * in use):")?;
            writeln!(
                f,
                "  {:<20} {:>6} {:>11} {:>13} {:>6}",
                "method", "snow", "ice pellets", "freezing rain", "rain"
            )?;
            for p in &self.ptype {
                writeln!(
                    f,
                    "  {:<20} {} {} {} {}",
                    format!("{}{}", p.method, if p.in_use { " *" } else { "" }),
                    cell(p.snow, 6, 2),
                    cell(p.ice_pellets, 11, 2),
                    cell(p.freezing_rain, 13, 2),
                    cell(p.rain, 6, 2)
                )?;
            }
            let d = &self.decided;
            if !d.energy_area_rule.is_empty() {
                writeln!(f, "  energy-area decided by: {}", d.energy_area_rule)?;
            }
            writeln!(
                f,
                "  surface-logistic melting aloft: warmest wet-bulb {} °C (melts from 1 to 3 °C), coldest below it {} °C (partly melted drops refreeze below 0 °C, fully melted ones below about −8 °C)",
                cell(d.warmest_wet_bulb_aloft_c, 0, 1).trim(),
                cell(d.coldest_below_c, 0, 1).trim()
            )?;
            writeln!(f, "\nsnow-to-liquid ratio (* in use):")?;
            for r in &self.snow_ratio {
                writeln!(
                    f,
                    "  {:<26} {}",
                    format!("{}{}", r.method, if r.in_use { " *" } else { "" }),
                    cell(r.ratio, 6, 1)
                )?;
            }
            writeln!(
                f,
                "\nthis step: {} mm left the cloud, {} mm reached the ground",
                cell(self.falling_mm, 0, 2).trim(),
                cell(self.reaching_ground_mm, 0, 2).trim()
            )?;
            if self.dry_air.enabled {
                writeln!(
                    f,
                    "dry air below the cloud: {} mm needed to saturate it, {} mm given up so far ({} % met)",
                    cell(self.dry_air.deficit_mm, 0, 2).trim(),
                    cell(self.dry_air.carried_mm, 0, 2).trim(),
                    cell(100.0 * self.dry_air.met, 0, 0).trim()
                )?;
            }
        }
        let t = &self.totals;
        writeln!(
            f,
            "\ntotals from step 1 to step {} (methods in use):",
            self.step
        )?;
        writeln!(
            f,
            "  liquid {} mm, of which snow {} mm; snowfall {} cm",
            cell(t.liquid_mm, 0, 1).trim(),
            cell(t.snow_liquid_mm, 0, 1).trim(),
            cell(t.snowfall_cm, 0, 1).trim()
        )?;
        writeln!(
            f,
            "  ice pellets {} mm ({} mm deep); freezing rain {} mm ({} mm of ice)",
            cell(t.ice_pellets_mm, 0, 1).trim(),
            cell(t.ice_pellet_depth_mm, 0, 1).trim(),
            cell(t.freezing_rain_mm, 0, 1).trim(),
            cell(t.ice_accretion_mm, 0, 1).trim()
        )?;
        match (t.onset_step, &t.onset_time) {
            (Some(k), Some(at)) => writeln!(f, "  first measurable snow: step {k} ({at})")?,
            _ => writeln!(f, "  no measurable snow yet")?,
        }
        if t.uncovered_steps > 0 {
            writeln!(
                f,
                "  {} step(s) lay outside the model's steps and count nothing",
                t.uncovered_steps
            )?;
        }
        write!(f, "{}", crate::CAUTION)
    }
}

fn rfc3339(t: chrono::DateTime<chrono::Utc>) -> String {
    t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true)
}
