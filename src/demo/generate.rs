//! The grid generator: every step's fields row by row, the ground worked out as it goes.

use super::region::{ground, ground_weight, to_geo, MapRow};
use super::storm::PRECIP_PER_STORM_TIME;
use super::storm::{dry_slot, front_weights, precip_shape, LevelPattern, StormState};
use super::thermo::{saturation_vapour_pressure, thickness, EPSILON, G, RD, STANDARD_LAPSE};
#[cfg(doc)]
use super::thermo::{specific_humidity, virtual_temperature};
use super::{DemoSpec, Field, Level};

/// Storm-time substeps per accumulation window are chosen so no substep is longer than this,
/// which keeps storm totals within about 2 % across step counts.
const MAX_SUBSTEP: f64 = 1.0 / 48.0;
/// Precipitation shape above which the column counts as saturated.
const SATURATED_SHAPE: f64 = 0.15;
/// Relative humidity at 2 m away from the precipitation, inside it, and removed by the dry
/// slot, %.
const RH2_DRY: f64 = 80.0;
const RH2_WET: f64 = 99.0;
const RH2_SLOT: f64 = 20.0;

/// Generates the demo fields for one [`DemoSpec`]. It keeps only per-level constants; the
/// ground is cheap enough to work out again row by row at every step, so no per-cell state
/// lives between steps.
#[derive(Debug, Clone)]
pub struct Generator {
    spec: DemoSpec,
    /// Patterns of the spec's levels; a spec without levels gets a 1000 hPa one, not output,
    /// so its 2 m temperature still has a profile to come from.
    levels: Vec<LevelPattern>,
    /// (Rd/g)·ln(p[k−1]/p[k]) for each level above the lowest, m K⁻¹.
    layer_factor: Vec<f64>,
    vapour: VapourTable,
}

/// Bolton's saturation vapour pressure tabulated every 0.05 K from 150 K, read by linear
/// interpolation: one exponential per table entry instead of one per cell and level. The
/// interpolation error is below 1e-5 of es, far under Bolton's own ±0.3 %.
#[derive(Debug, Clone)]
struct VapourTable {
    es_pa: Vec<f64>,
}

impl VapourTable {
    const T_MIN: f64 = 150.0;
    const STEP: f64 = 0.05;

    fn new() -> Self {
        let n = ((340.0 - Self::T_MIN) / Self::STEP) as usize + 2;
        let es_pa = (0..n)
            .map(|k| saturation_vapour_pressure(Self::T_MIN + k as f64 * Self::STEP))
            .map(|es| if es.is_nan() { 0.0 } else { es })
            .collect();
        VapourTable { es_pa }
    }

    /// Virtual temperature, K, at `t_k` (K), `rh` (%) and `1/p` (`inv_p`, Pa⁻¹): the formulas
    /// of [`specific_humidity`] and [`virtual_temperature`] with the tabulated es, written out
    /// without their domain checks because the generator's own values are always inside.
    /// q = εe/(p − (1 − ε)e) is expanded as (εe/p)(1 + x) with x = (1 − ε)e/p, dropping x²
    /// (x < 0.02 here, so q is off by under 4e-4 of itself and Tv by under 0.002 K).
    fn virtual_temperature(&self, t_k: f64, rh: f64, inv_p: f64) -> f64 {
        let last = (self.es_pa.len() - 2) as f64;
        let f = ((t_k - Self::T_MIN) * (1.0 / Self::STEP)).clamp(0.0, last);
        let k = f as usize;
        let (lo, hi) = (self.es_pa[k], self.es_pa[k + 1]);
        let e_over_p = 0.01 * rh * (lo + (f - k as f64) * (hi - lo)) * inv_p;
        let q = EPSILON * e_over_p * (1.0 + (1.0 - EPSILON) * e_over_p);
        t_k * (1.0 + q * ((1.0 - EPSILON) / EPSILON))
    }
}

impl Generator {
    /// Prepares the per-level constants for `spec`.
    pub fn new(spec: &DemoSpec) -> Self {
        let mut levels: Vec<LevelPattern> = spec
            .levels_hpa
            .iter()
            .map(|&p| LevelPattern::at(p))
            .collect();
        if levels.is_empty() {
            levels.push(LevelPattern::at(1000.0));
        }
        let layer_factor = levels
            .windows(2)
            .map(|w| thickness(1.0, w[0].p_pa, w[1].p_pa))
            .collect();
        Generator {
            spec: spec.clone(),
            levels,
            layer_factor,
            vapour: VapourTable::new(),
        }
    }

    /// The grid this generator was built for.
    pub fn spec(&self) -> &DemoSpec {
        &self.spec
    }

    /// Ground-attached fields: "surface_altitude" (m) and "land_area_fraction" (1).
    pub fn static_fields(&self) -> Vec<Field> {
        let n = self.spec.nx * self.spec.ny;
        let (mut z, mut land) = (Vec::with_capacity(n), Vec::with_capacity(n));
        for row in 0..self.spec.ny {
            for (x, y) in self.row_positions(row) {
                let g = ground(x, y);
                z.push(g.z as f32);
                land.push(g.land as f32);
            }
        }
        vec![
            field("surface_altitude", Level::Surface, "m", z),
            field("land_area_fraction", Level::Surface, "1", land),
        ]
    }

    /// Map positions (km) of the cells of `row`, west to east.
    fn row_positions(&self, row: usize) -> impl Iterator<Item = (f64, f64)> + '_ {
        let map_row = MapRow::new(self.spec.lat_north - row as f64 * self.spec.dlat);
        (0..self.spec.nx)
            .map(move |i| map_row.to_km(self.spec.lon_west + i as f64 * self.spec.dlon))
    }

    /// The fields valid at `step`, in this order: "air_temperature", "geopotential_height" and
    /// "relative_humidity" at every isobaric level (levels in the spec's order), then 2 m
    /// temperature and humidity, sea-level pressure and the precipitation of the step ending
    /// at the valid time. Step 0 is the start of the run, so its precipitation is zero.
    pub fn step_fields(&self, step: usize) -> Vec<Field> {
        let now = StormState::moved(
            storm_time(&self.spec, step),
            self.spec.variant.path_offset_km,
        );
        let warm = self.spec.variant.warm_k;
        let wet_factor = if self.spec.variant.wet_factor > 0.0 {
            self.spec.variant.wet_factor
        } else {
            1.0
        };
        let window = self.accumulation_window(step);
        let (nx, n) = (self.spec.nx, self.spec.nx * self.spec.ny);
        let nl = self.levels.len();
        let n_out = self.spec.levels_hpa.len();
        let mut t_out = vec![vec![0f32; n]; n_out];
        let mut z_out = vec![vec![0f32; n]; n_out];
        let mut rh_out = vec![vec![0f32; n]; n_out];
        let mut t2 = vec![0f32; n];
        let mut rh2 = vec![0f32; n];
        let mut mslp = vec![0f32; n];
        let mut precip = vec![0f32; n];
        // Row scratch, allocated once per step; the profiles are level-major.
        let (mut xs, mut ys) = (vec![0f64; nx], vec![0f64; nx]);
        let (mut gz, mut gdt) = (vec![0f64; nx], vec![0f64; nx]);
        let mut b_row = vec![0f64; nx];
        let mut bulge = vec![0f64; nx];
        let mut surge = vec![0f64; nx];
        let mut wet = vec![0f64; nx];
        let mut dry = vec![0f64; nx];
        let mut p_msl = vec![0f64; nx];
        let mut t_free = vec![0f64; nl * nx];
        let mut tv = vec![0f64; nl * nx];
        let mut z = vec![0f64; nl * nx];
        for row in 0..self.spec.ny {
            let r = row * nx..(row + 1) * nx;
            for (i, (x, y)) in self.row_positions(row).enumerate() {
                let g = ground(x, y);
                (xs[i], ys[i], gz[i], gdt[i]) = (x, y, g.z, g.dt);
            }
            for i in 0..nx {
                let (a, b) = now.relative(xs[i], ys[i]);
                (bulge[i], surge[i]) = front_weights(a);
                b_row[i] = b;
                let shape = now.strength * precip_shape(a, b);
                wet[i] = 1.0 - (1.0 - (shape * (1.0 / SATURATED_SHAPE)).min(1.0)).powi(2);
                dry[i] = dry_slot(a, b) * (1.0 - wet[i]);
                p_msl[i] = now.mslp_hpa(xs[i], ys[i]);
            }
            for (k, lv) in self.levels.iter().enumerate() {
                let tf = &mut t_free[k * nx..(k + 1) * nx];
                let tvk = &mut tv[k * nx..(k + 1) * nx];
                let inv_p = 1.0 / lv.p_pa;
                for i in 0..nx {
                    tf[i] = lv.temperature(b_row[i], bulge[i], surge[i]) + warm;
                    let t = tf[i] + gdt[i] * ground_weight(lv.z_standard - gz[i]);
                    let rh = (lv.rh_dry + (lv.rh_wet - lv.rh_dry) * wet[i] - lv.rh_slot * dry[i])
                        .clamp(2.0, 100.0);
                    tvk[i] = self.vapour.virtual_temperature(t, rh, inv_p);
                    if k < n_out {
                        t_out[k][r.start + i] = t as f32;
                        rh_out[k][r.start + i] = rh as f32;
                    }
                }
            }
            heights(&p_msl, self.levels[0].p_pa, &self.layer_factor, &tv, &mut z);
            for (k, out) in z_out.iter_mut().enumerate() {
                for (o, &zk) in out[r.clone()].iter_mut().zip(&z[k * nx..(k + 1) * nx]) {
                    *o = zk as f32;
                }
            }
            for i in 0..nx {
                let idx = r.start + i;
                let t_sfc = free_air_at(gz[i], &z[i..], &t_free[i..], nx, nl);
                t2[idx] = (t_sfc + gdt[i]) as f32;
                rh2[idx] = (RH2_DRY + (RH2_WET - RH2_DRY) * wet[i] - RH2_SLOT * dry[i])
                    .clamp(2.0, 100.0) as f32;
                mslp[idx] = (p_msl[i] * 100.0) as f32;
                let fallen: f64 = window
                    .iter()
                    .map(|(st, ds)| {
                        let (a, b) = st.relative(xs[i], ys[i]);
                        st.strength * precip_shape(a, b) * ds
                    })
                    .sum();
                precip[idx] = (PRECIP_PER_STORM_TIME * fallen * wet_factor) as f32;
            }
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
            .map(|k| {
                let s = s0 + (k as f64 + 0.5) * ds;
                (StormState::moved(s, self.spec.variant.path_offset_km), ds)
            })
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

/// Geopotential heights (m) of one row of cells from their sea-level pressures `p_msl_hpa`
/// (hPa), the lowest level's pressure `p0_pa` (Pa), each layer's (Rd/g)·ln(p_bottom/p_top) and
/// the levels' virtual temperatures `tv` (level-major, K), by the hypsometric equation
/// (SCIENCE.md §2).
///
/// Between levels the virtual temperature is taken linear in ln p, so a layer's mean is the
/// mean of its ends. Below the lowest level it is taken to fall off at the standard lapse rate
/// (ISO 2533) down to sea level, so with A = (Rd/g)·ln(p_msl/p₀) the lowest height solves
/// z₀ = A·(Tv₀ + Γ·z₀/2).
fn heights(p_msl_hpa: &[f64], p0_pa: f64, layer_factor: &[f64], tv: &[f64], z: &mut [f64]) {
    let nx = p_msl_hpa.len();
    for i in 0..nx {
        let a = RD / G * (p_msl_hpa[i] * 100.0 / p0_pa).ln();
        z[i] = a * tv[i] / (1.0 - a * STANDARD_LAPSE / 2.0);
    }
    for (k, factor) in layer_factor.iter().enumerate() {
        let (below, above) = z.split_at_mut((k + 1) * nx);
        let (tv_below, tv_above) = (&tv[k * nx..(k + 1) * nx], &tv[(k + 1) * nx..(k + 2) * nx]);
        for i in 0..nx {
            above[i] = below[k * nx + i] + factor * 0.5 * (tv_below[i] + tv_above[i]);
        }
    }
}

/// Free-air temperature at altitude `alt` m from the `nl` levels' heights `z` and temperatures
/// `t`, read with stride `stride` (the row's level-major profiles, offset to the cell): linear
/// in height between levels, at the standard lapse rate beyond the outermost ones.
fn free_air_at(alt: f64, z: &[f64], t: &[f64], stride: usize, nl: usize) -> f64 {
    if alt <= z[0] {
        return t[0] + STANDARD_LAPSE * (z[0] - alt);
    }
    for k in 1..nl {
        let (zk, zb) = (z[k * stride], z[(k - 1) * stride]);
        if alt <= zk {
            let (tk, tb) = (t[k * stride], t[(k - 1) * stride]);
            return tb + (alt - zb) / (zk - zb) * (tk - tb);
        }
    }
    let top = (nl - 1) * stride;
    t[top] - STANDARD_LAPSE * (alt - z[top])
}

/// The map position (lat, lon) and pressure (Pa) of the storm's sea-level pressure minimum at
/// `step`.
pub(crate) fn low_centre(spec: &DemoSpec, step: usize) -> (f64, f64, f64) {
    let st = StormState::moved(storm_time(spec, step), spec.variant.path_offset_km);
    let (lat, lon) = to_geo(st.centre.0, st.centre.1);
    (lat, lon, st.min_hpa * 100.0)
}
