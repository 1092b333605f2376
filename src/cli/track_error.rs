//! `track-error`: pair the forecast and analysed tracks named on the command line, verify them
//! with the library ([`trackswing::track_error`]) and write the two CSV files.

use super::args::TrackErrorArgs;
use crate::Failure;
use anyhow::anyhow;
use chrono::{DateTime, Utc};
use std::path::Path;
use trackswing::read::track::read_track;
use trackswing::track_error::{files, verify, PastCase};

/// The name of each case: the forecast file's stem, or the whole path as given when two
/// forecasts share a stem.
fn case_names(forecasts: &[std::path::PathBuf]) -> Vec<String> {
    let stem = |p: &Path| {
        p.file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| p.display().to_string())
    };
    let stems: Vec<String> = forecasts.iter().map(|p| stem(p)).collect();
    stems
        .iter()
        .zip(forecasts)
        .map(|(s, p)| {
            if stems.iter().filter(|t| *t == s).count() > 1 {
                p.display().to_string()
            } else {
                s.clone()
            }
        })
        .collect()
}

fn parse_time(s: &str) -> Result<DateTime<Utc>, Failure> {
    DateTime::parse_from_rfc3339(s.trim())
        .map(|t| t.with_timezone(&Utc))
        .map_err(|_| {
            Failure::Usage(anyhow!(
                "--reference-time '{s}' is not an RFC 3339 time such as 2026-01-14T00:00:00Z"
            ))
        })
}

/// Verifies the forecasts against their analyses and writes `track_error.csv` and
/// `track_error_summary.csv` into `--out`.
pub fn track_error(a: &TrackErrorArgs) -> Result<(), Failure> {
    let n = a.forecast.len();
    if a.analysis.len() != n {
        return Err(Failure::Usage(anyhow!(
            "--forecast names {n} track(s) and --analysis {}: give one analysed track per forecast, in the same order",
            a.analysis.len()
        )));
    }
    if !(a.bin_hours.is_finite() && a.bin_hours > 0.0) {
        return Err(Failure::Usage(anyhow!(
            "--bin-hours must be a positive number of hours, got {}",
            a.bin_hours
        )));
    }
    let references = match a.reference_time.len() {
        0 => vec![None; n],
        1 => vec![Some(parse_time(&a.reference_time[0])?); n],
        k if k == n => a
            .reference_time
            .iter()
            .map(|s| parse_time(s).map(Some))
            .collect::<Result<_, _>>()?,
        k => {
            return Err(Failure::Usage(anyhow!(
                "--reference-time gives {k} times for {n} forecasts: give one for all, or one per forecast in order"
            )))
        }
    };
    let mut cases = Vec::with_capacity(n);
    for (((name, f), an), reference) in case_names(&a.forecast)
        .into_iter()
        .zip(&a.forecast)
        .zip(&a.analysis)
        .zip(references)
    {
        let forecast = read_track(f).map_err(|e| Failure::Input(e.into()))?;
        let analysis = read_track(an).map_err(|e| Failure::Input(e.into()))?;
        let reference = reference.unwrap_or(forecast.points[0].time);
        cases.push(PastCase {
            name,
            forecast,
            analysis,
            reference,
        });
    }
    let (errors, bins) = verify(&cases, a.bin_hours);
    if errors.is_empty() {
        return Err(Failure::Input(anyhow!(
            "no forecast time at or after its reference time falls inside its analysed track's times; nothing to verify (check the pairing: forecast {} with analysis {})",
            a.forecast[0].display(),
            a.analysis[0].display()
        )));
    }
    std::fs::create_dir_all(&a.out)
        .map_err(|e| Failure::Output(anyhow!("creating {}: {e}", a.out.display())))?;
    for (name, text) in [
        ("track_error.csv", files::errors_csv(&errors)),
        ("track_error_summary.csv", files::summary_csv(&bins)),
    ] {
        trackswing::write::write_text_atomic(&a.out, name, &text)
            .map_err(|e| Failure::Output(e.into()))?;
    }
    for c in &cases {
        let k = errors.iter().filter(|e| e.case == c.name).count();
        if k == 0 {
            eprintln!(
                "note: {}: no forecast time falls inside {}'s times; the case adds no errors",
                c.forecast.source.display(),
                c.analysis.source.display()
            );
        }
    }
    println!("lead (h)     n   cross bias  cross σ [95 %]          along bias  along σ [95 %]");
    let sigma =
        |s: &trackswing::track_error::bins::ComponentStats| match (s.sigma_km, s.sigma_ci_km) {
            (Some(v), Some((lo, hi))) => format!("{v:7.1} [{lo:6.1}, {hi:6.1}]"),
            _ => format!("{:>23}", "–"),
        };
    for b in &bins {
        println!(
            "{:>4}–{:<4} {:>5}  {:>9.1}  {}  {:>9.1}  {}",
            b.from_h,
            b.to_h,
            b.n,
            b.cross.bias_km,
            sigma(&b.cross),
            b.along.bias_km,
            sigma(&b.along)
        );
    }
    println!(
        "wrote {} and {} (km; cross positive: the real low went left of the forecast motion; along positive: ahead)",
        a.out.join("track_error.csv").display(),
        a.out.join("track_error_summary.csv").display()
    );
    Ok(())
}
