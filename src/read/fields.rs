//! Model fields from GeoTIFF files: one file of ground-attached fields (terrain) and one
//! multi-band file per time step.
//!
//! Bands are found by their description, never by position: a CF standard name, with
//! `@<level>` for levelled fields — `air_temperature@850hPa`, `geopotential_height@850hPa`,
//! `relative_humidity@850hPa` for every isobaric level; `air_temperature@2m`,
//! `relative_humidity@2m`; `precipitation_amount` (kg m⁻², fallen during the step ending at the
//! valid time). The step's valid time is the dataset metadata item `valid_time` (RFC 3339).
//! The terrain file holds `surface_altitude` (m).
//!
//! Units are the CF canonical ones (K, %, m, kg m⁻²). Values outside physical ranges are
//! refused with the file, band and cell named, because a temperature in °C read as K, or RH as a
//! fraction, would silently give wrong maps. Missing cells (nodata, NaN) stay NaN.

use crate::geotiff::{read_geotiff, GeoTiffError, Raster};
use crate::grid::{Grid, GridError};
use chrono::{DateTime, Utc};
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Why model fields cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum FieldError {
    /// The GeoTIFF itself could not be read.
    #[error(transparent)]
    GeoTiff(#[from] GeoTiffError),
    /// The grid is unusable.
    #[error("{path}: {source}")]
    Grid {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: GridError,
    },
    /// A required band is absent.
    #[error("{path}: no band described as '{band}' ({why})")]
    Missing {
        /// The file.
        path: PathBuf,
        /// The band description that was expected.
        band: String,
        /// Why it is needed.
        why: String,
    },
    /// Values outside the physical range.
    #[error("{path}: {band}: {what}")]
    Implausible {
        /// The file.
        path: PathBuf,
        /// The band (`band 'name'`) or GRIB message.
        band: String,
        /// What was found and what was expected.
        what: String,
    },
    /// The file's grid differs from the first file's.
    #[error("{path}: its grid ({got}) differs from {first} ({want}); every file of a case must share one grid")]
    GridMismatch {
        /// The file.
        path: PathBuf,
        /// The first file of the case.
        first: PathBuf,
        /// This file's grid.
        got: String,
        /// The first file's grid.
        want: String,
    },
    /// Something else about the file's layout.
    #[error("{path}: {what}")]
    Layout {
        /// The file.
        path: PathBuf,
        /// What was wrong and what was expected.
        what: String,
    },
}

/// Where each variable sits in a cell's interleaved column of values.
///
/// Storm-attached variables of one cell are stored together so that sampling a displaced point
/// reads four short contiguous runs of memory (one per bilinear neighbour).
#[derive(Clone, Debug, PartialEq)]
pub struct StepLayout {
    /// Isobaric levels, Pa, from the highest pressure (lowest level) upward.
    pub levels_pa: Vec<f64>,
    /// Natural logarithms of `levels_pa` (ln Pa), once per run: the per-cell kernel integrates
    /// in ln p.
    ln_levels_pa: Vec<f64>,
}

impl StepLayout {
    /// The layout of columns with these isobaric levels (Pa, highest pressure first).
    pub fn new(levels_pa: Vec<f64>) -> Self {
        let ln_levels_pa = levels_pa.iter().map(|p| p.ln()).collect();
        Self {
            levels_pa,
            ln_levels_pa,
        }
    }
    /// ln of the pressure of level `k` (ln Pa).
    #[inline]
    pub fn ln_level(&self, k: usize) -> f64 {
        self.ln_levels_pa[k]
    }
    /// Index of the temperature (K) at level `k`.
    pub fn t(&self, k: usize) -> usize {
        3 * k
    }
    /// Index of the geopotential height (m) at level `k`.
    pub fn z(&self, k: usize) -> usize {
        3 * k + 1
    }
    /// Index of the relative humidity (%) at level `k`.
    pub fn rh(&self, k: usize) -> usize {
        3 * k + 2
    }
    /// Index of the 2 m temperature (K).
    pub fn t2(&self) -> usize {
        3 * self.levels_pa.len()
    }
    /// Index of the 2 m relative humidity (%).
    pub fn rh2(&self) -> usize {
        3 * self.levels_pa.len() + 1
    }
    /// Index of the step's precipitation (kg m⁻²).
    pub fn precip(&self) -> usize {
        3 * self.levels_pa.len() + 2
    }
    /// Index of the model terrain height under the column (m): carried with the storm so the
    /// 2 m temperature can be corrected when moved over different ground.
    pub fn terrain(&self) -> usize {
        3 * self.levels_pa.len() + 3
    }
    /// Values per cell.
    pub fn nvar(&self) -> usize {
        3 * self.levels_pa.len() + 4
    }
}

/// Ground-attached fields.
#[derive(Clone, Debug)]
pub struct StaticFields {
    /// The grid every file of the case shares.
    pub grid: Grid,
    /// Surface altitude, m, row-major.
    pub terrain: Vec<f32>,
    /// The file.
    pub path: PathBuf,
}

/// One time step's storm-attached fields.
#[derive(Clone, Debug)]
pub struct StepFields {
    /// Valid time (end of the precipitation interval).
    pub valid: DateTime<Utc>,
    /// Variable layout within each cell.
    pub layout: StepLayout,
    /// `nvar` values per cell, cell-major.
    pub columns: Vec<f32>,
    /// The file.
    pub path: PathBuf,
}

fn grid_text(g: &Grid) -> String {
    let gt = g.georef.geotransform;
    format!(
        "{}×{} cells, origin {:.6},{:.6}, spacing {:.6}×{:.6}",
        g.nx, g.ny, gt[0], gt[3], gt[1], gt[5]
    )
}

/// The band described as `name`; an error when it is absent or appears more than once (two
/// bands claiming one field and level leave no way to know which is meant).
fn band<'a>(r: &'a Raster, path: &Path, name: &str, why: &str) -> Result<&'a [f32], FieldError> {
    let mut found = r
        .descriptions
        .iter()
        .enumerate()
        .filter(|(_, d)| d.trim() == name)
        .map(|(i, _)| i);
    let first = found.next().ok_or_else(|| FieldError::Missing {
        path: path.to_path_buf(),
        band: name.to_string(),
        why: why.to_string(),
    })?;
    if let Some(second) = found.next() {
        return Err(FieldError::Layout {
            path: path.to_path_buf(),
            what: format!(
                "bands {} and {} are both described as '{name}'; each field and level may appear once",
                first + 1,
                second + 1
            ),
        });
    }
    Ok(r.bands[first].as_slice())
}

/// Checks that every finite value lies in `lo..=hi`, naming the first offender.
pub(crate) fn check_range(
    path: &Path,
    name: &str,
    v: &[f32],
    lo: f32,
    hi: f32,
    hint: &str,
) -> Result<(), FieldError> {
    if let Some((i, x)) = v
        .iter()
        .enumerate()
        .find(|(_, x)| x.is_finite() && !(lo..=hi).contains(*x))
    {
        return Err(FieldError::Implausible {
            path: path.to_path_buf(),
            band: name.to_string(),
            what: format!("cell {i} holds {x}, outside the plausible {lo}…{hi}; {hint}"),
        });
    }
    Ok(())
}

/// Reads the terrain file.
pub fn read_static(path: &Path) -> Result<StaticFields, FieldError> {
    let r = read_geotiff(path)?;
    let grid = Grid::new(r.width, r.height, r.georef).map_err(|source| FieldError::Grid {
        path: path.to_path_buf(),
        source,
    })?;
    let terrain = band(&r, path, "surface_altitude", "terrain height in m")?.to_vec();
    check_range(
        path,
        "band 'surface_altitude'",
        &terrain,
        -500.0,
        9000.0,
        "expected metres above sea level",
    )?;
    Ok(StaticFields {
        grid,
        terrain,
        path: path.to_path_buf(),
    })
}

/// Parses `…@850hPa` descriptions into the list of isobaric levels, Pa, highest pressure first.
fn isobaric_levels(r: &Raster) -> Vec<f64> {
    let mut levels: Vec<f64> = r
        .descriptions
        .iter()
        .filter_map(|d| d.trim().strip_prefix("air_temperature@"))
        .filter_map(|l| l.strip_suffix("hPa"))
        .filter_map(|l| l.parse::<f64>().ok())
        .filter(|p| p.is_finite() && *p > 0.0)
        .map(|p| p * 100.0)
        .collect();
    levels.sort_by(|a, b| b.total_cmp(a));
    levels.dedup();
    levels
}

/// Writes a level as it appears in band descriptions: 850 hPa → `850hPa`, 92.5 hPa → `92.5hPa`.
pub fn level_tag(p_pa: f64) -> String {
    let hpa = p_pa / 100.0;
    if (hpa - hpa.round()).abs() < 1e-9 {
        format!("{}hPa", hpa.round() as i64)
    } else {
        format!("{hpa}hPa")
    }
}

/// Reads one step file, checks it against the case grid and returns its interleaved columns.
/// `terrain` is the ground height of the case, copied into the columns (see
/// [`StepLayout::terrain`]). The columns are written into `reuse` (see
/// [`super::source::Source::step_reusing`]); pass an empty vector when there is none.
pub fn read_step(
    path: &Path,
    statics: &StaticFields,
    reuse: Vec<f32>,
) -> Result<StepFields, FieldError> {
    let r = read_geotiff(path)?;
    let grid = Grid::new(r.width, r.height, r.georef).map_err(|source| FieldError::Grid {
        path: path.to_path_buf(),
        source,
    })?;
    if !grid.same_as(&statics.grid) {
        return Err(FieldError::GridMismatch {
            path: path.to_path_buf(),
            first: statics.path.clone(),
            got: grid_text(&grid),
            want: grid_text(&statics.grid),
        });
    }
    let layout_err = |what: String| FieldError::Layout {
        path: path.to_path_buf(),
        what,
    };
    let valid = r
        .dataset_metadata
        .iter()
        .find(|(k, _)| k == "valid_time")
        .map(|(_, v)| v.clone())
        .ok_or_else(|| {
            layout_err(
                "no 'valid_time' metadata item (an RFC 3339 time such as 2026-01-14T06:00:00Z)"
                    .into(),
            )
        })?;
    let valid = DateTime::parse_from_rfc3339(valid.trim())
        .map_err(|_| layout_err(format!("'valid_time' = '{valid}' is not an RFC 3339 time")))?
        .with_timezone(&Utc);
    let levels_pa = isobaric_levels(&r);
    if levels_pa.len() < 2 {
        return Err(layout_err(format!(
            "found {} isobaric level(s) of air_temperature; at least two are needed (bands named like air_temperature@850hPa)",
            levels_pa.len()
        )));
    }
    let mut levels = Vec::with_capacity(levels_pa.len());
    for &p in &levels_pa {
        let tag = level_tag(p);
        let get = |name: &str| -> Result<Labelled<'_>, FieldError> {
            let full = format!("{name}@{tag}");
            let v = band(
                &r,
                path,
                &full,
                "every isobaric level needs temperature, height and humidity",
            )?;
            Ok(Labelled {
                label: format!("band '{full}'"),
                values: v,
            })
        };
        levels.push([
            get("air_temperature")?,
            get("geopotential_height")?,
            get("relative_humidity")?,
        ]);
    }
    let get = |name: &str| -> Result<Labelled<'_>, FieldError> {
        Ok(Labelled {
            label: format!("band '{name}'"),
            values: band(
                &r,
                path,
                name,
                "needed to decide type and amount at the ground",
            )?,
        })
    };
    let values = StepValues {
        levels_pa,
        levels,
        t2: get("air_temperature@2m")?,
        rh2: get("relative_humidity@2m")?,
        precip: get("precipitation_amount")?,
    };
    assemble(path, valid, values, &statics.terrain, reuse)
}

/// One field's values with the words that name it in messages (a band, or a GRIB message).
pub struct Labelled<'a> {
    /// E.g. `band 'air_temperature@850hPa'` or `message 12 (temperature at 850 hPa)`.
    pub label: String,
    /// Row-major values, row 0 north, NaN where missing.
    pub values: &'a [f32],
}

/// The storm-attached fields of one step, in SI units, before interleaving.
pub struct StepValues<'a> {
    /// Isobaric levels, Pa, highest pressure first.
    pub levels_pa: Vec<f64>,
    /// Temperature (K), geopotential height (m) and relative humidity (%) per level.
    pub levels: Vec<[Labelled<'a>; 3]>,
    /// 2 m temperature, K.
    pub t2: Labelled<'a>,
    /// 2 m relative humidity, %.
    pub rh2: Labelled<'a>,
    /// Precipitation fallen during the step, kg m⁻².
    pub precip: Labelled<'a>,
}

/// Checks every field against its physical range and interleaves the step's columns (see
/// [`StepLayout`]); `terrain` is the case's ground height, copied into every column. Shared by
/// every input format, so a temperature in °C or a humidity as a fraction is refused the same
/// way whatever the file type.
pub fn assemble(
    path: &Path,
    valid: DateTime<Utc>,
    v: StepValues<'_>,
    terrain: &[f32],
    reuse: Vec<f32>,
) -> Result<StepFields, FieldError> {
    // The surface point takes one place of a profile (diagnose::ptype::MAX_LEVELS).
    let most = crate::diagnose::ptype::MAX_LEVELS - 1;
    if v.levels_pa.len() > most {
        return Err(FieldError::Layout {
            path: path.to_path_buf(),
            what: format!(
                "found {} isobaric levels; at most {most} are supported",
                v.levels_pa.len()
            ),
        });
    }
    let layout = StepLayout::new(v.levels_pa);
    let n = terrain.len();
    let nvar = layout.nvar();
    let length = |f: &Labelled<'_>| -> Result<(), FieldError> {
        if f.values.len() == n {
            return Ok(());
        }
        Err(FieldError::Layout {
            path: path.to_path_buf(),
            what: format!(
                "{} has {} values but the grid has {n} cells",
                f.label,
                f.values.len()
            ),
        })
    };
    const T_HINT: &str = "temperatures must be in kelvin (a value near 0–30 suggests °C)";
    const RH_HINT: &str = "relative humidity must be in percent, 0–100";
    // Every field with the place it takes in a column.
    let mut sources: Vec<(usize, &[f32])> = Vec::with_capacity(nvar);
    for (k, [t, z, rh]) in v.levels.iter().enumerate() {
        check_range(path, &t.label, t.values, 150.0, 340.0, T_HINT)?;
        check_range(
            path,
            &z.label,
            z.values,
            -1000.0,
            40000.0,
            "expected metres",
        )?;
        check_range(path, &rh.label, rh.values, 0.0, 100.5, RH_HINT)?;
        for f in [t, z, rh] {
            length(f)?;
        }
        sources.extend([
            (layout.t(k), t.values),
            (layout.z(k), z.values),
            (layout.rh(k), rh.values),
        ]);
    }
    check_range(path, &v.t2.label, v.t2.values, 150.0, 340.0, T_HINT)?;
    check_range(path, &v.rh2.label, v.rh2.values, 0.0, 100.5, RH_HINT)?;
    check_range(
        path,
        &v.precip.label,
        v.precip.values,
        -0.01,
        1000.0,
        "expected kg m-2 (mm) per step, not negative",
    )?;
    for f in [&v.t2, &v.rh2, &v.precip] {
        length(f)?;
    }
    sources.extend([
        (layout.t2(), v.t2.values),
        (layout.rh2(), v.rh2.values),
        (layout.precip(), v.precip.values),
        (layout.terrain(), terrain),
    ]);
    // Interleave cell by cell (each column written once, every field read in order), in
    // parallel blocks; the first cell whose heights do not increase is reported whatever the
    // number of threads.
    const CELLS_PER_BLOCK: usize = 16_384;
    let nlev = layout.levels_pa.len();
    // Every value of every column is written below, so a buffer of the right size is used as
    // it is.
    let mut columns = reuse;
    if columns.len() != n * nvar {
        columns.clear();
        columns.resize(n * nvar, 0.0);
    }
    let not_rising = columns
        .par_chunks_mut(CELLS_PER_BLOCK * nvar)
        .enumerate()
        .filter_map(|(b, block)| {
            let mut first = None;
            for (i, col) in block.chunks_mut(nvar).enumerate() {
                let c = b * CELLS_PER_BLOCK + i;
                for &(var, src) in &sources {
                    col[var] = src[c];
                }
                // Rounding noise only: the range checks above refused anything larger.
                col[layout.precip()] = col[layout.precip()].max(0.0);
                for k in 0..nlev {
                    col[layout.rh(k)] = col[layout.rh(k)].min(100.0);
                }
                col[layout.rh2()] = col[layout.rh2()].min(100.0);
                if first.is_none() {
                    first = (1..nlev)
                        .find(|&k| col[layout.z(k)] <= col[layout.z(k - 1)])
                        .map(|k| (c, k, col[layout.z(k - 1)], col[layout.z(k)]));
                }
            }
            first
        })
        .min_by_key(|(c, ..)| *c);
    if let Some((c, k, z0, z1)) = not_rising {
        return Err(FieldError::Implausible {
            path: path.to_path_buf(),
            band: v.levels[k][1].label.clone(),
            what: format!(
                "cell {c}: height {z1} m is not above {z0} m at {}; heights must increase upward",
                level_tag(layout.levels_pa[k - 1])
            ),
        });
    }
    Ok(StepFields {
        valid,
        layout,
        columns,
        path: path.to_path_buf(),
    })
}
