//! Opening a member's fields: the whole model grid, or a window of it ([`RegionSource`]) for
//! `--region` and for global grids whose pole rows are left out.

use super::fields::{StaticFields, StepFields};
use super::member::{InputFormat, Member};
use super::region::{pole_rows, Region, RegionError, Window};
use super::source::{open_gdal, open_model, GeoTiffSource, Source, SourceError};
use chrono::{DateTime, Utc};
use std::path::PathBuf;
use std::sync::Mutex;

/// A source that hands the engine only a [`Window`] of another source's fields.
pub struct RegionSource {
    inner: Box<dyn Source>,
    window: Window,
    statics: StaticFields,
    /// The last full-grid step's columns, handed back to the inner source to read the next step
    /// into (a global step's columns take hundreds of MB).
    spare: Mutex<Vec<f32>>,
}

impl RegionSource {
    /// Cuts `inner` to `region`; `field` names where the region was given.
    pub fn new(inner: Box<dyn Source>, region: Region, field: &str) -> Result<Self, RegionError> {
        let full = inner.statics();
        let window = Window::of(region, &full.grid, field)?;
        let grid = full
            .grid
            .window(
                window.first_row,
                window.rows,
                window.first_col,
                window.cols,
                window.lon_shift_deg,
            )
            .map_err(|source| RegionError::Grid {
                field: field.into(),
                source,
            })?;
        let statics = StaticFields {
            grid,
            terrain: window.cut(&full.terrain, 1),
            path: full.path.clone(),
        };
        Ok(Self {
            inner,
            window,
            statics,
            spare: Mutex::new(Vec::new()),
        })
    }
}

impl Source for RegionSource {
    fn statics(&self) -> &StaticFields {
        &self.statics
    }
    fn step_count(&self) -> usize {
        self.inner.step_count()
    }
    fn valid_time(&self, k: usize) -> Option<DateTime<Utc>> {
        self.inner.valid_time(k)
    }
    fn step_reusing(&self, k: usize, mut reuse: Vec<f32>) -> Result<StepFields, SourceError> {
        let spare = std::mem::take(&mut *self.spare.lock().unwrap_or_else(|p| p.into_inner()));
        let full = self.inner.step_reusing(k, spare)?;
        self.window
            .cut_into(&full.columns, full.layout.nvar(), &mut reuse);
        *self.spare.lock().unwrap_or_else(|p| p.into_inner()) = full.columns;
        Ok(StepFields {
            valid: full.valid,
            layout: full.layout,
            columns: reuse,
            path: full.path,
        })
    }
    fn mslp(&self, k: usize) -> Result<Option<Vec<f32>>, SourceError> {
        Ok(self.inner.mslp(k)?.map(|p| self.window.cut(&p, 1)))
    }
    fn inputs(&self) -> Vec<PathBuf> {
        self.inner.inputs()
    }
    fn window(&self) -> Option<&Window> {
        Some(&self.window)
    }
    fn reference_time(&self) -> Option<DateTime<Utc>> {
        self.inner.reference_time()
    }
}

/// Opens a member's fields, cut to `region` (the box and where it was given, `--region` or the
/// case file's `region`) when there is one. `warn` receives one summary line of what was not
/// used.
pub fn open_member(
    member: &Member,
    region: Option<&(Region, String)>,
    warn: &dyn Fn(&str),
) -> Result<Box<dyn Source>, SourceError> {
    let whole = open_whole(member, warn)?;
    let grid = &whole.statics().grid;
    let poles = pole_rows(grid);
    if poles > 0 {
        let gt = grid.georef.geotransform;
        let edge = (0..grid.ny)
            .map(|r| (gt[3] + (r as f64 + 0.5) * gt[5]).abs() + gt[5].abs() / 2.0)
            .filter(|e| *e <= 90.0 + 1e-9)
            .fold(0.0, f64::max);
        warn(&format!(
            "the model grid's {poles} row(s) centred at the poles are left out: their cells would \
             reach past ±90° (to ±{:.4}°), which a GeoTIFF cannot hold, and each is one point; \
             the layers reach ±{edge:.4}°",
            90.0 + gt[5].abs() / 2.0,
        ));
    }
    Ok(match (region, poles) {
        (Some((r, field)), _) => Box::new(RegionSource::new(whole, *r, field)?),
        (None, 0) => whole,
        (None, _) => match super::region::whole(grid) {
            Some(r) => Box::new(RegionSource::new(whole, r, "the model grid")?),
            None => whole,
        },
    })
}

/// A member's fields on the whole model grid.
fn open_whole(member: &Member, warn: &dyn Fn(&str)) -> Result<Box<dyn Source>, SourceError> {
    match member.format {
        InputFormat::GeoTiff => Ok(Box::new(GeoTiffSource::open(
            &member.terrain,
            &member.steps,
        )?)),
        InputFormat::Model => open_model(&member.steps, member.perturbation, warn),
        InputFormat::Gdal => open_gdal(&member.steps, warn),
    }
}
