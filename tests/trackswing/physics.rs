//! The physics options end to end: every method through the case file and the flags, dry air
//! below the cloud, the timing / intensity / warm-bias axes, the sounding view and the
//! thermodynamic table.

use super::support::{bin, write_case, Synthetic};
use trackswing::accumulate::Totals;
use trackswing::case::{Case, Overrides};
use trackswing::engine::run;
use trackswing::geotiff::read_geotiff;
use trackswing::progress::Silent;

fn load(case: &std::path::Path, over: Overrides) -> Case {
    Case::load(case, &over).unwrap()
}

fn bits(t: &Totals) -> Vec<u32> {
    t.f32_arrays()
        .iter()
        .flat_map(|v| v.iter().map(|x| x.to_bits()))
        .chain(t.onset.iter().copied())
        .collect()
}

fn sum(v: &[f32]) -> f64 {
    v.iter().map(|x| *x as f64).sum()
}

#[test]
fn every_method_runs_from_the_case_file_and_the_flags() {
    let d = tempfile::tempdir().unwrap();
    let mut snow = Vec::new();
    for ptype in ["energy-area", "partial-thickness", "surface-logistic"] {
        for slr in ["fixed", "max-column-temperature", "growth-zone"] {
            let extra = format!("[methods]\nprecip_type = \"{ptype}\"\nsnow_ratio = \"{slr}\"\n");
            let case = write_case(
                &d.path().join(format!("{ptype}-{slr}")),
                &Synthetic::default(),
                &extra,
            );
            let c = load(&case, Overrides::default());
            assert_eq!(c.physics.methods.ptype.name(), ptype);
            assert_eq!(c.physics.methods.slr.name(), slr);
            let r = run(&c, 2, &Silent).unwrap();
            let total = sum(&r.totals[0].snowfall);
            assert!(total > 0.0, "{ptype} {slr}");
            snow.push(total);
        }
    }
    // The methods differ (each ratio method gives a different total for the same type).
    assert!(
        snow[0] != snow[1] && snow[1] != snow[2] && snow[0] != snow[3],
        "{snow:?}"
    );
    // The flags override the case file, through the binary.
    let case = write_case(&d.path().join("flags"), &Synthetic::default(), "");
    let o = bin()
        .arg("run")
        .arg(&case)
        .args([
            "--precip-type",
            "surface-logistic",
            "--snow-ratio",
            "growth-zone",
            "--dry-air",
            "-q",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value = serde_json::from_slice(
        &std::fs::read(case.parent().unwrap().join("out/manifest.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(m["methods"]["ptype"], "surface-logistic");
    assert_eq!(m["methods"]["slr"], "growth-zone");
    assert_eq!(m["methods"]["dry_air"], true);
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--precip-type", "thickness"])
        .output()
        .unwrap();
    // A bad option value is a bad command line (README: exit code 2).
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--precip-type"));
}

#[test]
fn dry_air_below_the_cloud_delays_and_removes_precipitation() {
    let d = tempfile::tempdir().unwrap();
    let dry = Synthetic {
        low_rh: 55.0,
        ..Default::default()
    };
    let case = write_case(d.path(), &dry, "");
    let on = run(
        &load(
            &case,
            Overrides {
                dry_air: true,
                ..Default::default()
            },
        ),
        2,
        &Silent,
    )
    .unwrap();
    let off = run(&load(&case, Overrides::default()), 2, &Silent).unwrap();
    let (a, b) = (&on.totals[0], &off.totals[0]);
    let mut lost = 0;
    for i in 0..a.len() {
        // A drier sub-cloud layer never lets more reach the ground; what is lost is what was
        // given up to the dry air.
        assert!(a.liquid[i] <= b.liquid[i] + 1e-5, "cell {i}");
        assert!((a.liquid[i] + a.carried[i] - b.liquid[i]).abs() < 1e-4 * b.liquid[i].max(1.0));
        // Onset is never earlier.
        if b.onset[i] > 0 {
            assert!(a.onset[i] == 0 || a.onset[i] >= b.onset[i], "cell {i}");
        }
        if a.carried[i] > 0.0 {
            lost += 1;
        }
    }
    assert!(
        lost > 100,
        "the dry layer must take water somewhere ({lost} cells)"
    );
    // With the dry layer taking its share first, light amounts vanish: cells with a little
    // precipitation without the correction have none with it.
    assert!((0..a.len()).any(|i| b.liquid[i] > 0.0 && a.liquid[i] == 0.0));
    assert!((0..a.len()).any(|i| b.onset[i] > 0 && a.onset[i] > b.onset[i]));
}

/// Guards the default: "as modelled" is the model's precipitation. The model's surface
/// precipitation already lost what evaporated below its cloud, so with the dry-air treatment
/// off (the default) liquid_baseline.tif is, cell for cell and bit for bit, the sum over the
/// steps of the step files' precipitation_amount band (summed in f32 in step order, as the
/// layer accumulates), even under air dry enough for the treatment to take water.
#[test]
fn as_modelled_liquid_is_the_model_precipitation_exactly() {
    let d = tempfile::tempdir().unwrap();
    let dry = Synthetic {
        low_rh: 55.0,
        ..Default::default()
    };
    let case = write_case(d.path(), &dry, "");
    let out = d.path().join("out");
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--cross", "0", "--along", "0", "-q", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let liquid = read_geotiff(&out.join("liquid_baseline.tif")).unwrap();
    let mut model = vec![0.0f32; dry.nx * dry.ny];
    for k in 0..dry.steps {
        let step = read_geotiff(&d.path().join(format!("f/s_{k:02}.tif"))).unwrap();
        let b = step
            .descriptions
            .iter()
            .position(|n| n == "precipitation_amount")
            .expect("the step files carry precipitation_amount");
        for (m, p) in model.iter_mut().zip(&step.bands[b]) {
            *m += *p;
        }
    }
    assert_eq!(liquid.bands[0].len(), model.len());
    let mut wet = 0;
    for (i, (l, m)) in liquid.bands[0].iter().zip(&model).enumerate() {
        assert_eq!(l.to_bits(), m.to_bits(), "cell {i}: layer {l}, model {m}");
        wet += usize::from(*m > 0.1);
    }
    assert!(wet > 100, "the storm must rain somewhere ({wet} cells)");
    // The dry-air treatment, turned on, does take water here: the guard can fail.
    let on = run(
        &load(
            &case,
            Overrides {
                dry_air: true,
                ..Default::default()
            },
        ),
        2,
        &Silent,
    )
    .unwrap();
    assert!(on.totals[0].carried.iter().any(|c| *c > 0.1));
}

#[test]
fn timing_of_one_step_replays_the_previous_step() {
    // Steps every 3 h: a storm 3 h later samples model step k − 1 at output step k exactly,
    // so it equals a run on the first two step files (the third output step sees the second
    // model step), and its first step is not covered.
    let d = tempfile::tempdir().unwrap();
    let case = write_case(
        d.path(),
        &Synthetic::default(),
        "[methods]\ndry_air = false",
    );
    let r = run(
        &load(
            &case,
            Overrides {
                timing: Some("0,3,1.5".into()),
                ..Default::default()
            },
        ),
        2,
        &Silent,
    )
    .unwrap();
    assert_eq!(r.scenarios.len(), 3);
    let later = &r.totals[1];
    assert_eq!(r.scenarios[1].timing_h, 3.0);
    assert_eq!(later.uncovered_steps, 1);
    std::fs::remove_file(d.path().join("f/s_02.tif")).unwrap();
    let first_two = run(&load(&case, Overrides::default()), 2, &Silent).unwrap();
    assert_eq!(later.liquid, first_two.totals[0].liquid);
    assert_eq!(later.snowfall, first_two.totals[0].snowfall);
    for (a, b) in later.onset.iter().zip(&first_two.totals[0].onset) {
        assert_eq!(*a, if *b == 0 { 0 } else { b + 1 });
    }
    // Half a step later lies between: linear in time, the liquid total is the mean of the
    // two neighbours' wherever both cover the same steps (the 1.5 h scenario also skips the
    // first step).
    let half = &r.totals[2];
    assert_eq!(half.uncovered_steps, 1);
    assert!(sum(&half.liquid) < sum(&r.totals[0].liquid));
    assert!(sum(&half.liquid) > sum(&later.liquid));
}

#[test]
fn intensity_scales_the_precipitation_exactly() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(
        d.path(),
        &Synthetic::default(),
        "[methods]\ndry_air = false",
    );
    let r = run(
        &load(
            &case,
            Overrides {
                intensity: Some("1,2".into()),
                ..Default::default()
            },
        ),
        2,
        &Silent,
    )
    .unwrap();
    let (one, two) = (&r.totals[0], &r.totals[1]);
    assert_eq!(r.scenarios[1].intensity, 2.0);
    // Doubling is exact in binary floating point; the types do not depend on the amount.
    for i in 0..one.len() {
        assert_eq!(two.liquid[i], 2.0 * one.liquid[i]);
        assert_eq!(two.snowfall[i], 2.0 * one.snowfall[i]);
    }
}

#[test]
fn a_colder_bias_never_less_snow_and_a_warmer_never_more() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(d.path(), &Synthetic::default(), "");
    for ptype in ["energy-area", "partial-thickness", "surface-logistic"] {
        let r = run(
            &load(
                &case,
                Overrides {
                    warm_bias: Some("-2,0,2".into()),
                    precip_type: Some(ptype.into()),
                    ..Default::default()
                },
            ),
            2,
            &Silent,
        )
        .unwrap();
        let (cold, base, warm) = (&r.totals[0], &r.totals[1], &r.totals[2]);
        assert!(r.scenarios[1].is_baseline());
        let mut differs = 0;
        for i in 0..base.len() {
            assert!(
                cold.snowfall[i] >= base.snowfall[i] - 1e-4,
                "{ptype} cell {i}"
            );
            assert!(
                warm.snowfall[i] <= base.snowfall[i] + 1e-4,
                "{ptype} cell {i}"
            );
            if (warm.snowfall[i] - cold.snowfall[i]).abs() > 0.1 {
                differs += 1;
            }
        }
        assert!(
            differs > 50,
            "{ptype}: ±2 K aloft must matter ({differs} cells)"
        );
    }
}

#[test]
fn every_axis_together_is_the_same_on_one_and_two_threads() {
    let d = tempfile::tempdir().unwrap();
    let dry = Synthetic {
        low_rh: 60.0,
        ..Default::default()
    };
    let case = write_case(d.path(), &dry, "");
    let c = load(
        &case,
        Overrides {
            cross: Some("-20,0,20".into()),
            along: Some("0,40".into()),
            timing: Some("-1.5,0,2".into()),
            intensity: Some("0.8,1".into()),
            warm_bias: Some("0,1".into()),
            ..Default::default()
        },
    );
    let a = run(&c, 1, &Silent).unwrap();
    let b = run(&c, 2, &Silent).unwrap();
    assert_eq!(a.scenarios.len(), 3 * 2 * 3 * 2 * 2);
    for (x, y) in a.totals.iter().zip(&b.totals) {
        assert_eq!(bits(x), bits(y));
    }
    // The baseline among all of them is the baseline alone.
    let alone = run(&load(&case, Overrides::default()), 1, &Silent).unwrap();
    assert_eq!(bits(&a.totals[a.baseline]), bits(&alone.totals[0]));
}

#[test]
fn the_step_window_stays_small() {
    use trackswing::engine::StepWindow;
    let d = tempfile::tempdir().unwrap();
    let s = Synthetic {
        steps: 7,
        ..Default::default()
    };
    let case = write_case(d.path(), &s, "");
    let c = load(&case, Overrides::default());
    let source = trackswing::read::open_member(c.member(), None, &|_: &str| {}).unwrap();
    // The engine's pattern: timing offsets over 3-hourly steps. The window holds the steps
    // that bracket the offsets, (max − min)/step + 1, plus the one just read: never all 7.
    for (offsets, bound) in [(vec![0.0], 2), (vec![-3.0, 0.0, 6.0], 5)] {
        let mut w = StepWindow::new(source.as_ref());
        let mut most = 0;
        for k in 0..7 {
            w.load_through(k).unwrap();
            let t = w.times[k];
            let samples: Vec<_> = offsets
                .iter()
                .map(|h| w.sample(t - trackswing::engine::hours(*h)).unwrap())
                .collect();
            most = most.max(w.held());
            let first = samples
                .iter()
                .flatten()
                .map(|x| x.index)
                .min()
                .unwrap_or(k)
                .min(k);
            w.forget_before(first);
        }
        assert_eq!(most, bound, "{offsets:?}");
    }
}

#[test]
fn the_sounding_reports_the_totals_the_layers_hold() {
    let d = tempfile::tempdir().unwrap();
    let dry = Synthetic {
        low_rh: 60.0,
        ..Default::default()
    };
    let case = write_case(d.path(), &dry, "");
    let c = load(
        &case,
        Overrides {
            cross: Some("20".into()),
            timing: Some("1.5".into()),
            ..Default::default()
        },
    );
    let r = run(&c, 2, &Silent).unwrap();
    let s_idx = r.scenarios.iter().position(|s| s.cross_km == 20.0).unwrap();
    let scenario = r.scenarios[s_idx];
    // A cell in the storm (row 15, column 14 of the synthetic grid).
    let (lon, lat) = r.grid.lonlat_of(14.0, 15.0);
    let req = trackswing::sounding::SoundingRequest {
        lat,
        lon,
        step: Some(3),
        scenario,
    };
    let snd = trackswing::sounding::sounding(&c, &req).unwrap();
    let i = 15 * r.grid.nx + 14;
    let t = &r.totals[s_idx];
    assert_eq!(snd.cell, [14, 15]);
    assert_eq!(snd.totals.liquid_mm, t.liquid[i] as f64);
    assert_eq!(snd.totals.snowfall_cm, t.snowfall[i] as f64 / 10.0);
    assert_eq!(snd.dry_air.carried_mm, t.carried[i] as f64);
    assert!(snd.totals.liquid_mm > 0.0);
    // The profile is cut at the ground and each method's fractions sum to 1.
    assert!(snd.levels.len() >= 2 && snd.levels[0].kind == "surface");
    assert!(snd.levels.windows(2).all(|w| w[1].p_hpa < w[0].p_hpa));
    for p in &snd.ptype {
        assert!((p.snow + p.ice_pellets + p.freezing_rain + p.rain - 1.0).abs() < 1e-9);
    }
    assert_eq!(snd.ptype.len(), 3);
    assert_eq!(snd.snow_ratio.len(), 3);

    // Through the binary: a readable table and JSON.
    let at = format!("{lat},{lon}");
    let o = bin()
        .arg("sounding")
        .arg(&case)
        .args(["--at", &at, "--cross", "20", "--timing", "1.5"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    for h in [
        "p (hPa)",
        "Td (°C)",
        "Tw (°C)",
        "energy areas",
        "partial-thickness",
        "growth-zone",
        "not an official forecast",
    ] {
        assert!(text.contains(h), "'{h}' missing from:\n{text}");
    }
    let o = bin()
        .arg("sounding")
        .arg(&case)
        .args([
            "--at", &at, "--cross", "20", "--timing", "1.5", "--step", "3", "--json",
        ])
        .output()
        .unwrap();
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        j["totals"]["liquid_mm"].as_f64().unwrap(),
        t.liquid[i] as f64
    );
    let o = bin()
        .arg("sounding")
        .arg(&case)
        .args(["--at", "45,100"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("outside the grid"));
}

#[test]
fn the_thermo_table_gives_bolton_and_metpy_values() {
    use std::io::Write;
    let mut child = bin()
        .arg("thermo-table")
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(b"p_pa,t_k,rh_pct\n99300,305.15,35.8053\n80000,273,50\n100000,298.15,50\n")
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success());
    let mut r = csv::Reader::from_reader(out.stdout.as_slice());
    let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
    let h = r.headers().unwrap().clone();
    let get = |row: usize, k: &str| -> f64 {
        rows[row][h.iter().position(|x| x == k).unwrap()]
            .parse()
            .unwrap()
    };
    // Bolton (1980) eq. 10 (SCIENCE.md): 25 °C → 31.674 hPa; MetPy 1.6.3
    // potential_temperature(800 hPa, 273 K) = 290.972 K (κ difference: tolerance 0.02 K).
    assert!(
        (get(2, "es_pa") - 3167.4).abs() < 0.1,
        "{}",
        get(2, "es_pa")
    );
    assert!((get(1, "theta_k") - 290.972).abs() < 0.02);
    // MetPy 1.6.3 wet_bulb_temperature(993 hPa, 32 °C, 15 °C) = 293.527 K; RH 35.8053 % at
    // 32 °C is es(15 °C)/es(32 °C) by Bolton eq. 10, a dewpoint of 15 °C: tolerance 0.05 K.
    assert!(
        (get(0, "tw_k") - 293.527).abs() < 0.05,
        "{}",
        get(0, "tw_k")
    );
}
