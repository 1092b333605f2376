//! Whether a run fits in memory: the estimate of what it holds at its peak and what the machine
//! has available.

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
