//! A case's fields from the bands of files GDAL opens: the bands identified ([`super::band`])
//! and handed to the shared [`crate::read::choose`] rules, then read step by step.
//!
//! Every band the case uses must lie on one grid (datasets holding no used field, such as a
//! NetCDF `time_bnds` variable, are ignored). A precipitation band with an accumulation interval
//! (GRIB) is a total since the interval's start; one without (NetCDF, GeoTIFF) is the amount
//! fallen during the step ending at its valid time. Specific humidity at 2 m is turned into
//! relative humidity at the standard-atmosphere pressure of the terrain (GDAL gives no surface
//! pressure).
//!
//! A dataset is opened each time a step is read rather than kept open: GDAL datasets may not be
//! shared between threads, and a [`Source`] is.

use super::band::{identify, BandInfo, Level, Meta, Quantity};
use super::grid::{raw_grid, raw_text, same_grid, RawGrid};
use super::GdalError;
use crate::diagnose::thermo::standard_pressure;
use crate::geotiff::{Crs, Georef};
use crate::grid::Grid;
use crate::read::choose::{self, Catalogue, Chooser, Field, Names, StepChoice, Unusable, Window};
use crate::read::fields::{assemble, check_range, Labelled, StaticFields, StepFields, StepValues};
use crate::read::source::{Source, SourceError};
use ::gdal::{Dataset, Metadata};
use chrono::{DateTime, Utc};
use std::path::{Path, PathBuf};

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

/// Fields of a case read through GDAL.
pub struct GdalSource {
    datasets: Vec<Opened>,
    entries: Vec<Entry>,
    flip: bool,
    statics: StaticFields,
    plan: Vec<StepChoice>,
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
        let fields = catalogue(&entries, &datasets, first_file);
        let ch = Chooser::new(&fields);
        let steps = ch.steps()?;
        let (levels, dropped) = ch.levels(&steps)?;
        let plan = (0..steps.len())
            .map(|k| ch.step(&steps, &levels, k))
            .collect::<Result<Vec<_>, _>>()?;
        // Terrain bands are in metres whatever they hold: geopotential is divided by g on
        // reading (`BandInfo::factor`).
        let ti = ch.terrain()?.field;
        let mut used = vec![false; entries.len()];
        used[ti] = true;
        for s in &plan {
            for i in s.reads().into_iter().chain(s.mslp) {
                used[i] = true;
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
}

/// How bands are named in messages about the fields a case needs: by CF standard name
/// (NetCDF), GRIB element and level (GRIB through GDAL), or band description (GeoTIFF).
const NAMES: Names = Names {
    isobaric_temperature: "air temperature on isobaric levels (NetCDF: standard_name air_temperature with a pressure dimension; GRIB: TMP at ISBL; GeoTIFF: air_temperature@850hPa)",
    temperature: "air temperature",
    height: "geopotential height or geopotential",
    humidity: "relative humidity, specific humidity or dew point",
    temperature_2m: "2 m air temperature",
    humidity_2m: "2 m relative humidity, dew point or specific humidity",
    terrain: "surface_altitude (m) or surface_geopotential (NetCDF, band description), or HGT/GP at 0-SFC (GRIB)",
    first_precipitation: "precipitation amount (NetCDF: precipitation_amount at every time; GRIB: APCP ending there, or the first step at the reference time)",
};

/// The identified bands as the chooser sees them, in the same order.
fn catalogue(entries: &[Entry], datasets: &[Opened], first_file: PathBuf) -> Catalogue {
    let fields = entries
        .iter()
        .map(|e| {
            let i = &e.info;
            let quantity = match i.quantity {
                Quantity::Temperature => choose::Quantity::Temperature,
                // In metres already: geopotential is divided by g on reading.
                Quantity::Height => choose::Quantity::GeopotentialHeight,
                Quantity::RelativeHumidity => choose::Quantity::RelativeHumidity,
                Quantity::SpecificHumidity => choose::Quantity::SpecificHumidity,
                Quantity::Dewpoint => choose::Quantity::Dewpoint,
                Quantity::Precipitation => choose::Quantity::Precipitation,
                Quantity::Terrain => choose::Quantity::TerrainHeight,
                Quantity::Mslp => choose::Quantity::Mslp,
            };
            // GDAL's `Surface` is whatever has no level: the ground for terrain and
            // precipitation, sea level for sea-level pressure, and for anything else no level
            // the case uses (a geopotential height without one is not the terrain).
            let level = match (i.level, i.quantity) {
                (Level::Isobaric(p), _) => choose::Level::Isobaric(p),
                (Level::AboveGround(h), _) => choose::Level::AboveGround(h),
                (Level::Surface, Quantity::Terrain | Quantity::Precipitation) => {
                    choose::Level::Ground
                }
                (Level::Surface, Quantity::Mslp) => choose::Level::MeanSeaLevel,
                (Level::Surface, _) => choose::Level::Other,
            };
            let window = match (i.quantity, i.start) {
                (Quantity::Precipitation, Some(start)) => Window::Since(start),
                (Quantity::Precipitation, None) => Window::Step,
                _ => Window::Instant,
            };
            // An isobaric temperature without a time cannot be a step; said when no band gives
            // the steps.
            let timeless = i.valid.is_none()
                && i.quantity == Quantity::Temperature
                && matches!(i.level, Level::Isobaric(_));
            Field {
                quantity,
                level,
                valid: i.valid,
                window,
                reference: i.reference,
                unusable: timeless.then(|| Unusable::Problem("it has no valid time: NetCDF needs a time dimension with CF units ('hours since ...'), a GeoTIFF the metadata item valid_time".into())),
                path: PathBuf::from(&datasets[e.ds].name),
                origin: format!("{} band {} ({})", datasets[e.ds].name, e.band, i.label),
            }
        })
        .collect();
    Catalogue {
        fields,
        files: first_file,
        // Bands on another grid are refused on opening, before any choice.
        grid: String::new(),
        names: NAMES,
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
        // In the order of `reads`; GDAL gives no surface pressure, so none is read.
        let mut got = self.read(&s.reads())?.into_iter();
        let mut owned = Vec::with_capacity(s.levels.len());
        for l in &s.levels {
            let tv = got.next().expect("read");
            let zv = got.next().expect("read");
            let hv = l
                .hum
                .relative(got.next().expect("read"), &tv, &|_| l.pressure);
            owned.push([(l.t, tv), (l.z.field, zv), (l.hum.field(), hv)]);
        }
        let t2 = got.next().expect("read");
        let terrain = &self.statics.terrain;
        let p_at = |c: usize| standard_pressure(f64::from(terrain[c]));
        let rh2 = s.hum2.relative(got.next().expect("read"), &t2, &p_at);
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
            levels_pa: s.levels.iter().map(|l| l.pressure).collect(),
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
            rh2: labelled(self, s.hum2.field(), &rh2),
            precip: Labelled {
                label: match s.plus.first() {
                    Some(&i) => self.label(i),
                    None => "precipitation (zero at the reference time)".into(),
                },
                values: &precip,
            },
        };
        let path = self.datasets[self.entries[s.levels[0].t].ds].file.clone();
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
