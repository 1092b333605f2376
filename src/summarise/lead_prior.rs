//! The track-error prior at the run's lead time, from a track-error verification
//! (`trackswing track-error`'s `track_error_summary.csv`, named by a case's
//! `[weights] from_track_error`).
//!
//! One lead time per run: the hours from the model run's reference time (from the model files;
//! without one, the first step's valid time, as `track-error` takes a forecast track's first
//! time) to the middle of the accumulation period. The prior is one Gaussian over the whole
//! run, so it takes one σ: that of the bin holding the middle lead, with that bin's bias as
//! the prior's centre (the real low went, on average, that far left of / ahead of the forecast
//! track, so the scenarios moved that way are the likeliest).

use super::weights::{TrackPrior, WeightsError};
use crate::accumulate::period::Period;
use crate::track_error::bins::LeadBin;
use chrono::{DateTime, Utc};
use std::path::PathBuf;

/// A track-error summary a case reads its prior from.
#[derive(Clone, Debug, PartialEq)]
pub struct TrackErrorPrior {
    /// The summary file.
    pub source: PathBuf,
    /// Its lead-time bins, in lead order.
    pub bins: Vec<LeadBin>,
}

impl TrackErrorPrior {
    /// The Gaussian prior at the lead time of a run with `reference` time and steps valid at
    /// `valid_times`: σ across and along from the bin holding the lead, centred at its bias.
    pub fn at(
        &self,
        reference: Option<DateTime<Utc>>,
        valid_times: &[DateTime<Utc>],
    ) -> Result<TrackPrior, WeightsError> {
        let file = self.source.display().to_string();
        let period =
            Period::of(valid_times).ok_or(WeightsError::NoLeadTime { file: file.clone() })?;
        let start = period.start.unwrap_or(period.end);
        let middle = start + (period.end - start) / 2;
        let (from, how) = match reference {
            Some(r) => (r, format!("reference time {}", r.to_rfc3339())),
            None => (
                valid_times[0],
                format!(
                    "no reference time in the model files: from the first step, {}",
                    valid_times[0].to_rfc3339()
                ),
            ),
        };
        let lead_h = (middle - from).num_seconds() as f64 / 3600.0;
        let how = format!(
            "{how} to the middle of the accumulation period, {}",
            middle.to_rfc3339()
        );
        let bin = self
            .bins
            .iter()
            .find(|b| b.from_h <= lead_h && lead_h < b.to_h)
            .ok_or_else(|| WeightsError::NoLeadBin {
                file: file.clone(),
                lead_h,
                how: how.clone(),
                bins: self
                    .bins
                    .iter()
                    .map(|b| format!("{}–{} h", b.from_h, b.to_h))
                    .collect::<Vec<_>>()
                    .join(", "),
            })?;
        let (Some(cross_sigma_km), Some(along_sigma_km)) = (bin.cross.sigma_km, bin.along.sigma_km)
        else {
            return Err(WeightsError::BinWithoutSigma {
                file,
                lead_h,
                from_h: bin.from_h,
                to_h: bin.to_h,
                n: bin.n,
            });
        };
        Ok(TrackPrior::Gaussian {
            cross_sigma_km,
            along_sigma_km,
            cross_mean_km: bin.cross.bias_km,
            along_mean_km: bin.along.bias_km,
            basis: Some(format!(
                "{file}, lead-time bin {}–{} h of {} errors, for the run's lead of {lead_h} h: {how}",
                bin.from_h, bin.to_h, bin.n
            )),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::track_error::bins::ComponentStats;
    use chrono::{Duration, TimeZone};

    fn stats(bias_km: f64, sigma_km: Option<f64>) -> ComponentStats {
        ComponentStats {
            bias_km,
            bias_ci_km: None,
            sigma_km,
            sigma_ci_km: None,
        }
    }

    fn prior() -> TrackErrorPrior {
        let bin = |from_h: f64, n: usize, c: f64, s: Option<f64>| LeadBin {
            from_h,
            to_h: from_h + 12.0,
            n,
            cross: stats(c, s),
            along: stats(-c, s.map(|s| 2.0 * s)),
        };
        TrackErrorPrior {
            source: "te.csv".into(),
            bins: vec![
                bin(0.0, 9, 10.0, Some(40.0)),
                bin(12.0, 9, 20.0, Some(60.0)),
                bin(24.0, 1, 5.0, None),
            ],
        }
    }

    #[test]
    fn the_bin_of_the_middle_of_the_period_sets_sigma_and_centre() {
        let r = Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap();
        // Steps every 3 h valid 9 h to 27 h: the period runs 6 h to 27 h, its middle at 16.5 h.
        let times: Vec<_> = (3..=9).map(|k| r + Duration::hours(3 * k)).collect();
        let p = prior().at(Some(r), &times).unwrap();
        let TrackPrior::Gaussian {
            cross_sigma_km,
            along_sigma_km,
            cross_mean_km,
            along_mean_km,
            basis,
        } = p
        else {
            panic!("{p:?}")
        };
        assert_eq!((cross_sigma_km, along_sigma_km), (60.0, 120.0));
        assert_eq!((cross_mean_km, along_mean_km), (20.0, -20.0));
        assert!(basis.unwrap().contains("16.5 h"));
        // Without a reference time the lead runs from the first step: 7.5 h, the first bin.
        let p = prior().at(None, &times).unwrap();
        assert!(matches!(p, TrackPrior::Gaussian { cross_sigma_km, .. } if cross_sigma_km == 40.0));
    }

    #[test]
    fn a_lead_without_a_usable_bin_is_named() {
        let r = Utc.with_ymd_and_hms(2026, 1, 14, 0, 0, 0).unwrap();
        // Steps valid 48 h and 51 h: the period runs 45–51 h, its middle at 48 h.
        let late: Vec<_> = [48, 51].map(|h| r + Duration::hours(h)).to_vec();
        let e = prior().at(Some(r), &late).unwrap_err().to_string();
        assert!(
            e.contains("te.csv") && e.contains("48 h") && e.contains("0–12 h"),
            "{e}"
        );
        let at_24: Vec<_> = [24, 27].map(|h| r + Duration::hours(h)).to_vec();
        let e = prior().at(Some(r), &at_24).unwrap_err().to_string();
        assert!(e.contains("24–36 h") && e.contains("no σ"), "{e}");
    }
}
