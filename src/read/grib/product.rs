//! What a field is: its parameter, level and times, from Sections 0, 1 and 4 by WMO code
//! tables (WMO-No. 306, Vol. I.2), never from file names.
//!
//! Parameters by discipline/category/number (code tables 0.0, 4.1, 4.2), levels by the type and
//! value of the first fixed surface (code table 4.5), times from the reference time (Section 1)
//! plus the forecast time (template 4.0 / 4.1) or the statistical-processing interval (templates
//! 4.8 / 4.11, code table 4.10: 1 = accumulation).

use super::GribError;
use crate::read::choose::catalogue::short;
use chrono::{DateTime, Duration, TimeZone, Utc};
use grib::def::grib2::{ProductDefinitionTemplate, Section1, Section4};
use grib::TryFromSlice;
use std::path::Path;

/// The parameters trackswing reads, with their GRIB2 codes and units.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Param {
    /// 0/0/0, K.
    Temperature,
    /// 0/0/6, K.
    Dewpoint,
    /// 0/1/0, kg kg⁻¹.
    SpecificHumidity,
    /// 0/1/1, %.
    RelativeHumidity,
    /// 0/1/8, kg m⁻².
    TotalPrecipitation,
    /// 0/3/0, Pa.
    Pressure,
    /// 0/3/1, Pa.
    MeanSeaLevelPressure,
    /// 0/3/4, m² s⁻².
    Geopotential,
    /// 0/3/5, gpm.
    GeopotentialHeight,
    /// 0/3/6, m.
    GeometricHeight,
    /// 2/0/7 (land surface products), m.
    ModelTerrainHeight,
}

impl Param {
    /// The parameter of discipline/category/number, if trackswing reads it.
    pub fn from_code(discipline: u8, category: u8, number: u8) -> Option<Self> {
        Some(match (discipline, category, number) {
            (0, 0, 0) => Self::Temperature,
            (0, 0, 6) => Self::Dewpoint,
            (0, 1, 0) => Self::SpecificHumidity,
            (0, 1, 1) => Self::RelativeHumidity,
            (0, 1, 8) => Self::TotalPrecipitation,
            (0, 3, 0) => Self::Pressure,
            (0, 3, 1) => Self::MeanSeaLevelPressure,
            (0, 3, 4) => Self::Geopotential,
            (0, 3, 5) => Self::GeopotentialHeight,
            (0, 3, 6) => Self::GeometricHeight,
            (2, 0, 7) => Self::ModelTerrainHeight,
            _ => return None,
        })
    }

    /// Name as code table 4.2 words it.
    pub fn name(&self) -> &'static str {
        match self {
            Self::Temperature => "temperature",
            Self::Dewpoint => "dew point temperature",
            Self::SpecificHumidity => "specific humidity",
            Self::RelativeHumidity => "relative humidity",
            Self::TotalPrecipitation => "total precipitation",
            Self::Pressure => "pressure",
            Self::MeanSeaLevelPressure => "pressure reduced to MSL",
            Self::Geopotential => "geopotential",
            Self::GeopotentialHeight => "geopotential height",
            Self::GeometricHeight => "geometric height",
            Self::ModelTerrainHeight => "model terrain height",
        }
    }

    /// Units in GRIB2 (and inside trackswing).
    pub fn units(&self) -> &'static str {
        match self {
            Self::Temperature | Self::Dewpoint => "K",
            Self::SpecificHumidity => "kg kg-1",
            Self::RelativeHumidity => "%",
            Self::TotalPrecipitation => "kg m-2",
            Self::Pressure | Self::MeanSeaLevelPressure => "Pa",
            Self::Geopotential => "m2 s-2",
            Self::GeopotentialHeight => "gpm",
            Self::GeometricHeight | Self::ModelTerrainHeight => "m",
        }
    }
}

/// Where a field lies vertically (code table 4.5, first fixed surface).
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
pub enum Surface {
    /// Type 1: ground or water surface.
    Ground,
    /// Type 100: isobaric surface, Pa.
    Isobaric(f64),
    /// Type 101: mean sea level.
    MeanSeaLevel,
    /// Type 103: specified height above ground, m.
    AboveGround(f64),
    /// Any other type, with its value.
    Other(u8, f64),
}

impl std::fmt::Display for Surface {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::Ground => write!(f, "surface"),
            Self::Isobaric(p) => write!(f, "{} hPa", p / 100.0),
            Self::MeanSeaLevel => write!(f, "mean sea level"),
            Self::AboveGround(m) => write!(f, "{m} m above ground"),
            Self::Other(t, v) => write!(f, "surface type {t} value {v}"),
        }
    }
}

/// A field's identity and times.
#[derive(Clone, Debug, PartialEq)]
pub struct Product {
    /// The parameter, when trackswing reads it.
    pub param: Option<Param>,
    /// Discipline/category/number.
    pub code: (u8, u8, u8),
    /// The first fixed surface.
    pub surface: Surface,
    /// Reference time (Section 1).
    pub reference: DateTime<Utc>,
    /// Valid time: the instant, or the end of a statistical-processing interval.
    pub valid: DateTime<Utc>,
    /// Start of the interval of an accumulation (template 4.8/4.11 with process type 1).
    pub window_start: Option<DateTime<Utc>>,
    /// Product definition template number.
    pub template: u16,
    /// Statistical process (code table 4.10) of templates 4.8/4.11.
    pub statistical_process: Option<u8>,
    /// Ensemble perturbation number (templates 4.1/4.11).
    pub member: Option<u8>,
}

impl Product {
    /// Short text such as `temperature at 850 hPa valid 2026-01-14T06:00Z`.
    pub fn label(&self) -> String {
        let name = match self.param {
            Some(p) => p.name().to_string(),
            None => format!("parameter {}/{}/{}", self.code.0, self.code.1, self.code.2),
        };
        let when = match self.window_start {
            Some(s) => format!("over {}…{}", short(s), short(self.valid)),
            None => format!("valid {}", short(self.valid)),
        };
        format!("{name} at {} {when}", self.surface)
    }
}

/// Length of `value` units of code table 4.4, if the unit has a fixed length.
pub fn duration(unit: u8, value: i64) -> Option<Duration> {
    let seconds = match unit {
        0 => 60,
        1 => 3600,
        2 => 86_400,
        10 => 3 * 3600,
        11 => 6 * 3600,
        12 => 12 * 3600,
        13 => 1,
        _ => return None,
    };
    Some(Duration::seconds(seconds * value))
}

fn date(y: u16, mo: u8, d: u8, h: u8, mi: u8, s: u8) -> Option<DateTime<Utc>> {
    Utc.with_ymd_and_hms(
        i32::from(y),
        u32::from(mo),
        u32::from(d),
        u32::from(h),
        u32::from(mi),
        u32::from(s),
    )
    .single()
}

/// Why a product could not be understood (the message can still be skipped if not needed).
#[derive(Clone, Debug, PartialEq)]
pub struct Unsupported(pub String);

/// Reads the product of a field. `Err(GribError)` for broken sections; `Ok(Err(..))` for a
/// product template this reader does not interpret.
pub fn product(
    path: &Path,
    message: usize,
    discipline: u8,
    sect1: &[u8],
    sect4: &[u8],
) -> Result<Result<Product, Unsupported>, GribError> {
    let broken = |what: String| GribError::Structure {
        path: path.to_path_buf(),
        message,
        what,
    };
    let s1 = Section1::try_from_slice(sect1, &mut 0)
        .map_err(|e| broken(format!("Section 1 cannot be read: {e}")))?;
    let rt = &s1.payload.ref_time;
    let reference =
        date(rt.year, rt.month, rt.day, rt.hour, rt.minute, rt.second).ok_or_else(|| {
            broken(format!(
                "Section 1 reference time {}-{}-{} {}:{}:{} is not a date",
                rt.year, rt.month, rt.day, rt.hour, rt.minute, rt.second
            ))
        })?;
    if sect4.len() < 9 {
        return Err(broken("Section 4 is shorter than 9 octets".into()));
    }
    let template = u16::from_be_bytes([sect4[7], sect4[8]]);
    let Ok(s4) = Section4::try_from_slice(sect4, &mut 0) else {
        return Ok(Err(Unsupported(format!(
            "product definition template 4.{template}"
        ))));
    };
    use ProductDefinitionTemplate as T;
    let (param, ft, horizontal, stat, member) = match &s4.payload.template {
        T::_4_0(t) => (&t.param, &t.forecast_time, &t.horizontal, None, None),
        T::_4_1(t) => (
            &t.param,
            &t.forecast_time,
            &t.horizontal,
            None,
            Some(t.emsemble_forecast.perturbation_num),
        ),
        T::_4_8(t) => (
            &t.param,
            &t.forecast_time,
            &t.horizontal,
            Some(&t.time_interval),
            None,
        ),
        T::_4_11(t) => (
            &t.param,
            &t.forecast_time,
            &t.horizontal,
            Some(&t.time_interval),
            Some(t.emsemble_forecast.perturbation_num),
        ),
        _ => {
            return Ok(Err(Unsupported(format!(
                "product definition template 4.{template}"
            ))))
        }
    };
    let code = (discipline, param.category, param.num);
    let first = &horizontal.first_surface;
    let raw = first.value.scaled_value;
    let value = if raw == i32::MAX || raw == -i32::MAX || first.value.scale_factor == -127 {
        f64::NAN
    } else {
        f64::from(raw) * 10f64.powi(-i32::from(first.value.scale_factor))
    };
    let surface = match first.surface_type {
        1 => Surface::Ground,
        100 => Surface::Isobaric(value),
        101 => Surface::MeanSeaLevel,
        103 => Surface::AboveGround(value),
        t => Surface::Other(t, value),
    };
    let Some(lead) = duration(ft.time.unit, i64::from(ft.time.len)) else {
        return Ok(Err(Unsupported(format!(
            "forecast time in unit {} of code table 4.4 (months/years have no fixed length)",
            ft.time.unit
        ))));
    };
    let start = reference + lead;
    let (valid, window_start, statistical_process) = match stat {
        None => (start, None, None),
        Some(st) => {
            let e = &st.end_of_overall_time_interval;
            let end =
                date(e.year, e.month, e.day, e.hour, e.minute, e.second).ok_or_else(|| {
                    broken(format!(
                        "Section 4 end of the time interval {}-{}-{} {}:{}:{} is not a date",
                        e.year, e.month, e.day, e.hour, e.minute, e.second
                    ))
                })?;
            let process = st.time_ranges.first().map(|r| r.statistical_process_type);
            let window = (process == Some(1)).then_some(start);
            (end, window, process)
        }
    };
    Ok(Ok(Product {
        param: Param::from_code(code.0, code.1, code.2),
        code,
        surface,
        reference,
        valid,
        window_start,
        template,
        statistical_process,
        member,
    }))
}
