//! A case's fields chosen from the bands of files GDAL opens, then read step by step.
//!
//! Choice rules (as for GRIB2, see [`crate::read::grib`]):
//! - every band the case uses must lie on one grid (datasets holding no used field, such as a
//!   NetCDF `time_bnds` variable, are ignored);
//! - the steps are the distinct valid times of isobaric temperatures;
//! - the levels are the isobaric levels where the first step has temperature, geopotential
//!   height (or geopotential) and humidity (relative, specific or dew point); every later step
//!   must have them;
//! - 2 m temperature and 2 m humidity (relative or dew point) at every step; terrain
//!   (surface altitude, surface geopotential, or GRIB height/geopotential at the ground) once;
//! - precipitation per step: a band with an accumulation interval (GRIB) that covers exactly
//!   the step, a chain of them, or the difference of two totals from a common start, with zero
//!   at the first step when it is the reference time; a band without one (NetCDF, GeoTIFF) is
//!   the amount fallen during the step ending at its valid time.
//!
//! A dataset is opened each time a step is read rather than kept open: GDAL datasets may not be
//! shared between threads, and a [`Source`] is.

use super::band::{identify, BandInfo, Level, Meta, Quantity};
use super::GdalError;
use crate::diagnose::thermo::rh_from_dewpoint;
use crate::diagnose::thermo::rh_from_specific;
use crate::geotiff::{Crs, Datum, Georef, Projected, Projection};
use crate::grid::Grid;
use crate::read::accumulation::{step_amount, Accumulation};
use crate::read::fields::{
    assemble, check_range, level_tag, Labelled, StaticFields, StepFields, StepValues,
};
use crate::read::source::{Source, SourceError};
use ::gdal::{Dataset, Metadata};
use chrono::{DateTime, Utc};
use std::path::{Path, PathBuf};

/// Most levels a column can hold (see `diagnose::ptype::MAX_LEVELS`).
const MAX_LEVELS: usize = crate::diagnose::ptype::MAX_LEVELS;
/// Precipitation differences down to this (kg m⁻²) are packing noise and become zero.
const PRECIP_NOISE: f32 = 0.05;

/// One GDAL dataset: a file, or one variable (subdataset) of a NetCDF file.
#[derive(Clone, Debug)]
struct Opened {
    /// What GDAL opens (`f.nc`, `NETCDF:"f.nc":t`).
    name: String,
    /// The file it lives in.
    file: PathBuf,
}

#[derive(Clone, Debug)]
struct Entry {
    ds: usize,
    band: usize,
    info: BandInfo,
}

#[derive(Clone, Copy, Debug)]
enum Humidity {
    Relative(usize),
    Specific(usize),
    Dewpoint(usize),
}

impl Humidity {
    fn index(self) -> usize {
        match self {
            Self::Relative(i) | Self::Specific(i) | Self::Dewpoint(i) => i,
        }
    }
}

#[derive(Clone, Debug)]
struct StepPlan {
    valid: DateTime<Utc>,
    levels: Vec<(f64, usize, usize, Humidity)>,
    t2: usize,
    hum2: Humidity,
    plus: Vec<usize>,
    minus: Vec<usize>,
    mslp: Option<usize>,
}

/// The grid as GDAL gives it, before building a [`Grid`].
#[derive(Clone, Debug, PartialEq)]
struct RawGrid {
    nx: usize,
    ny: usize,
    gt: [f64; 6],
    /// The projected CRS (its false origin moved into `gt`), `None` on lat/lon.
    projected: Option<Projected>,
    /// GDAL's rows run south to north (positive row spacing): flipped on reading.
    flip: bool,
}

/// Fields of a case read through GDAL.
pub struct GdalSource {
    datasets: Vec<Opened>,
    entries: Vec<Entry>,
    flip: bool,
    statics: StaticFields,
    plan: Vec<StepPlan>,
}

fn gdal_err(path: &Path, e: impl std::fmt::Display) -> GdalError {
    GdalError::Gdal {
        path: path.to_path_buf(),
        what: e.to_string(),
    }
}

fn items(list: Option<Vec<String>>) -> Vec<(String, String)> {
    list.unwrap_or_default()
        .into_iter()
        .filter_map(|s| {
            s.split_once('=')
                .map(|(k, v)| (k.to_string(), v.to_string()))
        })
        .collect()
}

/// Keeps GDAL's GRIB driver from converting units (it gives °C otherwise).
fn configure() -> Result<(), GdalError> {
    ::gdal::config::set_config_option("GRIB_NORMALIZE_UNITS", "NO")
        .map_err(|e| gdal_err(Path::new("GDAL configuration"), e))
}

/// Parses the `+key=value` items of a PROJ string.
fn proj_params(s: &str) -> Vec<(String, String)> {
    s.split_whitespace()
        .filter_map(|t| t.strip_prefix('+'))
        .map(|t| match t.split_once('=') {
            Some((k, v)) => (k.to_string(), v.to_string()),
            None => (t.to_string(), String::new()),
        })
        .collect()
}

/// The projected CRS of a PROJ string GDAL gives for a projected grid (without its false origin)
/// and the false easting and northing (m). Lambert conformal conic and polar stereographic, the
/// projections [`Grid::new`] takes.
fn projected_crs(proj: &str) -> Result<(Projected, f64, f64), String> {
    let p = proj_params(proj);
    let num = |k: &str| -> Option<f64> {
        p.iter()
            .find(|(key, _)| key == k)
            .and_then(|(_, v)| v.parse().ok())
    };
    let text = |k: &str| p.iter().find(|(key, _)| key == k).map(|(_, v)| v.as_str());
    let datum = if let Some(r) = num("R") {
        Datum::Sphere { radius_m: r }
    } else if let Some(a) = num("a") {
        let b = num("b")
            .or_else(|| num("rf").map(|rf| a * (1.0 - 1.0 / rf)))
            .unwrap_or(a);
        Datum::from_axes(a, b).map_err(|e| format!("'{proj}': {e}"))?
    } else if matches!(text("ellps"), Some("WGS84") | Some("GRS80"))
        || text("datum") == Some("WGS84")
    {
        Datum::Wgs84
    } else {
        return Err(format!("'{proj}': no Earth radius or known ellipsoid"));
    };
    if num("k")
        .or(num("k_0"))
        .is_some_and(|k| (k - 1.0).abs() > 1e-9)
    {
        return Err(format!(
            "'{proj}': a scale factor other than 1 is not supported"
        ));
    }
    let need = |k: &str| num(k).ok_or_else(|| format!("'{proj}': no +{k}"));
    let projection = match text("proj") {
        Some("lcc") => {
            let lat_1 = need("lat_1")?;
            Projection::LambertConformal2Sp {
                lat_1,
                lat_2: num("lat_2").unwrap_or(lat_1),
                lat_0: num("lat_0").unwrap_or(lat_1),
                lon_0: num("lon_0").unwrap_or(0.0),
            }
        }
        Some("stere") => {
            let lat_0 = need("lat_0")?;
            if (lat_0.abs() - 90.0).abs() > 1e-9 {
                return Err(format!(
                    "'{proj}': only the polar aspect of the stereographic projection is supported"
                ));
            }
            // The pole is the sign of lat_0; the CRS carries it as the sign of lat_ts.
            let lat_ts = num("lat_ts").unwrap_or(lat_0).abs();
            Projection::PolarStereographic {
                lat_ts: if lat_0 > 0.0 { lat_ts } else { -lat_ts },
                lon_0: num("lon_0").unwrap_or(0.0),
            }
        }
        other => {
            return Err(format!(
                "projection '{}' ('{proj}'); trackswing reads lat/lon, Lambert conformal conic and polar stereographic grids",
                other.unwrap_or("?")
            ))
        }
    };
    Ok((
        Projected {
            datum,
            projection,
            false_easting_m: 0.0,
            false_northing_m: 0.0,
        },
        num("x_0").unwrap_or(0.0),
        num("y_0").unwrap_or(0.0),
    ))
}

fn raw_grid(ds: &Dataset) -> Result<RawGrid, String> {
    let (nx, ny) = ds.raster_size();
    let mut gt = ds
        .geo_transform()
        .map_err(|e| format!("no geotransform ({e}); the grid must be regular"))?;
    let flip = gt[5] > 0.0;
    if flip {
        gt[3] += ny as f64 * gt[5];
        gt[5] = -gt[5];
    }
    let srs = ds.spatial_ref().ok();
    let projected = match &srs {
        Some(s) if s.is_projected() => {
            let proj = s.to_proj4().map_err(|e| e.to_string())?;
            let (crs, x0, y0) = projected_crs(&proj)?;
            gt[0] -= x0;
            gt[3] -= y0;
            Some(crs)
        }
        Some(s) if s.is_geographic() => None,
        Some(_) => {
            return Err(
                "its coordinate reference system is neither geographic nor projected".into(),
            )
        }
        None => {
            let inside = gt[0] >= -360.0
                && gt[0] + nx as f64 * gt[1] <= 360.0
                && gt[3] <= 90.0 + 1e-6
                && gt[3] + ny as f64 * gt[5] >= -90.0 - 1e-6;
            if !inside {
                return Err("no coordinate reference system, and its coordinates are not longitudes and latitudes".into());
            }
            None
        }
    };
    // Lat/lon grids stored 180…360 (GRIB's usual longitudes) are given as −180…0, as the GRIB2
    // reader gives them.
    if projected.is_none()
        && gt[0] + 0.5 * gt[1] >= 180.0
        && gt[0] + nx as f64 * gt[1] <= 360.0 + 1e-9
    {
        gt[0] -= 360.0;
    }
    Ok(RawGrid {
        nx,
        ny,
        gt,
        projected,
        flip,
    })
}

fn raw_text(g: &RawGrid) -> String {
    format!(
        "{}×{} cells, origin {:.6},{:.6}, spacing {:.6}×{:.6}{}",
        g.nx,
        g.ny,
        g.gt[0],
        g.gt[3],
        g.gt[1],
        g.gt[5],
        g.projected
            .map(|p| format!(", {}", p.describe()))
            .unwrap_or_default()
    )
}

fn same_grid(a: &RawGrid, b: &RawGrid) -> bool {
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0);
    a.nx == b.nx
        && a.ny == b.ny
        && a.projected == b.projected
        && a.flip == b.flip
        && a.gt.iter().zip(&b.gt).all(|(x, y)| close(*x, *y))
}

/// Datasets of one file: the file itself, or its subdatasets (the variables of a NetCDF file).
fn datasets_of(file: &Path) -> Result<Vec<Opened>, GdalError> {
    let ds = Dataset::open(file).map_err(|e| gdal_err(file, e))?;
    let subs: Vec<String> = items(ds.metadata_domain("SUBDATASETS"))
        .into_iter()
        .filter(|(k, _)| k.ends_with("_NAME"))
        .map(|(_, v)| v)
        .collect();
    if subs.is_empty() {
        Ok(vec![Opened {
            name: file.to_string_lossy().into_owned(),
            file: file.to_path_buf(),
        }])
    } else {
        Ok(subs
            .into_iter()
            .map(|name| Opened {
                name,
                file: file.to_path_buf(),
            })
            .collect())
    }
}

impl GdalSource {
    /// Opens `files` with GDAL, identifies their bands, chooses the case's fields and reads the
    /// terrain; a needed field that is missing or not understood is an error here. Bands not
    /// used are reported in one line through `warn`.
    pub fn open(files: &[PathBuf], warn: &dyn Fn(&str)) -> Result<Self, GdalError> {
        configure()?;
        let mut datasets = Vec::new();
        for f in files {
            datasets.extend(datasets_of(f)?);
        }
        let mut entries = Vec::new();
        let mut grid: Option<(RawGrid, usize)> = None;
        let mut skipped = 0usize;
        for (di, d) in datasets.iter().enumerate() {
            let ds = Dataset::open(&d.name).map_err(|e| gdal_err(&d.file, e))?;
            let dmeta = items(ds.metadata_domain(""));
            let mut found = Vec::new();
            for b in 1..=ds.raster_count() {
                let band = ds.rasterband(b).map_err(|e| gdal_err(&d.file, e))?;
                let bmeta = items(band.metadata_domain(""));
                let description = band.description().unwrap_or_default();
                let unit_type = band.unit();
                let m = Meta {
                    band: &bmeta,
                    dataset: &dmeta,
                    description: &description,
                    unit_type: &unit_type,
                };
                match identify(&m) {
                    Ok(Some(info)) => found.push(Entry {
                        ds: di,
                        band: b,
                        info,
                    }),
                    Ok(None) => skipped += 1,
                    Err(what) => {
                        return Err(GdalError::Band {
                            path: PathBuf::from(&d.name),
                            band: b,
                            label: if description.is_empty() {
                                "no description".into()
                            } else {
                                description
                            },
                            what,
                        })
                    }
                }
            }
            if found.is_empty() {
                continue;
            }
            let g = raw_grid(&ds).map_err(|what| GdalError::Missing {
                path: PathBuf::from(&d.name),
                what,
            })?;
            match &grid {
                None => grid = Some((g, di)),
                Some((first, fi)) if !same_grid(first, &g) => {
                    return Err(GdalError::Missing {
                        path: PathBuf::from(&d.name),
                        what: format!(
                            "its grid ({}) differs from that of {} ({}); every field of a case must share one grid",
                            raw_text(&g),
                            datasets[*fi].name,
                            raw_text(first)
                        ),
                    })
                }
                Some(_) => {}
            }
            entries.extend(found);
        }
        let first_file = files.first().cloned().unwrap_or_default();
        let Some((raw, _)) = grid else {
            return Err(GdalError::Missing {
                path: first_file,
                what: format!("GDAL finds no field trackswing uses in {} file(s) ({skipped} bands); fields are found by CF standard_name (NetCDF), GRIB_ELEMENT and GRIB_SHORT_NAME (GRIB) or band descriptions such as air_temperature@850hPa", files.len()),
            });
        };
        let ch = Chooser {
            entries: &entries,
            datasets: &datasets,
        };
        let steps = ch.steps(&first_file)?;
        let (levels, dropped) = ch.levels(&steps)?;
        let plan = (0..steps.len())
            .map(|k| ch.step(&steps, &levels, k))
            .collect::<Result<Vec<_>, _>>()?;
        let ti = ch.find(Quantity::Terrain, &Level::Surface, None).ok_or_else(|| {
            GdalError::Missing {
                path: first_file.clone(),
                what: "no terrain: surface_altitude (m) or surface_geopotential (NetCDF, band description), or HGT/GP at 0-SFC (GRIB)".into(),
            }
        })?;
        let mut used = vec![false; entries.len()];
        used[ti] = true;
        for s in &plan {
            for (_, t, z, h) in &s.levels {
                used[*t] = true;
                used[*z] = true;
                used[h.index()] = true;
            }
            used[s.t2] = true;
            used[s.hum2.index()] = true;
            for i in s.plus.iter().chain(&s.minus).chain(&s.mslp) {
                used[*i] = true;
            }
        }
        let unused = used.iter().filter(|u| !**u).count();
        if skipped + unused > 0 || !dropped.is_empty() {
            warn(&format!(
                "GDAL: {} bands not used ({skipped} of fields trackswing does not read, {unused} of used fields on other levels or times{}); the case uses {} bands",
                skipped + unused,
                if dropped.is_empty() {
                    String::new()
                } else {
                    format!("; incomplete isobaric levels dropped: {}", dropped.join(", "))
                },
                used.iter().filter(|u| **u).count()
            ));
        }
        let crs = raw.projected.map_or(Crs::Wgs84Geographic, Crs::Projected);
        let georef = Georef {
            crs,
            geotransform: raw.gt,
        };
        let grid = Grid::new(raw.nx, raw.ny, georef).map_err(|source| {
            crate::read::fields::FieldError::Grid {
                path: datasets[entries[ti].ds].file.clone(),
                source,
            }
        })?;
        let mut src = Self {
            datasets,
            entries,
            flip: raw.flip,
            statics: StaticFields {
                grid,
                terrain: Vec::new(),
                path: PathBuf::new(),
            },
            plan,
        };
        let terrain = src.read(&[ti])?.pop().expect("one band read");
        let tpath = src.datasets[src.entries[ti].ds].file.clone();
        check_range(
            &tpath,
            &src.label(ti),
            &terrain,
            -500.0,
            9000.0,
            "expected metres above sea level",
        )?;
        src.statics.terrain = terrain;
        src.statics.path = tpath;
        Ok(src)
    }

    fn label(&self, i: usize) -> String {
        let e = &self.entries[i];
        format!(
            "{} band {} ({})",
            self.datasets[e.ds].name, e.band, e.info.label
        )
    }

    /// Reads bands `ids` in trackswing's units, row 0 north, NaN where missing; each dataset
    /// is opened once.
    fn read(&self, ids: &[usize]) -> Result<Vec<Vec<f32>>, GdalError> {
        configure()?;
        let mut out = vec![Vec::new(); ids.len()];
        let mut order: Vec<usize> = (0..ids.len()).collect();
        order.sort_by_key(|&k| self.entries[ids[k]].ds);
        let mut open: Option<(usize, Dataset)> = None;
        for k in order {
            let e = &self.entries[ids[k]];
            let d = &self.datasets[e.ds];
            if open.as_ref().is_none_or(|(i, _)| *i != e.ds) {
                open = Some((
                    e.ds,
                    Dataset::open(&d.name).map_err(|x| gdal_err(&d.file, x))?,
                ));
            }
            let ds = &open.as_ref().expect("opened above").1;
            let band = ds.rasterband(e.band).map_err(|x| gdal_err(&d.file, x))?;
            let (nx, ny) = band.size();
            let raw = band
                .read_band_as::<f64>()
                .map_err(|x| gdal_err(&d.file, x))?;
            let nodata = band.no_data_value();
            let (scale, add) = (band.scale().unwrap_or(1.0), band.offset().unwrap_or(0.0));
            let (f, o) = (e.info.factor, e.info.offset);
            let data = raw.data();
            let mut v = Vec::with_capacity(nx * ny);
            for r in 0..ny {
                let row = if self.flip { ny - 1 - r } else { r };
                for x in &data[row * nx..(row + 1) * nx] {
                    let missing = x.is_nan() || nodata.is_some_and(|nd| *x == nd);
                    v.push(if missing {
                        f32::NAN
                    } else {
                        ((x * scale + add) * f + o) as f32
                    });
                }
            }
            out[k] = v;
        }
        Ok(out)
    }

    fn relative(&self, h: Humidity, v: Vec<f32>, t: &[f32], p_pa: f64) -> Vec<f32> {
        match h {
            Humidity::Relative(_) => v,
            Humidity::Dewpoint(_) => v
                .iter()
                .zip(t)
                .map(|(&td, &t)| {
                    // A dew point above the temperature is rounding: capped at saturation.
                    rh_from_dewpoint(f64::from(t), f64::from(td.min(t))) as f32
                })
                .collect(),
            Humidity::Specific(_) => v
                .iter()
                .zip(t)
                .map(|(&q, &t)| rh_from_specific(f64::from(q), f64::from(t), p_pa) as f32)
                .collect(),
        }
    }
}

struct Chooser<'a> {
    entries: &'a [Entry],
    datasets: &'a [Opened],
}

impl Chooser<'_> {
    /// First band of `q` on `level` valid at `valid` (any time when `None`).
    fn find(&self, q: Quantity, level: &Level, valid: Option<DateTime<Utc>>) -> Option<usize> {
        self.entries.iter().position(|e| {
            e.info.quantity == q
                && e.info.level.same(level)
                && valid.is_none_or(|v| e.info.valid == Some(v))
        })
    }

    fn path_at(&self, valid: DateTime<Utc>) -> PathBuf {
        self.entries
            .iter()
            .find(|e| e.info.valid == Some(valid))
            .map(|e| PathBuf::from(&self.datasets[e.ds].name))
            .unwrap_or_default()
    }

    fn steps(&self, first: &Path) -> Result<Vec<DateTime<Utc>>, GdalError> {
        let iso = |e: &&Entry| {
            e.info.quantity == Quantity::Temperature && matches!(e.info.level, Level::Isobaric(_))
        };
        let mut t: Vec<DateTime<Utc>> = self
            .entries
            .iter()
            .filter(iso)
            .filter_map(|e| e.info.valid)
            .collect();
        t.sort();
        t.dedup();
        if t.is_empty() {
            let what = match self.entries.iter().find(iso) {
                Some(e) => format!(
                    "{} band {} ({}) has no valid time: NetCDF needs a time dimension with CF units ('hours since ...'), a GeoTIFF the metadata item valid_time",
                    self.datasets[e.ds].name, e.band, e.info.label
                ),
                None => "no air temperature on isobaric levels (NetCDF: standard_name air_temperature with a pressure dimension; GRIB: TMP at ISBL; GeoTIFF: air_temperature@850hPa)".into(),
            };
            return Err(GdalError::Missing {
                path: first.to_path_buf(),
                what,
            });
        }
        Ok(t)
    }

    fn humidity(&self, level: &Level, valid: DateTime<Utc>) -> Option<Humidity> {
        let at = |q| self.find(q, level, Some(valid));
        at(Quantity::RelativeHumidity)
            .map(Humidity::Relative)
            .or_else(|| at(Quantity::Dewpoint).map(Humidity::Dewpoint))
            .or_else(|| match level {
                Level::Isobaric(_) => at(Quantity::SpecificHumidity).map(Humidity::Specific),
                _ => None,
            })
    }

    fn level(&self, p: f64, valid: DateTime<Utc>) -> Result<(usize, usize, Humidity), String> {
        let l = Level::Isobaric(p);
        let t = self
            .find(Quantity::Temperature, &l, Some(valid))
            .ok_or("air temperature")?;
        let z = self
            .find(Quantity::Height, &l, Some(valid))
            .ok_or("geopotential height or geopotential")?;
        let h = self
            .humidity(&l, valid)
            .ok_or("relative humidity, specific humidity or dew point")?;
        Ok((t, z, h))
    }

    fn levels(&self, steps: &[DateTime<Utc>]) -> Result<(Vec<f64>, Vec<String>), GdalError> {
        let first = steps[0];
        let mut ps: Vec<f64> = self
            .entries
            .iter()
            .filter(|e| e.info.quantity == Quantity::Temperature && e.info.valid == Some(first))
            .filter_map(|e| match e.info.level {
                Level::Isobaric(p) => Some(p),
                _ => None,
            })
            .collect();
        ps.sort_by(|a, b| b.total_cmp(a));
        ps.dedup_by(|a, b| (*a - *b).abs() < 0.5);
        let mut levels = Vec::new();
        let mut dropped = Vec::new();
        let mut why = String::new();
        for p in ps {
            match self.level(p, first) {
                Ok(_) => levels.push(p),
                Err(w) => {
                    if why.is_empty() {
                        why = format!("; at {} there is no {w}", level_tag(p));
                    }
                    dropped.push(level_tag(p));
                }
            }
        }
        if levels.len() > MAX_LEVELS {
            dropped.extend(levels.drain(MAX_LEVELS..).map(level_tag));
        }
        if levels.len() < 2 {
            return Err(GdalError::Missing {
                path: self.path_at(first),
                what: format!(
                    "{} complete isobaric level(s) at the first valid time {}; at least two with temperature, height and humidity are needed{why}",
                    levels.len(),
                    first.to_rfc3339()
                ),
            });
        }
        Ok((levels, dropped))
    }

    fn step(
        &self,
        steps: &[DateTime<Utc>],
        levels: &[f64],
        k: usize,
    ) -> Result<StepPlan, GdalError> {
        let valid = steps[k];
        let missing = |what: String| GdalError::Missing {
            path: self.path_at(valid),
            what: format!("step {} (valid {}): {what}", k + 1, valid.to_rfc3339()),
        };
        let mut lv = Vec::with_capacity(levels.len());
        for &p in levels {
            let (t, z, h) = self
                .level(p, valid)
                .map_err(|w| missing(format!("no {w} at {}", level_tag(p))))?;
            lv.push((p, t, z, h));
        }
        let two = Level::AboveGround(2.0);
        let t2 = self
            .find(Quantity::Temperature, &two, Some(valid))
            .ok_or_else(|| missing("no 2 m air temperature".into()))?;
        let hum2 = self
            .humidity(&two, valid)
            .ok_or_else(|| missing("no 2 m relative humidity or dew point".into()))?;
        let (plus, minus) = self.precipitation(steps, k).map_err(missing)?;
        Ok(StepPlan {
            valid,
            levels: lv,
            t2,
            hum2,
            plus,
            minus,
            mslp: self.find(Quantity::Mslp, &Level::Surface, Some(valid)),
        })
    }

    /// Bands to add and to subtract for the precipitation of step `k`.
    fn precipitation(
        &self,
        steps: &[DateTime<Utc>],
        k: usize,
    ) -> Result<(Vec<usize>, Vec<usize>), String> {
        let end = steps[k];
        let precip = || {
            self.entries
                .iter()
                .enumerate()
                .filter(|(_, e)| e.info.quantity == Quantity::Precipitation)
        };
        if let Some((i, _)) =
            precip().find(|(_, e)| e.info.start.is_none() && e.info.valid == Some(end))
        {
            return Ok((vec![i], vec![]));
        }
        let totals: Vec<(DateTime<Utc>, DateTime<Utc>, usize)> = precip()
            .filter_map(|(i, e)| Some((e.info.start?, e.info.valid?, i)))
            .filter(|(s, e, _)| s < e)
            .collect();
        let list = |t: DateTime<Utc>| {
            let v: Vec<String> = totals
                .iter()
                .filter(|(_, e, _)| *e == t)
                .map(|(s, e, _)| format!("{}…{}", s.to_rfc3339(), e.to_rfc3339()))
                .collect();
            if v.is_empty() {
                "none".to_string()
            } else {
                v.join(", ")
            }
        };
        if k == 0 {
            if let Some((_, _, i)) = totals
                .iter()
                .filter(|(_, e, _)| *e == end)
                .min_by_key(|t| t.0)
            {
                return Ok((vec![*i], vec![]));
            }
            let reference = self.entries.iter().filter_map(|e| e.info.reference).min();
            if reference.is_some_and(|r| end <= r) {
                return Ok((vec![], vec![]));
            }
            return Err(
                "no precipitation amount ending at the first valid time (NetCDF: precipitation_amount at every time; GRIB: APCP ending there, or the first step at the reference time)".into(),
            );
        }
        let prev = steps[k - 1];
        let windows: Vec<Accumulation<usize>> = totals
            .iter()
            .map(|&(start, end, id)| Accumulation { start, end, id })
            .collect();
        if let Some(found) = step_amount(&windows, prev, end) {
            return Ok(found);
        }
        Err(format!(
            "the precipitation amounts do not give the step {}…{} (totals ending at {}: {}; ending at {}: {})",
            prev.to_rfc3339(),
            end.to_rfc3339(),
            end.to_rfc3339(),
            list(end),
            prev.to_rfc3339(),
            list(prev)
        ))
    }
}

fn labelled<'a>(src: &GdalSource, i: usize, values: &'a [f32]) -> Labelled<'a> {
    Labelled {
        label: src.label(i),
        values,
    }
}

impl Source for GdalSource {
    fn statics(&self) -> &StaticFields {
        &self.statics
    }

    fn step_count(&self) -> usize {
        self.plan.len()
    }

    fn valid_time(&self, k: usize) -> Option<DateTime<Utc>> {
        self.plan.get(k).map(|s| s.valid)
    }

    fn step_reusing(&self, k: usize, reuse: Vec<f32>) -> Result<StepFields, SourceError> {
        let s = &self.plan[k];
        let mut ids = Vec::new();
        for (_, t, z, h) in &s.levels {
            ids.extend([*t, *z, h.index()]);
        }
        ids.extend([s.t2, s.hum2.index()]);
        ids.extend(s.plus.iter().chain(&s.minus));
        let mut got = self.read(&ids)?.into_iter();
        let mut owned = Vec::with_capacity(s.levels.len());
        for (p, t, z, h) in &s.levels {
            let tv = got.next().expect("read");
            let zv = got.next().expect("read");
            let hv = self.relative(*h, got.next().expect("read"), &tv, *p);
            owned.push([(*t, tv), (*z, zv), (h.index(), hv)]);
        }
        let t2 = got.next().expect("read");
        // Dew point needs no pressure; specific humidity at 2 m is not chosen (see `humidity`).
        let rh2 = self.relative(s.hum2, got.next().expect("read"), &t2, f64::NAN);
        let n = self.statics.terrain.len();
        let mut precip = vec![0f32; n];
        for _ in &s.plus {
            for (a, v) in precip.iter_mut().zip(got.next().expect("read")) {
                *a += v;
            }
        }
        for _ in &s.minus {
            for (a, v) in precip.iter_mut().zip(got.next().expect("read")) {
                *a -= v;
            }
        }
        if let Some((c, v)) = precip.iter().enumerate().find(|(_, v)| **v < -PRECIP_NOISE) {
            return Err(SourceError::Gdal(GdalError::Missing {
                path: self.datasets[self.entries[s.plus[0]].ds].file.clone(),
                what: format!(
                    "step {} (valid {}): {} minus {} is {v} kg m-2 at cell {c} (a later total smaller than an earlier one from the same start)",
                    k + 1,
                    s.valid.to_rfc3339(),
                    self.label(s.plus[0]),
                    self.label(s.minus[0])
                ),
            }));
        }
        for v in &mut precip {
            if *v < 0.0 {
                *v = 0.0;
            }
        }
        let values = StepValues {
            levels_pa: s.levels.iter().map(|l| l.0).collect(),
            levels: owned
                .iter()
                .map(|[t, z, h]| {
                    [
                        labelled(self, t.0, &t.1),
                        labelled(self, z.0, &z.1),
                        labelled(self, h.0, &h.1),
                    ]
                })
                .collect(),
            t2: labelled(self, s.t2, &t2),
            rh2: labelled(self, s.hum2.index(), &rh2),
            precip: Labelled {
                label: match s.plus.first() {
                    Some(&i) => self.label(i),
                    None => "precipitation (zero at the reference time)".into(),
                },
                values: &precip,
            },
        };
        let path = self.datasets[self.entries[s.levels[0].1].ds].file.clone();
        Ok(assemble(
            &path,
            s.valid,
            values,
            &self.statics.terrain,
            reuse,
        )?)
    }

    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError> {
        match self.plan[k].mslp {
            Some(i) => Ok(self.read(&[i])?.pop()),
            None => Ok(None),
        }
    }

    fn inputs(&self) -> Vec<PathBuf> {
        let mut v: Vec<PathBuf> = Vec::new();
        for d in &self.datasets {
            if !v.contains(&d.file) {
                v.push(d.file.clone());
            }
        }
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn proj_strings_gdal_writes_become_projected_crs() {
        // The PROJ strings are those `gdalsrsinfo -o proj4` prints for a Lambert conformal
        // and a north polar stereographic grid on a sphere of radius 6371229 m (GDAL 3.6).
        let (p, x0, y0) = projected_crs(
            "+proj=lcc +lat_0=25 +lon_0=265 +lat_1=25 +lat_2=25 +x_0=0 +y_0=0 +R=6371229 +units=m +no_defs",
        )
        .unwrap();
        assert_eq!((x0, y0), (0.0, 0.0));
        assert_eq!(
            p.projection,
            Projection::LambertConformal2Sp {
                lat_1: 25.0,
                lat_2: 25.0,
                lat_0: 25.0,
                lon_0: 265.0
            }
        );
        assert_eq!(
            p.datum,
            Datum::Sphere {
                radius_m: 6371229.0
            }
        );
        let (p, _, _) = projected_crs(
            "+proj=stere +lat_0=90 +lat_ts=60 +lon_0=-105 +k=1 +x_0=0 +y_0=0 +R=6371229 +units=m +no_defs",
        )
        .unwrap();
        assert!(matches!(
            p.projection,
            Projection::PolarStereographic { lat_ts, .. } if lat_ts == 60.0
        ));
        let e = projected_crs("+proj=merc +lon_0=0 +R=6371229").unwrap_err();
        assert!(e.contains("merc") && e.contains("Lambert"), "{e}");
    }
}
