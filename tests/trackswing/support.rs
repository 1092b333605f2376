//! Synthetic cases written with the crate's own GeoTIFF writer (whose output is checked against
//! GDAL in the geotiff module's tests).

use std::path::{Path, PathBuf};
use trackswing::geotiff::{
    write_cog, BandSpec, CogOptions, Crs, Georef, SampleEncoding, WriteOptions,
};

pub const LEVELS: [f64; 5] = [1000.0, 925.0, 850.0, 700.0, 500.0];

/// A synthetic storm on a lon/lat grid near the equator (so that a fixed number of km is the
/// same number of rows everywhere), moving east along the equator.
pub struct Synthetic {
    pub nx: usize,
    pub ny: usize,
    pub lon0: f64,
    pub lat0: f64,
    pub d: f64,
    pub steps: usize,
    /// Added to every temperature, K.
    pub warm: f64,
    /// Flat terrain (so a shifted storm sees the same ground everywhere).
    pub flat: bool,
    /// Relative humidity, %, at 2 m and at the levels below 850 hPa (the others stay 95 %):
    /// below 80 % the air under the cloud is dry.
    pub low_rh: f32,
}

impl Default for Synthetic {
    fn default() -> Self {
        Self {
            nx: 40,
            ny: 30,
            lon0: 10.0,
            lat0: 1.5,
            d: 0.1,
            steps: 3,
            warm: 0.0,
            flat: false,
            low_rh: 90.0,
        }
    }
}

pub fn georef(s: &Synthetic) -> Georef {
    Georef {
        crs: Crs::Wgs84Geographic,
        geotransform: [s.lon0 - s.d / 2.0, s.d, 0.0, s.lat0 + s.d / 2.0, 0.0, -s.d],
    }
}

fn write(path: &Path, s: &Synthetic, bands: Vec<(String, Vec<f32>)>, meta: Vec<(String, String)>) {
    write_float32(path, s.nx, s.ny, &georef(s), &bands, meta);
}

/// Writes Float32 bands (description, values) with nodata −9999 and the dataset metadata.
pub fn write_float32(
    path: &Path,
    width: usize,
    height: usize,
    georef: &Georef,
    bands: &[(String, Vec<f32>)],
    meta: Vec<(String, String)>,
) {
    let specs: Vec<BandSpec> = bands
        .iter()
        .map(|(d, v)| BandSpec {
            data: v,
            description: d.clone(),
            metadata: vec![],
        })
        .collect();
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: -9999.0,
        dataset_metadata: meta,
        band_scaling: vec![],
    };
    write_cog(
        path,
        width,
        height,
        georef,
        &specs,
        &opts,
        &CogOptions::default(),
    )
    .unwrap();
}

/// Temperature offset (K) of the synthetic air mass: warm to the south, a gradient across the
/// rows so the rain–snow line crosses the grid.
fn t_anom(s: &Synthetic, row: usize, col: usize) -> f64 {
    let y = row as f64 / (s.ny - 1) as f64; // 0 north … 1 south
    let x = col as f64 / (s.nx - 1) as f64;
    -6.0 + 12.0 * y + 1.5 * (3.0 * x).sin() + s.warm
}

pub fn write_case(dir: &Path, s: &Synthetic, extra: &str) -> PathBuf {
    std::fs::create_dir_all(dir.join("f")).unwrap();
    let n = s.nx * s.ny;
    let terrain: Vec<f32> = (0..n)
        .map(|i| {
            let (r, c) = (i / s.nx, i % s.nx);
            if s.flat {
                return 200.0;
            }
            (200.0 + 150.0 * ((r as f64) * 0.3).sin() * ((c as f64) * 0.2).cos()) as f32
        })
        .collect();
    write(
        &dir.join("terrain.tif"),
        s,
        vec![("surface_altitude".into(), terrain.clone())],
        vec![],
    );
    for k in 0..s.steps {
        let mut bands = Vec::new();
        let mut z = vec![0.0f64; n];
        let mut t_prev = vec![0.0f64; n];
        for (li, p) in LEVELS.iter().enumerate() {
            let mut t = vec![0.0f32; n];
            let mut rh = vec![0.0f32; n];
            for i in 0..n {
                let (r, c) = (i / s.nx, i % s.nx);
                let base = [273.0, 271.5, 270.0, 262.0, 245.0][li];
                let tk = base + t_anom(s, r, c) * [1.0, 1.0, 0.9, 0.6, 0.3][li];
                t[i] = tk as f32;
                rh[i] = if *p > 850.0 && s.low_rh < 90.0 {
                    s.low_rh
                } else {
                    95.0
                };
                if li == 0 {
                    z[i] = 100.0;
                } else {
                    let tm = 0.5 * (tk + t_prev[i]);
                    z[i] += 287.04 * tm / 9.80665 * (LEVELS[li - 1] / p).ln();
                }
                t_prev[i] = tk;
            }
            let tag = format!("{}hPa", *p as i64);
            bands.push((format!("air_temperature@{tag}"), t));
            bands.push((
                format!("geopotential_height@{tag}"),
                z.iter().map(|v| *v as f32).collect(),
            ));
            bands.push((format!("relative_humidity@{tag}"), rh));
        }
        let t2: Vec<f32> = (0..n)
            .map(|i| {
                (273.5 + t_anom(s, i / s.nx, i % s.nx) - 0.0065 * (terrain[i] as f64 - 100.0))
                    as f32
            })
            .collect();
        bands.push(("air_temperature@2m".into(), t2));
        bands.push(("relative_humidity@2m".into(), vec![s.low_rh; n]));
        let precip: Vec<f32> = (0..n)
            .map(|i| {
                let (r, c) = (i / s.nx, i % s.nx);
                let dx = (c as f64 - (10.0 + 5.0 * k as f64)) / 12.0;
                let dy = (r as f64 - 15.0) / 10.0;
                (3.0 * (-(dx * dx + dy * dy)).exp()) as f32
            })
            .collect();
        bands.push(("precipitation_amount".into(), precip));
        let meta = vec![(
            "valid_time".into(),
            format!("2026-01-14T{:02}:00:00Z", 3 * (k + 1)),
        )];
        write(&dir.join(format!("f/s_{k:02}.tif")), s, bands, meta);
    }
    // Due east along the equator band, at the grid's middle row.
    let lat = s.lat0 - s.d * (s.ny as f64 - 1.0) / 2.0;
    std::fs::write(
        dir.join("track.csv"),
        format!(
            "time,lat,lon\n2026-01-14T00:00:00Z,{lat},{}\n2026-01-15T00:00:00Z,{lat},{}\n",
            s.lon0,
            s.lon0 + 2.0
        ),
    )
    .unwrap();
    std::fs::write(dir.join("towns.csv"), "name,lat,lon\nMidpoint,0.0,12.0\n").unwrap();
    let case = dir.join("case.toml");
    std::fs::write(
        &case,
        format!(
            r#"title = "synthetic test storm"
towns = "towns.csv"
[[member]]
name = "synthetic"
terrain = "terrain.tif"
steps = "f/s_*.tif"
track = "track.csv"
[shift]
core_radius_km = 5000
outer_radius_km = 6000
lapse_rate_k_per_km = 6.5
[output]
folder = "out"
{extra}
"#
        ),
    )
    .unwrap();
    case
}

/// Copies a folder and everything under it.
pub fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        let q = to.join(p.file_name().unwrap());
        if p.is_dir() {
            copy_dir(&p, &q);
        } else {
            std::fs::copy(&p, &q).unwrap();
        }
    }
}

pub fn bin() -> std::process::Command {
    std::process::Command::new(env!("CARGO_BIN_EXE_trackswing"))
}

/// Row of the synthetic front: the 2 m temperature is 273.5 K (and the profile as in
/// [`write_case`] with no anomaly) on this row, warmer by [`FRONT_K_PER_ROW`] per row to the
/// south and colder to the north, the same in every column; precipitation is uniform. The
/// rain–snow line is therefore a straight east–west line, and a cross-track shift of the storm
/// (left = north for the eastward track) moves it north by exactly the shift.
pub const FRONT_ROW: usize = 18;
/// Temperature change per row across the synthetic front, K.
pub const FRONT_K_PER_ROW: f64 = 0.6;

/// A case like [`write_case`] (flat terrain, eastward track along the middle row, full
/// displacement everywhere) whose weather is the straight front above, with the given towns
/// (`name,lat,lon` lines).
pub fn write_front_case(dir: &Path, towns: &[(&str, f64, f64)], extra: &str) -> PathBuf {
    let s = Synthetic {
        flat: true,
        ..Default::default()
    };
    let case = write_case(dir, &s, extra);
    let n = s.nx * s.ny;
    let anom = |i: usize| (i / s.nx) as f64 * FRONT_K_PER_ROW - FRONT_ROW as f64 * FRONT_K_PER_ROW;
    for k in 0..s.steps {
        let mut bands = Vec::new();
        let mut z = vec![100.0f64; n];
        let mut t_prev = vec![0.0f64; n];
        for (li, p) in LEVELS.iter().enumerate() {
            let mut t = vec![0.0f32; n];
            for i in 0..n {
                let base = [273.0, 271.5, 270.0, 262.0, 245.0][li];
                let tk = base + anom(i) * [1.0, 1.0, 0.9, 0.6, 0.3][li];
                t[i] = tk as f32;
                if li > 0 {
                    let tm = 0.5 * (tk + t_prev[i]);
                    z[i] += 287.04 * tm / 9.80665 * (LEVELS[li - 1] / p).ln();
                }
                t_prev[i] = tk;
            }
            let tag = format!("{}hPa", *p as i64);
            bands.push((format!("air_temperature@{tag}"), t));
            bands.push((
                format!("geopotential_height@{tag}"),
                z.iter().map(|v| *v as f32).collect(),
            ));
            bands.push((format!("relative_humidity@{tag}"), vec![95.0; n]));
        }
        let t2: Vec<f32> = (0..n)
            .map(|i| (273.5 + anom(i) - 0.0065 * 100.0) as f32)
            .collect();
        bands.push(("air_temperature@2m".into(), t2));
        bands.push(("relative_humidity@2m".into(), vec![90.0; n]));
        bands.push(("precipitation_amount".into(), vec![2.0; n]));
        let meta = vec![(
            "valid_time".into(),
            format!("2026-01-14T{:02}:00:00Z", 3 * (k + 1)),
        )];
        write(&dir.join(format!("f/s_{k:02}.tif")), &s, bands, meta);
    }
    let mut csv = String::from("name,lat,lon\n");
    for (name, lat, lon) in towns {
        let quoted = name.replace('"', "\"\"");
        csv.push_str(&format!("\"{quoted}\",{lat},{lon}\n"));
    }
    std::fs::write(dir.join("towns.csv"), csv).unwrap();
    case
}

/// Latitude of the centre of row `row` of the default synthetic grid.
pub fn row_lat(row: usize) -> f64 {
    let s = Synthetic::default();
    s.lat0 - s.d * row as f64
}

/// Longitude of the centre of column `col` of the default synthetic grid.
pub fn col_lon(col: usize) -> f64 {
    let s = Synthetic::default();
    s.lon0 + s.d * col as f64
}

/// True when headless Chromium can be run; otherwise prints why (or panics when references
/// are required).
pub fn chromium_available() -> bool {
    let ok = std::process::Command::new("chromium")
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        if std::env::var("TRACKSWING_REQUIRE_REFERENCES").as_deref() == Ok("1") {
            panic!("chromium not on PATH but TRACKSWING_REQUIRE_REFERENCES=1");
        }
        eprintln!("note: chromium not on PATH; skipping the headless report rendering test");
    }
    ok
}

/// Decodes a PNG into (width, height, RGB or RGBA bytes, channels).
pub fn decode_png(path: &Path) -> (u32, u32, Vec<u8>, usize) {
    let file = std::io::BufReader::new(std::fs::File::open(path).unwrap());
    let mut r = png::Decoder::new(file).read_info().unwrap();
    let mut buf = vec![0; r.output_buffer_size().unwrap()];
    let info = r.next_frame(&mut buf).unwrap();
    buf.truncate(info.buffer_size());
    let ch = info.color_type.samples();
    (info.width, info.height, buf, ch)
}

/// Rewrites a GeoTIFF band by band: `f` returns the new values, or `None` to drop the band.
pub fn rewrite(p: &Path, f: impl Fn(&str, &[f32]) -> Option<Vec<f32>>) {
    rewrite_bands(p, |bands| {
        bands
            .into_iter()
            .filter_map(|(desc, b)| f(&desc, &b).map(|v| (desc, v)))
            .collect()
    });
}

/// Rewrites a GeoTIFF's bands (description, values) as a whole: `f` returns the new list. The
/// grid and the dataset metadata stay.
pub fn rewrite_bands(p: &Path, f: impl FnOnce(Vec<(String, Vec<f32>)>) -> Vec<(String, Vec<f32>)>) {
    let r = trackswing::geotiff::read_geotiff(p).unwrap();
    let bands = f(r.descriptions.into_iter().zip(r.bands).collect());
    write_float32(p, r.width, r.height, &r.georef, &bands, r.dataset_metadata);
}
