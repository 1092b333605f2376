//! What the chooser picks: per step, the field (an index into the catalogue) for each need.

use chrono::{DateTime, Utc};

/// Humidity as found, with the field holding it.
#[derive(Clone, Copy, Debug)]
pub enum Humidity {
    /// Relative humidity, %.
    Relative(usize),
    /// Dew point, K.
    Dewpoint(usize),
    /// Specific humidity, kg kg⁻¹.
    Specific(usize),
}

impl Humidity {
    /// The field holding it.
    pub fn field(self) -> usize {
        match self {
            Self::Relative(i) | Self::Dewpoint(i) | Self::Specific(i) => i,
        }
    }

    /// Relative humidity (%) from `values` of this humidity, with temperature `t` (K) and
    /// pressure `p` (Pa, per cell).
    pub fn relative(self, values: Vec<f32>, t: &[f32], p: &dyn Fn(usize) -> f64) -> Vec<f32> {
        use crate::diagnose::thermo::{rh_from_dewpoint, rh_from_specific};
        match self {
            Self::Relative(_) => values,
            Self::Dewpoint(_) => values
                .iter()
                .zip(t)
                .map(|(&td, &t)| {
                    // A dew point above the temperature is rounding: capped at saturation.
                    rh_from_dewpoint(f64::from(t), f64::from(td.min(t))) as f32
                })
                .collect(),
            Self::Specific(_) => values
                .iter()
                .zip(t)
                .enumerate()
                .map(|(c, (&q, &t))| rh_from_specific(f64::from(q), f64::from(t), p(c)) as f32)
                .collect(),
        }
    }
}

/// Geopotential height, or geopotential to be divided by g.
#[derive(Clone, Copy, Debug)]
pub struct Height {
    /// The field holding it.
    pub field: usize,
    /// True for geopotential (m² s⁻²).
    pub geopotential: bool,
}

/// The fields of one isobaric level at one step.
#[derive(Clone, Copy, Debug)]
pub struct LevelChoice {
    /// The level, Pa.
    pub pressure: f64,
    /// Temperature.
    pub t: usize,
    /// Height.
    pub z: Height,
    /// Humidity.
    pub hum: Humidity,
}

/// The fields of one step.
#[derive(Clone, Debug)]
pub struct StepChoice {
    /// Its valid time.
    pub valid: DateTime<Utc>,
    /// The isobaric levels, highest pressure first.
    pub levels: Vec<LevelChoice>,
    /// 2 m temperature.
    pub t2: usize,
    /// 2 m humidity.
    pub hum2: Humidity,
    /// Surface pressure, when the files hold it.
    pub psfc: Option<usize>,
    /// Precipitation fields to add...
    pub plus: Vec<usize>,
    /// ... and to subtract for the step's amount (none at all: zero at the reference time).
    pub minus: Vec<usize>,
    /// Sea-level pressure, when the files hold it.
    pub mslp: Option<usize>,
}

impl StepChoice {
    /// The fields the step's values are made of, in the order: per level temperature, height
    /// and humidity; 2 m temperature and humidity; surface pressure; precipitation to add, to
    /// subtract.
    pub fn reads(&self) -> Vec<usize> {
        self.levels
            .iter()
            .flat_map(|l| [l.t, l.z.field, l.hum.field()])
            .chain([self.t2, self.hum2.field()])
            .chain(self.psfc)
            .chain(self.plus.iter().chain(&self.minus).copied())
            .collect()
    }
}
