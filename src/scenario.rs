//! Scenarios: the track offsets and other uncertainty axes a run explores, and the value lists
//! users write.
//!
//! A scenario is one version of the storm: displaced cross-track (km, positive to the left of
//! the direction of motion) and along-track (km, positive ahead); shifted in time
//! (`timing_h`, positive = the storm comes later: each step samples the model `timing_h` hours
//! earlier); with its precipitation scaled (`intensity`, a factor); and with the air between the
//! ground and 500 hPa warmer or colder (`warm_bias_k`, see
//! [`crate::diagnose::Profile::build`] for exactly which levels). The scenario set is the
//! product of the five lists. Scenarios are independent of each other, so any subset computed
//! elsewhere (a shard) merges with the rest by simple concatenation.

use chrono::{DateTime, Utc};
use serde::Serialize;

/// One version of the storm.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Scenario {
    /// Cross-track offset, km, positive to the left of the storm's motion.
    pub cross_km: f64,
    /// Along-track offset, km, positive ahead of the storm.
    pub along_km: f64,
    /// Time offset, hours, positive when the storm comes later (the fields at time t are the
    /// model's at t − timing_h, interpolated linearly between the steps that bracket it).
    pub timing_h: f64,
    /// Factor on the precipitation leaving the cloud (1: as modelled).
    pub intensity: f64,
    /// Added to the temperature of the isobaric levels between the ground and 500 hPa, K.
    pub warm_bias_k: f64,
}

impl Default for Scenario {
    fn default() -> Self {
        Self::BASELINE
    }
}

impl Scenario {
    /// The model as issued.
    pub const BASELINE: Scenario = Scenario {
        cross_km: 0.0,
        along_km: 0.0,
        timing_h: 0.0,
        intensity: 1.0,
        warm_bias_k: 0.0,
    };

    /// A pure track offset, every other axis neutral.
    ///
    /// ```
    /// use trackswing::scenario::Scenario;
    /// assert!(Scenario::offset(0.0, 0.0).is_baseline());
    /// assert_eq!(Scenario::offset(20.0, 0.0).intensity, 1.0);
    /// ```
    pub fn offset(cross_km: f64, along_km: f64) -> Self {
        Scenario {
            cross_km,
            along_km,
            ..Self::BASELINE
        }
    }

    /// True for the model as issued: no displacement and every other axis neutral.
    pub fn is_baseline(&self) -> bool {
        !self.is_displaced()
            && self.timing_h == 0.0
            && self.intensity == 1.0
            && self.warm_bias_k == 0.0
    }

    /// True when the storm is moved in space (the fields are resampled and the track is needed).
    pub fn is_displaced(&self) -> bool {
        self.cross_km != 0.0 || self.along_km != 0.0
    }

    /// A label for band descriptions and tables, e.g. `cross +20 km, along -50 km`, with the
    /// other axes appended when they are not neutral (`, timing +3 h, intensity ×1.2, warm bias
    /// +1 K`).
    pub fn label(&self) -> String {
        let mut s = format!(
            "cross {} km, along {} km",
            signed(self.cross_km),
            signed(self.along_km)
        );
        if self.timing_h != 0.0 {
            s += &format!(", timing {} h", signed(self.timing_h));
        }
        if self.intensity != 1.0 {
            s += &format!(", intensity ×{}", trim(self.intensity));
        }
        if self.warm_bias_k != 0.0 {
            s += &format!(", warm bias {} K", signed(self.warm_bias_k));
        }
        s
    }

    /// A compact tag for column names: `c+20_a-50`, with `_t+3`, `_i1.2`, `_w+1` appended for
    /// the axes that are not neutral (an axis missing from a tag is at its neutral value).
    ///
    /// ```
    /// use trackswing::scenario::Scenario;
    /// assert_eq!(Scenario::offset(20.0, -50.0).tag(), "c+20_a-50");
    /// let s = Scenario { timing_h: -3.0, intensity: 1.2, warm_bias_k: 1.0, ..Scenario::BASELINE };
    /// assert_eq!(s.tag(), "c0_a0_t-3_i1.2_w+1");
    /// ```
    pub fn tag(&self) -> String {
        let mut s = format!("c{}_a{}", signed(self.cross_km), signed(self.along_km));
        if self.timing_h != 0.0 {
            s += &format!("_t{}", signed(self.timing_h));
        }
        if self.intensity != 1.0 {
            s += &format!("_i{}", trim(self.intensity));
        }
        if self.warm_bias_k != 0.0 {
            s += &format!("_w{}", signed(self.warm_bias_k));
        }
        s
    }

    /// Plain words, e.g. `40 km left, 50 km behind, 3 h later, 20 % wetter, 1 K warmer aloft`
    /// or `as modelled`.
    pub fn in_words(&self) -> String {
        self.in_words_in(crate::units::Units::Metric)
    }

    /// [`Scenario::in_words`] with distances as `units` writes them (km, and in US units the
    /// miles too: `40 km (25 mi) left`).
    pub fn in_words_in(&self, units: crate::units::Units) -> String {
        let mut parts = Vec::new();
        if self.cross_km != 0.0 {
            let side = if self.cross_km > 0.0 { "left" } else { "right" };
            parts.push(format!("{} {side}", units.distance(self.cross_km.abs())));
        }
        if self.along_km != 0.0 {
            let side = if self.along_km > 0.0 {
                "ahead"
            } else {
                "behind"
            };
            parts.push(format!("{} {side}", units.distance(self.along_km.abs())));
        }
        if self.timing_h != 0.0 {
            let when = if self.timing_h > 0.0 {
                "later"
            } else {
                "earlier"
            };
            parts.push(format!("{} h {when}", trim(self.timing_h.abs())));
        }
        if self.intensity != 1.0 {
            let pct = (self.intensity - 1.0) * 100.0;
            let how = if pct > 0.0 { "wetter" } else { "drier" };
            parts.push(format!("{} % {how}", trim(pct.abs())));
        }
        if self.warm_bias_k != 0.0 {
            let how = if self.warm_bias_k > 0.0 {
                "warmer"
            } else {
                "colder"
            };
            parts.push(format!("{} K {how} aloft", trim(self.warm_bias_k.abs())));
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
    #[error("'{0}' is not a number")]
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
    /// The same value twice.
    #[error("{0} is listed twice")]
    Duplicate(f64),
}

/// Most values one axis may list: beyond this a run is a sharding job, not a typo.
pub const MAX_OFFSETS_PER_AXIS: usize = 2001;

/// Parses a value list: a single value (`0`), a comma list (`-50,0,50`) or an inclusive range
/// `start:end:step` (`-100:100:10`), or a mix (`-100:-60:20,0,60:100:20`). The same syntax
/// serves every axis (km, hours, factors, kelvin).
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

/// Rounds to 1e-6 of the unit (a millimetre for km) so that `-0.1 + 3·0.1` prints as `0.2`, not
/// `0.20000000000000004`.
fn round_km(v: f64) -> f64 {
    let r = (v * 1e6).round() / 1e6;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

/// The product of the two track-offset lists, cross-track varying fastest, other axes neutral.
/// The baseline (0, 0) is always included: it is added first when the lists do not contain it.
pub fn scenario_set(cross: &[f64], along: &[f64]) -> Vec<Scenario> {
    scenario_product(&Axes {
        cross_km: cross.to_vec(),
        along_km: along.to_vec(),
        ..Axes::default()
    })
}

/// The values of every scenario axis a run explores.
#[derive(Clone, Debug, PartialEq)]
pub struct Axes {
    /// Cross-track offsets, km.
    pub cross_km: Vec<f64>,
    /// Along-track offsets, km.
    pub along_km: Vec<f64>,
    /// Time offsets, hours (positive: later).
    pub timing_h: Vec<f64>,
    /// Precipitation factors.
    pub intensity: Vec<f64>,
    /// Warm-layer biases, K.
    pub warm_bias_k: Vec<f64>,
}

impl Default for Axes {
    /// Every axis at its neutral value only.
    fn default() -> Self {
        Axes {
            cross_km: vec![0.0],
            along_km: vec![0.0],
            timing_h: vec![0.0],
            intensity: vec![1.0],
            warm_bias_k: vec![0.0],
        }
    }
}

impl Axes {
    /// Number of scenarios of the product (the baseline not counted when absent).
    pub fn product_len(&self) -> usize {
        self.cross_km.len()
            * self.along_km.len()
            * self.timing_h.len()
            * self.intensity.len()
            * self.warm_bias_k.len()
    }
}

/// The product of every axis: cross-track varies fastest, then along-track, timing, intensity
/// and warm bias. The baseline is always included: it is added first when the lists do not
/// contain it.
///
/// ```
/// use trackswing::scenario::{scenario_product, Axes};
/// let s = scenario_product(&Axes { cross_km: vec![-10.0, 10.0], timing_h: vec![0.0, 3.0],
///                                  ..Axes::default() });
/// assert_eq!(s.len(), 5);
/// assert!(s[0].is_baseline());
/// assert_eq!((s[4].cross_km, s[4].timing_h), (10.0, 3.0));
/// ```
pub fn scenario_product(axes: &Axes) -> Vec<Scenario> {
    let mut out = Vec::with_capacity(axes.product_len() + 1);
    for &warm_bias_k in &axes.warm_bias_k {
        for &intensity in &axes.intensity {
            for &timing_h in &axes.timing_h {
                for &along_km in &axes.along_km {
                    for &cross_km in &axes.cross_km {
                        out.push(Scenario {
                            cross_km,
                            along_km,
                            timing_h,
                            intensity,
                            warm_bias_k,
                        });
                    }
                }
            }
        }
    }
    if !out.iter().any(Scenario::is_baseline) {
        out.insert(0, Scenario::BASELINE);
    }
    out
}

/// Where a time falls among the model's steps: between `index` and `index + 1`, with weight
/// `next` (0–1) on the later one. `next` is exactly 0 when the time is a step's valid time, so
/// sampling there reproduces the step bit for bit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimeSample {
    /// The step at or before the time (an index into the slice given to [`bracket`]).
    pub index: usize,
    /// Weight of step `index + 1`, 0–1 (0 when the time is step `index`'s).
    pub next: f64,
}

/// The steps (valid times in increasing order) that bracket `t`, for linear interpolation in
/// time; `None` when `t` lies before the first or after the last.
///
/// ```
/// use chrono::{DateTime, Duration, Utc};
/// use trackswing::scenario::{bracket, TimeSample};
/// let t0: DateTime<Utc> = "2026-01-14T00:00:00Z".parse().unwrap();
/// let times = [t0, t0 + Duration::hours(3), t0 + Duration::hours(6)];
/// assert_eq!(bracket(&times, t0 + Duration::hours(4)).unwrap().index, 1);
/// assert!((bracket(&times, t0 + Duration::hours(4)).unwrap().next - 1.0 / 3.0).abs() < 1e-12);
/// assert_eq!(bracket(&times, times[2]), Some(TimeSample { index: 2, next: 0.0 }));
/// assert_eq!(bracket(&times, t0 - Duration::hours(1)), None);
/// ```
pub fn bracket(times: &[DateTime<Utc>], t: DateTime<Utc>) -> Option<TimeSample> {
    let after = times.partition_point(|x| *x <= t);
    if after == 0 {
        return None;
    }
    let index = after - 1;
    if times[index] == t {
        return Some(TimeSample { index, next: 0.0 });
    }
    let next_time = times.get(index + 1)?;
    let span = (*next_time - times[index]).num_milliseconds() as f64;
    let into = (t - times[index]).num_milliseconds() as f64;
    Some(TimeSample {
        index,
        next: into / span,
    })
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
        assert_eq!(s[1], Scenario::offset(0.0, -50.0));
    }

    #[test]
    fn product_of_every_axis() {
        let axes = Axes {
            cross_km: vec![-10.0, 0.0, 10.0],
            along_km: vec![0.0],
            timing_h: vec![-3.0, 0.0],
            intensity: vec![0.8, 1.0],
            warm_bias_k: vec![0.0, 1.0],
        };
        let s = scenario_product(&axes);
        assert_eq!(s.len(), 24);
        assert_eq!(s.iter().filter(|x| x.is_baseline()).count(), 1);
        // Cross-track fastest, warm bias slowest.
        assert_eq!(s[1].timing_h, -3.0);
        assert_eq!(s[3].timing_h, 0.0);
        assert_eq!(s[23].warm_bias_k, 1.0);
        assert!(!s[12].is_baseline() && s[12].warm_bias_k == 1.0);
        let no_baseline = Axes {
            intensity: vec![1.2],
            ..Axes::default()
        };
        let s = scenario_product(&no_baseline);
        assert_eq!(s.len(), 2);
        assert!(s[0].is_baseline() && !s[1].is_baseline());
        assert!(!s[1].is_displaced());
    }

    #[test]
    fn words_and_labels() {
        let s = Scenario::offset(40.0, -50.0);
        assert_eq!(s.in_words(), "40 km left, 50 km behind");
        assert_eq!(s.label(), "cross +40 km, along -50 km");
        assert_eq!(Scenario::BASELINE.in_words(), "as modelled");
        assert_eq!(
            s.in_words_in(crate::units::Units::Us),
            "40 km (25 mi) left, 50 km (31 mi) behind"
        );
        let t = Scenario {
            timing_h: 3.0,
            intensity: 0.8,
            warm_bias_k: -1.5,
            ..s
        };
        assert_eq!(
            t.in_words(),
            "40 km left, 50 km behind, 3 h later, 20 % drier, 1.5 K colder aloft"
        );
        assert_eq!(
            t.label(),
            "cross +40 km, along -50 km, timing +3 h, intensity ×0.8, warm bias -1.5 K"
        );
        assert_eq!(t.tag(), "c+40_a-50_t+3_i0.8_w-1.5");
    }

    #[test]
    fn brackets_with_uneven_steps() {
        let t0: DateTime<Utc> = "2026-01-14T00:00:00Z".parse().unwrap();
        let h = chrono::Duration::hours;
        let times = [t0, t0 + h(1), t0 + h(4)];
        assert_eq!(
            bracket(&times, t0),
            Some(TimeSample {
                index: 0,
                next: 0.0
            })
        );
        let b = bracket(&times, t0 + h(2)).unwrap();
        assert_eq!(b.index, 1);
        assert!((b.next - 1.0 / 3.0).abs() < 1e-12);
        assert_eq!(bracket(&times, t0 + h(5)), None);
        assert_eq!(bracket(&[], t0), None);
    }
}
