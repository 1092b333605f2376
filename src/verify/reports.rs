//! The observed storm totals: a CSV of reports with `lat`, `lon` (WGS 84 degrees) and `snow`,
//! an optional `name` and `type`. The snow's unit is a `units` column (per row) or a suffix of
//! the header (`snow_cm`, `snow_in`, `snow_mm`); values are converted to mm of snow depth here.

use super::VerifyError;
use std::path::Path;

/// One observed storm total.
#[derive(Clone, Debug, PartialEq)]
pub struct Report {
    /// 1-based line of the CSV file it came from (the header is line 1).
    pub line: usize,
    /// Name, empty when the file has none.
    pub name: String,
    /// Degrees north.
    pub lat: f64,
    /// Degrees east.
    pub lon: f64,
    /// Snow depth, mm.
    pub snow_mm: f64,
    /// What was reported (free text, e.g. "snow", "sleet"), empty when not given.
    pub kind: String,
}

/// mm per unit of a snow depth written `unit`.
fn mm_per(unit: &str) -> Option<f64> {
    match unit.trim().to_ascii_lowercase().as_str() {
        "cm" => Some(10.0),
        "mm" => Some(1.0),
        "in" | "inch" | "inches" => Some(25.4),
        _ => None,
    }
}

/// Reads the reports of `path`.
pub fn read_reports(path: &Path) -> Result<Vec<Report>, VerifyError> {
    let bad = |line: usize, field: &str, what: String| VerifyError::Reports {
        path: path.to_path_buf(),
        line,
        field: field.to_string(),
        what,
    };
    let mut r = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(false)
        .from_path(path)
        .map_err(|e| VerifyError::ReportsFile {
            path: path.to_path_buf(),
            what: e.to_string(),
        })?;
    let header: Vec<String> = r
        .headers()
        .map_err(|e| bad(1, "header", e.to_string()))?
        .iter()
        .map(|h| h.trim_start_matches('\u{feff}').to_ascii_lowercase())
        .collect();
    let col = |name: &str| header.iter().position(|h| h == name);
    let need = |name: &str| {
        col(name).ok_or_else(|| {
            bad(
                1,
                name,
                format!(
                    "the header has no '{name}' column (it has: {})",
                    header.join(", ")
                ),
            )
        })
    };
    let (lat_c, lon_c) = (need("lat")?, need("lon")?);
    let snow_cols: Vec<(usize, Option<f64>)> = header
        .iter()
        .enumerate()
        .filter_map(|(i, h)| match h.strip_prefix("snow") {
            Some("") => Some((i, None)),
            Some(rest) => rest
                .strip_prefix('_')
                .and_then(mm_per)
                .map(|k| (i, Some(k))),
            None => None,
        })
        .collect();
    let (snow_c, suffix) = match snow_cols.as_slice() {
        [one] => *one,
        [] => {
            return Err(bad(
                1,
                "snow",
                "the header has no snow column: expected 'snow' with a 'units' column, or 'snow_cm', 'snow_in' or 'snow_mm'".into(),
            ))
        }
        _ => return Err(bad(1, "snow", "the header has more than one snow column".into())),
    };
    let units_c = col("units");
    if suffix.is_some() && units_c.is_some() {
        return Err(bad(
            1,
            "units",
            "the snow column's name gives its unit; a 'units' column as well is ambiguous".into(),
        ));
    }
    if suffix.is_none() && units_c.is_none() {
        return Err(bad(
            1,
            "snow",
            "the snow column has no unit: name it snow_cm, snow_in or snow_mm, or add a 'units' column (cm, in or mm)".into(),
        ));
    }
    let (name_c, type_c) = (col("name"), col("type"));
    let mut out = Vec::new();
    for (k, rec) in r.records().enumerate() {
        let line = k + 2;
        let rec = rec.map_err(|e| bad(line, "row", e.to_string()))?;
        let number = |c: usize, field: &str, what: &str| -> Result<f64, VerifyError> {
            let text = rec.get(c).unwrap_or("");
            text.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad(line, field, format!("'{text}' is not {what}")))
        };
        let lat = number(lat_c, "lat", "a latitude in degrees")?;
        if !(-90.0..=90.0).contains(&lat) {
            return Err(bad(line, "lat", format!("{lat} is outside −90…90")));
        }
        let lon = number(lon_c, "lon", "a longitude in degrees")?;
        if !(-360.0..=360.0).contains(&lon) {
            return Err(bad(line, "lon", format!("{lon} is outside −360…360")));
        }
        let snow_field = header[snow_c].as_str();
        let snow = number(snow_c, snow_field, "a snow depth (a number)")?;
        if snow < 0.0 {
            return Err(bad(
                line,
                snow_field,
                format!("{snow} is negative; a storm total is 0 or more"),
            ));
        }
        let per = match suffix {
            Some(k) => k,
            None => {
                let u = units_c.and_then(|c| rec.get(c)).unwrap_or("");
                mm_per(u).ok_or_else(|| {
                    bad(
                        line,
                        "units",
                        format!("'{u}' is not a unit of snow depth: expected cm, in or mm"),
                    )
                })?
            }
        };
        let text = |c: Option<usize>| c.and_then(|c| rec.get(c)).unwrap_or("").to_string();
        out.push(Report {
            line,
            name: text(name_c),
            lat,
            lon,
            snow_mm: snow * per,
            kind: text(type_c),
        });
    }
    if out.is_empty() {
        return Err(VerifyError::ReportsFile {
            path: path.to_path_buf(),
            what: "the file holds no reports, only a header".into(),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Vec<Report>, VerifyError> {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("r.csv");
        std::fs::write(&p, text).unwrap();
        read_reports(&p)
    }

    #[test]
    fn units_from_the_suffix_or_the_column() {
        // 1 in = 25.4 mm (international inch, by definition).
        let r = read("name,lat,lon,snow_in\nA,45,-30,2\n").unwrap();
        assert_eq!(r[0].snow_mm, 50.8);
        let r = read("lat,lon,snow,units,type\n45,-30,12.5,cm,snow\n46,-31,3,in,sleet\n").unwrap();
        assert_eq!(r[0].snow_mm, 125.0);
        assert!((r[1].snow_mm - 76.2).abs() < 1e-12);
        assert_eq!((r[1].kind.as_str(), r[1].line), ("sleet", 3));
    }

    #[test]
    fn errors_name_the_line_and_field() {
        let e = read("lat,lon,snow_cm\n45,-30,5\n46,x,5\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 3") && e.contains("'lon'") && e.contains("'x'"),
            "{e}"
        );
        let e = read("lat,lon,snow\n45,-30,5\n").unwrap_err().to_string();
        assert!(e.contains("line 1") && e.contains("no unit"), "{e}");
        let e = read("lat,lon,snow,units\n45,-30,5,ft\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 2") && e.contains("'units'") && e.contains("'ft'"),
            "{e}"
        );
        let e = read("lat,lon,snow_cm\n95,-30,5\n").unwrap_err().to_string();
        assert!(e.contains("'lat'"), "{e}");
        let e = read("lat,lon,snow_cm\n45,-30,-1\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("negative"), "{e}");
        let e = read("lat,snow_cm\n45,1\n").unwrap_err().to_string();
        assert!(e.contains("'lon'"), "{e}");
        let e = read("lat,lon,snow_cm\n").unwrap_err().to_string();
        assert!(e.contains("no reports"), "{e}");
    }
}
