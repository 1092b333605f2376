//! Scenarios: the track offsets a run explores, and the offset lists users write.
//!
//! A scenario is one displacement of the storm: cross-track kilometres (positive to the left of
//! the direction of motion) and along-track kilometres (positive ahead). The scenario set is the
//! product of the cross-track and along-track lists. Scenarios are independent of each other, so
//! any subset computed elsewhere (a shard) merges with the rest by simple concatenation.

use serde::Serialize;

/// One displacement of the storm track.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Scenario {
    /// Cross-track offset, km, positive to the left of the storm's motion.
    pub cross_km: f64,
    /// Along-track offset, km, positive ahead of the storm.
    pub along_km: f64,
}

impl Scenario {
    /// The model as issued.
    pub const BASELINE: Scenario = Scenario {
        cross_km: 0.0,
        along_km: 0.0,
    };

    /// True for the unshifted model.
    pub fn is_baseline(&self) -> bool {
        self.cross_km == 0.0 && self.along_km == 0.0
    }

    /// A label for band descriptions and tables, e.g. `cross +20 km, along -50 km`.
    pub fn label(&self) -> String {
        format!(
            "cross {} km, along {} km",
            signed(self.cross_km),
            signed(self.along_km)
        )
    }

    /// Plain words for the offset, e.g. `40 km left, 50 km behind` or `as modelled`.
    pub fn in_words(&self) -> String {
        let mut parts = Vec::new();
        if self.cross_km != 0.0 {
            let side = if self.cross_km > 0.0 { "left" } else { "right" };
            parts.push(format!("{} km {side}", trim(self.cross_km.abs())));
        }
        if self.along_km != 0.0 {
            let side = if self.along_km > 0.0 {
                "ahead"
            } else {
                "behind"
            };
            parts.push(format!("{} km {side}", trim(self.along_km.abs())));
        }
        if parts.is_empty() {
            "as modelled".to_string()
        } else {
            parts.join(", ")
        }
    }
}

fn trim(v: f64) -> String {
    let s = format!("{v:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

fn signed(v: f64) -> String {
    if v > 0.0 {
        format!("+{}", trim(v))
    } else if v < 0.0 {
        format!("-{}", trim(-v))
    } else {
        "0".to_string()
    }
}

/// Why an offset list cannot be read.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum OffsetError {
    /// A number did not parse.
    #[error("'{0}' is not a number of kilometres")]
    NotANumber(String),
    /// `start:end:step` with a zero or negative step.
    #[error("range '{0}': the step must be positive")]
    BadStep(String),
    /// `start:end:step` with end before start.
    #[error("range '{0}': the end is before the start (write it as low:high:step)")]
    Reversed(String),
    /// Nothing listed.
    #[error("the offset list is empty")]
    Empty,
    /// More than the engine will hold.
    #[error("range '{0}' has more than {1} offsets")]
    TooMany(String, usize),
    /// The same offset twice.
    #[error("offset {0} km is listed twice")]
    Duplicate(f64),
}

/// Most offsets one axis may list: beyond this a run is a sharding job, not a typo.
pub const MAX_OFFSETS_PER_AXIS: usize = 2001;

/// Parses an offset list: a single value (`0`), a comma list (`-50,0,50`) or an inclusive range
/// `start:end:step` (`-100:100:10`), or a mix (`-100:-60:20,0,60:100:20`). Values are km.
///
/// ```
/// use trackswing::scenario::parse_offsets;
/// assert_eq!(parse_offsets("-20:20:10").unwrap(), vec![-20.0, -10.0, 0.0, 10.0, 20.0]);
/// assert_eq!(parse_offsets("0").unwrap(), vec![0.0]);
/// assert!(parse_offsets("10:-10:5").is_err());
/// ```
pub fn parse_offsets(text: &str) -> Result<Vec<f64>, OffsetError> {
    let mut out = Vec::new();
    for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        let fields: Vec<&str> = part.split(':').map(str::trim).collect();
        let num = |s: &str| {
            s.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| OffsetError::NotANumber(s.to_string()))
        };
        match fields.as_slice() {
            [v] => out.push(num(v)?),
            [a, b, s] => {
                let (a, b, s) = (num(a)?, num(b)?, num(s)?);
                if s <= 0.0 {
                    return Err(OffsetError::BadStep(part.to_string()));
                }
                if b < a {
                    return Err(OffsetError::Reversed(part.to_string()));
                }
                let n = ((b - a) / s + 1e-9).floor() as usize + 1;
                if n > MAX_OFFSETS_PER_AXIS {
                    return Err(OffsetError::TooMany(part.to_string(), MAX_OFFSETS_PER_AXIS));
                }
                // Multiply rather than add so long ranges carry no rounding drift.
                out.extend((0..n).map(|k| round_km(a + k as f64 * s)));
            }
            _ => return Err(OffsetError::NotANumber(part.to_string())),
        }
    }
    if out.is_empty() {
        return Err(OffsetError::Empty);
    }
    let mut sorted = out.clone();
    sorted.sort_by(f64::total_cmp);
    if let Some(w) = sorted.windows(2).find(|w| w[0] == w[1]) {
        return Err(OffsetError::Duplicate(w[0]));
    }
    Ok(out)
}

/// Rounds to a millimetre so that `-0.1 + 3·0.1` prints as `0.2`, not `0.20000000000000004`.
fn round_km(v: f64) -> f64 {
    let r = (v * 1e6).round() / 1e6;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

/// The product of the two lists, cross-track varying fastest. The baseline (0, 0) is always
/// included: it is added first when the lists do not contain it.
pub fn scenario_set(cross: &[f64], along: &[f64]) -> Vec<Scenario> {
    let mut out: Vec<Scenario> = along
        .iter()
        .flat_map(|&a| {
            cross.iter().map(move |&c| Scenario {
                cross_km: c,
                along_km: a,
            })
        })
        .collect();
    if !out.iter().any(Scenario::is_baseline) {
        out.insert(0, Scenario::BASELINE);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_lists_and_mixes() {
        assert_eq!(
            parse_offsets("-100:100:50").unwrap(),
            vec![-100.0, -50.0, 0.0, 50.0, 100.0]
        );
        assert_eq!(
            parse_offsets("-60:-20:20, 0 ,40").unwrap(),
            vec![-60.0, -40.0, -20.0, 0.0, 40.0]
        );
        let fine = parse_offsets("-0.3:0.3:0.1").unwrap();
        assert_eq!(fine, vec![-0.3, -0.2, -0.1, 0.0, 0.1, 0.2, 0.3]);
    }

    #[test]
    fn bad_lists_are_refused() {
        assert_eq!(
            parse_offsets("0:10:0"),
            Err(OffsetError::BadStep("0:10:0".into()))
        );
        assert_eq!(
            parse_offsets("10:0:5"),
            Err(OffsetError::Reversed("10:0:5".into()))
        );
        assert_eq!(parse_offsets(" , "), Err(OffsetError::Empty));
        assert_eq!(
            parse_offsets("ten"),
            Err(OffsetError::NotANumber("ten".into()))
        );
        assert_eq!(parse_offsets("0,0"), Err(OffsetError::Duplicate(0.0)));
        assert!(matches!(
            parse_offsets("0:100000:1"),
            Err(OffsetError::TooMany(..))
        ));
    }

    #[test]
    fn set_always_holds_the_baseline() {
        let s = scenario_set(&[-10.0, 10.0], &[0.0]);
        assert_eq!(s.len(), 3);
        assert!(s[0].is_baseline());
        let s = scenario_set(&[-10.0, 0.0, 10.0], &[-50.0, 0.0]);
        assert_eq!(s.len(), 6);
        assert_eq!(s.iter().filter(|x| x.is_baseline()).count(), 1);
        assert_eq!(
            s[1],
            Scenario {
                cross_km: 0.0,
                along_km: -50.0
            }
        );
    }

    #[test]
    fn words_and_labels() {
        let s = Scenario {
            cross_km: 40.0,
            along_km: -50.0,
        };
        assert_eq!(s.in_words(), "40 km left, 50 km behind");
        assert_eq!(s.label(), "cross +40 km, along -50 km");
        assert_eq!(Scenario::BASELINE.in_words(), "as modelled");
    }
}
