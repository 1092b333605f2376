//! The catalogue a reader fills from its own metadata: one format-neutral [`Field`] per field
//! its files hold, in the reader's own order, and the words it names them by.

use chrono::{DateTime, Utc};
use std::path::PathBuf;

/// What a field holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Air temperature.
    Temperature,
    /// Geopotential height (m).
    GeopotentialHeight,
    /// Geopotential (m² s⁻², to be divided by g).
    Geopotential,
    /// Geometric height (m).
    GeometricHeight,
    /// The model's terrain height (m).
    TerrainHeight,
    /// Relative humidity.
    RelativeHumidity,
    /// Specific humidity.
    SpecificHumidity,
    /// Dew-point temperature.
    Dewpoint,
    /// Precipitation amount.
    Precipitation,
    /// Air pressure.
    Pressure,
    /// Air pressure reduced to mean sea level.
    Mslp,
}

/// Where a field sits vertically.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Level {
    /// An isobaric surface, Pa.
    Isobaric(f64),
    /// A height above the ground, m.
    AboveGround(f64),
    /// The ground.
    Ground,
    /// Mean sea level.
    MeanSeaLevel,
    /// Any other level: never chosen.
    Other,
}

impl Level {
    /// True when both are the same level (isobaric to 0.5 Pa, since files store pressure with
    /// rounding); `Other` matches nothing.
    pub(super) fn same(&self, other: &Level) -> bool {
        match (self, other) {
            (Self::Isobaric(a), Self::Isobaric(b)) => (a - b).abs() < 0.5,
            (Self::AboveGround(a), Self::AboveGround(b)) => (a - b).abs() < 1e-6,
            (Self::Ground, Self::Ground) | (Self::MeanSeaLevel, Self::MeanSeaLevel) => true,
            _ => false,
        }
    }
}

/// The time a field's value covers, up to its valid time.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Window {
    /// The value at the valid time.
    Instant,
    /// Accumulated since this time.
    Since(DateTime<Utc>),
    /// Accumulated over the step ending at the valid time (files that give no window).
    Step,
    /// Another statistic over a window (maximum, mean...): never chosen.
    Statistic,
}

/// Why a field the files hold cannot be used.
#[derive(Clone, Debug)]
pub enum Unusable {
    /// It cannot be read (the text says why).
    Problem(String),
    /// It lies on another grid than the case's (described by the text).
    OtherGrid(String),
}

/// One field as a reader found it.
#[derive(Clone, Debug)]
pub struct Field {
    /// What it holds.
    pub quantity: Quantity,
    /// Its level.
    pub level: Level,
    /// Its valid time (the end of an accumulation), when known.
    pub valid: Option<DateTime<Utc>>,
    /// The time its value covers.
    pub window: Window,
    /// The model run's reference time, when known.
    pub reference: Option<DateTime<Utc>>,
    /// Why it cannot be used, if it cannot.
    pub unusable: Option<Unusable>,
    /// The file (or dataset) named in messages about it.
    pub path: PathBuf,
    /// Where it is, for messages (`file: message 3`).
    pub origin: String,
}

/// How a reader names the fields the case needs, in messages.
#[derive(Clone, Copy, Debug)]
pub struct Names {
    /// Temperature on isobaric levels, when there is none at all.
    pub isobaric_temperature: &'static str,
    /// Temperature at a level.
    pub temperature: &'static str,
    /// Geopotential height at a level.
    pub height: &'static str,
    /// Humidity at a level.
    pub humidity: &'static str,
    /// 2 m temperature.
    pub temperature_2m: &'static str,
    /// 2 m humidity.
    pub humidity_2m: &'static str,
    /// Every kind of terrain height.
    pub terrain: &'static str,
    /// Precipitation ending at the first valid time.
    pub first_precipitation: &'static str,
}

/// The fields of a case's files, in the reader's order: a choice is an index into `fields`.
#[derive(Clone, Debug)]
pub struct Catalogue {
    /// Every field the reader found of a quantity the case may use.
    pub fields: Vec<Field>,
    /// The files as a whole, named when no field can be.
    pub files: PathBuf,
    /// The case grid, described for a field found on another grid.
    pub grid: String,
    /// The reader's words for the fields.
    pub names: Names,
}

/// A field the case needs is missing or cannot be used.
#[derive(Debug, thiserror::Error)]
#[error("{path}: {what}")]
pub struct Missing {
    /// The file (or the first of the files).
    pub path: PathBuf,
    /// What is missing, and what was found instead.
    pub what: String,
}

/// A time as `2026-01-14T06:00Z`.
pub fn short(t: DateTime<Utc>) -> String {
    t.format("%Y-%m-%dT%H:%MZ").to_string()
}
