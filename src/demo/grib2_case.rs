//! The invented demo storm written as GRIB2, as a model would deliver it: one file per valid
//! time (`fields/step_NNN.grib2`) holding every field of that time, precipitation as running
//! totals since the start of the run (template 4.8), model terrain in the first file, and a
//! case file that points at the folder.

use super::files::DemoError;
use super::grib2::{message, BitMap, FieldDef, GridDef};
use super::{static_fields, step_fields, towns, track, valid_time_iso, DemoSpec, Field, Level};
use chrono::{DateTime, Utc};
use std::path::Path;

/// How a demo field is coded in GRIB2.
struct Code {
    /// Discipline, category, number.
    param: (u8, u8, u8),
    /// First fixed surface: type, scale factor, scaled value.
    surface: (u8, i8, i32),
    /// Decimal scale factor of simple packing.
    decimal_scale: i16,
}

/// GRIB2 code and decimal scale of a demo field.
fn code(f: &Field) -> Option<Code> {
    let surface = match f.level {
        Level::Isobaric { hpa } => (100, 0, (hpa * 100.0).round() as i32),
        Level::HeightAboveGround { m } => (103, 0, m.round() as i32),
        Level::MeanSeaLevel => (101, 0, 0),
        Level::Surface | Level::Accumulation => (1, 0, 0),
    };
    let (param, d) = match f.name {
        "air_temperature" => ((0, 0, 0), 2),
        "geopotential_height" | "surface_altitude" => ((0, 3, 5), 1),
        "relative_humidity" => ((0, 1, 1), 2),
        "air_pressure_at_mean_sea_level" => ((0, 3, 1), 0),
        "precipitation_amount" => ((0, 1, 8), 3),
        _ => return None,
    };
    Some(Code {
        param,
        surface,
        decimal_scale: d,
    })
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> DemoError + '_ {
    move |source| DemoError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// The demo grid as GRIB2 template 3.0, scanning west to east, north to south.
pub fn demo_grid(spec: &DemoSpec) -> GridDef {
    GridDef::LatLon {
        ni: spec.nx as u32,
        nj: spec.ny as u32,
        la1: spec.lat_north,
        lo1: spec.lon_west,
        di: spec.dlon,
        dj: spec.dlat,
        scan: 0,
    }
}

/// How precipitation is stored, as models do it in different ways.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PrecipStyle {
    /// Totals since the start of the run (0–3 h, 0–6 h, …).
    RunningTotal,
    /// The amount of each step (0–3 h, 3–6 h, …).
    PerStep,
    /// Totals since the start of fixed buckets of this many hours (0–3, 0–6, 6–9, 6–12 h for
    /// 6-h buckets and 3-h steps).
    Buckets(u32),
}

/// Writes the GRIB2 case into `dir`: `fields/step_NNN.grib2`, `track.csv`, `towns.csv`,
/// `case.toml`, with precipitation as running totals.
pub fn write_case_grib2(dir: &Path, spec: &DemoSpec) -> Result<(), DemoError> {
    write_case_grib2_with(dir, spec, PrecipStyle::RunningTotal)
}

/// As [`write_case_grib2`], with precipitation stored as `style` says.
pub fn write_case_grib2_with(
    dir: &Path,
    spec: &DemoSpec,
    style: PrecipStyle,
) -> Result<(), DemoError> {
    let fields_dir = dir.join("fields");
    std::fs::create_dir_all(&fields_dir).map_err(io(&fields_dir))?;
    let grid = demo_grid(spec);
    let reference: DateTime<Utc> = DateTime::parse_from_rfc3339(&valid_time_iso(spec, 0))
        .expect("demo times are RFC 3339")
        .with_timezone(&Utc);
    let statics = static_fields(spec);
    let mut running = vec![0f32; spec.nx * spec.ny];
    for k in 0..spec.steps {
        let hours = k as u32 * spec.step_hours;
        let mut fields = step_fields(spec, k);
        fields.extend(statics.iter().cloned());
        let mut owned: Vec<(Field, u32, Option<u32>)> = Vec::new();
        for f in fields {
            if f.name == "precipitation_amount" {
                if k == 0 {
                    continue;
                }
                let prev = hours - spec.step_hours;
                let start = match style {
                    PrecipStyle::RunningTotal => 0,
                    PrecipStyle::PerStep => prev,
                    PrecipStyle::Buckets(b) => prev / b * b,
                };
                if start == prev {
                    running.iter_mut().for_each(|r| *r = 0.0);
                }
                for (r, v) in running.iter_mut().zip(&f.data) {
                    *r += v;
                }
                let total = Field {
                    data: running.clone(),
                    ..f
                };
                owned.push((total, start, Some(hours - start)));
            } else {
                let ft = if f.level == Level::Surface { 0 } else { hours };
                owned.push((f, ft, None));
            }
        }
        let defs: Vec<FieldDef<'_>> = owned
            .iter()
            .filter_map(|(f, ft, acc)| {
                let Code {
                    param,
                    surface,
                    decimal_scale: d,
                } = code(f)?;
                Some(FieldDef {
                    param,
                    surface,
                    reference,
                    forecast_hours: *ft,
                    accumulation_hours: *acc,
                    decimal_scale: d,
                    values: &f.data,
                    bitmap: BitMap::Auto,
                })
            })
            .collect();
        let mut bytes = Vec::new();
        for d in &defs {
            bytes.extend(message(&grid, std::slice::from_ref(d)));
        }
        let p = fields_dir.join(format!("step_{k:03}.grib2"));
        std::fs::write(&p, bytes).map_err(io(&p))?;
    }
    let mut t = String::from("time,lat,lon,mslp_pa\n");
    for p in track(spec) {
        t.push_str(&format!(
            "{},{:.4},{:.4},{:.0}\n",
            p.time_iso, p.lat, p.lon, p.mslp_pa
        ));
    }
    let tp = dir.join("track.csv");
    std::fs::write(&tp, t).map_err(io(&tp))?;
    let mut w = String::from("name,lat,lon\n");
    for town in towns() {
        w.push_str(&format!("{},{:.4},{:.4}\n", town.name, town.lat, town.lon));
    }
    let wp = dir.join("towns.csv");
    std::fs::write(&wp, w).map_err(io(&wp))?;
    let cp = dir.join("case.toml");
    let toml = format!(
        r#"# trackswing case: the invented demo storm as GRIB2 model output (not a real place or storm).
title = "Invented demo storm as GRIB2 ({nx}×{ny} cells, {steps} steps of {h} h)"
towns = "towns.csv"

[[member]]
name = "demo-grib2"
model = "fields"
track = "track.csv"

[offsets]
cross_km = "-100:100:10"
along_km = "-60:60:60"

[shift]
core_radius_km = 400
outer_radius_km = 1000
lapse_rate_k_per_km = 6.5

[methods]
precip_type = "energy-area"
snow_ratio = "max-column-temperature"

[output]
folder = "out"
units = "metric"
"#,
        nx = spec.nx,
        ny = spec.ny,
        steps = spec.steps,
        h = spec.step_hours
    );
    std::fs::write(&cp, toml).map_err(io(&cp))?;
    Ok(())
}
