//! Input through GDAL (the `gdal` feature) against the pure-Rust readers: the demo storm
//! written as CF NetCDF by GDAL's own netCDF driver, the demo GeoTIFF steps read as a stack,
//! and the demo GRIB2 files read by GDAL's GRIB driver, each compared with what the GeoTIFF or
//! GRIB2 reader gives for the same storm. Without the feature, a NetCDF file must be refused
//! with the rebuild command.
//!
//! The NetCDF files are written from the GeoTIFF reader's values through GDAL's API (an
//! in-memory dataset copied with the netCDF driver, its `NETCDF_DIM_EXTRA` /
//! `NETCDF_DIM_<dim>_DEF` / `NETCDF_DIM_<dim>_VALUES` metadata giving the time and pressure
//! dimensions), in units other than trackswing's where CF allows it (°C, hPa, geopotential,
//! relative humidity as a fraction, precipitation in mm, terrain packed as Int16 with
//! scale_factor 0.1), so the unit mapping is checked by GDAL's round trip, not by our writer.

use super::support::bin;

#[cfg(feature = "gdal")]
mod with_gdal {
    use super::*;
    use gdal::raster::{Buffer, RasterCreationOptions};
    use gdal::spatial_ref::SpatialRef;
    use gdal::{DriverManager, Metadata};
    use std::path::Path;
    use std::path::PathBuf;
    use trackswing::case::{Case, Overrides};
    use trackswing::demo::grib2_case::write_case_grib2;
    use trackswing::demo::DemoSpec;
    use trackswing::progress::Collect;
    use trackswing::read::gdal::GdalSource;
    use trackswing::read::grib::GribSource;
    use trackswing::read::open_member as open_source;
    use trackswing::read::source::Source;

    /// g as trackswing divides geopotential by it (WMO-No. 306 / CF: m2 s-2 = g · m).
    const G: f64 = 9.80665;

    fn spec() -> DemoSpec {
        DemoSpec::scaled(32, 26, 5, 6, 5)
    }

    /// One NetCDF variable to write.
    struct Var {
        name: &'static str,
        standard_name: &'static str,
        units: &'static str,
        /// Dimensions beyond lat/lon, slowest first: ("time", …) and/or ("plev", …).
        dims: Vec<(&'static str, Vec<f64>)>,
        /// One grid per band, in band order (the last dimension fastest).
        bands: Vec<Vec<f64>>,
        /// Int16 with this scale factor instead of Float32.
        packed: Option<f64>,
    }

    /// Writes `vars` into one NetCDF file. Several variables in one file must be 2-D (without
    /// extra dimensions GDAL writes each band as its own variable, read back as subdatasets).
    fn write_nc(path: &Path, gt: [f64; 6], nx: usize, ny: usize, vars: &[&Var]) {
        let v = vars[0];
        assert!(vars.len() == 1 || vars.iter().all(|v| v.dims.is_empty() && v.bands.len() == 1));
        let mem = DriverManager::get_driver_by_name("MEM").unwrap();
        let nb: usize = vars.iter().map(|v| v.bands.len()).sum();
        let mut ds = match v.packed {
            None => mem.create_with_band_type::<f32, _>("", nx, ny, nb).unwrap(),
            Some(_) => mem.create_with_band_type::<i16, _>("", nx, ny, nb).unwrap(),
        };
        ds.set_geo_transform(&gt).unwrap();
        ds.set_spatial_ref(&SpatialRef::from_epsg(4326).unwrap())
            .unwrap();
        if !v.dims.is_empty() {
            let names: Vec<&str> = v.dims.iter().map(|d| d.0).collect();
            ds.set_metadata_item("NETCDF_DIM_EXTRA", &format!("{{{}}}", names.join(",")), "")
                .unwrap();
        }
        for (name, values) in &v.dims {
            // nc_type 6 = NC_DOUBLE (netCDF C library, netcdf.h).
            ds.set_metadata_item(
                &format!("NETCDF_DIM_{name}_DEF"),
                &format!("{{{},6}}", values.len()),
                "",
            )
            .unwrap();
            let list: Vec<String> = values.iter().map(|x| x.to_string()).collect();
            ds.set_metadata_item(
                &format!("NETCDF_DIM_{name}_VALUES"),
                &format!("{{{}}}", list.join(",")),
                "",
            )
            .unwrap();
        }
        for (k, units, sn) in [
            ("time", "hours since 2026-01-13 12:00:00", "time"),
            ("plev", "hPa", "air_pressure"),
        ] {
            ds.set_metadata_item(&format!("{k}#units"), units, "")
                .unwrap();
            ds.set_metadata_item(&format!("{k}#standard_name"), sn, "")
                .unwrap();
        }
        let sizes: Vec<usize> = v.dims.iter().map(|d| d.1.len()).collect();
        let bands = vars
            .iter()
            .flat_map(|v| v.bands.iter().enumerate().map(move |(b, d)| (*v, b, d)));
        for (n, (v, b, data)) in bands.enumerate() {
            let mut band = ds.rasterband(n + 1).unwrap();
            band.set_metadata_item("NETCDF_VARNAME", v.name, "")
                .unwrap();
            band.set_metadata_item("standard_name", v.standard_name, "")
                .unwrap();
            band.set_metadata_item("units", v.units, "").unwrap();
            let mut rest = b;
            for (d, (name, values)) in v.dims.iter().enumerate().rev() {
                let i = rest % sizes[d];
                rest /= sizes[d];
                band.set_metadata_item(&format!("NETCDF_DIM_{name}"), &values[i].to_string(), "")
                    .unwrap();
            }
            match v.packed {
                None => {
                    band.set_no_data_value(Some(-9999.0)).unwrap();
                    let mut buf = Buffer::new(
                        (nx, ny),
                        data.iter()
                            .map(|x| if x.is_nan() { -9999.0 } else { *x as f32 })
                            .collect(),
                    );
                    band.write((0, 0), (nx, ny), &mut buf).unwrap();
                }
                Some(scale) => {
                    band.set_no_data_value(Some(-32768.0)).unwrap();
                    band.set_scale(scale).unwrap();
                    band.set_offset(0.0).unwrap();
                    let mut buf = Buffer::new(
                        (nx, ny),
                        data.iter()
                            .map(|x| {
                                if x.is_nan() {
                                    -32768
                                } else {
                                    (x / scale).round() as i16
                                }
                            })
                            .collect(),
                    );
                    band.write((0, 0), (nx, ny), &mut buf).unwrap();
                }
            }
        }
        let nc = DriverManager::get_driver_by_name("netCDF").unwrap();
        ds.create_copy(&nc, path, &RasterCreationOptions::new())
            .unwrap();
    }

    /// Writes the GeoTIFF case in `dir` again as NetCDF files in `dir/nc`, from the values the
    /// GeoTIFF reader gives, and a case file `dir/case_nc.toml` for them.
    fn write_netcdf_case(dir: &Path, format_line: &str) -> PathBuf {
        let case = Case::load(&dir.join("case.toml"), &Overrides::default()).unwrap();
        let src = open_source(case.member(), None, &|_| {}).unwrap();
        let st = src.statics();
        let (nx, ny) = (st.grid.nx, st.grid.ny);
        let gt = st.grid.georef.geotransform;
        let steps: Vec<_> = (0..src.step_count())
            .map(|k| src.step(k).unwrap())
            .collect();
        let l = &steps[0].layout;
        let t0 = chrono::DateTime::parse_from_rfc3339("2026-01-13T12:00:00Z").unwrap();
        let hours: Vec<f64> = steps
            .iter()
            .map(|s| (s.valid - t0.with_timezone(&chrono::Utc)).num_minutes() as f64 / 60.0)
            .collect();
        let plev: Vec<f64> = l.levels_pa.iter().map(|p| p / 100.0).collect();
        let field = |s: &trackswing::read::StepFields, var: usize, f: &dyn Fn(f64) -> f64| {
            s.columns
                .chunks(l.nvar())
                .map(|c| f(f64::from(c[var])))
                .collect::<Vec<f64>>()
        };
        let per_level = |var: &dyn Fn(usize) -> usize, f: &dyn Fn(f64) -> f64| {
            let mut v = Vec::new();
            for s in &steps {
                for k in 0..l.levels_pa.len() {
                    v.push(field(s, var(k), f));
                }
            }
            v
        };
        let per_step = |var: usize, f: &dyn Fn(f64) -> f64| {
            steps.iter().map(|s| field(s, var, f)).collect::<Vec<_>>()
        };
        let tp = vec![("time", hours.clone()), ("plev", plev.clone())];
        let t = vec![("time", hours.clone())];
        let mslp: Vec<Vec<f64>> = (0..steps.len())
            .map(|k| {
                src.mslp(k)
                    .unwrap()
                    .unwrap()
                    .iter()
                    .map(|p| f64::from(*p) / 100.0)
                    .collect()
            })
            .collect();
        let vars = [
            Var {
                name: "ta",
                standard_name: "air_temperature",
                units: "degC",
                dims: tp.clone(),
                bands: per_level(&|k| l.t(k), &|x| x - 273.15),
                packed: None,
            },
            Var {
                name: "phi",
                standard_name: "geopotential",
                units: "m2 s-2",
                dims: tp.clone(),
                bands: per_level(&|k| l.z(k), &|x| x * G),
                packed: None,
            },
            Var {
                name: "hur",
                standard_name: "relative_humidity",
                units: "1",
                dims: tp.clone(),
                bands: per_level(&|k| l.rh(k), &|x| x / 100.0),
                packed: None,
            },
            Var {
                name: "tas",
                standard_name: "air_temperature",
                units: "K",
                dims: t.clone(),
                bands: per_step(l.t2(), &|x| x),
                packed: None,
            },
            Var {
                name: "hurs",
                standard_name: "relative_humidity",
                units: "%",
                dims: t.clone(),
                bands: per_step(l.rh2(), &|x| x),
                packed: None,
            },
            Var {
                name: "pr",
                standard_name: "lwe_thickness_of_precipitation_amount",
                units: "mm",
                dims: t.clone(),
                bands: per_step(l.precip(), &|x| x),
                packed: None,
            },
            Var {
                name: "psl",
                standard_name: "air_pressure_at_mean_sea_level",
                units: "hPa",
                dims: t.clone(),
                bands: mslp,
                packed: None,
            },
            Var {
                name: "orog",
                standard_name: "surface_altitude",
                units: "m",
                dims: vec![],
                bands: vec![st.terrain.iter().map(|x| f64::from(*x)).collect()],
                packed: Some(0.1),
            },
        ];
        let land = trackswing::geotiff::read_geotiff(&dir.join("terrain.tif"))
            .unwrap()
            .bands[1]
            .iter()
            .map(|x| f64::from(*x))
            .collect();
        let sftlf = Var {
            name: "sftlf",
            standard_name: "land_area_fraction",
            units: "1",
            dims: vec![],
            bands: vec![land],
            packed: Some(0.001),
        };
        std::fs::create_dir_all(dir.join("nc")).unwrap();
        let (orog, timed) = vars.split_last().unwrap();
        for v in timed {
            write_nc(&dir.join(format!("nc/{}.nc", v.name)), gt, nx, ny, &[v]);
        }
        // Terrain in a file of two variables, as static fields often come.
        let fixed = dir.join("nc/fixed.nc");
        write_nc(&fixed, gt, nx, ny, &[orog, &sftlf]);
        let subs = gdal::Dataset::open(&fixed)
            .unwrap()
            .metadata_domain("SUBDATASETS")
            .unwrap_or_default();
        assert_eq!(
            subs.len(),
            4,
            "two variables, a name and a description each: {subs:?}"
        );
        let text = std::fs::read_to_string(dir.join("case.toml"))
            .unwrap()
            .replace(
                "terrain = \"terrain.tif\"\nsteps = \"fields/step_*.tif\"",
                &format!("model = \"nc\"{format_line}"),
            );
        assert!(text.contains("model = \"nc\""), "{text}");
        let p = dir.join("case_nc.toml");
        std::fs::write(&p, text).unwrap();
        p
    }

    fn sources(case: &Path) -> Box<dyn Source> {
        let c = Case::load(case, &Overrides::default()).unwrap();
        open_source(c.member(), None, &|_| {}).unwrap()
    }

    /// Largest difference per variable of the two sources' steps, after checking grids and
    /// times agree.
    fn compare(a: &dyn Source, b: &dyn Source) -> Vec<f32> {
        let (ga, gb) = (&a.statics().grid, &b.statics().grid);
        assert_eq!((ga.nx, ga.ny), (gb.nx, gb.ny));
        for (x, y) in ga.georef.geotransform.iter().zip(gb.georef.geotransform) {
            assert!((x - y).abs() < 1e-9, "geotransforms differ: {x} vs {y}");
        }
        for (x, y) in ga
            .lon()
            .iter()
            .zip(gb.lon())
            .chain(ga.lat().iter().zip(gb.lat()))
        {
            assert!((x - y).abs() < 1e-9, "cell centres differ: {x} vs {y}");
        }
        for (x, y) in a.statics().terrain.iter().zip(&b.statics().terrain) {
            assert!((x - y).abs() < 0.01, "terrain {x} vs {y}");
        }
        assert_eq!(a.step_count(), b.step_count());
        let mut worst = Vec::new();
        for k in 0..a.step_count() {
            let (sa, sb) = (a.step(k).unwrap(), b.step(k).unwrap());
            assert_eq!(sa.valid, sb.valid, "step {k}");
            assert_eq!(sa.layout, sb.layout, "step {k}");
            let nvar = sa.layout.nvar();
            worst.resize(nvar, 0.0f32);
            for (ca, cb) in sa.columns.chunks(nvar).zip(sb.columns.chunks(nvar)) {
                for (v, (x, y)) in ca.iter().zip(cb).enumerate() {
                    assert_eq!(x.is_nan(), y.is_nan(), "step {k} var {v}: {x} vs {y}");
                    if x.is_finite() {
                        worst[v] = worst[v].max((x - y).abs());
                    }
                }
            }
            let (ma, mb) = (a.mslp(k).unwrap().unwrap(), b.mslp(k).unwrap().unwrap());
            for (x, y) in ma.iter().zip(&mb) {
                assert!(
                    (x - y).abs() < 0.05,
                    "step {k}: sea-level pressure {x} vs {y} Pa"
                );
            }
        }
        worst
    }

    fn assert_within(
        worst: &[f32],
        layout: &trackswing::read::StepLayout,
        t: f32,
        z: f32,
        rh: f32,
        p: f32,
    ) {
        for k in 0..layout.levels_pa.len() {
            assert!(
                worst[layout.t(k)] <= t,
                "T level {k}: {}",
                worst[layout.t(k)]
            );
            assert!(
                worst[layout.z(k)] <= z,
                "Z level {k}: {}",
                worst[layout.z(k)]
            );
            assert!(
                worst[layout.rh(k)] <= rh,
                "RH level {k}: {}",
                worst[layout.rh(k)]
            );
        }
        assert!(worst[layout.t2()] <= t, "T2: {}", worst[layout.t2()]);
        assert!(worst[layout.rh2()] <= rh, "RH2: {}", worst[layout.rh2()]);
        assert!(
            worst[layout.precip()] <= p,
            "precip: {}",
            worst[layout.precip()]
        );
    }

    #[test]
    fn netcdf_written_by_gdal_reads_as_the_geotiff_case() {
        let d = tempfile::tempdir().unwrap();
        trackswing::demo::files::write_case(d.path(), &spec()).unwrap();
        // Auto-detected: the files are NetCDF, not GRIB2 or TIFF.
        let nc = write_netcdf_case(d.path(), "");
        let (a, b) = (sources(&d.path().join("case.toml")), sources(&nc));
        let worst = compare(a.as_ref(), b.as_ref());
        eprintln!("largest differences per variable (GeoTIFF vs NetCDF through GDAL): {worst:?}");
        let layout = a.step(0).unwrap().layout;
        // Float32 round trips of T − 273.15 (°C) and of g·z (geopotential): a few f32 ulps of
        // 300 K and of 5·10⁴ m² s⁻²; RH as a fraction ×100.
        assert_within(&worst, &layout, 1e-4, 2e-3, 1e-4, 1e-6);
        assert!(b
            .inputs()
            .iter()
            .all(|p| p.extension().is_some_and(|e| e == "nc")));
    }

    /// `inspect` on NetCDF files: grid, valid times, levels and requirements, through GDAL.
    #[test]
    fn inspect_lists_what_netcdf_files_hold() {
        let d = tempfile::tempdir().unwrap();
        trackswing::demo::files::write_case(d.path(), &spec()).unwrap();
        let nc = write_netcdf_case(d.path(), "");
        let o = bin()
            .arg("inspect")
            .arg(nc.parent().unwrap().join("nc"))
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&o.stdout);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let s = spec();
        for want in [
            "read through the general reader".to_string(),
            format!("{}×{} cells on lat/lon", s.nx, s.ny),
            format!("Valid times ({})", s.steps),
            "1000, 925, 850, 700, 500 hPa".to_string(),
            "met     every one of the".to_string(),
        ] {
            assert!(text.contains(&want), "'{want}' not in:\n{text}");
        }
    }

    #[test]
    fn a_run_on_the_netcdf_case_gives_the_geotiff_case_snowfall() {
        let d = tempfile::tempdir().unwrap();
        trackswing::demo::files::write_case(d.path(), &spec()).unwrap();
        let nc = write_netcdf_case(d.path(), "\nformat = \"gdal\"");
        let over = Overrides {
            cross: Some("-60:60:30".into()),
            along: Some("0".into()),
            ..Default::default()
        };
        let run = |p: &Path| {
            let c = Case::load(p, &over).unwrap();
            trackswing::engine::run(&c, 2, &Collect::default()).unwrap()
        };
        let (ra, rb) = (run(&d.path().join("case.toml")), run(&nc));
        assert_eq!(ra.valid_times, rb.valid_times);
        assert_eq!(ra.totals.len(), rb.totals.len());
        let (mut worst, mut most) = (0.0f32, 0.0f32);
        for (ta, tb) in ra.totals.iter().zip(&rb.totals) {
            for (x, y) in ta.snowfall.iter().zip(&tb.snowfall) {
                assert_eq!(x.is_nan(), y.is_nan());
                if x.is_finite() {
                    worst = worst.max((x - y).abs());
                    most = most.max(*x);
                }
            }
        }
        eprintln!("snowfall: largest {most} mm, largest difference {worst} mm");
        assert!(most > 5.0, "the demo storm snows: {most} mm");
        // The inputs agree to 1e-4 K and 2e-3 m: the snowfall to a hundredth of a millimetre.
        assert!(worst < 0.01, "snowfall differs by {worst} mm");
    }

    #[test]
    fn geotiff_stack_through_gdal_equals_the_pure_rust_reader() {
        let d = tempfile::tempdir().unwrap();
        trackswing::demo::files::write_case(d.path(), &spec()).unwrap();
        let text = std::fs::read_to_string(d.path().join("case.toml"))
            .unwrap()
            .replace(
                "terrain = \"terrain.tif\"\nsteps = \"fields/step_*.tif\"",
                "model = [\"terrain.tif\", \"fields\"]\nformat = \"gdal\"",
            );
        std::fs::write(d.path().join("case_gdal.toml"), text).unwrap();
        let (a, b) = (
            sources(&d.path().join("case.toml")),
            sources(&d.path().join("case_gdal.toml")),
        );
        let worst = compare(a.as_ref(), b.as_ref());
        let layout = a.step(0).unwrap().layout;
        // The same Int16 values with the same scale and offset, applied in f64 by GDAL's path.
        assert_within(&worst, &layout, 1e-4, 1e-4, 1e-4, 1e-6);
    }

    #[test]
    fn grib2_through_gdal_equals_the_pure_rust_grib2_reader() {
        let d = tempfile::tempdir().unwrap();
        write_case_grib2(d.path(), &spec()).unwrap();
        let mut files: Vec<PathBuf> = std::fs::read_dir(d.path().join("fields"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        files.sort();
        let a = GribSource::open(&files, &|_| {}).unwrap();
        let b = GdalSource::open(&files, &|_| {}).unwrap();
        let worst = compare(&a, &b);
        eprintln!("largest differences per variable (GRIB2 reader vs GDAL): {worst:?}");
        let layout = a.step(0).unwrap().layout;
        // Both decode the same packed integers; GDAL in f64, the grib crate in f32.
        assert_within(&worst, &layout, 1e-3, 1e-2, 1e-3, 1e-4);
    }

    #[test]
    fn grib_units_are_not_normalised_by_gdal() {
        // Without GRIB_NORMALIZE_UNITS=NO GDAL's GRIB driver reports TMP in [C] (GDAL 3.6,
        // GRIB driver documentation); GdalSource sets the option before opening.
        let d = tempfile::tempdir().unwrap();
        write_case_grib2(d.path(), &DemoSpec::scaled(16, 12, 2, 6, 3)).unwrap();
        let f = d.path().join("fields/step_000.grib2");
        GdalSource::open(std::slice::from_ref(&f), &|_| {}).unwrap();
        assert_eq!(
            gdal::config::get_config_option("GRIB_NORMALIZE_UNITS", "").unwrap(),
            "NO"
        );
        let ds = gdal::Dataset::open(&f).unwrap();
        let b = ds.rasterband(1).unwrap();
        assert_eq!(b.metadata_item("GRIB_ELEMENT", "").as_deref(), Some("TMP"));
        assert_eq!(b.metadata_item("GRIB_UNIT", "").as_deref(), Some("[K]"));
    }

    #[test]
    fn lambert_grib2_through_gdal_equals_the_pure_rust_reader() {
        // One file at the reference time on a secant Lambert grid (template 3.30): the grid
        // comes from GDAL's spatial reference as a PROJ string, the pure-Rust reader builds it
        // from the template; both place every cell centre through proj4rs.
        use chrono::{TimeZone, Utc};
        use trackswing::demo::grib2::{message, BitMap, FieldDef, GridDef};
        let grid = GridDef::Lambert {
            nx: 24,
            ny: 18,
            la1: 33.0,
            lo1: 250.0,
            lad: 38.5,
            lov: 262.5,
            dx: 30_000.0,
            dy: 30_000.0,
            latin1: 30.0,
            latin2: 45.0,
            scan: 0x40,
        };
        let n = 24 * 18;
        let smooth = |base: f32, amp: f32| -> Vec<f32> {
            (0..n)
                .map(|i| base + amp * ((i as f32) * 0.37).sin())
                .collect()
        };
        let fields = vec![
            ((0, 0, 0), (100, 0, 85_000), smooth(268.0, 5.0)),
            ((0, 3, 5), (100, 0, 85_000), smooth(1450.0, 30.0)),
            ((0, 1, 1), (100, 0, 85_000), smooth(80.0, 15.0)),
            ((0, 0, 0), (100, 0, 70_000), smooth(258.0, 5.0)),
            ((0, 3, 5), (100, 0, 70_000), smooth(2950.0, 30.0)),
            ((0, 1, 1), (100, 0, 70_000), smooth(70.0, 20.0)),
            ((0, 0, 0), (103, 0, 2), smooth(272.0, 4.0)),
            ((0, 1, 1), (103, 0, 2), smooth(85.0, 10.0)),
            ((0, 3, 5), (1, 0, 0), smooth(300.0, 200.0)),
            ((0, 3, 1), (101, 0, 0), smooth(100_500.0, 800.0)),
        ];
        let defs: Vec<FieldDef> = fields
            .iter()
            .map(|(param, surface, v)| FieldDef {
                param: *param,
                surface: *surface,
                reference: Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap(),
                forecast_hours: 0,
                accumulation_hours: None,
                decimal_scale: 2,
                values: v,
                bitmap: BitMap::Auto,
            })
            .collect();
        let d = tempfile::tempdir().unwrap();
        let f = d.path().join("lcc.grib2");
        let mut bytes = Vec::new();
        for def in &defs {
            bytes.extend(message(&grid, std::slice::from_ref(def)));
        }
        std::fs::write(&f, bytes).unwrap();
        let files = [f];
        let a = GribSource::open(&files, &|_| {}).unwrap();
        let b = GdalSource::open(&files, &|_| {}).unwrap();
        let (ga, gb) = (&a.statics().grid, &b.statics().grid);
        assert!(ga.is_projected() && gb.is_projected());
        let mut worst = 0.0f64;
        for (x, y) in ga
            .lon()
            .iter()
            .zip(gb.lon())
            .chain(ga.lat().iter().zip(gb.lat()))
        {
            worst = worst.max((x - y).abs());
        }
        eprintln!("Lambert cell centres: largest difference {worst}°");
        assert!(worst < 1e-6, "cell centres differ by {worst}°");
        for (ma, mb) in ga.metric().iter().zip(gb.metric()) {
            assert!((ma.col_per_km_east - mb.col_per_km_east).abs() < 1e-5);
            assert!((ma.row_per_km_north - mb.row_per_km_north).abs() < 1e-5);
        }
        let (sa, sb) = (a.step(0).unwrap(), b.step(0).unwrap());
        assert_eq!(sa.valid, sb.valid);
        assert_eq!(sa.layout, sb.layout);
        for (x, y) in sa.columns.iter().zip(&sb.columns) {
            assert!((x - y).abs() <= 1e-3 * x.abs().max(1.0), "{x} vs {y}");
        }
    }

    #[test]
    fn temperature_in_fahrenheit_is_refused_naming_file_band_and_units() {
        let d = tempfile::tempdir().unwrap();
        trackswing::demo::files::write_case(d.path(), &DemoSpec::scaled(16, 12, 3, 6, 3)).unwrap();
        let nc = write_netcdf_case(d.path(), "");
        let p = d.path().join("nc/tas.nc");
        let v = Var {
            name: "tas",
            standard_name: "air_temperature",
            units: "degF",
            dims: vec![("time", vec![0.0, 6.0, 12.0])],
            bands: vec![vec![30.0; 16 * 12]; 3],
            packed: None,
        };
        std::fs::remove_file(&p).unwrap();
        let gt = trackswing::demo::files::georef(&DemoSpec::scaled(16, 12, 3, 6, 3)).geotransform;
        write_nc(&p, gt, 16, 12, &[&v]);
        let o = bin()
            .arg("run")
            .arg(&nc)
            .arg("--cross")
            .arg("0")
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{err}");
        for want in ["tas.nc", "band 1", "degF", "K or °C"] {
            assert!(err.contains(want), "expected '{want}' in: {err}");
        }
    }
}

#[cfg(not(feature = "gdal"))]
#[test]
fn netcdf_without_the_feature_says_how_to_rebuild() {
    // The netCDF classic format starts with "CDF\x01" (netCDF file format specification,
    // Unidata); the reader must not get that far.
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("model.nc"), b"CDF\x01\0\0\0\0").unwrap();
    let o = bin()
        .arg("run")
        .arg(d.path().join("model.nc"))
        .arg("--out")
        .arg(d.path().join("out"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("model.nc") && err.contains("--features gdal"),
        "{err}"
    );
    assert!(!d.path().join("out").exists());
    let case = d.path().join("case.toml");
    std::fs::write(
        &case,
        "title = \"t\"\n[[member]]\nname = \"m\"\nmodel = \"model.nc\"\nformat = \"gdal\"\n",
    )
    .unwrap();
    let o = bin().arg("run").arg(&case).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("member[0].format") && err.contains("--features gdal"),
        "{err}"
    );
}
