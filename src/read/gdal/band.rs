//! What one GDAL raster band holds: the quantity, the level, the valid time (and accumulation
//! interval) and the factor and offset that turn its values into trackswing's units, read from
//! the metadata each GDAL driver exposes.
//!
//! - NetCDF (CF conventions): the variable's `standard_name` and `units` (band metadata), and
//!   its extra dimensions as `NETCDF_DIM_<dim>=<value>` band metadata items, with the
//!   dimension's own attributes as dataset metadata `<dim>#units`, `<dim>#standard_name`,
//!   `<dim>#axis`. A dimension in pressure units (or with standard name `air_pressure`) is the
//!   isobaric level; one in `<unit> since <date>` is the time. A temperature or humidity without
//!   a vertical dimension is taken as the 2 m field (CF puts 2 m on a scalar `height`
//!   coordinate, which GDAL does not expose as band metadata).
//! - GRIB1 and GRIB2 through GDAL's GRIB driver: `GRIB_ELEMENT` (TMP, HGT, GP, RH, SPFH, DPT,
//!   APCPnn, PRMSL), `GRIB_SHORT_NAME` (`85000-ISBL`, `2-HTGL`, `0-SFC`, `0-MSL`), `GRIB_UNIT`,
//!   `GRIB_REF_TIME`, `GRIB_VALID_TIME` and `GRIB_FORECAST_SECONDS` (for an accumulation, the
//!   start of its interval after the reference time).
//! - Anything else (GeoTIFF stacks): the band descriptions of trackswing's GeoTIFF steps
//!   (`air_temperature@850hPa`, `air_temperature@2m`, `precipitation_amount`, ...), the band
//!   metadata item `units` and the dataset metadata item `valid_time` (RFC 3339).
//!
//! Units are mapped to K, %, m, kg m⁻² and Pa; a unit that cannot be mapped is refused with the
//! file, band and unit named. Values read without units are taken as already in those units
//! and are still range-checked by [`crate::read::fields::assemble`].

use crate::diagnose::thermo::G;
use chrono::{DateTime, Duration, NaiveDate, NaiveDateTime, TimeZone, Utc};

/// A physical quantity trackswing uses, in its SI unit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Air temperature, K.
    Temperature,
    /// Geopotential height, m (geopotential is divided by g on reading).
    Height,
    /// Relative humidity, %.
    RelativeHumidity,
    /// Specific humidity, kg kg⁻¹.
    SpecificHumidity,
    /// Dew-point temperature, K.
    Dewpoint,
    /// Precipitation amount, kg m⁻².
    Precipitation,
    /// Surface altitude, m.
    Terrain,
    /// Air pressure at mean sea level, Pa.
    Mslp,
}

/// Where a field sits vertically.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Level {
    /// An isobaric surface, Pa.
    Isobaric(f64),
    /// A height above the ground, m.
    AboveGround(f64),
    /// The ground, mean sea level or a field that is not levelled (precipitation, terrain).
    Surface,
}

/// One band identified.
#[derive(Clone, Debug)]
pub struct BandInfo {
    /// What it holds.
    pub quantity: Quantity,
    /// Its level.
    pub level: Level,
    /// Valid time (end of an accumulation), when the metadata gives one.
    pub valid: Option<DateTime<Utc>>,
    /// Start of the accumulation interval, for precipitation whose metadata gives one.
    pub start: Option<DateTime<Utc>>,
    /// Reference (initial) time, when the metadata gives one.
    pub reference: Option<DateTime<Utc>>,
    /// `si = raw · factor + offset` after GDAL's own scale and offset.
    pub factor: f64,
    /// See `factor`.
    pub offset: f64,
    /// How the band is named in messages, e.g. `variable 't' (air_temperature) at 85000 Pa`.
    pub label: String,
}

/// Metadata of one band and of its dataset, as `KEY=VALUE` items.
pub struct Meta<'a> {
    /// The band's items (default domain).
    pub band: &'a [(String, String)],
    /// The dataset's items (default domain).
    pub dataset: &'a [(String, String)],
    /// The band description.
    pub description: &'a str,
    /// GDAL's unit type of the band (may be empty).
    pub unit_type: &'a str,
}

fn get<'a>(items: &'a [(String, String)], key: &str) -> Option<&'a str> {
    items
        .iter()
        .find(|(k, _)| k == key)
        .map(|(_, v)| v.as_str())
}

/// Identifies a band. `Ok(None)`: a field trackswing does not use. `Err`: a field it uses
/// whose units, level or time cannot be understood (the message says what was found).
pub fn identify(m: &Meta<'_>) -> Result<Option<BandInfo>, String> {
    if let Some(element) = get(m.band, "GRIB_ELEMENT") {
        return grib(m, element);
    }
    if let Some(var) = get(m.band, "NETCDF_VARNAME") {
        return netcdf(m, var);
    }
    described(m)
}

/// The base quantity of a CF standard name or a trackswing band name, with a factor to apply
/// after the unit conversion (1/g for geopotential).
fn from_standard_name(name: &str) -> Option<(Quantity, UnitsOf, f64)> {
    Some(match name {
        "air_temperature" => (Quantity::Temperature, UnitsOf::Temperature, 1.0),
        "geopotential_height" => (Quantity::Height, UnitsOf::Length, 1.0),
        "geopotential" => (Quantity::Height, UnitsOf::Geopotential, 1.0 / G),
        "relative_humidity" => (Quantity::RelativeHumidity, UnitsOf::Humidity, 1.0),
        "specific_humidity" => (Quantity::SpecificHumidity, UnitsOf::Ratio, 1.0),
        "dew_point_temperature" => (Quantity::Dewpoint, UnitsOf::Temperature, 1.0),
        "precipitation_amount" | "lwe_thickness_of_precipitation_amount" => {
            (Quantity::Precipitation, UnitsOf::Amount, 1.0)
        }
        "surface_altitude" => (Quantity::Terrain, UnitsOf::Length, 1.0),
        "surface_geopotential" => (Quantity::Terrain, UnitsOf::Geopotential, 1.0 / G),
        "air_pressure_at_mean_sea_level" | "air_pressure_at_sea_level" => {
            (Quantity::Mslp, UnitsOf::Pressure, 1.0)
        }
        _ => return None,
    })
}

/// The family of units a quantity may come in.
#[derive(Clone, Copy, Debug)]
enum UnitsOf {
    Temperature,
    Length,
    Geopotential,
    Humidity,
    Ratio,
    Amount,
    Pressure,
}

/// Units written the many ways files write them, reduced to one spelling: lower case without
/// spaces, brackets, `*` or `^` (`kg m**-2`, `[kg/(m^2)]` → `kgm-2`, `kg/m2`).
fn normalise(u: &str) -> String {
    u.chars()
        .filter(|c| !matches!(c, ' ' | '[' | ']' | '(' | ')' | '*' | '^' | '.'))
        .flat_map(|c| c.to_lowercase())
        .collect()
}

/// `(factor, offset)` from `units` to trackswing's unit of `family`. An empty unit is taken as
/// trackswing's own unit.
fn convert(family: UnitsOf, units: &str) -> Result<(f64, f64), String> {
    let u = normalise(units);
    let ok = |f: f64, o: f64| Ok((f, o));
    let r = match family {
        UnitsOf::Temperature => match u.as_str() {
            "" | "k" | "kelvin" | "degk" | "deg_k" | "degreesk" | "degree_kelvin" => ok(1.0, 0.0),
            "c" | "°c" | "degc" | "deg_c" | "degreesc" | "degree_celsius" | "celsius" => {
                ok(1.0, 273.15)
            }
            _ => Err("K or °C"),
        },
        UnitsOf::Length => match u.as_str() {
            "" | "m" | "gpm" | "metre" | "metres" | "meter" | "meters" => ok(1.0, 0.0),
            "dam" | "gpdam" => ok(10.0, 0.0),
            _ => Err("m, gpm or dam"),
        },
        UnitsOf::Geopotential => match u.as_str() {
            "" | "m2s-2" | "m2/s2" | "m2s-1s-1" | "j/kg" | "jkg-1" => ok(1.0, 0.0),
            _ => Err("m2 s-2"),
        },
        UnitsOf::Humidity => match u.as_str() {
            "" | "%" | "percent" | "pct" => ok(1.0, 0.0),
            "1" | "fraction" | "0-1" => ok(100.0, 0.0),
            _ => Err("% or 1 (a fraction)"),
        },
        UnitsOf::Ratio => match u.as_str() {
            "" | "1" | "kg/kg" | "kgkg-1" | "kgkg**-1" => ok(1.0, 0.0),
            "g/kg" | "gkg-1" => ok(0.001, 0.0),
            _ => Err("kg kg-1, 1 or g kg-1"),
        },
        UnitsOf::Amount => match u.as_str() {
            "" | "kgm-2" | "kg/m2" | "kgm-2s0" | "mm" | "kg/m**2" => ok(1.0, 0.0),
            "m" => ok(1000.0, 0.0),
            "cm" => ok(10.0, 0.0),
            r if r.contains("s-1") || r.contains("/s") => Err(
                "kg m-2, mm or m of liquid fallen during the step (this is a rate; trackswing needs amounts)",
            ),
            _ => Err("kg m-2, mm or m"),
        },
        UnitsOf::Pressure => match u.as_str() {
            "" | "pa" => ok(1.0, 0.0),
            "hpa" | "mbar" | "millibar" | "mb" => ok(100.0, 0.0),
            _ => Err("Pa or hPa"),
        },
    };
    r.map_err(|want| format!("units '{units}' where {want} are expected"))
}

/// A level written in pressure units, in Pa.
fn pressure_pa(value: f64, units: &str) -> Option<f64> {
    convert(UnitsOf::Pressure, units)
        .ok()
        .filter(|_| !units.trim().is_empty())
        .map(|(f, _)| value * f)
}

fn netcdf(m: &Meta<'_>, var: &str) -> Result<Option<BandInfo>, String> {
    let Some(sn) = get(m.band, "standard_name") else {
        return Ok(None);
    };
    let Some((quantity, family, extra)) = from_standard_name(sn.trim()) else {
        return Ok(None);
    };
    let units = get(m.band, "units").unwrap_or(m.unit_type);
    let (f, o) = convert(family, units)?;
    let mut level = None;
    let mut valid = None;
    let mut at = String::new();
    for (k, v) in m.band {
        let Some(dim) = k.strip_prefix("NETCDF_DIM_") else {
            continue;
        };
        let attr = |a: &str| get(m.dataset, &format!("{dim}#{a}")).unwrap_or("");
        let value: f64 = v
            .trim()
            .parse()
            .map_err(|_| format!("dimension '{dim}' has the value '{v}', not a number"))?;
        let dunits = attr("units");
        if attr("standard_name") == "time" || attr("axis") == "T" || dunits.contains(" since ") {
            valid = Some(cf_time(dunits, value, attr("calendar")).map_err(|e| {
                format!("dimension '{dim}' (units '{dunits}', value {value}): {e}")
            })?);
        } else if let Some(p) = pressure_pa(value, dunits)
            .or_else(|| (attr("standard_name") == "air_pressure").then_some(value))
        {
            level = Some(Level::Isobaric(p));
            at = format!(" at {dim} = {value} {dunits}");
        } else if matches!(
            normalise(dunits).as_str(),
            "m" | "metre" | "meter" | "metres"
        ) && (attr("standard_name") == "height" || attr("axis") == "Z")
        {
            level = Some(Level::AboveGround(value));
            at = format!(" at {dim} = {value} m");
        }
    }
    let level = level.unwrap_or(match quantity {
        Quantity::Temperature
        | Quantity::RelativeHumidity
        | Quantity::SpecificHumidity
        | Quantity::Dewpoint => Level::AboveGround(2.0),
        _ => Level::Surface,
    });
    Ok(Some(BandInfo {
        quantity,
        level,
        valid,
        start: None,
        reference: None,
        factor: f * extra,
        offset: o * extra,
        label: format!("variable '{var}' ({sn}){at}"),
    }))
}

/// A CF time coordinate value: `value` in `units` (`hours since 2026-01-13 12:00:00`).
pub fn cf_time(units: &str, value: f64, calendar: &str) -> Result<DateTime<Utc>, String> {
    let cal = calendar.trim().to_ascii_lowercase();
    if !matches!(
        cal.as_str(),
        "" | "standard" | "gregorian" | "proleptic_gregorian"
    ) {
        return Err(format!(
            "calendar '{calendar}': only the standard (Gregorian) calendar is read"
        ));
    }
    let (unit, since) = units
        .split_once(" since ")
        .ok_or("expected '<unit> since <date>'")?;
    let seconds = match unit.trim().to_ascii_lowercase().as_str() {
        "seconds" | "second" | "secs" | "sec" | "s" => 1.0,
        "minutes" | "minute" | "mins" | "min" => 60.0,
        "hours" | "hour" | "hrs" | "hr" | "h" => 3600.0,
        "days" | "day" | "d" => 86400.0,
        other => {
            return Err(format!(
                "time unit '{other}' (expected seconds, minutes, hours or days)"
            ))
        }
    };
    let epoch = parse_since(since.trim()).ok_or_else(|| format!("'{since}' is not a date"))?;
    let ms = value * seconds * 1000.0;
    if !ms.is_finite() || ms.abs() > 1e15 {
        return Err(format!("{value} {unit} is not a usable time"));
    }
    Ok(epoch + Duration::milliseconds(ms.round() as i64))
}

/// The date after `since`: `2026-01-13 12:00:00`, `2026-01-13T12:00:00Z`, `2026-01-13 12:00`,
/// `2026-01-13`, with an optional `UTC`, `Z` or `+00:00`.
fn parse_since(s: &str) -> Option<DateTime<Utc>> {
    if let Ok(t) = DateTime::parse_from_rfc3339(s) {
        return Some(t.with_timezone(&Utc));
    }
    let s = s
        .trim_end_matches(" UTC")
        .trim_end_matches("UTC")
        .trim_end_matches('Z')
        .trim_end_matches("+00:00")
        .trim_end_matches(" +0000")
        .trim();
    for f in [
        "%Y-%m-%d %H:%M:%S%.f",
        "%Y-%m-%dT%H:%M:%S%.f",
        "%Y-%m-%d %H:%M",
        "%Y-%m-%dT%H:%M",
    ] {
        if let Ok(t) = NaiveDateTime::parse_from_str(s, f) {
            return Some(Utc.from_utc_datetime(&t));
        }
    }
    NaiveDate::parse_from_str(s, "%Y-%m-%d")
        .ok()
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|t| Utc.from_utc_datetime(&t))
}

/// Seconds since 1970 as GDAL's GRIB driver writes them (`1768327200`, or with ` sec UTC`).
fn epoch_seconds(s: &str) -> Option<DateTime<Utc>> {
    let n: i64 = s.split_whitespace().next()?.parse().ok()?;
    Utc.timestamp_opt(n, 0).single()
}

fn grib(m: &Meta<'_>, element: &str) -> Result<Option<BandInfo>, String> {
    let short = get(m.band, "GRIB_SHORT_NAME").unwrap_or("");
    let (value, kind) = short.split_once('-').unwrap_or(("", short));
    let value: f64 = value.trim().parse().unwrap_or(f64::NAN);
    let level = match kind.trim() {
        "ISBL" if value > 0.0 => Level::Isobaric(value),
        "HTGL" if value.is_finite() => Level::AboveGround(value),
        "SFC" | "MSL" => Level::Surface,
        _ => return Ok(None),
    };
    let surface = level == Level::Surface;
    let (quantity, family, extra) = match element.trim() {
        "TMP" if !surface => (Quantity::Temperature, UnitsOf::Temperature, 1.0),
        "HGT" if surface => (Quantity::Terrain, UnitsOf::Length, 1.0),
        "HGT" => (Quantity::Height, UnitsOf::Length, 1.0),
        "GP" if surface => (Quantity::Terrain, UnitsOf::Geopotential, 1.0 / G),
        "GP" => (Quantity::Height, UnitsOf::Geopotential, 1.0 / G),
        "RH" if !surface => (Quantity::RelativeHumidity, UnitsOf::Humidity, 1.0),
        "SPFH" if !surface => (Quantity::SpecificHumidity, UnitsOf::Ratio, 1.0),
        "DPT" if !surface => (Quantity::Dewpoint, UnitsOf::Temperature, 1.0),
        "PRMSL" if kind.trim() == "MSL" => (Quantity::Mslp, UnitsOf::Pressure, 1.0),
        e if e.starts_with("APCP") && surface => (Quantity::Precipitation, UnitsOf::Amount, 1.0),
        _ => return Ok(None),
    };
    let units = get(m.band, "GRIB_UNIT").unwrap_or(m.unit_type);
    let (f, o) = convert(family, units)?;
    let reference = get(m.band, "GRIB_REF_TIME").and_then(epoch_seconds);
    let valid = get(m.band, "GRIB_VALID_TIME").and_then(epoch_seconds);
    let start = if quantity == Quantity::Precipitation {
        // APCPnn names the hours of the interval; GRIB_FORECAST_SECONDS is its start after the
        // reference time (GDAL 3.6, templates 4.8 and GRIB1 time range indicator 4).
        let hours: Option<i64> = element.trim()[4..].parse().ok();
        match (hours, valid, reference) {
            (Some(h), Some(v), _) => Some(v - Duration::hours(h)),
            (None, _, Some(r)) => get(m.band, "GRIB_FORECAST_SECONDS")
                .and_then(|s| s.split_whitespace().next()?.parse::<i64>().ok())
                .map(|s| r + Duration::seconds(s)),
            _ => None,
        }
    } else {
        None
    };
    Ok(Some(BandInfo {
        quantity,
        level,
        valid,
        start,
        reference,
        factor: f * extra,
        offset: o * extra,
        label: format!("{element} at {short}"),
    }))
}

fn described(m: &Meta<'_>) -> Result<Option<BandInfo>, String> {
    let d = m.description.trim();
    let (name, level) = match d.split_once('@') {
        Some((n, l)) => (n, Some(l)),
        None => (d, None),
    };
    let Some((quantity, family, extra)) = from_standard_name(name) else {
        return Ok(None);
    };
    let level = match level {
        None => Level::Surface,
        Some(l) => {
            if let Some(p) = l.strip_suffix("hPa").and_then(|p| p.parse::<f64>().ok()) {
                Level::Isobaric(p * 100.0)
            } else if let Some(h) = l.strip_suffix('m').and_then(|h| h.parse::<f64>().ok()) {
                Level::AboveGround(h)
            } else {
                return Err(format!(
                    "band '{d}': level '{l}' is neither hPa (850hPa) nor metres (2m)"
                ));
            }
        }
    };
    let units = get(m.band, "units").unwrap_or(m.unit_type);
    let (f, o) = convert(family, units)?;
    let valid = match get(m.dataset, "valid_time") {
        Some(v) => Some(
            DateTime::parse_from_rfc3339(v.trim())
                .map_err(|_| format!("'valid_time' = '{v}' is not an RFC 3339 time"))?
                .with_timezone(&Utc),
        ),
        None => None,
    };
    Ok(Some(BandInfo {
        quantity,
        level,
        valid,
        start: None,
        reference: None,
        factor: f * extra,
        offset: o * extra,
        label: format!("band '{d}'"),
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn items(v: &[(&str, &str)]) -> Vec<(String, String)> {
        v.iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect()
    }

    #[test]
    fn cf_times_in_the_forms_files_write() {
        // CF conventions 1.11 §4.4: "<units> since <date>", Gregorian calendar.
        let want = Utc.with_ymd_and_hms(2026, 1, 13, 18, 0, 0).unwrap();
        for (u, v) in [
            ("hours since 2026-01-13 12:00:00", 6.0),
            ("hours since 2026-01-13T12:00:00Z", 6.0),
            ("minutes since 2026-01-13 12:00", 360.0),
            ("seconds since 1970-01-01", 1_768_327_200.0),
            ("days since 2026-01-13", 0.75),
        ] {
            assert_eq!(cf_time(u, v, "standard").unwrap(), want, "{u}");
        }
        assert!(cf_time("days since 2026-01-01", 1.0, "360_day")
            .unwrap_err()
            .contains("calendar"));
        assert!(cf_time("fortnights since 2026-01-01", 1.0, "")
            .unwrap_err()
            .contains("fortnights"));
    }

    #[test]
    fn units_are_mapped_or_refused() {
        // Conversion factors: 0 °C = 273.15 K (SI Brochure, 9th ed., §2.3.1); 1 hPa = 100 Pa;
        // 1 mm of liquid water = 1 kg m-2 (density 1000 kg m-3).
        assert_eq!(
            convert(UnitsOf::Temperature, "degC").unwrap(),
            (1.0, 273.15)
        );
        assert_eq!(convert(UnitsOf::Temperature, "[K]").unwrap(), (1.0, 0.0));
        assert_eq!(convert(UnitsOf::Humidity, "1").unwrap(), (100.0, 0.0));
        assert_eq!(convert(UnitsOf::Amount, "[kg/(m^2)]").unwrap(), (1.0, 0.0));
        assert_eq!(convert(UnitsOf::Amount, "kg m**-2").unwrap(), (1.0, 0.0));
        assert_eq!(convert(UnitsOf::Amount, "m").unwrap(), (1000.0, 0.0));
        assert_eq!(convert(UnitsOf::Pressure, "hPa").unwrap(), (100.0, 0.0));
        let e = convert(UnitsOf::Temperature, "degF").unwrap_err();
        assert!(e.contains("degF") && e.contains("°C"), "{e}");
        let e = convert(UnitsOf::Amount, "kg m-2 s-1").unwrap_err();
        assert!(e.contains("rate"), "{e}");
    }

    #[test]
    fn netcdf_band_with_pressure_and_time_dimensions() {
        let band = items(&[
            ("NETCDF_VARNAME", "ta"),
            ("standard_name", "air_temperature"),
            ("units", "degC"),
            ("NETCDF_DIM_plev", "850"),
            ("NETCDF_DIM_time", "6"),
        ]);
        let ds = items(&[
            ("plev#units", "hPa"),
            ("time#units", "hours since 2026-01-13 12:00:00"),
            ("time#standard_name", "time"),
        ]);
        let m = Meta {
            band: &band,
            dataset: &ds,
            description: "",
            unit_type: "",
        };
        let b = identify(&m).unwrap().unwrap();
        assert_eq!(b.quantity, Quantity::Temperature);
        assert_eq!(b.level, Level::Isobaric(85_000.0));
        assert_eq!(
            b.valid,
            Some(Utc.with_ymd_and_hms(2026, 1, 13, 18, 0, 0).unwrap())
        );
        assert_eq!((b.factor, b.offset), (1.0, 273.15));
    }

    #[test]
    fn grib_accumulation_interval_from_the_element_name() {
        // GDAL 3.6 on a template 4.8 total over 0–6 h: GRIB_ELEMENT=APCP06,
        // GRIB_FORECAST_SECONDS=0, GRIB_VALID_TIME = reference + 6 h (read with gdalinfo).
        let band = items(&[
            ("GRIB_ELEMENT", "APCP06"),
            ("GRIB_SHORT_NAME", "0-SFC"),
            ("GRIB_UNIT", "[kg/(m^2)]"),
            ("GRIB_REF_TIME", "1768305600"),
            ("GRIB_VALID_TIME", "1768327200"),
            ("GRIB_FORECAST_SECONDS", "0"),
        ]);
        let m = Meta {
            band: &band,
            dataset: &[],
            description: "",
            unit_type: "",
        };
        let b = identify(&m).unwrap().unwrap();
        assert_eq!(b.quantity, Quantity::Precipitation);
        assert_eq!(b.start, b.reference);
        assert_eq!(b.valid.unwrap() - b.start.unwrap(), Duration::hours(6));
    }
}
