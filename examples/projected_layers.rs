//! Writes the full layer set of a synthetic run on a Lambert conformal grid (a regional model's
//! kind of grid, on a sphere of radius 6 371 229 m), through the same writer as `trackswing run`,
//! for the GIS checks in tests/ref/check_layers.py and for timing large stacks.
//!
//! The totals are invented shapes, not physics: a precipitation shield whose rain–snow line moves
//! north with the cross-track offset, a band of ice pellets and freezing rain on its warm side, and
//! missing cells (a block in every scenario, the western edge in the far-off scenarios).
//!
//! ```sh
//! cargo run --release --example projected_layers -- OUT_DIR [NX NY CROSS_RANGE]
//! cargo run --release --example projected_layers -- /tmp/big 1800 1060 -200:200:10
//! ```
//! Besides the layers, `OUT_DIR/../<name>.expected.json` records sample cells' values as computed
//! here, for the check script to compare with what GDAL reads.

use std::path::{Path, PathBuf};
use std::time::Instant;

use trackswing::accumulate::Totals;
use trackswing::case::{
    Case, InputFormat, Inputs, Member, OutputSettings, Physics, SummarySettings,
};
use trackswing::diagnose::{Methods, PtypeMethod, SlrMethod};
use trackswing::engine::{RunResult, Timings};
use trackswing::geotiff::*;
use trackswing::grid::Grid;
use trackswing::read::{StepLayout, Town};
use trackswing::render::legend;
use trackswing::scenario::Axes;
use trackswing::scenario::Scenario;
use trackswing::shift::Taper;
use trackswing::units::Units;
use trackswing::write::raster_type::RasterType;

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let out = PathBuf::from(args.first().map_or("projected-out", String::as_str));
    let nx: usize = args.get(1).map_or(Ok(300), |s| s.parse())?;
    let ny: usize = args.get(2).map_or(Ok(200), |s| s.parse())?;
    let cross = args.get(3).map_or("-100:100:10", String::as_str);
    let raster_type = match args.get(4).map(String::as_str) {
        Some("int16") => RasterType::Int16,
        _ => RasterType::Float32,
    };
    let cross_km = trackswing::scenario::parse_offsets(cross)?;

    let dx = 12_000.0 * 300.0 / nx.max(1) as f64;
    let crs = Crs::Projected(Projected {
        datum: Datum::Sphere {
            radius_m: 6_371_229.0,
        },
        projection: Projection::LambertConformal2Sp {
            lat_1: 38.5,
            lat_2: 38.5,
            lat_0: 38.5,
            lon_0: -97.5,
        },
        false_easting_m: 0.0,
        false_northing_m: 0.0,
    });
    let gt = [
        -(nx as f64) * dx / 2.0,
        dx,
        0.0,
        ny as f64 * dx / 2.0,
        0.0,
        -dx,
    ];
    let grid = Grid::new(
        nx,
        ny,
        Georef {
            crs,
            geotransform: gt,
        },
    )?;

    let scenarios: Vec<Scenario> = cross_km.iter().map(|&c| Scenario::offset(c, 0.0)).collect();
    let baseline = scenarios
        .iter()
        .position(Scenario::is_baseline)
        .ok_or_else(|| anyhow::anyhow!("the cross range must include 0"))?;
    let half_w = nx as f64 * dx / 2000.0;
    let totals: Vec<Totals> = scenarios
        .iter()
        .map(|s| {
            let mut t = Totals::new(grid.len());
            for row in 0..ny {
                for col in 0..nx {
                    let i = row * nx + col;
                    let x = (col as f64 + 0.5) * dx / 1000.0 - half_w;
                    let y = ny as f64 * dx / 2000.0 - (row as f64 + 0.5) * dx / 1000.0;
                    let blocked = (col * 7 / nx == 2 && row * 5 / ny == 3)
                        || (s.cross_km.abs() > 50.0 && col < nx / 30);
                    if blocked {
                        t.liquid[i] = f32::NAN;
                        t.snow_liquid[i] = f32::NAN;
                        t.snowfall[i] = f32::NAN;
                        t.ice_pellets[i] = f32::NAN;
                        t.freezing_rain[i] = f32::NAN;
                        continue;
                    }
                    let r2 = (x / (0.55 * half_w)).powi(2) + (y / (0.45 * half_w)).powi(2);
                    let liquid = 35.0 * (-r2).exp() - 0.05;
                    let liquid = liquid.max(0.0);
                    let line = s.cross_km + 0.25 * x + 40.0 * (x / 300.0).sin();
                    let snow = 1.0 / (1.0 + ((line - y) / 45.0).exp());
                    let warm = 1.0 - snow;
                    let mixed = (-((y - line - 60.0) / 50.0).powi(2)).exp();
                    let ip = warm * 0.5 * mixed;
                    let fzra = warm * 0.4 * (-((y - line - 130.0) / 40.0).powi(2)).exp();
                    t.liquid[i] = liquid as f32;
                    t.snow_liquid[i] = (liquid * snow) as f32;
                    t.snowfall[i] = (liquid * snow * 10.0) as f32;
                    t.ice_pellets[i] = (liquid * ip) as f32;
                    t.freezing_rain[i] = (liquid * fzra) as f32;
                }
            }
            t
        })
        .collect();

    let inputs = out.with_extension("inputs");
    std::fs::create_dir_all(&inputs)?;
    let terrain: Vec<f32> = (0..grid.len())
        .map(|i| (i % nx) as f32 * 0.5 + 100.0)
        .collect();
    let terrain_path = inputs.join("terrain.tif");
    write_cog(
        &terrain_path,
        nx,
        ny,
        &grid.georef,
        &[BandSpec {
            data: &terrain,
            description: "surface_altitude".into(),
            metadata: vec![],
        }],
        &WriteOptions {
            encoding: SampleEncoding::Float32,
            nodata: -9999.0,
            dataset_metadata: vec![],
            band_scaling: vec![],
        },
        &CogOptions::default(),
    )?;
    let case_path = inputs.join("case.toml");
    std::fs::write(
        &case_path,
        "title = \"Synthetic run on a Lambert conformal grid (invented)\"\n",
    )?;
    let towns: Vec<Town> = [
        ("Ashcombe", nx / 2, ny / 2),
        ("Brindle Ford", nx / 3, ny / 2 + ny / 10),
        ("Corran Vale", 2 * nx / 3, ny / 2 - ny / 10),
    ]
    .into_iter()
    .map(|(name, c, r)| {
        let (lon, lat) = grid.lonlat_of(c as f64 + 0.3, r as f64 + 0.6);
        Town {
            name: name.into(),
            lat,
            lon,
        }
    })
    .collect();
    let towns_path = inputs.join("towns.csv");
    let mut csv = String::from("name,lat,lon\n");
    for t in &towns {
        csv.push_str(&format!("{},{:.6},{:.6}\n", t.name, t.lat, t.lon));
    }
    std::fs::write(&towns_path, csv)?;

    let case = Case {
        path: case_path,
        title: "Synthetic run on a Lambert conformal grid (invented)".into(),
        inputs: Inputs {
            members: vec![Member {
                name: "synthetic-lambert".into(),
                terrain: terrain_path.clone(),
                steps: vec![terrain_path],
                skipped: Vec::new(),
                track: None,
                format: InputFormat::GeoTiff,
                find_track: false,
                weight: 1.0,
                perturbation: None,
            }],
            towns: Some(towns_path),
            region: None,
        },
        axes: Axes {
            cross_km: cross_km.clone(),
            ..Axes::default()
        },
        physics: Physics {
            taper: Taper {
                core_radius_km: 500.0,
                outer_radius_km: 1500.0,
            },
            methods: Methods {
                ptype: PtypeMethod::EnergyArea,
                slr: SlrMethod::Fixed(10.0),
                lapse_rate_k_per_m: 0.0065,
                dry_air: false,
            },
            fixed_ratio: 10.0,
            options: Vec::new(),
            explicit_shifts: None,
        },
        summary: SummarySettings {
            prior: trackswing::summarise::weights::TrackPrior::Gaussian {
                cross_sigma_km: 50.0,
                along_sigma_km: 50.0,
                cross_mean_km: 0.0,
                along_mean_km: 0.0,
                basis: None,
            },
            track_error: None,
            min_coverage: trackswing::summarise::coverage::DEFAULT_MIN_COVERAGE,
            snow_thresholds: legend::default_snow_thresholds(Units::Metric),
            ice_thresholds: legend::default_ice_thresholds(Units::Metric),
        },
        output: OutputSettings {
            out_dir: out.clone(),
            units: Units::Metric,
            raster_type,
            snowfall_bands: legend::default_snow_thresholds(Units::Metric),
            report: false,
        },
        force: true,
    };
    let expected = expected_cells(&grid, &totals, baseline);
    let result = RunResult {
        grid,
        terrain,
        scenarios,
        baseline,
        totals,
        valid_times: vec![chrono::DateTime::parse_from_rfc3339("2026-01-14T06:00:00Z")?.into()],
        centres: vec![None],
        towns,
        track: None,
        layout: StepLayout::new(vec![85_000.0, 70_000.0]),
        timings: Timings {
            read_s: 0.0,
            compute_s: 0.0,
        },
        shards: Vec::new(),
        warnings: Vec::new(),
        window: None,
        reference: None,
    };
    let started = Instant::now();
    let summary = trackswing::summarise::summary::summarise(&case, &result)?;
    let files = trackswing::write::write_all(&case, &result, &summary)?.files;
    let secs = started.elapsed().as_secs_f64();
    std::fs::write(
        expected_path(&out),
        serde_json::to_string_pretty(&expected)?,
    )?;
    println!(
        "wrote {} files for {} x {} cells x {} scenarios in {secs:.2} s into {}",
        files.len(),
        nx,
        ny,
        result.scenarios.len(),
        out.display()
    );
    Ok(())
}

fn expected_path(out: &Path) -> PathBuf {
    out.with_extension("expected.json")
}

/// Values of sample cells as computed here (cm of snow), for the check script.
fn expected_cells(grid: &Grid, totals: &[Totals], baseline: usize) -> serde_json::Value {
    let (nx, ny) = (grid.nx, grid.ny);
    let cells: Vec<(usize, usize)> = (0..40)
        .map(|k| ((k * 7919) % nx, (k * 104_729) % ny))
        .collect();
    let value = |v: f32| {
        if v.is_nan() {
            serde_json::Value::Null
        } else {
            serde_json::json!(v / 10.0)
        }
    };
    serde_json::json!({
        "proj": grid.georef.crs.proj_string(),
        "geotransform": grid.georef.geotransform,
        "size": [nx, ny],
        "cells": cells.iter().map(|&(c, r)| {
            let i = r * nx + c;
            serde_json::json!({
                "col": c,
                "row": r,
                "lon": grid.lon()[i],
                "lat": grid.lat()[i],
                "baseline_cm": value(totals[baseline].snowfall[i]),
                "by_scenario_cm": totals.iter().map(|t| value(t.snowfall[i])).collect::<Vec<_>>(),
            })
        }).collect::<Vec<_>>(),
    })
}
