//! Criterion micro-benchmarks of the per-cell kernels: energy-area type, column diagnosis (also
//! with dry air below the cloud), bilinear sampling, and the remapping of a member's totals
//! onto the output grid.
//!
//! `cargo bench --bench kernels`. The end-to-end throughput benchmark is scripts/bench.sh.

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use trackswing::diagnose::ptype::bourgouin;
use trackswing::diagnose::subcloud::SubCloud;
use trackswing::diagnose::thermo::isobaric_wet_bulb_deficit_humidity;
use trackswing::diagnose::{
    diagnose_column, step_column, Methods, Profile, PtypeMethod, SlrMethod,
};
use trackswing::engine::regrid::Remap;
use trackswing::geotiff::{Crs, Georef};
use trackswing::grid::Grid;
use trackswing::read::StepLayout;
use trackswing::shift::sample_bilinear;

const LEVELS_HPA: [f64; 6] = [1000.0, 925.0, 850.0, 700.0, 600.0, 500.0];

/// A warm-nose sounding: cold surface layer, warm layer near 850 hPa, cold aloft.
fn warm_nose() -> (Vec<f64>, Vec<f64>) {
    let p = vec![98_000.0, 92_500.0, 85_000.0, 70_000.0, 60_000.0, 50_000.0];
    let t = vec![270.5, 272.0, 275.0, 266.0, 258.0, 248.0];
    (p, t)
}

fn column() -> (StepLayout, Vec<f32>) {
    let layout = StepLayout::new(LEVELS_HPA.iter().map(|p| p * 100.0).collect());
    let mut col = vec![0.0f32; layout.nvar()];
    let temps = [271.0, 272.5, 275.0, 266.0, 258.0, 248.0];
    let heights = [120.0, 780.0, 1500.0, 3000.0, 4200.0, 5550.0];
    for k in 0..LEVELS_HPA.len() {
        col[layout.t(k)] = temps[k];
        col[layout.z(k)] = heights[k];
        col[layout.rh(k)] = 95.0;
    }
    col[layout.t2()] = 270.8;
    col[layout.rh2()] = 92.0;
    col[layout.precip()] = 1.2;
    col[layout.terrain()] = 60.0;
    (layout, col)
}

fn kernels(c: &mut Criterion) {
    let (p, t) = warm_nose();
    c.bench_function("bourgouin warm nose, 6 points", |b| {
        b.iter(|| bourgouin(black_box(&p), black_box(&t)))
    });
    let (layout, col) = column();
    let methods = Methods {
        ptype: PtypeMethod::EnergyArea,
        slr: SlrMethod::MaxColumnTemperature,
        lapse_rate_k_per_m: 0.0065,
        dry_air: false,
    };
    c.bench_function("diagnose_column, 6 levels", |b| {
        b.iter(|| diagnose_column(black_box(&col), &layout, black_box(80.0), &methods))
    });
    // Dry below 850 hPa: the sub-cloud deficit (isobaric wet-bulb per point) and the cooling.
    let mut dry = col.clone();
    for k in 0..2 {
        dry[layout.rh(k)] = 55.0;
    }
    dry[layout.rh2()] = 50.0;
    let with_dry_air = Methods {
        dry_air: true,
        ..methods
    };
    // The engine's path: the isobaric levels' wet-bulb, moistening and humidity come from the
    // grid-point memo (here worked out beforehand), only the surface point is solved.
    let known: Vec<[f64; 3]> = (0..LEVELS_HPA.len())
        .map(|k| {
            let (tw, d, q) = isobaric_wet_bulb_deficit_humidity(
                LEVELS_HPA[k] * 100.0,
                dry[layout.t(k)] as f64,
                dry[layout.rh(k)] as f64,
            );
            [tw, d, q]
        })
        .collect();
    let mut profile = Profile::empty();
    let mut sub = SubCloud::empty();
    for (name, from_memo) in [
        ("step_column with dry air below the cloud, 6 levels", false),
        (
            "step_column with dry air, isobaric levels from the memo, 6 levels",
            true,
        ),
    ] {
        c.bench_function(name, |b| {
            b.iter(|| {
                step_column(
                    black_box(&dry),
                    &layout,
                    black_box(80.0),
                    &with_dry_air,
                    0.0,
                    1.2,
                    black_box(0.4),
                    &mut profile,
                    &mut sub,
                    |k| from_memo.then(|| known[k]),
                )
            })
        });
    }
    let grid = Grid::new(
        64,
        64,
        Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [0.0, 0.1, 0.0, 50.0, 0.0, -0.1],
        },
    )
    .expect("valid grid");
    let nvar = layout.nvar();
    let columns: Vec<f32> = (0..grid.len() * nvar).map(|i| (i % 97) as f32).collect();
    let mut out = vec![0.0f32; nvar];
    c.bench_function("sample_bilinear, 22 values", |b| {
        b.iter(|| {
            sample_bilinear(
                &columns,
                nvar,
                &grid,
                black_box(20.3),
                black_box(31.7),
                &mut out,
            )
        })
    });
    // A member on another grid: the mapping of a 0.15° × 0.1° member onto the 128 × 104
    // output grid of the demo shifted by a fraction of a cell (built once per member), and
    // one scenario's amount carried over (once per field and scenario).
    let member = Grid::new(
        120,
        100,
        Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [-35.03, 0.17, 0.0, 52.04, 0.0, -0.11],
        },
    )
    .expect("valid grid");
    let output = Grid::new(
        128,
        104,
        Georef {
            crs: Crs::Wgs84Geographic,
            geotransform: [-35.0, 0.15, 0.0, 52.0, 0.0, -0.1],
        },
    )
    .expect("valid grid");
    c.bench_function("Remap::new, 128 × 104 output cells", |b| {
        b.iter(|| Remap::new(black_box(&member), &output))
    });
    let remap = Remap::new(&member, &output);
    let amount: Vec<f32> = (0..member.len()).map(|i| (i % 89) as f32).collect();
    c.bench_function("Remap::conservative, 128 × 104 output cells", |b| {
        b.iter(|| remap.conservative(black_box(&amount)))
    });
}

criterion_group!(benches, kernels);
criterion_main!(benches);
