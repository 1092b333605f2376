//! The two CSV files of a track-error verification: `track_error.csv` (one row per matched
//! time) and `track_error_summary.csv` (one row per lead-time bin), and the reader of the
//! summary that a case's `[weights] from_track_error` uses.
//!
//! Distances in km with three decimals; a statistic that cannot be computed (σ of a bin with
//! one error) is an empty cell, never zero.

use super::bins::{ComponentStats, LeadBin};
use super::decompose::PositionError;
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// Header of `track_error.csv`.
pub const ERRORS_HEADER: &str = "case,lead_h,cross_km,along_km,total_km";

/// Header of `track_error_summary.csv`: the bin, its size, then for `cross` and `along` the
/// bias with its 95 % interval and σ with its 95 % interval.
pub const SUMMARY_HEADER: &str = "lead_from_h,lead_to_h,n,\
cross_bias_km,cross_bias_lo_km,cross_bias_hi_km,cross_sigma_km,cross_sigma_lo_km,cross_sigma_hi_km,\
along_bias_km,along_bias_lo_km,along_bias_hi_km,along_sigma_km,along_sigma_lo_km,along_sigma_hi_km";

/// Why a track-error summary cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum SummaryFileError {
    /// The file could not be read.
    #[error("{path}: cannot read the track-error summary: {what}")]
    Read {
        /// The summary file.
        path: PathBuf,
        /// The cause.
        what: String,
    },
    /// A value is malformed.
    #[error("{path}: line {line}: {what}")]
    Bad {
        /// The summary file.
        path: PathBuf,
        /// 1-based line.
        line: u64,
        /// What was wrong and what was expected.
        what: String,
    },
}

/// CSV cell for a value that may be missing.
fn cell(v: Option<f64>) -> String {
    v.map(|v| format!("{v:.3}")).unwrap_or_default()
}

/// `track_error.csv`: one row per error, in the order given.
pub fn errors_csv(errors: &[PositionError]) -> String {
    let mut out = format!("{ERRORS_HEADER}\n");
    for e in errors {
        let mut w = csv::WriterBuilder::new()
            .has_headers(false)
            .from_writer(vec![]);
        w.write_record([
            e.case.as_str(),
            &format!("{}", e.lead_h),
            &format!("{:.3}", e.cross_km),
            &format!("{:.3}", e.along_km),
            &format!("{:.3}", e.total_km),
        ])
        .expect("writing to memory");
        out.push_str(&String::from_utf8(w.into_inner().expect("in memory")).expect("UTF-8 in"));
    }
    out
}

fn component_cells(c: &ComponentStats) -> String {
    format!(
        "{:.3},{},{},{},{},{}",
        c.bias_km,
        cell(c.bias_ci_km.map(|b| b.0)),
        cell(c.bias_ci_km.map(|b| b.1)),
        cell(c.sigma_km),
        cell(c.sigma_ci_km.map(|b| b.0)),
        cell(c.sigma_ci_km.map(|b| b.1)),
    )
}

/// `track_error_summary.csv`: one row per bin.
pub fn summary_csv(bins: &[LeadBin]) -> String {
    let mut out = format!("{SUMMARY_HEADER}\n");
    for b in bins {
        writeln!(
            out,
            "{},{},{},{},{}",
            b.from_h,
            b.to_h,
            b.n,
            component_cells(&b.cross),
            component_cells(&b.along)
        )
        .expect("writing to a String");
    }
    out
}

/// Reads `track_error_summary.csv` (as [`summary_csv`] writes it; columns by name).
pub fn read_summary(path: &Path) -> Result<Vec<LeadBin>, SummaryFileError> {
    let bad = |line: u64, what: String| SummaryFileError::Bad {
        path: path.to_path_buf(),
        line,
        what,
    };
    let mut r = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_path(path)
        .map_err(|e| SummaryFileError::Read {
            path: path.to_path_buf(),
            what: e.to_string(),
        })?;
    let header = r.headers().map_err(|e| bad(1, e.to_string()))?.clone();
    let mut cols = Vec::new();
    for name in SUMMARY_HEADER.split(',') {
        cols.push(header.iter().position(|h| h == name).ok_or_else(|| {
            bad(
                1,
                format!("no '{name}' column; expected the header {SUMMARY_HEADER} (as `trackswing track-error` writes it)"),
            )
        })?);
    }
    let mut bins = Vec::new();
    for (i, rec) in r.records().enumerate() {
        let line = i as u64 + 2;
        let rec = rec.map_err(|e| bad(line, e.to_string()))?;
        let field = |k: usize| -> Result<Option<f64>, SummaryFileError> {
            let text = rec.get(cols[k]).unwrap_or("");
            if text.is_empty() {
                return Ok(None);
            }
            match text.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(Some(v)),
                _ => Err(bad(
                    line,
                    format!("'{}' is '{text}', expected a number", &header[cols[k]]),
                )),
            }
        };
        let needed = |k: usize| {
            field(k)?.ok_or_else(|| {
                bad(
                    line,
                    format!("'{}' is empty, expected a number", &header[cols[k]]),
                )
            })
        };
        let pair = |k: usize| -> Result<Option<(f64, f64)>, SummaryFileError> {
            Ok(field(k)?.zip(field(k + 1)?))
        };
        let component = |k: usize| -> Result<ComponentStats, SummaryFileError> {
            Ok(ComponentStats {
                bias_km: needed(k)?,
                bias_ci_km: pair(k + 1)?,
                sigma_km: field(k + 3)?,
                sigma_ci_km: pair(k + 4)?,
            })
        };
        let n = needed(2)?;
        let (from_h, to_h) = (needed(0)?, needed(1)?);
        if !(from_h < to_h && n >= 1.0 && n.fract() == 0.0) {
            return Err(bad(
                line,
                format!("a bin needs lead_from_h < lead_to_h and a whole n ≥ 1, got {from_h}, {to_h}, {n}"),
            ));
        }
        bins.push(LeadBin {
            from_h,
            to_h,
            n: n as usize,
            cross: component(3)?,
            along: component(9)?,
        });
    }
    Ok(bins)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::track_error::bins::lead_bins;

    #[test]
    fn the_summary_reads_back_as_written() {
        let e = |lead_h: f64, c: f64, a: f64| PositionError {
            case: "c".into(),
            lead_h,
            cross_km: c,
            along_km: a,
            total_km: f64::hypot(c, a),
        };
        let bins = lead_bins(
            &[
                e(0.0, 10.0, 3.0),
                e(6.0, -20.0, 7.5),
                e(6.0, 4.0, 1.0),
                e(18.0, 5.0, 2.0),
            ],
            12.0,
        );
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("s.csv");
        std::fs::write(&p, summary_csv(&bins)).unwrap();
        let back = read_summary(&p).unwrap();
        assert_eq!(back.len(), 2);
        let s = bins[0].cross.sigma_km.unwrap();
        assert!((back[0].cross.sigma_km.unwrap() - s).abs() < 5e-4);
        assert_eq!(back[1].cross.sigma_km, None);
        assert_eq!((back[1].from_h, back[1].to_h, back[1].n), (12.0, 24.0, 1));
        std::fs::write(&p, "lead_from_h,n\n0,1\n").unwrap();
        let err = read_summary(&p).unwrap_err().to_string();
        assert!(err.contains("line 1") && err.contains("lead_to_h"), "{err}");
    }

    #[test]
    fn case_names_with_commas_are_quoted() {
        let e = PositionError {
            case: "a,b".into(),
            lead_h: 6.0,
            cross_km: 1.0,
            along_km: -2.0,
            total_km: 2.236,
        };
        assert_eq!(
            errors_csv(&[e]),
            format!("{ERRORS_HEADER}\n\"a,b\",6,1.000,-2.000,2.236\n")
        );
    }
}
