//! Values at a point: towns across the antimeridian on a global grid, a town outside the grid,
//! and `sounding` against the towns table. Regressions for [trust] item 6 (towns near 180° were
//! refused on a global grid, one town off the grid stopped the run, and `sounding` took the
//! nearest cell while towns.csv interpolated, so the same town and offset gave two totals).

use super::support::{bin, write_case, Synthetic};
use std::path::Path;
use trackswing::case::{Case, Overrides};
use trackswing::engine::run;
use trackswing::geotiff::{Crs, Georef};
use trackswing::grid::{Bilinear, Grid};
use trackswing::progress::Silent;
use trackswing::scenario::Scenario;
use trackswing::sounding::{sounding, SoundingRequest, StepChoice};

/// Hand bilinear interpolation (Press et al. 2007, *Numerical Recipes*, 3rd ed., eq. 3.6.5)
/// between the values at the corners (north-west, north-east, south-west, south-east) at
/// fractions `fx` east and `fy` south.
fn bilinear(nw: f64, ne: f64, sw: f64, se: f64, fx: f64, fy: f64) -> f64 {
    (1.0 - fx) * (1.0 - fy) * nw + fx * (1.0 - fy) * ne + (1.0 - fx) * fy * sw + fx * fy * se
}

/// A global grid of 2.5° cells on −180…180° (cell centres −178.75…178.75), 30 rows from
/// 36.25°N to 36.25°S, with the synthetic storm near its western edge.
fn global() -> Synthetic {
    Synthetic {
        nx: 144,
        ny: 30,
        lon0: -178.75,
        lat0: 36.25,
        d: 2.5,
        ..Default::default()
    }
}

/// Same cells, weights equal to rounding.
fn same(a: Bilinear, b: Bilinear) {
    for (x, y) in a.cells.iter().zip(&b.cells) {
        assert!(x.0 == y.0 && (x.1 - y.1).abs() < 1e-9, "{a:?} vs {b:?}");
    }
}

fn load(case: &Path, over: Overrides) -> Case {
    Case::load(case, &over).unwrap()
}

fn baseline_only() -> Overrides {
    Overrides {
        cross: Some("0".into()),
        along: Some("0".into()),
        ..Default::default()
    }
}

#[test]
fn towns_near_the_antimeridian_interpolate_between_the_last_and_first_column() {
    let d = tempfile::tempdir().unwrap();
    let s = global();
    let case = write_case(d.path(), &s, "");
    // Both between the last column's centre (178.75°) and the first's (−178.75° = 181.25°),
    // half way between rows 14 (1.25°N) and 15 (1.25°S).
    std::fs::write(
        d.path().join("towns.csv"),
        "name,lat,lon\nEast of 179,0.0,179.0\nWest of 180,0.0,-179.9\n",
    )
    .unwrap();
    let c = load(&case, baseline_only());
    let r = run(&c, 1, &Silent).unwrap();
    assert!(r.grid.wraps());
    assert_eq!(r.towns.len(), 2, "both towns lie inside a global grid");
    let towns = trackswing::summarise::towns(&r);
    let t = &r.totals[r.baseline];
    let nx = s.nx;
    let at = |row: usize, col: usize| t.liquid[row * nx + col] as f64;
    for (town, lon) in towns.iter().zip([179.0, -179.9]) {
        // Degrees east of the last column's centre, wrapped to 0…360.
        let fx = (lon - 178.75f64).rem_euclid(360.0) / 2.5;
        let want = bilinear(
            at(14, nx - 1),
            at(14, 0),
            at(15, nx - 1),
            at(15, 0),
            fx,
            0.5,
        );
        let got = town.liquid[r.baseline] as f64;
        assert!(
            want > 0.1,
            "{}: the storm reaches the first column",
            town.name
        );
        assert!(
            (got - want).abs() <= 1e-5 * want,
            "{}: {got} mm, hand bilinear {want} mm",
            town.name
        );
    }
    // The same place given on 0…360°.
    same(
        r.grid.bilinear_at(181.0, 0.0).unwrap(),
        r.grid.bilinear_at(-179.0, 0.0).unwrap(),
    );
}

#[test]
fn a_grid_on_0_to_360_wraps_between_357_5_and_0() {
    // Cell centres 0, 2.5, …, 357.5°E, as a global model's GRIB2 grid starting at 0°.
    let georef = Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: [-1.25, 2.5, 0.0, 1.25, 0.0, -2.5],
    };
    let g = Grid::new(144, 2, georef).unwrap();
    assert!(g.wraps());
    // Half way between the two rows (0° and 2.5°S).
    let b = g.bilinear_at(-1.0, -1.25).unwrap();
    let (w, e) = (b.cells[0], b.cells[1]);
    assert_eq!(
        (w.0, e.0),
        (143, 0),
        "between the last and the first column"
    );
    // 359°E is 1.5° east of 357.5°: 0.6 of a cell.
    assert!((e.1 - 0.6 * 0.5).abs() < 1e-12 && (w.1 - 0.4 * 0.5).abs() < 1e-12);
    same(g.bilinear_at(359.0, -1.25).unwrap(), b);
    // A regional grid (not spanning 360°) does not wrap.
    let georef = Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: [-1.25, 2.5, 0.0, 1.25, 0.0, -2.5],
    };
    let g = Grid::new(100, 2, georef).unwrap();
    assert!(!g.wraps());
    assert!(g.bilinear_at(-1.0, -1.25).is_none());
}

#[test]
fn a_town_outside_the_grid_is_left_out_with_a_warning_and_the_others_computed() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(d.path(), &Synthetic::default(), "");
    std::fs::write(
        d.path().join("towns.csv"),
        "name,lat,lon\nMidpoint,0.0,12.0\nFar Away,30,11\nEdge,1.0,11.0\n",
    )
    .unwrap();
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--cross", "-20,0,20", "--report", "--threads", "1"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let out = d.path().join("out");
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let warned: Vec<&str> = m["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .filter(|w| w.contains("Far Away"))
        .collect();
    assert_eq!(warned.len(), 1, "{:?}", m["warnings"]);
    assert!(warned[0].contains("outside the grid") && warned[0].contains("lat"));
    let report = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        report.contains("Far Away"),
        "the report names the town left out"
    );
    let towns = std::fs::read_to_string(out.join("towns.csv")).unwrap();
    assert!(!towns.contains("Far Away"));
    let mut rows = csv::Reader::from_reader(towns.as_bytes());
    let names: Vec<String> = rows.records().map(|r| r.unwrap()[0].to_string()).collect();
    assert_eq!(names, ["Midpoint", "Edge"]);
    for r in csv::Reader::from_reader(towns.as_bytes()).records() {
        let r = r.unwrap();
        let baseline: f64 = r[3].parse().unwrap();
        assert!(baseline.is_finite(), "{} has a value", &r[0]);
    }
}

#[test]
fn the_sounding_gives_the_towns_table_total_for_the_same_town_and_offset() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(d.path(), &Synthetic::default(), "");
    // Off every cell centre, on the cold side of the synthetic storm: column 20.4, row 8.7.
    let (lat, lon) = (0.63, 12.04);
    std::fs::write(
        d.path().join("towns.csv"),
        format!("name,lat,lon\nOffside,{lat},{lon}\n"),
    )
    .unwrap();
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--cross", "-20,0,20", "--threads", "1"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let table = std::fs::read_to_string(d.path().join("out/towns.csv")).unwrap();
    let mut rdr = csv::Reader::from_reader(table.as_bytes());
    let header = rdr.headers().unwrap().clone();
    let row = rdr.records().next().unwrap().unwrap();
    let col = header
        .iter()
        .position(|h| h.starts_with("snow_cm_c+20"))
        .expect("a column for the +20 km scenario");
    let o = bin()
        .arg("sounding")
        .arg(&case)
        .args([
            "--at",
            &format!("{lat},{lon}"),
            "--cross",
            "20",
            "--step",
            "3",
        ])
        .arg("--json")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let snow = j["totals"]["snowfall_cm"].as_f64().unwrap();
    assert!(snow > 0.05, "snow at the town: {snow} cm");
    assert_eq!(format!("{snow:.1}"), &row[col], "sounding vs towns.csv");
    let cells = j["cells"].as_array().unwrap();
    let weights: Vec<f64> = cells
        .iter()
        .map(|c| c["weight"].as_f64().unwrap())
        .collect();
    // Column 20.4, row 8.7: weights (1 − fx)(1 − fy) … by hand.
    let want = [0.6 * 0.3, 0.4 * 0.3, 0.6 * 0.7, 0.4 * 0.7];
    for (w, h) in weights.iter().zip(want) {
        assert!((w - h).abs() < 1e-9, "{weights:?} vs {want:?}");
    }

    // In the library, to the last bit of the f32 the table holds.
    let c = load(
        &case,
        Overrides {
            cross: Some("-20,0,20".into()),
            ..Default::default()
        },
    );
    let r = run(&c, 1, &Silent).unwrap();
    let si = r.scenarios.iter().position(|s| s.cross_km == 20.0).unwrap();
    let town = &trackswing::summarise::towns(&r)[0];
    let snd = sounding(
        &c,
        &SoundingRequest {
            lat,
            lon,
            step: Some(3),
            scenario: r.scenarios[si],
        },
    )
    .unwrap();
    assert_eq!(snd.totals.snowfall_cm, town.snowfall[si] as f64 / 10.0);
    assert_eq!(snd.totals.liquid_mm, town.liquid[si] as f64);
}

#[test]
fn the_sounding_shows_the_wettest_step_by_default() {
    let d = tempfile::tempdir().unwrap();
    let s = Synthetic::default();
    let case = write_case(d.path(), &s, "");
    let c = load(&case, baseline_only());
    // Column 12.3, row 15.4: the storm's precipitation peak passes column 10 + 5k at step k + 1
    // (support::write_case), so this point is wettest at step 1 of 3.
    let (col, row) = (12.3, 15.4);
    let (lon, lat) = (s.lon0 + s.d * col, s.lat0 - s.d * row);
    let snd = sounding(
        &c,
        &SoundingRequest {
            lat,
            lon,
            step: None,
            scenario: Scenario::offset(0.0, 0.0),
        },
    )
    .unwrap();
    // The input's precipitation at the four cells, interpolated by hand.
    let precip = |k: usize, c: f64, r: f64| {
        let dx = (c - (10.0 + 5.0 * k as f64)) / 12.0;
        let dy = (r - 15.0) / 10.0;
        3.0 * (-(dx * dx + dy * dy)).exp()
    };
    let hand: Vec<f64> = (0..s.steps)
        .map(|k| {
            bilinear(
                precip(k, 12.0, 15.0),
                precip(k, 13.0, 15.0),
                precip(k, 12.0, 16.0),
                precip(k, 13.0, 16.0),
                0.3,
                0.4,
            )
        })
        .collect();
    for (got, want) in snd.step_precip_mm.iter().zip(&hand) {
        assert!(
            (got - want).abs() < 1e-5,
            "{:?} vs {hand:?}",
            snd.step_precip_mm
        );
    }
    let wettest = 1
        + (0..hand.len())
            .max_by(|a, b| hand[*a].total_cmp(&hand[*b]))
            .unwrap();
    assert_eq!(wettest, 1);
    assert_eq!((snd.step, snd.step_choice), (wettest, StepChoice::Wettest));
    // Through the binary, the choice is said.
    let o = bin()
        .arg("sounding")
        .arg(&case)
        .args(["--at", &format!("{lat},{lon}")])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(
        text.contains("step 1 of 3 (the wettest at this point"),
        "{text}"
    );
}

#[test]
fn the_sounding_reads_model_files_as_run_does() {
    let d = tempfile::tempdir().unwrap();
    let demo = d.path().join("g");
    let o = bin()
        .args(["make-demo", "--grib2", "--out"])
        .arg(&demo)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // Brinmouth, a town of the demo's towns.csv.
    let at = "45.47,-30.43";
    let json = |args: &[&std::ffi::OsStr]| -> serde_json::Value {
        let o = bin()
            .arg("sounding")
            .args(args)
            .args(["--at", at, "--cross", "30", "--json"])
            .args(["--precip-type", "energy-area"])
            .args(["--snow-ratio", "max-column-temperature"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        serde_json::from_slice(&o.stdout).unwrap()
    };
    let files = json(&[
        demo.join("fields").as_os_str(),
        "--track".as_ref(),
        demo.join("track.csv").as_os_str(),
    ]);
    let case = json(&[demo.join("case.toml").as_os_str()]);
    assert!(files["totals"]["liquid_mm"].as_f64().unwrap() > 0.0);
    assert_eq!(files["totals"], case["totals"]);
    assert_eq!(files["step"], case["step"]);
    assert_eq!(files["step_choice"], "wettest");
    assert_eq!(files["cells"].as_array().unwrap().len(), 4);
}
