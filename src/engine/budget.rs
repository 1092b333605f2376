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
    /// The smallest whole factor by which coarsening the step of every track axis with more
    /// than one value brings the count to [`SCENARIOS_WARN`] or fewer, and the count it gives;
    /// `None` when the track axes cannot get there (other axes alone make too many).
    pub coarser: Option<(usize, usize)>,
}

/// The values left when every `factor`-th value of a sorted axis is kept, its first and last
/// always among them, and never fewer than three (both sides and the middle) where there were.
fn thinned(n: usize, factor: usize) -> usize {
    if n <= 1 {
        n
    } else {
        ((n - 1).div_ceil(factor) + 1).max(n.min(3))
    }
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
/// // A step 5× coarser (-900:900:5) gives 361 scenarios.
/// assert_eq!(b.coarser, Some((5, 361)));
/// ```
pub fn scenario_budget(axes: &Axes, cells: usize, steps: usize, threads: usize) -> Budget {
    let others = axes.timing_h.len() * axes.intensity.len() * axes.warm_bias_k.len();
    let (nc, na) = (axes.cross_km.len(), axes.along_km.len());
    let scenarios = nc * na * others;
    let evaluations = cells as f64 * steps as f64 * scenarios as f64;
    let rate = EVALUATIONS_PER_S_TWO_THREADS * threads.clamp(1, 2) as f64 / 2.0;
    let coarser = (1..=nc.max(na).max(1)).find_map(|f| {
        let n = thinned(nc, f) * thinned(na, f) * others;
        (n <= SCENARIOS_WARN).then_some((f, n))
    });
    Budget {
        scenarios,
        seconds: evaluations / rate,
        bytes: memory_estimate(cells, scenarios),
        coarser,
    }
}

impl Budget {
    /// The estimate in words: "about 25 min and 3.1 GiB".
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
            format!("{:.0} MiB", (self.bytes >> 20).max(1))
        };
        format!("about {time} and {memory} (at {:.0e} cell·step·scenario evaluations per second on two threads, measured on a 400×300, 48-step case; a wetter storm or another machine can differ by 2×)", EVALUATIONS_PER_S_TWO_THREADS)
    }

    /// What would make it smaller, in words.
    pub fn advice(&self) -> String {
        match self.coarser {
            Some((f, n)) if f > 1 => format!(
                "a step {f}× coarser on the track axes (e.g. `--cross LO:HI:STEP` with STEP {f}× larger) gives {n} scenarios"
            ),
            _ => "fewer values on the timing, intensity or warm-bias axes would reduce it".into(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thinning_keeps_both_ends() {
        // -900:900:1 has 1801 values; every 5th from -900 reaches +900: 361 values.
        assert_eq!(thinned(1801, 5), 361);
        assert_eq!(thinned(1801, 1), 1801);
        assert_eq!(thinned(1, 7), 1);
        assert_eq!(thinned(5, 2), 3);
        assert_eq!(thinned(4, 2), 3);
        // -60:60:60 keeps its three values.
        assert_eq!(thinned(3, 10), 3);
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
        // Along keeps its 3 values: 3 × thinned(1801, f) ≤ 400 first at f = 14
        // (1800 / 14 → 129 steps, 130 values, 390 scenarios; f = 13 gives 140 × 3 = 420).
        assert_eq!(b.coarser, Some((14, 390)));
        assert!(b.cost_words().starts_with("about 90 s and 2.1 GiB"), "{}", b.cost_words());
        // One thread takes twice as long.
        assert!((scenario_budget(&axes, 13312, 25, 1).seconds - 2.0 * b.seconds).abs() < 1e-6);
    }
}
