//! The point sounding view: one cell's shifted profile at one step, what every method makes of
//! it, and the cell's totals up to that step.
//!
//! [`sounding`] runs the engine's own per-cell kernel ([`crate::engine::accumulate_cell`]) for
//! one cell and one scenario over steps 1…N, so the totals it reports are those the layers hold
//! for that cell. The cell is the grid cell nearest the requested point (town values in
//! towns.csv are bilinear between four cells; a sounding is one column). [`Sounding`] prints as
//! an aligned plain-text table (its `Display`) and serialises to JSON.

use crate::accumulate::Totals;
use crate::case::Case;
use crate::diagnose::ptype::{energy_areas, Layer, MAX_LEVELS};
use crate::diagnose::subcloud::SubCloud;
use crate::diagnose::thermo::{dewpoint_from_rh, T_FREEZE};
use crate::diagnose::{ColumnStep, Methods, Profile, PtypeMethod, SlrMethod};
use crate::engine::{
    accumulate_cell, case_track, cell_column, hours, sample_column, scenario_shift, CellStep,
    EngineError, Sampled, SourceAt, StepWindow,
};
use crate::progress::Silent;
use crate::read::source::open as open_source;
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
    /// 1-based step (default: the last).
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

/// A point sounding.
#[derive(Clone, Debug, Serialize)]
pub struct Sounding {
    /// Case title.
    pub title: String,
    /// Requested latitude.
    pub lat: f64,
    /// Requested longitude.
    pub lon: f64,
    /// Nearest cell: column and row, 0-based.
    pub cell: [usize; 2],
    /// Its centre, degrees.
    pub cell_lat: f64,
    /// Its centre, degrees.
    pub cell_lon: f64,
    /// Its terrain height, m.
    pub ground_m: f64,
    /// The step shown, 1-based.
    pub step: usize,
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

/// Makes the sounding for `req` under `case`'s methods.
pub fn sounding(case: &Case, req: &SoundingRequest) -> Result<Sounding, SoundingError> {
    let source = open_source(&case.member, &|_: &str| {}).map_err(EngineError::from)?;
    let statics = source.statics();
    let grid = statics.grid.clone();
    let (fc, fr) = grid
        .index_of(req.lon, req.lat)
        .ok_or_else(|| SoundingError::Outside {
            lat: req.lat,
            lon: req.lon,
            extent: {
                let (w, n) = grid.lonlat_of(-0.5, -0.5);
                let (e, s) = grid.lonlat_of(grid.nx as f64 - 0.5, grid.ny as f64 - 0.5);
                format!("lon {w:.3}…{e:.3}, lat {s:.3}…{n:.3}")
            },
        })?;
    let (ci, ri) = (fc.round() as usize, fr.round() as usize);
    let c = ri * grid.nx + ci;
    let (cell_lon, cell_lat) = grid.lonlat_of(ci as f64, ri as f64);
    let steps = source.step_count();
    let step = req.step.unwrap_or(steps);
    if !(1..=steps).contains(&step) {
        return Err(SoundingError::Step { step, steps });
    }
    let track = case_track(case, source.as_ref(), &Silent)?;
    let s = req.scenario;
    let methods = case.methods;
    let ground = statics.terrain[c];
    let mut window = StepWindow::new(source.as_ref());
    let mut totals = Totals::new(1);
    let mut buf = vec![0.0f32; 0];
    let mut later = vec![0.0f32; 0];
    let mut profile = Profile::empty();
    let mut last: Option<Last> = None;
    for k in 0..step {
        window.load_through(k)?;
        let at = window.times[k] - hours(s.timing_h);
        let Some(sample) = window.sample(at)? else {
            totals.uncovered_steps += 1;
            last = None;
            continue;
        };
        let file = window.fields(k).path.clone();
        let shift = scenario_shift(track.as_ref(), &s, at, k, &file)?;
        let layout = window.layout().clone();
        let nvar = layout.nvar();
        buf.resize(nvar, 0.0);
        later.resize(nvar, 0.0);
        let input = window.scenario_step(k, sample, shift, &s);
        let mut rows = totals.rows_mut(0, 1);
        let column = if rows.liquid[0].is_nan() {
            None
        } else {
            match cell_column(
                &grid,
                &input,
                nvar,
                layout.precip(),
                c,
                &case.taper,
                &mut buf,
                &mut later,
            ) {
                Sampled::Outside => {
                    rows.set_missing(0);
                    None
                }
                Sampled::Dry => {
                    // Nothing falls: the totals stand; show the column all the same.
                    sample_column(&grid, &input, nvar, c, &case.taper, &mut buf, &mut later)
                        .then_some((0.0, None))
                }
                Sampled::Falling(falling, w) => {
                    let cell = CellStep {
                        col: &buf,
                        falling,
                        ground_m: ground,
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
                        &mut profile,
                        &mut SubCloud::empty(),
                    )
                    .ok()
                    .flatten();
                    Some((falling, done))
                }
            }
        };
        last = column.map(|(falling, done)| Last {
            at,
            falling,
            done,
            col: buf.clone(),
            layout,
        });
        window.forget_before(sample.index.min(k));
    }
    let valid_time = rfc3339(window.times[step - 1]);
    let onset = (totals.onset[0] > 0).then_some(totals.onset[0]);
    let t = &totals;
    let totals_out = TotalsToStep {
        liquid_mm: t.liquid[0] as f64,
        snow_liquid_mm: t.snow_liquid[0] as f64,
        snowfall_cm: t.snowfall[0] as f64 / 10.0,
        ice_pellets_mm: t.ice_pellets[0] as f64,
        ice_pellet_depth_mm: t.ice_pellet_depth()[0] as f64,
        freezing_rain_mm: t.freezing_rain[0] as f64,
        ice_accretion_mm: t.ice_accretion()[0] as f64,
        onset_step: onset,
        onset_time: onset.map(|k| rfc3339(window.times[k as usize - 1])),
        uncovered_steps: t.uncovered_steps,
    };
    let mut out = Sounding {
        title: case.title.clone(),
        lat: req.lat,
        lon: req.lon,
        cell: [ci, ri],
        cell_lat,
        cell_lon,
        ground_m: ground as f64,
        step,
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
        },
        ptype: Vec::new(),
        snow_ratio: Vec::new(),
        dry_air: DryAir {
            enabled: methods.dry_air,
            deficit_mm: f64::NAN,
            carried_mm: t.carried[0] as f64,
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
        _ => case.fixed_ratio,
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
        writeln!(f, "trackswing sounding: {}", self.title)?;
        writeln!(
            f,
            "point {} {}: nearest cell column {}, row {} ({} {}), ground {:.0} m",
            ns(self.lat),
            ew(self.lon),
            self.cell[0],
            self.cell[1],
            ns(self.cell_lat),
            ew(self.cell_lon),
            self.ground_m
        )?;
        writeln!(
            f,
            "step {} of {}, valid {}; scenario: {} ({})",
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
