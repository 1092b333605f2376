//! Whether a run fits: in memory (the estimate of what it holds at its peak against what the
//! machine has available) and in reasonable time (the number of scenarios a request makes, the
//! time and memory it would take, and a coarser step that would do).

use crate::scenario::Axes;

/// Bytes a run holds at its peak: the per-scenario totals (five f32 sums, the carried dry-air
/// water and the onset step per cell) plus one output band per scenario while the stack is
/// written. The held steps' fields and their sub-cloud memos (three f32 per level below
/// 500 hPa, step and warm bias) add a few bands' worth per level each, small beside the totals
/// once there are more than a handful of scenarios.
pub fn memory_estimate(cells: usize, scenarios: usize) -> u64 {
    (cells as u64) * (scenarios as u64) * (7 + 1) * 4
}

/// Whether the totals of `scenarios` scenarios on `cells` cells fit in nine tenths of the
/// memory available; otherwise the estimate and what is available, bytes. Fits where the
/// available memory is unknown.
pub fn fits_in_memory(cells: usize, scenarios: usize) -> Result<(), (u64, u64)> {
    let need = memory_estimate(cells, scenarios);
    match available_memory() {
        Some(avail) if need > avail / 10 * 9 => Err((need, avail)),
        _ => Ok(()),
    }
}

/// Memory available to new allocations, bytes (Linux `MemAvailable`); `None` where unknown.
fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// Above this many scenarios a run warns, with its estimated time and memory and a coarser step.
/// A few hundred offsets already resolve the offset plane at a few km; more is usually a typo in
/// a range (`-900:900:1`).
pub const SCENARIOS_WARN: usize = 400;

/// Above this many scenarios a run is refused unless `--force` is given: at this size the
/// per-scenario stack alone is thousands of bands and the CSV tables thousands of columns.
pub const SCENARIOS_REFUSE: usize = 2000;

/// Cell·step·scenario evaluations per second on this project's 2-core machine with two threads,
/// measured end to end on the B1 benchmark (README "Performance": 2.0e7). Used only to tell the
/// user the order of magnitude a request costs; a storm with more wet cells or another machine
/// can take twice as long or half.
pub const EVALUATIONS_PER_S_TWO_THREADS: f64 = 2.0e7;

/// What a request for `scenarios` scenarios would cost, and a step that would cost less.
#[derive(Clone, Debug, PartialEq)]
pub struct Budget {
    /// Scenarios requested.
    pub scenarios: usize,
    /// Estimated wall time, s, on `threads` threads.
    pub seconds: f64,
    /// Estimated peak memory of the totals, bytes.
    pub bytes: u64,
    /// Coarser track-axis ranges that bring the count to [`SCENARIOS_WARN`] or fewer, as flags
    /// (`--cross=-900:900:15`), and the count they give; `None` when the track axes are not
    /// evenly spaced ranges or cannot get there alone.
    pub coarser: Option<(String, usize)>,
}

/// An evenly spaced axis: (first, last, step), for axes of more than three values.
fn even_range(values: &[f64]) -> Option<(f64, f64, f64)> {
    if values.len() <= 3 {
        return None;
    }
    let step = values[1] - values[0];
    let even = step > 0.0
        && values
            .windows(2)
            .all(|w| ((w[1] - w[0]) - step).abs() <= 1e-9 * step.max(1.0));
    even.then(|| (values[0], values[values.len() - 1], step))
}

/// The values `first:last:step` gives (as [`crate::scenario::parse_offsets`] counts them) and
/// whether `last` is among them.
fn range_count(first: f64, last: f64, step: f64) -> (usize, bool) {
    let q = (last - first) / step;
    let n = (q + 1e-9).floor();
    (n as usize + 1, (q - n).abs() < 1e-9)
}

/// The cost of running `axes` on `cells` cells and `steps` steps with `threads` threads.
///
/// ```
/// use trackswing::engine::scenario_budget;
/// use trackswing::scenario::Axes;
/// // --cross -900:900:1 --along 0: 1801 scenarios.
/// let axes = Axes { cross_km: (-900..=900).map(f64::from).collect(), ..Axes::default() };
/// let b = scenario_budget(&axes, 10_000, 25, 2);
/// assert_eq!(b.scenarios, 1801);
/// // -900:900:5 gives 361 scenarios, both ends kept.
/// assert_eq!(b.coarser, Some(("--cross=-900:900:5".to_string(), 361)));
/// ```
pub fn scenario_budget(axes: &Axes, cells: usize, steps: usize, threads: usize) -> Budget {
    let others = axes.timing_h.len() * axes.intensity.len() * axes.warm_bias_k.len();
    let (nc, na) = (axes.cross_km.len(), axes.along_km.len());
    let scenarios = nc * na * others;
    let evaluations = cells as f64 * steps as f64 * scenarios as f64;
    let rate = EVALUATIONS_PER_S_TWO_THREADS * threads.clamp(1, 2) as f64 / 2.0;
    let ranges = [
        ("--cross", even_range(&axes.cross_km), nc),
        ("--along", even_range(&axes.along_km), na),
    ];
    // The smallest whole factor on the step of every evenly spaced track axis that brings the
    // count under the warning, preferring factors that keep each range's last value (so a
    // symmetric range stays symmetric).
    let try_factor = |f: usize, need_ends: bool| -> Option<(String, usize)> {
        let mut flags = Vec::new();
        let mut count = others;
        for (flag, range, n) in &ranges {
            match range {
                Some((a, b, st)) => {
                    let step = st * f as f64;
                    let (k, ends) = range_count(*a, *b, step);
                    if need_ends && !ends {
                        return None;
                    }
                    count *= k;
                    flags.push(format!("{flag}={a}:{b}:{step}"));
                }
                None => count *= n,
            }
        }
        (!flags.is_empty() && count <= SCENARIOS_WARN).then(|| (flags.join(" "), count))
    };
    let widest = nc.max(na);
    let coarser = (2..=widest)
        .find_map(|f| try_factor(f, true))
        .or_else(|| (2..=widest).find_map(|f| try_factor(f, false)));
    Budget {
        scenarios,
        seconds: evaluations / rate,
        bytes: memory_estimate(cells, scenarios),
        coarser,
    }
}

impl Budget {
    /// The estimate in words: "about 25 min and 3.1 GiB (...)".
    pub fn cost_words(&self) -> String {
        let time = if self.seconds < 90.0 {
            format!("{:.0} s", self.seconds.max(1.0))
        } else if self.seconds < 5400.0 {
            format!("{:.0} min", self.seconds / 60.0)
        } else {
            format!("{:.1} h", self.seconds / 3600.0)
        };
        let gib = self.bytes as f64 / (1u64 << 30) as f64;
        let memory = if gib >= 1.0 {
            format!("{gib:.1} GiB")
        } else {
            format!("{} MiB", (self.bytes >> 20).max(1))
        };
        format!("about {time} and {memory} (at {EVALUATIONS_PER_S_TWO_THREADS:.0e} cell·step·scenario evaluations per second on two threads, measured on a 400×300, 48-step case; a wetter storm or another machine can differ by 2×)")
    }

    /// What would make it smaller, in words.
    pub fn advice(&self) -> String {
        match &self.coarser {
            Some((flags, n)) => format!("{flags} would give {n} scenarios"),
            None => "fewer values on the axes would reduce it".into(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_are_counted_as_the_parser_counts_them() {
        assert_eq!(range_count(-900.0, 900.0, 15.0), (121, true));
        // 1800 / 14 is not whole: -900, -886, …, 892 and the last value is lost.
        assert_eq!(range_count(-900.0, 900.0, 14.0), (129, false));
        assert_eq!(even_range(&[-60.0, 0.0, 60.0]), None);
        assert_eq!(
            even_range(&[-20.0, -10.0, 0.0, 10.0, 20.0]),
            Some((-20.0, 20.0, 10.0))
        );
        assert_eq!(even_range(&[-20.0, -10.0, 0.0, 5.0, 20.0]), None);
    }

    #[test]
    fn the_issue_request_is_named_with_its_cost() {
        // -900:900:1 across, -60:60:60 along: 5403 scenarios, as a user once asked for.
        let axes = Axes {
            cross_km: (-900..=900).map(f64::from).collect(),
            along_km: vec![-60.0, 0.0, 60.0],
            ..Axes::default()
        };
        let b = scenario_budget(&axes, 128 * 104, 25, 2);
        assert_eq!(b.scenarios, 5403);
        // 13312 cells × 25 steps × 5403 scenarios / 2e7 per s = 89.9 s.
        assert!((b.seconds - 13312.0 * 25.0 * 5403.0 / 2.0e7).abs() < 1e-6);
        assert_eq!(b.bytes, 13312 * 5403 * 32);
        // Along keeps its 3 values; across, 1800 km in steps of 15 km (the smallest factor that
        // divides the range and gives 3 × n ≤ 400; 14 does not divide it): 121 × 3 = 363.
        assert_eq!(b.coarser, Some(("--cross=-900:900:15".to_string(), 363)));
        assert!(
            b.cost_words().starts_with("about 90 s and 2.1 GiB"),
            "{}",
            b.cost_words()
        );
        // One thread takes twice as long.
        assert!((scenario_budget(&axes, 13312, 25, 1).seconds - 2.0 * b.seconds).abs() < 1e-6);
    }

    #[test]
    fn lists_that_are_not_ranges_get_general_advice() {
        let axes = Axes {
            cross_km: (0..500).map(|i| f64::from(i * i)).collect(),
            ..Axes::default()
        };
        let b = scenario_budget(&axes, 100, 1, 2);
        assert_eq!(b.coarser, None);
        assert_eq!(b.advice(), "fewer values on the axes would reduce it");
    }
}
