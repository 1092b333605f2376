//! `--region W,S,E,N` and the case's `region`: a window of the model grid gives the same cells
//! as the whole grid, across the antimeridian too; bad boxes are named with the grid's extent
//! and the documented exit codes; the manifest records the box, the window and the model grid.
//! Regression tests for [trust] item 7 (a global file's maps were the whole globe).
//!
//! Reference: the run on the whole model grid, read back with the crate's GeoTIFF reader (whose
//! output is checked against GDAL in the geotiff module's tests).

use super::support::{bin, copy_dir, write_case, Synthetic};
use std::path::{Path, PathBuf};
use trackswing::geotiff::read_geotiff;

fn demo_case() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid/case.toml")
}

/// Runs `trackswing run case --out out` with `extra` arguments; stderr on failure.
fn run(case: &Path, out: &Path, extra: &[&str]) -> std::process::Output {
    bin()
        .arg("run")
        .arg(case)
        .arg("--out")
        .arg(out)
        .arg("--quiet")
        .args(extra)
        .output()
        .unwrap()
}

fn ok(o: &std::process::Output) {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn manifest(out: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap()
}

/// The GeoTIFF layers of a run folder, by file name.
fn layers(out: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(out)
        .unwrap()
        .filter_map(|e| e.ok()?.file_name().into_string().ok())
        .filter(|n| n.ends_with(".tif"))
        .collect();
    names.sort();
    names
}

/// Every band of `name` in the window run against the same cells of the whole run: window cell
/// (col, row) is whole-grid cell ((first_col + col) mod nx, first_row + row). Calls `check`
/// with (layer, band, window value, whole value) for every cell.
fn compare(
    window: &Path,
    whole: &Path,
    name: &str,
    (first_col, first_row): (usize, usize),
    mut check: impl FnMut(&str, usize, f32, f32),
) {
    let w = read_geotiff(&window.join(name)).unwrap();
    let f = read_geotiff(&whole.join(name)).unwrap();
    assert_eq!(w.bands.len(), f.bands.len(), "{name}");
    for (b, (wb, fb)) in w.bands.iter().zip(&f.bands).enumerate() {
        for row in 0..w.height {
            for col in 0..w.width {
                let fc = (first_col + col) % f.width;
                check(
                    name,
                    b,
                    wb[row * w.width + col],
                    fb[(first_row + row) * f.width + fc],
                );
            }
        }
    }
}

/// The demo box holding every town and part of the track.
const DEMO_BOX: &str = "-33,44,-22,51.5";

/// Regression, [trust] item 7: a window of the demo without offsets is the same cells of the
/// whole run, bit for bit, in every GeoTIFF layer; the window's geotransform starts at the
/// corner of its first cell; the manifest records the box, the window and the model grid.
#[test]
fn demo_window_without_offsets_equals_the_whole_run_bit_for_bit() {
    let d = tempfile::tempdir().unwrap();
    let (win, whole) = (d.path().join("win"), d.path().join("whole"));
    let zero = ["--cross", "0", "--along", "0"];
    ok(&run(
        &demo_case(),
        &win,
        &[&zero[..], &[&format!("--region={DEMO_BOX}")]].concat(),
    ));
    ok(&run(&demo_case(), &whole, &zero));
    let m = manifest(&win);
    let r = &m["region"];
    assert_eq!(r["region"]["west"], -33.0);
    assert_eq!(r["region"]["north"], 51.5);
    // Demo grid: 128×104 cells of 0.15° × 0.1° from (−35, 52) (demo-grid/case.toml, `gdalinfo`):
    // centres −34.925 + 0.15·c lie in −33…−22 for c = 13…86, 51.95 − 0.1·r in 44…51.5 for
    // r = 5…79.
    assert_eq!(
        (&r["first_col"], &r["cols"], &r["first_row"], &r["rows"]),
        (&13.into(), &74.into(), &5.into(), &75.into())
    );
    assert_eq!(r["wraps"], false);
    assert_eq!(r["model_grid"]["columns"], 128);
    assert_eq!(r["model_grid"]["rows"], 104);
    assert_eq!(
        (&m["grid"]["columns"], &m["grid"]["rows"]),
        (&74.into(), &75.into())
    );
    assert!(manifest(&whole).get("region").is_none());
    let snow = read_geotiff(&win.join("snowfall_baseline.tif")).unwrap();
    let gt = snow.georef.geotransform;
    assert!((gt[0] - (-35.0 + 13.0 * 0.15)).abs() < 1e-9, "{gt:?}");
    assert!((gt[3] - (52.0 - 5.0 * 0.1)).abs() < 1e-9, "{gt:?}");
    let names = layers(&win);
    assert_eq!(names, layers(&whole));
    let mut cells = 0usize;
    let mut snowy = 0usize;
    for name in &names {
        compare(&win, &whole, name, (13, 5), |layer, band, w, f| {
            assert!(
                w.to_bits() == f.to_bits() || (w.is_nan() && f.is_nan()),
                "{layer} band {band}: {w} in the window, {f} in the whole run"
            );
            cells += 1;
            snowy += usize::from(layer == "snowfall_baseline.tif" && w >= 1.0);
        });
    }
    assert!(cells > 74 * 75 * 10, "{cells} cells compared");
    assert!(snowy > 100, "the window holds snow: {snowy} cells ≥ 1 cm");
}

/// Regression, [trust] item 7: with track offsets, a window cell whose shifted source lies in
/// the window has the whole run's value; where it lies beyond the window's edge the scenario
/// is missing there, as at the model grid's own edge (README, "--region"). Source positions are
/// counted from the window's corner in single precision, so the bilinear fractions may differ
/// in the last bits: values agree to 1e-3 cm (a thousandth of the layers' resolution), not bit
/// for bit.
#[test]
fn demo_window_with_offsets_equals_the_whole_run_inside_and_is_missing_past_its_edge() {
    let d = tempfile::tempdir().unwrap();
    let (win, whole) = (d.path().join("win"), d.path().join("whole"));
    let axes = ["--cross", "-60,0,60", "--along", "0"];
    ok(&run(
        &demo_case(),
        &win,
        &[&axes[..], &[&format!("--region={DEMO_BOX}")]].concat(),
    ));
    ok(&run(&demo_case(), &whole, &axes));
    let (mut equal, mut edge, mut differ) = (0usize, 0usize, Vec::new());
    compare(
        &win,
        &whole,
        "snowfall_by_scenario.tif",
        (13, 5),
        |_, band, w, f| match (w.is_nan(), f.is_nan()) {
            (false, false) if (w - f).abs() <= 1e-3 => equal += 1,
            (true, false) => edge += 1,
            (true, true) => {}
            _ => differ.push((band, w, f)),
        },
    );
    assert!(
        differ.is_empty(),
        "{} cells differ: {:?}",
        differ.len(),
        &differ[..differ.len().min(10)]
    );
    // 60 km is about 5 to 8 columns or 5 rows of the demo grid: the shifted scenarios lose a
    // rim of the window, the baseline nothing.
    assert!(edge > 100, "{edge} cells sample past the window's edge");
    assert!(
        equal > 3 * 74 * 75 - edge - 100,
        "{equal} equal, {edge} at the edge"
    );
    let base = read_geotiff(&win.join("snowfall_by_scenario.tif")).unwrap();
    let m = manifest(&win);
    let b = m["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .position(|s| s["baseline"] == true)
        .unwrap();
    assert!(
        base.bands[b].iter().all(|v| !v.is_nan()),
        "the baseline has every cell"
    );
}

/// A 2.5° global grid with columns −180…180 whose storm sits just east of the antimeridian,
/// with the track and a town inside the box 170,40,−150,60.
fn global_case(dir: &Path) -> PathBuf {
    let s = Synthetic {
        nx: 144,
        ny: 72,
        lon0: -178.75,
        lat0: 88.75,
        d: 2.5,
        ..Default::default()
    };
    let case = write_case(dir, &s, "");
    // The synthetic storm's rain sits on row 15 (51.25°N) from column 10 (−153.75°E) on.
    std::fs::write(
        dir.join("track.csv"),
        "time,lat,lon\n2026-01-14T00:00:00Z,50.0,175.0\n2026-01-15T00:00:00Z,52.0,-160.0\n",
    )
    .unwrap();
    std::fs::write(dir.join("towns.csv"), "name,lat,lon\nSeamton,50.0,-175.0\n").unwrap();
    case
}

/// Regression, [trust] item 7: a box across the antimeridian on a −180…180 global grid gives
/// one raster with increasing longitudes (170…210, not two pieces), whose cells are the whole
/// run's cells on both sides of the seam, bit for bit.
#[test]
fn antimeridian_window_of_a_global_grid_is_one_raster_equal_to_the_whole_run() {
    let d = tempfile::tempdir().unwrap();
    let case = global_case(&d.path().join("case"));
    let (win, whole) = (d.path().join("win"), d.path().join("whole"));
    let zero = ["--cross", "0", "--along", "0"];
    ok(&run(
        &case,
        &win,
        &[&zero[..], &["--region=170,40,-150,60"]].concat(),
    ));
    ok(&run(&case, &whole, &zero));
    let r = &manifest(&win)["region"];
    // Centres −178.75 + 2.5·c: 171.25 is c = 140; 171.25…208.75 (= −151.25) is 16 columns;
    // rows of centres 58.75…41.25 are r = 12…19.
    assert_eq!(
        (&r["first_col"], &r["cols"], &r["first_row"], &r["rows"]),
        (&140.into(), &16.into(), &12.into(), &8.into())
    );
    assert_eq!(r["wraps"], true);
    let snow = read_geotiff(&win.join("snowfall_baseline.tif")).unwrap();
    assert_eq!((snow.width, snow.height), (16, 8));
    assert_eq!(snow.georef.geotransform[0], 170.0);
    assert_eq!(snow.georef.geotransform[1], 2.5);
    let mut wet = 0usize;
    for name in layers(&win) {
        compare(&win, &whole, &name, (140, 12), |layer, band, w, f| {
            assert!(
                w.to_bits() == f.to_bits() || (w.is_nan() && f.is_nan()),
                "{layer} band {band}: {w} in the window, {f} in the whole run"
            );
            wet += usize::from(layer == "liquid_baseline.tif" && w > 0.1);
        });
    }
    assert!(
        wet > 5,
        "the window holds the storm east of the seam: {wet} wet cells"
    );
}

/// Regression, [trust] item 7: a box that misses the grid or is not a box is refused naming the
/// box and the grid's extent: exit 2 as an option, 3 in a case file, nothing written.
#[test]
fn bad_boxes_exit_2_as_an_option_and_3_in_a_case_file() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    for (value, says) in [
        ("100,10,110,20", "lon -34.925…-15.875, lat 41.650…51.950"),
        ("-30,50,-20,45", "south (50) must be less than north (45)"),
        ("-20,45,-30,50", "west (-20) must be less than east (-30)"),
        ("-30,45,-20", "four numbers"),
        ("-30,45.01,-20,45.02", "no row of cell centres"),
    ] {
        let o = run(&demo_case(), &out, &[&format!("--region={value}")]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{value}: {err}");
        assert!(
            err.contains("--region") && err.contains(says),
            "{value}: {err}"
        );
        assert!(!out.exists(), "{value}: nothing may be written");
    }
    let grid = d.path().join("grid");
    copy_demo(&grid);
    for (value, says) in [
        ("[100, 10, 110, 20]", "lon -34.925…-15.875"),
        (
            "[-30, 50, -20, 45]",
            "south (50) must be less than north (45)",
        ),
    ] {
        let case = grid.join("bad.toml");
        std::fs::write(&case, region_case(&format!("region = {value}"))).unwrap();
        let o = run(&case, &out, &[]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{value}: {err}");
        assert!(
            err.contains("bad.toml") && err.contains("region"),
            "{value}: {err}"
        );
        assert!(err.contains(says), "{value}: {err}");
        assert!(!out.exists(), "{value}: nothing may be written");
    }
}

/// Regression, [trust] item 7: the case's `region` is read, and `--region` overrides it.
#[test]
fn case_region_is_read_and_the_option_overrides_it() {
    let d = tempfile::tempdir().unwrap();
    let grid = d.path().join("grid");
    copy_demo(&grid);
    let case = grid.join("region.toml");
    std::fs::write(&case, region_case("region = [-33, 44, -22, 51.5]")).unwrap();
    let zero = ["--cross", "0", "--along", "0"];
    let from_case = d.path().join("case");
    ok(&run(&case, &from_case, &zero));
    assert_eq!(manifest(&from_case)["region"]["cols"], 74);
    let from_flag = d.path().join("flag");
    ok(&run(
        &case,
        &from_flag,
        &[&zero[..], &["--region=-32.5,44,-22,51.5"]].concat(),
    ));
    let r = &manifest(&from_flag)["region"];
    assert_eq!(r["region"]["west"], -32.5);
    // Centres −34.925 + 0.15·c ≥ −32.5 from c = 17 (−32.375) to 86 (−22.025).
    assert_eq!((&r["first_col"], &r["cols"]), (&17.into(), &70.into()));
}

/// The demo case text with `line` added at the top level.
fn region_case(line: &str) -> String {
    let text = std::fs::read_to_string(demo_case()).unwrap();
    let (head, rest) = text.split_once("[[member]]").unwrap();
    format!("{head}{line}\n\n[[member]]{rest}")
}

fn copy_demo(to: &Path) {
    let from = demo_case().parent().unwrap().to_path_buf();
    copy_dir(&from, to);
}

/// Regression, [trust] item 9: a global grid with rows centred at ±90° (2.5°, 144×73, as global
/// models write them) gave GeoTIFFs reaching ±91.25°. The pole rows are left out of every layer,
/// with a warning, and the other rows are the model's own cells. GeoTIFF's raster space: the
/// geotransform's origin is the outer corner of the top-left cell (OGC 19-008r4, §B.4).
#[test]
fn pole_rows_of_a_global_grid_are_left_out_so_layers_stay_within_90_degrees() {
    let d = tempfile::tempdir().unwrap();
    let s = Synthetic {
        nx: 144,
        ny: 73,
        lon0: -180.0,
        lat0: 90.0,
        d: 2.5,
        ..Default::default()
    };
    let case = write_case(&d.path().join("case"), &s, "");
    let out = d.path().join("out");
    ok(&run(&case, &out, &["--cross", "0", "--along", "0"]));
    let snow = read_geotiff(&out.join("liquid_baseline.tif")).unwrap();
    assert_eq!((snow.width, snow.height), (144, 71));
    let gt = snow.georef.geotransform;
    // Rows centred 87.5…−87.5 with edges 88.75…−88.75.
    assert_eq!(gt[3], 88.75);
    assert_eq!(gt[3] + 71.0 * gt[5], -88.75);
    let m = manifest(&out);
    assert_eq!(m["region"]["first_row"], 1);
    assert_eq!(m["region"]["rows"], 71);
    let warned = m["warnings"].as_array().unwrap().iter().any(|w| {
        w.as_str()
            .unwrap()
            .starts_with("the model grid's 2 row(s) centred at the poles are left out")
    });
    assert!(warned, "{:?}", m["warnings"]);
    // The kept rows are the model's rows 1…71: the liquid (mm) is the sum of the steps'
    // precipitation (kg m⁻² = mm) of the same cell.
    let mut sum = vec![0.0f64; 144 * 73];
    for k in 0..s.steps {
        let step = read_geotiff(&d.path().join(format!("case/f/s_{k:02}.tif"))).unwrap();
        let b = step
            .descriptions
            .iter()
            .position(|n| n == "precipitation_amount")
            .expect("the synthetic step holds its precipitation");
        for (t, v) in sum.iter_mut().zip(&step.bands[b]) {
            *t += f64::from(*v);
        }
    }
    let liquid = &snow.bands[0];
    let mut wet = 0;
    for r in 0..71 {
        for c in 0..144 {
            let (w, f) = (f64::from(liquid[r * 144 + c]), sum[(r + 1) * 144 + c]);
            assert!(
                (w - f).abs() < 1e-3,
                "row {r} col {c}: {w} mm, the model {f} mm"
            );
            wet += usize::from(w > 0.1);
        }
    }
    assert!(
        wet > 20,
        "the synthetic storm is on the grid: {wet} wet cells"
    );
}
