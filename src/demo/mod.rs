//! An invented demo storm on a lat/lon grid, for trying trackswing without model data.
//!
//! **Everything here is invented**: the region of Carrowmark (its coastal plain, the Sallow
//! Flats; the Greymantle Ridge; the Wendle Valley behind it), its towns and the storm. It is
//! placed over open ocean at 41.6–52° N, 35–15.8° W so its layers land on a map without
//! implying any real place. The data is deterministic: the same spec gives the same bits.
//!
//! The storm is a deepening mid-latitude low (about 987 hPa falling to 974 hPa) crossing from
//! south-west to north-east just off the coast, with a warm sector and warm advection ahead and
//! right of it, cold air left and behind, a comma-head band left of the track and a
//! warm-frontal shield ahead. Warm air aloft runs over cold air trapped against the ridge and
//! in the valley, so sleet and freezing rain occur there. Heights are hypsometric from
//! sea-level pressure and virtual temperature (SCIENCE.md §2).
//!
//! Storm time runs from 0 at the first step to 1 at the last, whatever the step count, so every
//! [`DemoSpec::scaled`] grid shows the whole storm with the same storm totals.

mod calendar;
mod generate;
mod region;
mod storm;
pub mod thermo;
mod towns;

pub use generate::Generator;
pub use towns::towns;

/// Grid and time axis of a demo run.
#[derive(Debug, Clone, PartialEq)]
pub struct DemoSpec {
    /// Columns (west to east) and rows (north to south).
    pub nx: usize,
    pub ny: usize,
    /// Number of valid times, step 0 being the start of the run.
    pub steps: usize,
    /// Hours between valid times.
    pub step_hours: u32,
    /// Isobaric levels, hPa, in descending order (the heights are integrated upward).
    pub levels_hpa: Vec<f64>,
    /// Cell centre of the north-west cell, degrees; spacings are positive degrees; row 0 is
    /// north, so cell (i, j) is at (lat_north − j·dlat, lon_west + i·dlon).
    pub lon_west: f64,
    pub lat_north: f64,
    pub dlon: f64,
    pub dlat: f64,
    /// Year, month, day and hour (UTC) of step 0.
    pub start: (i32, u32, u32, u32),
}

/// The shipped case's levels, hPa.
const DEMO_LEVELS_HPA: [f64; 5] = [1000.0, 925.0, 850.0, 700.0, 500.0];
/// Levels in the order [`DemoSpec::scaled`] adds them, so each count keeps the ones that matter
/// most for precipitation type (the warm nose lives between 925 and 700 hPa).
const LEVEL_PREFERENCE_HPA: [f64; 13] = [
    1000.0, 850.0, 500.0, 700.0, 925.0, 600.0, 950.0, 800.0, 975.0, 900.0, 750.0, 650.0, 550.0,
];

impl DemoSpec {
    /// The shipped case: 128 × 104 cells of 0.15° × 0.1° over the whole region, 18 steps three
    /// hours apart from 2026-01-13T12:00Z, levels 1000/925/850/700/500 hPa.
    pub fn demo() -> Self {
        let mut spec = Self::scaled(128, 104, 25, 2, DEMO_LEVELS_HPA.len());
        spec.levels_hpa = DEMO_LEVELS_HPA.to_vec();
        spec
    }

    /// The same storm over the same region on `nx` × `ny` cells, `steps` valid times
    /// `step_hours` apart and `n_levels` isobaric levels between 1000 and 500 hPa (at least
    /// one cell, two steps' worth of storm time and two levels are always used). Up to 13
    /// levels come from a fixed list (1000, 850, 500, 700, 925, 600, …); more are spaced
    /// evenly in pressure.
    pub fn scaled(nx: usize, ny: usize, steps: usize, step_hours: u32, n_levels: usize) -> Self {
        let (nx, ny) = (nx.max(1), ny.max(1));
        let n_levels = n_levels.max(2);
        let mut levels_hpa: Vec<f64> = if n_levels <= LEVEL_PREFERENCE_HPA.len() {
            LEVEL_PREFERENCE_HPA[..n_levels].to_vec()
        } else {
            (0..n_levels)
                .map(|k| 1000.0 - 500.0 * k as f64 / (n_levels - 1) as f64)
                .collect()
        };
        levels_hpa.sort_by(|a, b| b.total_cmp(a));
        let dlon = (region::EAST - region::WEST) / nx as f64;
        let dlat = (region::NORTH - region::SOUTH) / ny as f64;
        DemoSpec {
            nx,
            ny,
            steps,
            step_hours,
            levels_hpa,
            lon_west: region::WEST + 0.5 * dlon,
            lat_north: region::NORTH - 0.5 * dlat,
            dlon,
            dlat,
            start: (2026, 1, 13, 12),
        }
    }
}

/// One gridded field.
#[derive(Debug, Clone, PartialEq)]
pub struct Field {
    /// CF standard name.
    pub name: &'static str,
    pub level: Level,
    /// UDUNITS string.
    pub units: &'static str,
    /// ny·nx values, row-major, row 0 north.
    pub data: Vec<f32>,
}

/// Vertical placement of a [`Field`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Level {
    Isobaric {
        hpa: f64,
    },
    HeightAboveGround {
        m: f64,
    },
    MeanSeaLevel,
    Surface,
    /// Accumulated over the step ending at the valid time.
    Accumulation,
}

/// Ground-attached fields: "surface_altitude" (m) and "land_area_fraction" (1), both Surface.
pub fn static_fields(spec: &DemoSpec) -> Vec<Field> {
    Generator::new(spec).static_fields()
}

/// The fields valid at `step` (see [`Generator::step_fields`] for the list and order). Builds
/// the ground each call; a caller streaming many steps should keep a [`Generator`].
pub fn step_fields(spec: &DemoSpec, step: usize) -> Vec<Field> {
    Generator::new(spec).step_fields(step)
}

/// Valid time of `step` as an RFC 3339 UTC timestamp, e.g. "2026-01-14T06:00:00Z".
pub fn valid_time_iso(spec: &DemoSpec, step: usize) -> String {
    calendar::iso_after(spec.start, step as u64 * u64::from(spec.step_hours))
}

/// One point of the storm track.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackPoint {
    pub time_iso: String,
    /// Degrees north and east.
    pub lat: f64,
    pub lon: f64,
    /// Sea-level pressure at the centre, Pa.
    pub mslp_pa: f64,
}

/// The low centre at every step: the true minimum of the generated sea-level pressure (found
/// on the analytic field, so it falls between grid cells).
pub fn track(spec: &DemoSpec) -> Vec<TrackPoint> {
    (0..spec.steps)
        .map(|step| {
            let (lat, lon, mslp_pa) = generate::low_centre(spec, step);
            TrackPoint {
                time_iso: valid_time_iso(spec, step),
                lat,
                lon,
                mslp_pa,
            }
        })
        .collect()
}

/// An invented town of the demo region.
#[derive(Debug, Clone, PartialEq)]
pub struct Town {
    pub name: &'static str,
    /// Degrees north and east.
    pub lat: f64,
    pub lon: f64,
}

pub mod files;

/// The shipped demo spec, or the same storm at another size when any dimension is given.
pub fn spec_from(
    nx: Option<usize>,
    ny: Option<usize>,
    steps: Option<usize>,
    step_hours: Option<u32>,
    levels: Option<usize>,
) -> DemoSpec {
    let d = DemoSpec::demo();
    if nx.is_none() && ny.is_none() && steps.is_none() && step_hours.is_none() && levels.is_none() {
        return d;
    }
    DemoSpec::scaled(
        nx.unwrap_or(d.nx),
        ny.unwrap_or(d.ny),
        steps.unwrap_or(d.steps),
        step_hours.unwrap_or(d.step_hours),
        levels.unwrap_or(d.levels_hpa.len()),
    )
}
