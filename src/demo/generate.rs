//! The grid generator: ground once, then every step's fields cell by cell.

use super::region::{ground, ground_weight, to_geo, to_km, Ground};
use super::storm::PRECIP_PER_STORM_TIME;
use super::storm::{dry_slot, front_weights, precip_shape, LevelPattern, StormState};
use super::thermo::{thickness, virtual_temperature_from_rh, G, RD, STANDARD_LAPSE};
use super::{DemoSpec, Field, Level};

/// Storm-time substeps per accumulation window are chosen so no substep is longer than this,
/// which keeps storm totals within about a per cent across step counts.
const MAX_SUBSTEP: f64 = 1.0 / 48.0;
/// Precipitation shape above which the column counts as saturated.
const SATURATED_SHAPE: f64 = 0.15;
/// Relative humidity at 2 m away from the precipitation, inside it, and removed by the dry
/// slot, %.
const RH2_DRY: f64 = 80.0;
const RH2_WET: f64 = 99.0;
const RH2_SLOT: f64 = 20.0;

/// Generates the demo fields for one [`DemoSpec`]. It keeps the ground of every cell, so a
/// caller that streams many steps builds one and calls [`Generator::step_fields`] per step.
#[derive(Debug, Clone)]
pub struct Generator {
    spec: DemoSpec,
    /// Patterns of the spec's levels; a spec without levels gets a 1000 hPa one, not output,
    /// so its 2 m temperature still has a profile to come from.
    levels: Vec<LevelPattern>,
    /// Map position (km) and ground of every cell, row-major, row 0 north.
    cells: Vec<((f64, f64), Ground)>,
}

impl Generator {
    /// Prepares the ground under every cell of `spec`'s grid.
    pub fn new(spec: &DemoSpec) -> Self {
        let mut cells = Vec::with_capacity(spec.nx * spec.ny);
        for j in 0..spec.ny {
            let lat = spec.lat_north - j as f64 * spec.dlat;
            for i in 0..spec.nx {
                let (x, y) = to_km(lat, spec.lon_west + i as f64 * spec.dlon);
                cells.push(((x, y), ground(x, y)));
            }
        }
        let mut levels: Vec<LevelPattern> = spec
            .levels_hpa
            .iter()
            .map(|&p| LevelPattern::at(p))
            .collect();
        if levels.is_empty() {
            levels.push(LevelPattern::at(1000.0));
        }
        Generator {
            spec: spec.clone(),
            levels,
            cells,
        }
    }

    /// The grid this generator was built for.
    pub fn spec(&self) -> &DemoSpec {
        &self.spec
    }

    /// Ground-attached fields: "surface_altitude" (m) and "land_area_fraction" (1).
    pub fn static_fields(&self) -> Vec<Field> {
        let field = |name, units, f: fn(&Ground) -> f64| Field {
            name,
            level: Level::Surface,
            units,
            data: self.cells.iter().map(|(_, g)| f(g) as f32).collect(),
        };
        vec![
            field("surface_altitude", "m", |g| g.z),
            field("land_area_fraction", "1", |g| g.land),
        ]
    }

    /// The fields valid at `step`, in this order: "air_temperature", "geopotential_height" and
    /// "relative_humidity" at every isobaric level (levels in the spec's order), then 2 m
    /// temperature and humidity, sea-level pressure and the precipitation of the step ending
    /// at the valid time. Step 0 is the start of the run, so its precipitation is zero.
    pub fn step_fields(&self, step: usize) -> Vec<Field> {
        let now = StormState::at(storm_time(&self.spec, step));
        let window = self.accumulation_window(step);
        let n = self.cells.len();
        let nl = self.levels.len();
        let n_out = self.spec.levels_hpa.len();
        let mut t_out = vec![vec![0f32; n]; n_out];
        let mut z_out = vec![vec![0f32; n]; n_out];
        let mut rh_out = vec![vec![0f32; n]; n_out];
        let mut t2 = vec![0f32; n];
        let mut rh2 = vec![0f32; n];
        let mut mslp = vec![0f32; n];
        let mut precip = vec![0f32; n];
        // Per-cell profiles, allocated once per step.
        let mut t_free = vec![0f64; nl];
        let mut tv = vec![0f64; nl];
        let mut z = vec![0f64; nl];
        for (idx, &((x, y), g)) in self.cells.iter().enumerate() {
            let (a, b) = now.relative(x, y);
            let (bulge, surge) = front_weights(a);
            let shape = now.strength * precip_shape(a, b);
            let wet = 1.0 - (1.0 - (shape / SATURATED_SHAPE).min(1.0)).powi(2);
            let dry = dry_slot(a, b) * (1.0 - wet);
            let p_msl = now.mslp_hpa(x, y);
            for (k, lv) in self.levels.iter().enumerate() {
                t_free[k] = lv.temperature(b, bulge, surge);
                let t = t_free[k] + g.dt * ground_weight(lv.z_standard - g.z);
                let rh = (lv.rh_dry + (lv.rh_wet - lv.rh_dry) * wet - lv.rh_slot * dry)
                    .clamp(2.0, 100.0);
                tv[k] = virtual_temperature_from_rh(t, rh, lv.p_pa);
                if k < n_out {
                    t_out[k][idx] = t as f32;
                    rh_out[k][idx] = rh as f32;
                }
            }
            heights(p_msl * 100.0, &self.levels, &tv, &mut z);
            for (out, &zk) in z_out.iter_mut().zip(&z) {
                out[idx] = zk as f32;
            }
            t2[idx] = (free_air_at(g.z, &z, &t_free) + g.dt) as f32;
            rh2[idx] =
                (RH2_DRY + (RH2_WET - RH2_DRY) * wet - RH2_SLOT * dry).clamp(2.0, 100.0) as f32;
            mslp[idx] = (p_msl * 100.0) as f32;
            let fallen: f64 = window
                .iter()
                .map(|(st, ds)| {
                    let (a, b) = st.relative(x, y);
                    st.strength * precip_shape(a, b) * ds
                })
                .sum();
            precip[idx] = (PRECIP_PER_STORM_TIME * fallen) as f32;
        }
        let mut fields = Vec::with_capacity(3 * n_out + 4);
        let isobaric = |hpa| Level::Isobaric { hpa };
        for (k, data) in t_out.into_iter().enumerate() {
            let level = isobaric(self.spec.levels_hpa[k]);
            fields.push(field("air_temperature", level, "K", data));
        }
        for (k, data) in z_out.into_iter().enumerate() {
            let level = isobaric(self.spec.levels_hpa[k]);
            fields.push(field("geopotential_height", level, "m", data));
        }
        for (k, data) in rh_out.into_iter().enumerate() {
            let level = isobaric(self.spec.levels_hpa[k]);
            fields.push(field("relative_humidity", level, "%", data));
        }
        let two_m = Level::HeightAboveGround { m: 2.0 };
        fields.push(field("air_temperature", two_m, "K", t2));
        fields.push(field("relative_humidity", two_m, "%", rh2));
        fields.push(field(
            "air_pressure_at_mean_sea_level",
            Level::MeanSeaLevel,
            "Pa",
            mslp,
        ));
        fields.push(field(
            "precipitation_amount",
            Level::Accumulation,
            "kg m-2",
            precip,
        ));
        fields
    }

    /// Storm states at the midpoints of the substeps of the window ending at `step`, with
    /// their storm-time lengths.
    fn accumulation_window(&self, step: usize) -> Vec<(StormState, f64)> {
        if step == 0 || self.spec.steps < 2 {
            return Vec::new();
        }
        let s1 = storm_time(&self.spec, step);
        let s0 = storm_time(&self.spec, step - 1);
        let count = ((s1 - s0) / MAX_SUBSTEP).ceil().max(1.0) as usize;
        let ds = (s1 - s0) / count as f64;
        (0..count)
            .map(|k| (StormState::at(s0 + (k as f64 + 0.5) * ds), ds))
            .collect()
    }
}

fn field(name: &'static str, level: Level, units: &'static str, data: Vec<f32>) -> Field {
    Field {
        name,
        level,
        units,
        data,
    }
}

/// Storm time of `step`: 0 at the first step, 1 at the last (and beyond 1 past it).
pub(crate) fn storm_time(spec: &DemoSpec, step: usize) -> f64 {
    if spec.steps < 2 {
        0.0
    } else {
        step as f64 / (spec.steps - 1) as f64
    }
}

/// Geopotential heights (m) of the levels from sea-level pressure `p_msl_pa` (Pa) and the
/// levels' virtual temperatures, by the hypsometric equation (SCIENCE.md §2).
///
/// Between levels the virtual temperature is taken linear in ln p, so a layer's mean is the
/// mean of its ends. Below the lowest level it is taken to fall off at the standard lapse rate
/// (ISO 2533) down to sea level, so with A = (Rd/g)·ln(p_msl/p₀) the lowest height solves
/// z₀ = A·(Tv₀ + Γ·z₀/2).
fn heights(p_msl_pa: f64, levels: &[LevelPattern], tv: &[f64], z: &mut [f64]) {
    let a = RD / G * (p_msl_pa / levels[0].p_pa).ln();
    z[0] = a * tv[0] / (1.0 - a * STANDARD_LAPSE / 2.0);
    for k in 1..levels.len() {
        let mean = 0.5 * (tv[k - 1] + tv[k]);
        z[k] = z[k - 1] + thickness(mean, levels[k - 1].p_pa, levels[k].p_pa);
    }
}

/// Free-air temperature at altitude `alt` m from the levels' heights `z` and temperatures `t`:
/// linear in height between levels, at the standard lapse rate beyond the outermost ones.
fn free_air_at(alt: f64, z: &[f64], t: &[f64]) -> f64 {
    if alt <= z[0] {
        return t[0] + STANDARD_LAPSE * (z[0] - alt);
    }
    for k in 1..z.len() {
        if alt <= z[k] {
            let w = (alt - z[k - 1]) / (z[k] - z[k - 1]);
            return t[k - 1] + w * (t[k] - t[k - 1]);
        }
    }
    t[z.len() - 1] - STANDARD_LAPSE * (alt - z[z.len() - 1])
}

/// The map position (lat, lon) and pressure (Pa) of the storm's sea-level pressure minimum at
/// `step`.
pub(crate) fn low_centre(spec: &DemoSpec, step: usize) -> (f64, f64, f64) {
    let st = StormState::at(storm_time(spec, step));
    let (lat, lon) = to_geo(st.centre.0, st.centre.1);
    (lat, lon, st.min_hpa * 100.0)
}
