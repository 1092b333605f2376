//! Track-error weighting: a prior probability for every scenario (track offset).
//!
//! Two kinds of prior:
//! - **Gaussian** in the cross- and along-track offsets, independent axes, centred on the model
//!   as issued or, when set from a track-error verification ([`super::lead_prior`]), on its mean
//!   error (μc, μa): `w ∝ exp(−½·(((c−μc)/σc)² + ((a−μa)/σa)²)) · Δc · Δa`, where Δc and Δa are the widths of
//!   offset space each scenario stands for (half the gap to each neighbour on its axis, the full
//!   gap at the ends), so that unevenly spaced offsets do not bias the result. On evenly spaced
//!   offsets every width is the same and the weight is the density alone.
//!   σ must come from the user's own verification of track error at the lead time of the
//!   forecast; the defaults below are examples for the demo, not a climatology.
//! - **Explicit**: one weight per scenario, from the case file or a CSV. They need not add up to
//!   one; they are normalised.
//!
//! Weights are normalised to sum to 1 over the scenario set of the run.

use crate::scenario::Scenario;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Example cross-track σ, km (for the demo; not a climatology of track error).
pub const EXAMPLE_CROSS_SIGMA_KM: f64 = 50.0;
/// Example along-track σ, km (for the demo; not a climatology of track error).
pub const EXAMPLE_ALONG_SIGMA_KM: f64 = 50.0;

/// Two offsets closer than this (km) are the same offset.
const SAME_OFFSET_KM: f64 = 1e-6;

/// How likely each track offset is, before looking at the weather.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum TrackPrior {
    /// Independent Gaussians across and along the track, centred on the model as issued unless
    /// a mean is given.
    Gaussian {
        /// σ across the track, km.
        cross_sigma_km: f64,
        /// σ along the track, km.
        along_sigma_km: f64,
        /// Centre across the track, km (positive left of the motion): the mean cross-track
        /// error of past forecasts; 0 (not written) when centred on the model as issued.
        #[serde(skip_serializing_if = "is_zero")]
        cross_mean_km: f64,
        /// Centre along the track, km (positive ahead); 0 (not written) when centred on the
        /// model as issued.
        #[serde(skip_serializing_if = "is_zero")]
        along_mean_km: f64,
        /// Where σ and the centre came from, when from a track-error verification.
        #[serde(skip_serializing_if = "Option::is_none")]
        basis: Option<String>,
    },
    /// One weight per offset.
    Explicit {
        /// Where the weights came from (`case file` or the CSV's path).
        source: String,
        /// The weights as given.
        weights: Vec<ExplicitWeight>,
    },
}

impl Default for TrackPrior {
    fn default() -> Self {
        Self::Gaussian {
            cross_sigma_km: EXAMPLE_CROSS_SIGMA_KM,
            along_sigma_km: EXAMPLE_ALONG_SIGMA_KM,
            cross_mean_km: 0.0,
            along_mean_km: 0.0,
            basis: None,
        }
    }
}

/// A prior centred on the model as issued leaves its centre out of the manifest.
fn is_zero(v: &f64) -> bool {
    *v == 0.0
}

/// The weight of one offset.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExplicitWeight {
    /// Cross-track offset, km (positive left of the motion).
    pub cross_km: f64,
    /// Along-track offset, km (positive ahead).
    pub along_km: f64,
    /// Relative weight (≥ 0).
    pub weight: f64,
}

/// Why the weights cannot be used.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum WeightsError {
    /// σ not positive.
    #[error("σ must be a positive number of km, got {0}")]
    BadSigma(f64),
    /// The prior's centre is not a number.
    #[error("the prior's centre must be a finite number of km, got {0}")]
    BadMean(f64),
    /// The track-error summary has no bin for the run's lead time.
    #[error(
        "{file}: no lead-time bin holds the run's lead of {lead_h} h ({how}); its bins are {bins}"
    )]
    NoLeadBin {
        /// The summary file.
        file: String,
        /// The run's lead time, hours.
        lead_h: f64,
        /// How the lead was taken.
        how: String,
        /// The bins the file has.
        bins: String,
    },
    /// The bin of the run's lead time has no σ.
    #[error("{file}: the lead-time bin {from_h}–{to_h} h (the run's lead of {lead_h} h) has {n} error(s) and no σ; at least two are needed (use more past cases or wider bins)")]
    BinWithoutSigma {
        /// The summary file.
        file: String,
        /// The run's lead time, hours.
        lead_h: f64,
        /// Start of the bin, hours.
        from_h: f64,
        /// End of the bin, hours.
        to_h: f64,
        /// Errors in the bin.
        n: usize,
    },
    /// A run without steps has no lead time.
    #[error("{file}: the run has no steps, so no lead time to pick a track-error bin for")]
    NoLeadTime {
        /// The summary file.
        file: String,
    },
    /// A weight negative or not finite.
    #[error("weight {weight} for cross {cross_km} km, along {along_km} km: a weight must be a finite number ≥ 0")]
    BadWeight {
        /// Cross offset.
        cross_km: f64,
        /// Along offset.
        along_km: f64,
        /// The weight.
        weight: f64,
    },
    /// A scenario has no weight.
    #[error("the run's offset cross {cross_km} km, along {along_km} km has no explicit weight; give every offset of the run a weight (0 is allowed)")]
    Missing {
        /// Cross offset.
        cross_km: f64,
        /// Along offset.
        along_km: f64,
    },
    /// A weight for an offset the run does not have.
    #[error("a weight is given for cross {cross_km} km, along {along_km} km, which is not an offset of this run (check [offsets], --cross and --along)")]
    Unknown {
        /// Cross offset.
        cross_km: f64,
        /// Along offset.
        along_km: f64,
    },
    /// The same offset twice.
    #[error("cross {cross_km} km, along {along_km} km is given a weight twice")]
    Duplicate {
        /// Cross offset.
        cross_km: f64,
        /// Along offset.
        along_km: f64,
    },
    /// Nothing to normalise.
    #[error("the weights add up to zero")]
    ZeroSum,
    /// The CSV cannot be read.
    #[error("line {line}: {what}")]
    Csv {
        /// 1-based line.
        line: u64,
        /// What is wrong.
        what: String,
    },
}

/// An offset as whole micrometres of km, so offsets can be looked up exactly.
fn key(cross_km: f64, along_km: f64) -> (i64, i64) {
    let k = |v: f64| (v / SAME_OFFSET_KM).round() as i64;
    (k(cross_km), k(along_km))
}

/// The distinct values of one axis, sorted, for [`axis_width`].
fn axis_values(values: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut u: Vec<f64> = values.collect();
    u.sort_by(f64::total_cmp);
    u.dedup_by(|a, b| (*a - *b).abs() < SAME_OFFSET_KM);
    u
}

/// The width of offset space value `v` of a sorted axis `u` stands for: half the gap to each
/// neighbour, the whole gap at the two ends (so even spacing gives equal widths), 1 when the
/// axis has a single value.
fn axis_width(u: &[f64], v: f64) -> f64 {
    let k = u.partition_point(|x| *x < v - SAME_OFFSET_KM);
    match (k.checked_sub(1).map(|j| u[j]), u.get(k + 1)) {
        (None, None) => 1.0,
        (Some(lo), None) => v - lo,
        (None, Some(hi)) => hi - v,
        (Some(lo), Some(hi)) => (hi - lo) / 2.0,
    }
}

/// Normalised weight of every scenario (same order as `scenarios`; they add up to 1).
///
/// ```
/// use trackswing::scenario::scenario_set;
/// use trackswing::summarise::weights::{scenario_weights, TrackPrior};
/// let s = scenario_set(&[-50.0, 0.0, 50.0], &[0.0]);
/// let prior = TrackPrior::Gaussian {
///     cross_sigma_km: 50.0,
///     along_sigma_km: 50.0,
///     cross_mean_km: 0.0,
///     along_mean_km: 0.0,
///     basis: None,
/// };
/// let w = scenario_weights(&prior, &s).unwrap();
/// // 1σ either side: e^(−1/2) relative to the centre; the centre gets 1/(1 + 2e^(−1/2)).
/// assert!((w[1] - 1.0 / (1.0 + 2.0 * (-0.5f64).exp())).abs() < 1e-12);
/// ```
pub fn scenario_weights(
    prior: &TrackPrior,
    scenarios: &[Scenario],
) -> Result<Vec<f64>, WeightsError> {
    let raw: Vec<f64> = match prior {
        TrackPrior::Gaussian {
            cross_sigma_km,
            along_sigma_km,
            cross_mean_km,
            along_mean_km,
            ..
        } => {
            for s in [*cross_sigma_km, *along_sigma_km] {
                if !(s.is_finite() && s > 0.0) {
                    return Err(WeightsError::BadSigma(s));
                }
            }
            for m in [*cross_mean_km, *along_mean_km] {
                if !m.is_finite() {
                    return Err(WeightsError::BadMean(m));
                }
            }
            let cross = axis_values(scenarios.iter().map(|s| s.cross_km));
            let along = axis_values(scenarios.iter().map(|s| s.along_km));
            scenarios
                .iter()
                .map(|s| {
                    let (zc, za) = (
                        (s.cross_km - cross_mean_km) / cross_sigma_km,
                        (s.along_km - along_mean_km) / along_sigma_km,
                    );
                    (-0.5 * (zc * zc + za * za)).exp()
                        * axis_width(&cross, s.cross_km)
                        * axis_width(&along, s.along_km)
                })
                .collect()
        }
        TrackPrior::Explicit { weights, .. } => {
            let run: std::collections::HashSet<(i64, i64)> = scenarios
                .iter()
                .map(|s| key(s.cross_km, s.along_km))
                .collect();
            let mut given = std::collections::HashMap::with_capacity(weights.len());
            for w in weights {
                if !(w.weight.is_finite() && w.weight >= 0.0) {
                    return Err(WeightsError::BadWeight {
                        cross_km: w.cross_km,
                        along_km: w.along_km,
                        weight: w.weight,
                    });
                }
                let k = key(w.cross_km, w.along_km);
                if given.insert(k, w.weight).is_some() {
                    return Err(WeightsError::Duplicate {
                        cross_km: w.cross_km,
                        along_km: w.along_km,
                    });
                }
                if !run.contains(&k) {
                    return Err(WeightsError::Unknown {
                        cross_km: w.cross_km,
                        along_km: w.along_km,
                    });
                }
            }
            scenarios
                .iter()
                .map(|s| {
                    given
                        .get(&key(s.cross_km, s.along_km))
                        .copied()
                        .ok_or(WeightsError::Missing {
                            cross_km: s.cross_km,
                            along_km: s.along_km,
                        })
                })
                .collect::<Result<_, _>>()?
        }
    };
    let sum: f64 = raw.iter().sum();
    if sum.is_nan() || sum <= 0.0 {
        return Err(WeightsError::ZeroSum);
    }
    Ok(raw.iter().map(|w| w / sum).collect())
}

/// Reads explicit weights from a CSV with the header `cross_km,along_km,weight` (any column
/// order; other columns are refused so a misspelt header is not silently ignored).
pub fn read_weights_csv(path: &Path) -> Result<Vec<ExplicitWeight>, WeightsError> {
    let mut r = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_path(path)
        .map_err(|e| WeightsError::Csv {
            line: 0,
            what: format!("cannot read: {e}"),
        })?;
    let header = r.headers().map_err(|e| WeightsError::Csv {
        line: 1,
        what: e.to_string(),
    })?;
    let col = |name: &str| header.iter().position(|h| h == name);
    let (Some(c), Some(a), Some(w)) = (col("cross_km"), col("along_km"), col("weight")) else {
        return Err(WeightsError::Csv {
            line: 1,
            what: format!(
                "the header must be cross_km,along_km,weight (found '{}')",
                header.iter().collect::<Vec<_>>().join(",")
            ),
        });
    };
    if header.len() != 3 {
        return Err(WeightsError::Csv {
            line: 1,
            what: "expected exactly the columns cross_km, along_km, weight".into(),
        });
    }
    let mut out = Vec::new();
    for (i, rec) in r.records().enumerate() {
        let line = i as u64 + 2;
        let rec = rec.map_err(|e| WeightsError::Csv {
            line,
            what: e.to_string(),
        })?;
        let num = |k: usize, name: &str| -> Result<f64, WeightsError> {
            let text = rec.get(k).unwrap_or("");
            text.parse::<f64>().map_err(|_| WeightsError::Csv {
                line,
                what: format!("{name} '{text}' is not a number"),
            })
        };
        out.push(ExplicitWeight {
            cross_km: num(c, "cross_km")?,
            along_km: num(a, "along_km")?,
            weight: num(w, "weight")?,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::scenario_set;

    #[test]
    fn gaussian_on_a_grid_is_the_product_of_two_normal_densities() {
        // Closed form: on the 3×3 grid {−50, 0, 50}² with σc = 50 km and σa = 100 km, the
        // weight of (c, a) is φ(c/50)·φ(a/100) / Σ; the corner (50, 50) gets
        // e^(−1/2 − 1/8) / ((1 + 2e^(−1/2))·(1 + 2e^(−1/8))).
        let s = scenario_set(&[-50.0, 0.0, 50.0], &[-50.0, 0.0, 50.0]);
        let prior = TrackPrior::Gaussian {
            cross_sigma_km: 50.0,
            along_sigma_km: 100.0,
            cross_mean_km: 0.0,
            along_mean_km: 0.0,
            basis: None,
        };
        let w = scenario_weights(&prior, &s).unwrap();
        assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        let k = s
            .iter()
            .position(|x| x.cross_km == 50.0 && x.along_km == 50.0)
            .unwrap();
        let e = |x: f64| x.exp();
        let want = e(-0.5 - 0.125) / ((1.0 + 2.0 * e(-0.5)) * (1.0 + 2.0 * e(-0.125)));
        assert!((w[k] - want).abs() < 1e-12, "{} vs {want}", w[k]);
    }

    #[test]
    fn a_shifted_centre_weighs_offsets_by_their_distance_from_it() {
        // Closed form: centred at +50 km across with σ 50 km on {0, 50, 100}, the offsets 0 and
        // 100 are 1σ from the centre: weights e^(−1/2), 1, e^(−1/2) over their sum.
        let s = scenario_set(&[0.0, 50.0, 100.0], &[0.0]);
        let prior = TrackPrior::Gaussian {
            cross_sigma_km: 50.0,
            along_sigma_km: 50.0,
            cross_mean_km: 50.0,
            along_mean_km: 0.0,
            basis: None,
        };
        let w = scenario_weights(&prior, &s).unwrap();
        let e = (-0.5f64).exp();
        let want = [e, 1.0, e].map(|x| x / (1.0 + 2.0 * e));
        for (got, want) in w.iter().zip(want) {
            assert!((got - want).abs() < 1e-12, "{w:?}");
        }
    }

    #[test]
    fn uneven_offsets_are_weighted_by_the_width_they_stand_for() {
        // Offsets −100, 0, 20: widths 100, 60, 20. With a huge σ the prior is flat and the
        // weights are the widths over their sum (100, 60, 20)/180.
        let s = scenario_set(&[-100.0, 0.0, 20.0], &[0.0]);
        let prior = TrackPrior::Gaussian {
            cross_sigma_km: 1e9,
            along_sigma_km: 1e9,
            cross_mean_km: 0.0,
            along_mean_km: 0.0,
            basis: None,
        };
        let w = scenario_weights(&prior, &s).unwrap();
        for (got, want) in w.iter().zip([100.0 / 180.0, 60.0 / 180.0, 20.0 / 180.0]) {
            assert!((got - want).abs() < 1e-9, "{w:?}");
        }
    }

    #[test]
    fn explicit_weights_are_normalised_and_checked() {
        let s = scenario_set(&[-40.0, 0.0, 40.0], &[0.0]);
        let ew = |c: f64, w: f64| ExplicitWeight {
            cross_km: c,
            along_km: 0.0,
            weight: w,
        };
        let prior = TrackPrior::Explicit {
            source: "test".into(),
            weights: vec![ew(40.0, 1.0), ew(-40.0, 1.0), ew(0.0, 2.0)],
        };
        assert_eq!(scenario_weights(&prior, &s).unwrap(), vec![0.25, 0.5, 0.25]);
        let missing = TrackPrior::Explicit {
            source: "test".into(),
            weights: vec![ew(40.0, 1.0), ew(0.0, 2.0)],
        };
        assert_eq!(
            scenario_weights(&missing, &s),
            Err(WeightsError::Missing {
                cross_km: -40.0,
                along_km: 0.0
            })
        );
        let unknown = TrackPrior::Explicit {
            source: "test".into(),
            weights: vec![ew(40.0, 1.0), ew(-40.0, 1.0), ew(0.0, 2.0), ew(10.0, 1.0)],
        };
        assert!(matches!(
            scenario_weights(&unknown, &s),
            Err(WeightsError::Unknown { .. })
        ));
        let negative = TrackPrior::Explicit {
            source: "test".into(),
            weights: vec![ew(40.0, -1.0), ew(-40.0, 1.0), ew(0.0, 2.0)],
        };
        assert!(matches!(
            scenario_weights(&negative, &s),
            Err(WeightsError::BadWeight { .. })
        ));
        let bad_sigma = TrackPrior::Gaussian {
            cross_sigma_km: 0.0,
            along_sigma_km: 10.0,
            cross_mean_km: 0.0,
            along_mean_km: 0.0,
            basis: None,
        };
        assert_eq!(
            scenario_weights(&bad_sigma, &s),
            Err(WeightsError::BadSigma(0.0))
        );
    }

    #[test]
    fn weights_csv_reads_and_reports_the_line() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("w.csv");
        std::fs::write(&p, "weight,cross_km,along_km\n2,0,0\n1, -40 ,0\n").unwrap();
        let w = read_weights_csv(&p).unwrap();
        assert_eq!(w.len(), 2);
        assert_eq!((w[1].cross_km, w[1].weight), (-40.0, 1.0));
        std::fs::write(&p, "cross_km,along_km,weight\n0,0,heavy\n").unwrap();
        let e = read_weights_csv(&p).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("heavy"), "{e}");
    }
}
