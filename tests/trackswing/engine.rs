//! The engine on synthetic cases: exactness of the baseline, translation, monotonicity,
//! determinism across thread counts.

use super::support::{rewrite, write_case, Synthetic};
use trackswing::case::{Case, Overrides};
use trackswing::engine::run;
use trackswing::progress::Silent;

fn load(case: &std::path::Path, cross: &str, along: &str) -> Case {
    Case::load(
        case,
        &Overrides {
            cross: Some(cross.into()),
            along: Some(along.into()),
            ..Default::default()
        },
    )
    .unwrap()
}

#[test]
fn zero_offset_reproduces_the_unshifted_model_exactly() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(d.path(), &Synthetic::default(), "");
    let alone = run(&load(&case, "0", "0"), 2, &Silent).unwrap();
    let among = run(&load(&case, "-30:30:10", "-50,0"), 2, &Silent).unwrap();
    assert_eq!(alone.totals.len(), 1);
    assert_eq!(among.totals.len(), 14);
    let b = &among.totals[among.baseline];
    assert_eq!(
        b, &alone.totals[0],
        "the baseline must not depend on the other scenarios"
    );

    // And it equals a direct, unshifted column-by-column computation.
    use trackswing::diagnose::diagnose_column;
    use trackswing::read::fields::{read_static, read_step};
    let c = load(&case, "0", "0");
    let st = read_static(&c.member().terrain).unwrap();
    let mut liquid = vec![0.0f32; st.grid.len()];
    let mut snow = vec![0.0f32; st.grid.len()];
    for p in &c.member().steps {
        let step = read_step(p, &st, Vec::new()).unwrap();
        let nv = step.layout.nvar();
        for i in 0..st.grid.len() {
            let col = &step.columns[i * nv..(i + 1) * nv];
            let pr = col[step.layout.precip()];
            if pr > 0.0 {
                let r =
                    diagnose_column(col, &step.layout, st.terrain[i], &c.physics.methods).unwrap();
                liquid[i] += pr;
                snow[i] += pr * r.fractions.snow as f32 * r.snow_ratio as f32;
            }
        }
    }
    assert_eq!(alone.totals[0].liquid, liquid);
    assert_eq!(alone.totals[0].snowfall, snow);
    assert!(
        snow.iter().any(|v| *v > 1.0),
        "the synthetic storm must snow somewhere"
    );
    assert!(
        liquid
            .iter()
            .zip(&snow)
            .any(|(l, s)| *l > 1.0 && *s < 0.1 * l),
        "and rain somewhere"
    );
}

#[test]
fn cross_track_shift_of_k_cells_translates_the_result() {
    // Taper radii far larger than the grid and a straight eastward track along the equator:
    // a shift of exactly k rows northward (left of an eastward motion) must move every total
    // k rows north. Near the equator a degree of latitude has the same length on every row to
    // within 1e-5 (WGS 84 meridional radius), so the shift is k rows everywhere.
    let d = tempfile::tempdir().unwrap();
    let s = Synthetic {
        flat: true,
        ..Default::default()
    };
    let case = write_case(d.path(), &s, "");
    let k = 3usize;
    let (_, ky) = trackswing::grid::km_per_degree(0.0);
    let km = k as f64 * s.d * ky;
    let r = run(&load(&case, &format!("0,{km}"), "0"), 2, &Silent).unwrap();
    let (base, moved) = (&r.totals[0], &r.totals[1]);
    assert_eq!(r.scenarios[1].cross_km, km);
    let mut checked = 0;
    // Interior cells: the edge columns may sample a hair beyond the grid, since the geodesic
    // heading along a parallel is not exactly 90°.
    for row in 0..s.ny - k {
        for col in 1..s.nx - 1 {
            let a = moved.snowfall[row * s.nx + col];
            let b = base.snowfall[(row + k) * s.nx + col];
            assert!(
                (a - b).abs() <= 1e-3 * b.abs().max(1.0),
                "row {row} col {col}: {a} vs {b}"
            );
            let a = moved.liquid[row * s.nx + col];
            let b = base.liquid[(row + k) * s.nx + col];
            assert!((a - b).abs() <= 1e-3 * b.abs().max(1.0));
            checked += 1;
        }
    }
    assert_eq!(checked, (s.ny - k) * (s.nx - 2));
    // The last k rows took their values from beyond the grid's southern edge: missing.
    assert!(moved.snowfall[(s.ny - 1) * s.nx].is_nan());
}

#[test]
fn a_uniformly_colder_storm_never_has_less_snow() {
    let d = tempfile::tempdir().unwrap();
    let warm = run(
        &load(
            &write_case(&d.path().join("w"), &Synthetic::default(), ""),
            "0",
            "0",
        ),
        2,
        &Silent,
    )
    .unwrap();
    let cold_s = Synthetic {
        warm: -1.5,
        ..Default::default()
    };
    let cold = run(
        &load(&write_case(&d.path().join("c"), &cold_s, ""), "0", "0"),
        2,
        &Silent,
    )
    .unwrap();
    let (fw, fc) = (
        warm.totals[0].snow_fraction(),
        cold.totals[0].snow_fraction(),
    );
    let mut compared = 0;
    for (w, c) in fw.iter().zip(&fc) {
        if w.is_finite() && c.is_finite() {
            assert!(c + 1e-6 >= *w, "colder {c} < warmer {w}");
            compared += 1;
        }
    }
    assert!(compared > 100);
    assert!(
        fc.iter().zip(&fw).any(|(c, w)| c - w > 0.05),
        "cooling must matter somewhere"
    );
}

#[test]
fn one_and_two_threads_give_identical_results() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(d.path(), &Synthetic::default(), "");
    let c = load(&case, "-40:40:20", "-50,0,50");
    let a = run(&c, 1, &Silent).unwrap();
    let b = run(&c, 2, &Silent).unwrap();
    let bits = |t: &trackswing::accumulate::Totals| -> Vec<u32> {
        [
            &t.liquid,
            &t.snow_liquid,
            &t.snowfall,
            &t.ice_pellets,
            &t.freezing_rain,
        ]
        .iter()
        .flat_map(|v| v.iter().map(|x| x.to_bits()))
        .collect()
    };
    assert_eq!(a.totals.len(), 15);
    for (x, y) in a.totals.iter().zip(&b.totals) {
        assert_eq!(bits(x), bits(y));
        assert_eq!(x.outside, y.outside);
    }
}

/// Rewrites a GeoTIFF with `edit` applied to the band described `band`.
fn edit_band(path: &std::path::Path, band: &str, edit: impl Fn(usize, &mut f32)) {
    rewrite(path, |desc, values| {
        let mut v = values.to_vec();
        if desc == band {
            v.iter_mut().enumerate().for_each(|(i, x)| edit(i, x));
        }
        Some(v)
    });
}

/// A cell without terrain is missing (NaN) in every scenario, wherever it lies: inside the
/// storm, and far from any precipitation, where the dry screen passes the cell over without
/// looking at it.
#[test]
fn cells_without_terrain_are_missing_in_every_scenario() {
    let d = tempfile::tempdir().unwrap();
    let s = Synthetic::default();
    let case = write_case(d.path(), &s, "");
    // Nothing falls east of column 30 at any step, so cells there far from the storm are
    // screened dry for every offset.
    for k in 0..s.steps {
        let step = std::fs::read_dir(d.path().join("f"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .filter(|p| p.extension().is_some_and(|e| e == "tif"))
            .nth(k)
            .unwrap();
        edit_band(&step, "precipitation_amount", |i, v| {
            if i % s.nx >= 30 {
                *v = 0.0;
            }
        });
    }
    let (wet_cell, dry_cell) = (15 * s.nx + 12, 15 * s.nx + 35);
    edit_band(&d.path().join("terrain.tif"), "surface_altitude", |i, v| {
        if i == wet_cell || i == dry_cell {
            *v = f32::NAN;
        }
    });
    let r = run(&load(&case, "-20:20:20", "0"), 2, &Silent).unwrap();
    assert_eq!(r.totals.len(), 3);
    for t in &r.totals {
        for c in [wet_cell, dry_cell] {
            assert!(t.liquid[c].is_nan() && t.snowfall[c].is_nan(), "cell {c}");
        }
        // The neighbours of the dry cell are computed: dry, not missing.
        assert_eq!(t.liquid[dry_cell - 1], 0.0);
        assert!(t.liquid[wet_cell - 1] > 0.0);
    }
}
