//! Towns: named points where the planner wants totals, from a CSV with `name,lat,lon`.

use std::collections::HashSet;
use std::path::{Path, PathBuf};

/// A named point.
#[derive(Clone, Debug, PartialEq)]
pub struct Town {
    /// Name as written in the file.
    pub name: String,
    /// Latitude, degrees north.
    pub lat: f64,
    /// Longitude, degrees east.
    pub lon: f64,
}

/// Why a towns file cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum TownsError {
    /// The file could not be read.
    #[error("{path}: cannot read the towns file: {source}")]
    Io {
        /// The towns file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A row is malformed.
    #[error("{path}: line {line}: {what}")]
    Bad {
        /// The towns file.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// What was wrong and what was expected.
        what: String,
    },
}

/// Reads a towns CSV: a header naming `name`, `lat` and `lon` columns (any order, case-insensitive;
/// other columns are ignored), then one town per row. Names must be unique.
pub fn read_towns(path: &Path) -> Result<Vec<Town>, TownsError> {
    let text = std::fs::read_to_string(path).map_err(|source| TownsError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let bad = |line: usize, what: String| TownsError::Bad {
        path: path.to_path_buf(),
        line,
        what,
    };
    let mut rdr = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let headers = rdr
        .headers()
        .map_err(|e| bad(1, format!("cannot read the header: {e}")))?
        .clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h.eq_ignore_ascii_case(name))
            .ok_or_else(|| {
                bad(
                    1,
                    format!("the header has no '{name}' column (expected name,lat,lon)"),
                )
            })
    };
    let (cn, cla, clo) = (col("name")?, col("lat")?, col("lon")?);
    let mut towns = Vec::new();
    let mut seen = HashSet::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| {
            let line = e.position().map(|p| p.line() as usize).unwrap_or(0);
            bad(line, e.to_string())
        })?;
        let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
        let name = rec.get(cn).unwrap_or("").to_string();
        if name.is_empty() {
            return Err(bad(line, "the town has no name".into()));
        }
        let num = |i: usize, what: &str, lo: f64, hi: f64| {
            rec.get(i)
                .and_then(|s| s.parse::<f64>().ok())
                .filter(|v| (lo..=hi).contains(v))
                .ok_or_else(|| {
                    bad(
                        line,
                        format!(
                            "'{what}' of {name} must be degrees between {lo} and {hi}, got '{}'",
                            rec.get(i).unwrap_or("")
                        ),
                    )
                })
        };
        let lat = num(cla, "lat", -90.0, 90.0)?;
        let lon = num(clo, "lon", -180.0, 360.0)?;
        if !seen.insert(name.clone()) {
            return Err(bad(line, format!("town '{name}' is listed twice")));
        }
        towns.push(Town { name, lat, lon });
    }
    Ok(towns)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file(text: &str) -> (tempfile::TempDir, PathBuf) {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("towns.csv");
        std::fs::write(&p, text).unwrap();
        (d, p)
    }

    #[test]
    fn reads_any_column_order() {
        let (_d, p) = file("lon,name,lat,pop\n-80.5,Alder Ford,40.25,1200\n-79,Brinmoor,41,3\n");
        let t = read_towns(&p).unwrap();
        assert_eq!(t.len(), 2);
        assert_eq!(
            t[0],
            Town {
                name: "Alder Ford".into(),
                lat: 40.25,
                lon: -80.5
            }
        );
    }

    #[test]
    fn bad_rows_name_their_line() {
        let (_d, p) = file("name,lat,lon\nA,40,-80\nB,forty,-80\n");
        let e = read_towns(&p).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("'lat' of B"), "{e}");
        let (_d, p) = file("name,lat,lon\nA,40,-80\nA,41,-80\n");
        let e = read_towns(&p).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("twice"), "{e}");
        let (_d, p) = file("name,lat,lon\nA,91,-80\n");
        assert!(read_towns(&p).unwrap_err().to_string().contains("line 2"));
        let (_d, p) = file("town,lat,lon\n");
        assert!(read_towns(&p).unwrap_err().to_string().contains("'name'"));
    }
}
