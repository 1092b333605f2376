//! GRIB2 input against independent references: GDAL's GRIB driver (values, grid coordinates,
//! valid times, read with GRIB_NORMALIZE_UNITS=NO so it keeps GRIB's units) and PROJ through
//! `gdaltransform` (Lambert and polar stereographic cell centres). Files are written with the
//! crate's own GRIB2 writer (src/demo/grib2.rs), which GDAL reading them also checks.
//!
//! Reference commands, per file F and band B:
//! `GRIB_NORMALIZE_UNITS=NO gdal_translate -q -of XYZ -b B F /vsistdout/` (values, top row
//! first), `GRIB_NORMALIZE_UNITS=NO gdalinfo -json F` (geotransform, nodata, GRIB_VALID_TIME),
//! `gdaltransform -t_srs '+proj=longlat +R=6371229 +no_defs' F` fed "col+0.5 row+0.5" lines.

use super::reference::gdal::gdal_available;
use chrono::{TimeZone, Utc};
use std::path::Path;
use std::process::Command;
use trackswing::demo::grib2::{message, BitMap, FieldDef, GridDef};
use trackswing::read::grib::catalog::Catalog;
use trackswing::read::grib::decode::decode;

fn gdal(cmd: &str, args: &[&str], stdin: Option<&str>) -> String {
    use std::io::Write;
    let mut c = Command::new(cmd);
    c.args(args).env("GRIB_NORMALIZE_UNITS", "NO");
    c.stdin(std::process::Stdio::piped());
    c.stdout(std::process::Stdio::piped());
    c.stderr(std::process::Stdio::piped());
    let mut child = c.spawn().unwrap_or_else(|e| panic!("{cmd}: {e}"));
    if let Some(s) = stdin {
        child.stdin.take().unwrap().write_all(s.as_bytes()).unwrap();
    } else {
        drop(child.stdin.take());
    }
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{cmd} {args:?}: {stderr}");
    assert!(!stderr.contains("ERROR"), "{cmd} {args:?}: {stderr}");
    String::from_utf8(out.stdout).unwrap()
}

/// GDAL's values of band `b` (1-based), top row first, and its nodata value.
fn gdal_values(path: &Path, b: usize) -> Vec<(f64, f64, f64)> {
    gdal(
        "gdal_translate",
        &[
            "-q",
            "-of",
            "XYZ",
            "-b",
            &b.to_string(),
            path.to_str().unwrap(),
            "/vsistdout/",
        ],
        None,
    )
    .lines()
    .map(|l| {
        let v: Vec<f64> = l.split_whitespace().map(|x| x.parse().unwrap()).collect();
        (v[0], v[1], v[2])
    })
    .collect()
}

fn gdal_json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&gdal("gdalinfo", &["-json", path.to_str().unwrap()], None)).unwrap()
}

fn reference() -> chrono::DateTime<Utc> {
    Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap()
}

/// A smooth field with missing points, in scanning order (its values do not depend on order).
fn field(n: usize, base: f32, holes: bool) -> Vec<f32> {
    (0..n)
        .map(|i| {
            if holes && i % 11 == 3 {
                f32::NAN
            } else {
                base + 7.5 * ((i as f32) * 0.37).sin()
            }
        })
        .collect()
}

/// Writes one file with two messages: temperature at 850 hPa (with holes, explicit bit map)
/// followed in the same message by 850 hPa relative humidity reusing that bit map (254), then
/// an accumulation (template 4.8) in a second message.
fn write_file(path: &Path, grid: &GridDef) -> (Vec<f32>, Vec<f32>, Vec<f32>) {
    let n = grid.len();
    let t = field(n, 265.0, true);
    let rh: Vec<f32> = t
        .iter()
        .map(|v| {
            if v.is_nan() {
                f32::NAN
            } else {
                70.0 + (v - 265.0)
            }
        })
        .collect();
    let tp: Vec<f32> = (0..n).map(|i| (i % 17) as f32 * 0.25).collect();
    let base = FieldDef {
        param: (0, 0, 0),
        surface: (100, 0, 85_000),
        reference: reference(),
        forecast_hours: 6,
        accumulation_hours: None,
        decimal_scale: 2,
        values: &t,
        bitmap: BitMap::Auto,
    };
    let mut bytes = message(
        grid,
        &[
            base.clone(),
            FieldDef {
                param: (0, 1, 1),
                values: &rh,
                bitmap: BitMap::Previous,
                ..base.clone()
            },
        ],
    );
    bytes.extend(message(
        grid,
        &[FieldDef {
            param: (0, 1, 8),
            surface: (1, 0, 0),
            forecast_hours: 0,
            accumulation_hours: Some(6),
            decimal_scale: 3,
            values: &tp,
            ..base
        }],
    ));
    std::fs::write(path, bytes).unwrap();
    (t, rh, tp)
}

/// Decodes every entry of `path` with trackswing: (grid, values per entry in file order).
fn trackswing_read(path: &Path) -> (trackswing::grid::Grid, Vec<Vec<f32>>, Catalog) {
    let cat = Catalog::scan(&[path.to_path_buf()]).unwrap();
    let p = cat.grids[0].placement.clone().unwrap();
    let vals = cat
        .entries
        .iter()
        .map(|e| {
            assert!(e.problem.is_none(), "{:?}", e.problem);
            decode(path, &e.raw, p.order.len(), &p.order).unwrap()
        })
        .collect();
    (p.grid, vals, cat)
}

/// Value by value against GDAL, and the cell coordinates GDAL reports (lon modulo 360 on
/// lat/lon grids).
fn compare_with_gdal(path: &Path, lonlat: bool) {
    let (grid, vals, cat) = trackswing_read(path);
    let info = gdal_json(path);
    let bands = info["bands"].as_array().unwrap();
    assert_eq!(bands.len(), vals.len());
    assert_eq!(info["size"][0].as_u64().unwrap() as usize, grid.nx);
    assert_eq!(info["size"][1].as_u64().unwrap() as usize, grid.ny);
    for (b, v) in vals.iter().enumerate() {
        let nodata = bands[b]["noDataValue"].as_f64();
        let g = gdal_values(path, b + 1);
        assert_eq!(g.len(), v.len());
        for (i, ((x, y, gv), ours)) in g.iter().zip(v).enumerate() {
            // GDAL 3.6 fills the points a bit map of indicator 254 (previously defined) leaves
            // out with its GRIB missing value 9999 but declares no nodata for that band.
            let gdal_missing = Some(*gv) == nodata || (nodata.is_none() && *gv == 9999.0);
            if gdal_missing {
                assert!(
                    ours.is_nan(),
                    "band {} cell {i}: GDAL missing, trackswing {ours}",
                    b + 1
                );
            } else {
                assert!(
                    (f64::from(*ours) - gv).abs() <= 1e-4 * gv.abs().max(1.0),
                    "band {} cell {i}: GDAL {gv}, trackswing {ours}",
                    b + 1
                );
            }
            if lonlat {
                let dlon = (grid.lon()[i] - x).rem_euclid(360.0);
                assert!(
                    dlon.min(360.0 - dlon) < 1e-6,
                    "cell {i}: lon {} vs GDAL {x}",
                    grid.lon()[i]
                );
                assert!(
                    (grid.lat()[i] - y).abs() < 1e-6,
                    "cell {i}: lat {} vs GDAL {y}",
                    grid.lat()[i]
                );
            }
        }
        let valid: i64 = bands[b]["metadata"][""]["GRIB_VALID_TIME"]
            .as_str()
            .unwrap()
            .split_whitespace()
            .next()
            .unwrap()
            .parse()
            .unwrap();
        assert_eq!(
            cat.entries[b].product.valid.timestamp(),
            valid,
            "band {}",
            b + 1
        );
    }
}

#[test]
fn latlon_grids_match_gdal_in_every_scanning_order_gdal_reads() {
    if !gdal_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    // Regional grid across the prime meridian stored as 350…20°E, rows north to south; and
    // the same rows stored south to north (scanning mode bit 2, flag table 3.4).
    for (name, scan, la1) in [("ns.grib2", 0u8, 60.0), ("sn.grib2", 0x40, 40.0)] {
        let grid = GridDef::LatLon {
            ni: 13,
            nj: 11,
            la1,
            lo1: 350.0,
            di: 2.5,
            dj: 2.0,
            scan,
        };
        let p = d.path().join(name);
        write_file(&p, &grid);
        compare_with_gdal(&p, true);
        let (g, _, _) = trackswing_read(&p);
        // The crate's convention: row 0 north, longitudes in −180…180 (350°E becomes −10°).
        assert!((g.lon()[0] + 10.0).abs() < 1e-9 && (g.lat()[0] - 60.0).abs() < 1e-9);
    }
}

/// Packings other than simple packing, written by GDAL (`gdal_translate -of GRIB -co
/// DATA_ENCODING=…`, with its own choice of reference value and scale factors): complex packing
/// with and without spatial differencing (5.2/5.3, missing points by missing-value management),
/// PNG (5.41), JPEG 2000 (5.40) and IEEE floating point (5.4), decoded by trackswing value by
/// value as GDAL reads them back. Two sources: three fields with missing points (bit maps of
/// indicator 0 and 254), and a whole step of the demo storm (20 fields, none missing). GDAL 3.6
/// keeps missing points only with complex packing ("non-COMPLEX_PACKING DATA_ENCODING cannot
/// preserve nodata": it writes a fill value instead), so the other packings are checked on the
/// whole step.
#[test]
fn packings_written_by_gdal_decode_as_gdal_reads_them() {
    if !gdal_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    let holes = d.path().join("holes.grib2");
    write_file(
        &holes,
        &GridDef::LatLon {
            ni: 13,
            nj: 11,
            la1: 60.0,
            lo1: 350.0,
            di: 2.5,
            dj: 2.0,
            scan: 0,
        },
    );
    let demo = d.path().join("demo");
    trackswing::demo::grib2_case::write_case_grib2(
        &demo,
        // 1.2° × 0.8° cells: steps GRIB2 stores exactly in micro-degrees.
        &trackswing::demo::DemoSpec::scaled(16, 13, 2, 6, 5),
    )
    .unwrap();
    let whole = demo.join("fields/step_001.grib2");
    for (name, options, templates, sources) in [
        (
            "complex",
            vec!["DATA_ENCODING=COMPLEX_PACKING"],
            vec![2u16, 3],
            vec![&holes, &whole],
        ),
        (
            "complex_sd2",
            vec![
                "DATA_ENCODING=COMPLEX_PACKING",
                "SPATIAL_DIFFERENCING_ORDER=2",
            ],
            vec![3],
            // GDAL 3.6 fails to pack some of the demo's fields this way ("Error while packing").
            vec![&holes],
        ),
        ("png", vec!["DATA_ENCODING=PNG"], vec![41], vec![&whole]),
        (
            "jpeg2000",
            vec!["DATA_ENCODING=JPEG2000"],
            vec![40],
            vec![&whole],
        ),
        (
            "ieee",
            vec!["DATA_ENCODING=IEEE_FLOATING_POINT"],
            vec![4],
            vec![&whole],
        ),
    ] {
        for src in sources {
            let dst = d.path().join(format!(
                "{name}_{}",
                src.file_name().unwrap().to_str().unwrap()
            ));
            let mut args = vec!["-q", "-of", "GRIB"];
            for o in &options {
                args.extend(["-co", o]);
            }
            args.extend([src.to_str().unwrap(), dst.to_str().unwrap()]);
            gdal("gdal_translate", &args, None);
            let (_, _, cat) = trackswing_read(&dst);
            let (_, _, original) = trackswing_read(src);
            assert_eq!(cat.entries.len(), original.entries.len(), "{name}");
            for e in &cat.entries {
                assert!(
                    templates.contains(&e.packing),
                    "{name}: GDAL wrote template 5.{}",
                    e.packing
                );
            }
            compare_with_gdal(&dst, true);
        }
    }
}

#[test]
fn global_grid_is_rotated_to_start_at_180_west() {
    let d = tempfile::tempdir().unwrap();
    let grid = GridDef::LatLon {
        ni: 72,
        nj: 5,
        la1: 10.0,
        lo1: 0.0,
        di: 5.0,
        dj: 5.0,
        scan: 0,
    };
    let p = d.path().join("global.grib2");
    let (t, _, _) = write_file(&p, &grid);
    let (g, vals, _) = trackswing_read(&p);
    assert_eq!(g.lon()[0], -180.0);
    assert_eq!(g.lon()[71], 175.0);
    // The value stored for 180°E (column 36 of the file's first row) is now column 0.
    let (a, b) = (vals[0][0], t[36]);
    assert!(
        a.is_nan() && b.is_nan() || (a - b).abs() < 0.01,
        "{a} vs {b}"
    );
    // A point given as 190°E is found at −170°.
    let (c, _) = g.index_of(190.0, 5.0).unwrap();
    assert!((c - 2.0).abs() < 1e-9);
}

fn worst_metres(grid: &trackswing::grid::Grid, lonlat: &str) -> f64 {
    let mut worst = 0.0f64;
    for (i, l) in lonlat.lines().enumerate() {
        let v: Vec<f64> = l.split_whitespace().map(|x| x.parse().unwrap()).collect();
        let dn = (grid.lat()[i] - v[1]).to_radians() * 6_371_229.0;
        let de = (grid.lon()[i] - v[0]).to_radians() * 6_371_229.0 * v[1].to_radians().cos();
        worst = worst.max(dn.hypot(de));
    }
    worst
}

/// Cell centres against PROJ, two ways. (1) GDAL's whole chain: `gdaltransform` on the file
/// turns pixel centres into lon/lat. GDAL 3.6 places the first grid point of a projected grid
/// at the bottom row whatever the scanning mode, which WMO-No. 306 (flag table 3.4 and the
/// template notes: "La1 — latitude of first grid point") contradicts for grids stored north to
/// south, so this check runs on grids scanned south to north (bit 2 set, as regional models
/// deliver them). (2) Any scanning mode: the projection GDAL reads from the file
/// (`gdalsrsinfo -o proj4`), PROJ's position of the first grid point, the WMO placement of the
/// others at multiples of Dx, Dy from it, and PROJ's inverse for each centre.
fn centres_match_proj(path: &Path, la1: f64, lo1: f64, dx: f64, dy: f64, scan: u8) {
    let (grid, _, _) = trackswing_read(path);
    let ll = "+proj=longlat +R=6371229 +no_defs";
    if scan & 0x40 != 0 {
        let mut input = String::new();
        for r in 0..grid.ny {
            for c in 0..grid.nx {
                input.push_str(&format!("{} {}\n", c as f64 + 0.5, r as f64 + 0.5));
            }
        }
        let out = gdal(
            "gdaltransform",
            &["-t_srs", ll, path.to_str().unwrap()],
            Some(&input),
        );
        let w = worst_metres(&grid, &out);
        eprintln!(
            "{}: worst cell centre vs GDAL/PROJ {w:.2e} m",
            path.display()
        );
        assert!(
            w < 1.0,
            "{}: worst cell centre differs from GDAL/PROJ by {w} m",
            path.display()
        );
    }
    let proj = gdal(
        "gdalsrsinfo",
        &["-o", "proj4", path.to_str().unwrap()],
        None,
    );
    let proj = proj.trim();
    let first = gdal(
        "gdaltransform",
        &["-s_srs", ll, "-t_srs", proj],
        Some(&format!("{lo1} {la1}\n")),
    );
    let xy: Vec<f64> = first
        .split_whitespace()
        .map(|x| x.parse().unwrap())
        .collect();
    let north_up = scan & 0x40 == 0;
    let mut input = String::new();
    for r in 0..grid.ny {
        for c in 0..grid.nx {
            let j = if north_up { r } else { grid.ny - 1 - r } as f64;
            let y = if north_up {
                xy[1] - j * dy
            } else {
                xy[1] + j * dy
            };
            input.push_str(&format!("{} {y}\n", xy[0] + c as f64 * dx));
        }
    }
    let out = gdal(
        "gdaltransform",
        &["-s_srs", proj, "-t_srs", ll],
        Some(&input),
    );
    let w = worst_metres(&grid, &out);
    eprintln!("{}: worst cell centre vs PROJ {w:.2e} m", path.display());
    assert!(
        w < 1.0,
        "{}: worst cell centre differs from PROJ by {w} m",
        path.display()
    );
}

#[test]
fn lambert_grid_matches_gdal_values_and_proj_centres() {
    if !gdal_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("lcc.grib2");
    let grid = GridDef::Lambert {
        nx: 24,
        ny: 18,
        la1: 33.0,
        lo1: 250.0,
        lad: 38.5,
        lov: 262.5,
        dx: 30_000.0,
        dy: 30_000.0,
        latin1: 38.5,
        latin2: 38.5,
        scan: 0x40,
    };
    write_file(&p, &grid);
    compare_with_gdal(&p, false);
    centres_match_proj(&p, 33.0, 250.0, 30_000.0, 30_000.0, 0x40);
    let p2 = d.path().join("lcc2.grib2");
    let secant = GridDef::Lambert {
        nx: 24,
        ny: 18,
        la1: 50.0,
        lo1: 250.0,
        lad: 30.0,
        lov: 262.5,
        dx: 30_000.0,
        dy: 30_000.0,
        latin1: 30.0,
        latin2: 50.0,
        scan: 0,
    };
    write_file(&p2, &secant);
    compare_with_gdal(&p2, false);
    centres_match_proj(&p2, 50.0, 250.0, 30_000.0, 30_000.0, 0);
}

#[test]
fn polar_stereographic_grid_matches_gdal_values_and_proj_centres() {
    if !gdal_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("ps.grib2");
    let grid = GridDef::PolarStereographic {
        nx: 20,
        ny: 16,
        la1: 45.0,
        lo1: 320.0,
        lad: 60.0,
        lov: 340.0,
        dx: 40_000.0,
        dy: 40_000.0,
        scan: 0x40,
    };
    write_file(&p, &grid);
    compare_with_gdal(&p, false);
    centres_match_proj(&p, 45.0, 320.0, 40_000.0, 40_000.0, 0x40);
}

#[test]
fn projected_metric_moves_one_km() {
    // A displacement of 1 km east or north through a Lambert cell's metric lands 1 km away
    // (Karney 2013 geodesics, geo's `Geodesic`), within 0.5 % (the metric is WGS 84 while the
    // grid's sphere differs by that much).
    use geo::{Distance, Geodesic, Point};
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("lcc.grib2");
    let grid = GridDef::Lambert {
        nx: 30,
        ny: 25,
        la1: 30.0,
        lo1: 240.0,
        lad: 40.0,
        lov: 260.0,
        dx: 25_000.0,
        dy: 25_000.0,
        latin1: 30.0,
        latin2: 50.0,
        scan: 0x40,
    };
    write_file(&p, &grid);
    let (g, _, _) = trackswing_read(&p);
    for &cell in &[0usize, 377, g.len() - 1] {
        let m = g.metric()[cell];
        let (c, r) = ((cell % g.nx) as f64, (cell / g.nx) as f64);
        let here = Point::new(g.lon()[cell], g.lat()[cell]);
        for (ce, re) in [
            (f64::from(m.col_per_km_east), f64::from(m.row_per_km_east)),
            (f64::from(m.col_per_km_north), f64::from(m.row_per_km_north)),
        ] {
            let (lo, la) = g.lonlat_of(c + ce, r + re);
            let km = Geodesic.distance(here, Point::new(lo, la)) / 1000.0;
            assert!((km - 1.0).abs() < 0.005, "cell {cell}: {km} km");
        }
        // Off the central meridian, grid north is not true north.
        if cell == 0 {
            assert!(m.col_per_km_north.abs() > 1e-3);
        }
    }
}

mod cases {
    //! Whole cases written as GRIB2: the same layers as GeoTIFF, accumulation styles, and bad
    //! input through the binary.

    use super::super::support::bin;
    use std::path::{Path, PathBuf};
    use trackswing::case::{Case, Overrides};
    use trackswing::demo::grib2_case::{write_case_grib2, write_case_grib2_with, PrecipStyle};
    use trackswing::demo::DemoSpec;
    use trackswing::progress::Collect;
    use trackswing::read::grib::GribSource;
    use trackswing::read::Source;

    fn spec() -> DemoSpec {
        DemoSpec::scaled(32, 26, 5, 6, 5)
    }

    fn run(case: &Path) -> trackswing::engine::RunResult {
        let over = Overrides {
            cross: Some("-60:60:60".into()),
            along: Some("0".into()),
            ..Default::default()
        };
        let c = Case::load(case, &over).unwrap();
        trackswing::engine::run(&c, 2, &Collect::default()).unwrap()
    }

    #[test]
    fn grib2_case_gives_the_geotiff_case_layers() {
        // The same invented storm written both ways. GeoTIFF stores Int16 steps of 0.01 K,
        // 0.5 m, 0.005 %, 0.001 mm; GRIB2 keeps 0.01 K, 0.1 m, 0.01 % and 0.001 mm running
        // totals: the layers agree to what those steps allow.
        let d = tempfile::tempdir().unwrap();
        let (a, b) = (d.path().join("tif"), d.path().join("grib"));
        trackswing::demo::files::write_case(&a, &spec()).unwrap();
        write_case_grib2(&b, &spec()).unwrap();
        let (ra, rb) = (run(&a.join("case.toml")), run(&b.join("case.toml")));
        for (x, y) in ra
            .grid
            .lon()
            .iter()
            .zip(rb.grid.lon())
            .chain(ra.grid.lat().iter().zip(rb.grid.lat()))
        {
            assert!((x - y).abs() < 1e-6, "cell centres differ: {x} vs {y}");
        }
        assert_eq!(ra.valid_times, rb.valid_times);
        assert_eq!(ra.layout, rb.layout);
        let mut worst = (0.0f32, 0.0f32);
        for (ta, tb) in ra.totals.iter().zip(&rb.totals) {
            for (x, y) in ta.liquid.iter().zip(&tb.liquid) {
                assert_eq!(x.is_nan(), y.is_nan());
                if x.is_finite() {
                    worst.0 = worst.0.max((x - y).abs());
                }
            }
            for (x, y) in ta.snowfall.iter().zip(&tb.snowfall) {
                if x.is_finite() {
                    worst.1 = worst.1.max((x - y).abs());
                }
            }
        }
        eprintln!(
            "largest difference: liquid {} mm, snowfall {} mm",
            worst.0, worst.1
        );
        // Liquid: 5 steps × 0.001 mm rounding of each side.
        assert!(worst.0 < 0.01, "liquid differs by {} mm", worst.0);
        // Snowfall: the ratio and type respond to 0.01 K; 0.5 mm of snow is 0.05 cm.
        assert!(worst.1 < 0.5, "snowfall differs by {} mm", worst.1);
    }

    fn precip(dir: &Path) -> Vec<Vec<f32>> {
        let files: Vec<PathBuf> = {
            let mut v: Vec<PathBuf> = std::fs::read_dir(dir.join("fields"))
                .unwrap()
                .map(|e| e.unwrap().path())
                .collect();
            v.sort();
            v
        };
        let s = GribSource::open(&files, &|_| {}).unwrap();
        (0..s.step_count())
            .map(|k| {
                let st = s.step(k).unwrap();
                let l = &st.layout;
                st.columns.chunks(l.nvar()).map(|c| c[l.precip()]).collect()
            })
            .collect()
    }

    #[test]
    fn running_totals_buckets_and_step_amounts_give_the_same_step_precipitation() {
        let d = tempfile::tempdir().unwrap();
        let spec = DemoSpec::scaled(20, 16, 6, 3, 3);
        let mut got = Vec::new();
        for (name, style) in [
            ("run", PrecipStyle::RunningTotal),
            ("step", PrecipStyle::PerStep),
            ("bucket", PrecipStyle::Buckets(6)),
        ] {
            write_case_grib2_with(&d.path().join(name), &spec, style).unwrap();
            got.push(precip(&d.path().join(name)));
        }
        // The generator's own per-step amounts are the reference.
        for k in 0..spec.steps {
            let want = trackswing::demo::step_fields(&spec, k)
                .into_iter()
                .find(|f| f.name == "precipitation_amount")
                .unwrap()
                .data;
            for g in &got {
                for (a, b) in g[k].iter().zip(&want) {
                    assert!((a - b).abs() < 0.003, "step {k}: {a} vs {b}");
                }
            }
        }
    }

    /// Coarsely packed running totals whose packing grids differ between messages (as a
    /// packer with its own reference value per message gives them) may decrease by up to the
    /// sum of the two half-steps where nothing fell; that is packing, not a broken chain. Here
    /// the totals are packed to 0.1 kg m⁻² (D = 1) and their reference values moved by ±0.04,
    /// so a dry cell's step amount comes out as −0.08: accepted (and counted as zero), where a
    /// fixed 0.05 tolerance refused it.
    #[test]
    fn coarse_packing_noise_in_running_totals_is_not_a_broken_chain() {
        use trackswing::demo::grib2::{message, BitMap, FieldDef};
        use trackswing::demo::grib2_case::demo_grid;
        let d = tempfile::tempdir().unwrap();
        let spec = DemoSpec::scaled(16, 12, 4, 6, 5);
        write_case_grib2(d.path(), &spec).unwrap();
        let reference =
            chrono::DateTime::parse_from_rfc3339(&trackswing::demo::valid_time_iso(&spec, 0))
                .unwrap()
                .with_timezone(&chrono::Utc);
        let mut running = vec![0f32; spec.nx * spec.ny];
        for k in 1..spec.steps {
            let step = trackswing::demo::step_fields(&spec, k)
                .into_iter()
                .find(|f| f.name == "precipitation_amount")
                .unwrap();
            for (r, v) in running.iter_mut().zip(&step.data) {
                *r += v;
            }
            let mut m = message(
                &demo_grid(&spec),
                &[FieldDef {
                    param: (0, 1, 8),
                    surface: (1, 0, 0),
                    reference,
                    forecast_hours: 0,
                    accumulation_hours: Some(k as u32 * spec.step_hours),
                    decimal_scale: 1,
                    values: &running,
                    bitmap: BitMap::Auto,
                }],
            );
            // R (template 5.0 octets 12–15) in units of 10^−D: ±0.4 moves every value ±0.04.
            let s5 = section(&m, 5);
            let r = f32::from_be_bytes(m[s5 + 11..s5 + 15].try_into().unwrap());
            let moved = if k % 2 == 1 { r + 0.4 } else { r - 0.4 };
            m[s5 + 11..s5 + 15].copy_from_slice(&moved.to_be_bytes());
            edit(
                &d.path().join(format!("fields/step_{k:03}.grib2")),
                |i, old| {
                    if i == 19 {
                        *old = m.clone();
                    }
                    true
                },
            );
        }
        let files: Vec<PathBuf> = (0..spec.steps)
            .map(|k| d.path().join(format!("fields/step_{k:03}.grib2")))
            .collect();
        let s = GribSource::open(&files, &|_| {}).unwrap();
        let st = s.step(2).unwrap();
        let p: Vec<f32> = st
            .columns
            .chunks(st.layout.nvar())
            .map(|c| c[st.layout.precip()])
            .collect();
        // Never negative; dry cells (nothing fell at this step) are exactly zero.
        assert!(p.iter().all(|v| *v >= 0.0));
        assert!(p.contains(&0.0));
    }

    /// GRIB2 messages of a file.
    fn messages(bytes: &[u8]) -> Vec<Vec<u8>> {
        let mut out = Vec::new();
        let mut pos = 0;
        while pos < bytes.len() {
            let len = u64::from_be_bytes(bytes[pos + 8..pos + 16].try_into().unwrap()) as usize;
            out.push(bytes[pos..pos + len].to_vec());
            pos += len;
        }
        out
    }

    /// Offset of section `num` in a single-field message.
    fn section(m: &[u8], num: u8) -> usize {
        let mut pos = 16;
        loop {
            let len = u32::from_be_bytes(m[pos..pos + 4].try_into().unwrap()) as usize;
            if m[pos + 4] == num {
                return pos;
            }
            pos += len;
        }
    }

    fn edit(path: &Path, f: impl Fn(usize, &mut Vec<u8>) -> bool) {
        let ms = messages(&std::fs::read(path).unwrap());
        let mut out = Vec::new();
        for (i, mut m) in ms.into_iter().enumerate() {
            if f(i + 1, &mut m) {
                out.extend(m);
            }
        }
        std::fs::write(path, out).unwrap();
    }

    fn bad_case(f: impl Fn(&Path)) -> (tempfile::TempDir, PathBuf) {
        let d = tempfile::tempdir().unwrap();
        write_case_grib2(d.path(), &DemoSpec::scaled(16, 12, 4, 6, 5)).unwrap();
        f(d.path());
        let case = d.path().join("case.toml");
        (d, case)
    }

    fn fails_cleanly(case: &Path, expect: &[&str]) -> String {
        let out = case.parent().unwrap().join("out");
        let o = bin()
            .arg("run")
            .arg(case)
            .arg("--cross")
            .arg("-50,0,50")
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr).to_string();
        assert_eq!(o.status.code(), Some(3), "stderr: {err}");
        for e in expect {
            assert!(err.contains(e), "expected '{e}' in: {err}");
        }
        assert!(!out.exists(), "outputs were written");
        err
    }

    /// The small case with message 3 of step_001 (850 hPa temperature, simple packing) given
    /// data representation template 5.`template` (Section 5 octets 10–11) over the same bytes.
    fn relabelled_packing(template: u16) -> (tempfile::TempDir, PathBuf) {
        bad_case(|d| {
            edit(&d.join("fields/step_001.grib2"), |i, m| {
                if i == 3 {
                    let s5 = section(m, 5);
                    m[s5 + 9..s5 + 11].copy_from_slice(&template.to_be_bytes());
                }
                true
            });
        })
    }

    // Messages of a step file: temperature at 1000…500 hPa (1–5), heights (6–10), relative
    // humidity (11–15), 2 m temperature (16), 2 m humidity (17), sea-level pressure (18),
    // precipitation (19), terrain (20).

    #[test]
    fn truncated_file() {
        let (_d, c) = bad_case(|d| {
            let p = d.join("fields/step_001.grib2");
            let b = std::fs::read(&p).unwrap();
            std::fs::write(&p, &b[..b.len() - 100]).unwrap();
        });
        fails_cleanly(&c, &["step_001.grib2", "message 20", "truncated"]);
    }

    #[test]
    fn not_grib_at_all() {
        let (_d, c) = bad_case(|d| {
            std::fs::write(d.join("fields/step_002.grib2"), "time,lat,lon\n").unwrap();
        });
        fails_cleanly(&c, &["step_002.grib2", "not a GRIB file"]);
    }

    #[test]
    fn needed_field_with_unsupported_template() {
        let (_d, c) = relabelled_packing(1);
        fails_cleanly(
            &c,
            &[
                "step_001.grib2: message 3",
                "850 hPa",
                "template 5.1",
                "not supported",
            ],
        );
    }

    /// A simple-packed field relabelled as IEEE floating point (5.4): its octet 12 (the first
    /// octet of the reference value R) is no precision of code table 5.7, so it is refused.
    #[test]
    fn simple_packing_labelled_as_ieee_floating_point() {
        let (_d, c) = relabelled_packing(4);
        fails_cleanly(
            &c,
            &[
                "step_001.grib2",
                "message 3",
                "IEEE floating point of precision",
            ],
        );
    }

    /// Regression (found by tests/trackswing/fuzz.rs): run-length packing is refused, since the
    /// decoder it would go to expands a damaged message without bound.
    #[test]
    fn needed_field_with_run_length_packing() {
        let (_d, c) = relabelled_packing(200);
        fails_cleanly(
            &c,
            &[
                "step_001.grib2: message 3",
                "run length packing",
                "not supported",
            ],
        );
    }

    /// Regression (found by tests/trackswing/fuzz.rs): a grid whose Ni × Nj disagrees with the
    /// number of data points of Section 3 (octets 7–10) is refused before any allocation.
    #[test]
    fn grid_size_disagrees_with_the_number_of_points() {
        let (_d, c) = bad_case(|d| {
            edit(&d.join("fields/step_001.grib2"), |_, m| {
                let s3 = section(m, 3);
                m[s3 + 6..s3 + 10].copy_from_slice(&u32::MAX.to_be_bytes());
                true
            });
        });
        fails_cleanly(
            &c,
            &[
                "step_001.grib2",
                "valid time 2026-01-13T18:00Z",
                "Ni × Nj = 16 × 12",
                "4294967295",
            ],
        );
    }

    #[test]
    fn fields_on_different_grids() {
        let (_d, c) = bad_case(|d| {
            edit(&d.join("fields/step_002.grib2"), |_, m| {
                // La1 (template 3.0 octets 47–50) one degree further north.
                let s3 = section(m, 3);
                let la1 = u32::from_be_bytes(m[s3 + 46..s3 + 50].try_into().unwrap()) + 1_000_000;
                m[s3 + 46..s3 + 50].copy_from_slice(&la1.to_be_bytes());
                true
            });
        });
        fails_cleanly(&c, &["step_002.grib2", "different grid"]);
    }

    #[test]
    fn missing_level() {
        let (_d, c) = bad_case(|d| {
            edit(&d.join("fields/step_002.grib2"), |i, _| i != 9);
        });
        fails_cleanly(
            &c,
            &["step_002.grib2", "step 3", "700 hPa", "geopotential height"],
        );
    }

    #[test]
    fn precipitation_buckets_that_do_not_chain() {
        let (_d, c) = bad_case(|d| {
            edit(&d.join("fields/step_003.grib2"), |i, m| {
                if i == 19 {
                    // 0–18 h becomes 6–18 h: forecast time (octets 19–22) 6, length (50–53) 12.
                    let s4 = section(m, 4);
                    m[s4 + 18..s4 + 22].copy_from_slice(&6u32.to_be_bytes());
                    m[s4 + 49..s4 + 53].copy_from_slice(&12u32.to_be_bytes());
                }
                true
            });
        });
        fails_cleanly(
            &c,
            &[
                "step_003.grib2",
                "step 4",
                "do not chain",
                "18:00Z…2026-01-14T06:00Z",
            ],
        );
    }

    /// Regression (found by tests/trackswing/fuzz.rs): a single total that is itself negative
    /// (no earlier total to subtract) made the error message index an empty list and panic.
    #[test]
    fn negative_precipitation_total() {
        let (_d, c) = bad_case(|d| {
            edit(&d.join("fields/step_001.grib2"), |i, m| {
                if i == 19 {
                    // Simple packing's reference value R (template 5.0 octets 12–15, IEEE float):
                    // Y = (R + X·2^E)/10^D, so a large negative R makes every value negative.
                    let s5 = section(m, 5);
                    m[s5 + 11..s5 + 15].copy_from_slice(&(-1.0e4f32).to_be_bytes());
                }
                true
            });
        });
        fails_cleanly(&c, &["step_001.grib2", "step 2", "cannot be negative"]);
    }

    #[test]
    fn single_file_single_time_needs_no_track() {
        let d = tempfile::tempdir().unwrap();
        write_case_grib2(d.path(), &DemoSpec::scaled(16, 12, 3, 6, 5)).unwrap();
        let f = d.path().join("fields/step_002.grib2");
        let out = d.path().join("out1");
        let o = bin()
            .args([
                "run",
                f.to_str().unwrap(),
                "--cross",
                "0",
                "--along",
                "0",
                "--quiet",
                "--out",
            ])
            .arg(&out)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        assert!(out.join("snowfall_baseline.tif").is_file());
        let o = bin()
            .args(["run", f.to_str().unwrap(), "--cross", "-50,0,50", "--out"])
            .arg(d.path().join("out2"))
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(3));
        assert!(String::from_utf8_lossy(&o.stderr).contains("need the storm track"));
    }

    #[test]
    fn inspect_lists_fields_and_unmet_requirements() {
        let (d, _) = bad_case(|d| {
            edit(&d.join("fields/step_002.grib2"), |i, _| i != 9);
        });
        let o = bin()
            .arg("inspect")
            .arg(d.path().join("fields"))
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&o.stdout);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        for want in [
            "4 GRIB2 file(s)",
            "16×12 cells on lat/lon",
            "temperature (K) — isobaric 1000, 925, 850, 700, 500 hPa — 4 time(s)",
            "total precipitation accumulated (kg m-2) — at the ground — 3 time(s)",
            "met     terrain",
            "MISSING",
            "700 hPa",
        ] {
            assert!(text.contains(want), "'{want}' not in:\n{text}");
        }
    }
}
