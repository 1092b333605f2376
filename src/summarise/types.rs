//! The dominant precipitation type of a cell in each scenario, and where it differs between
//! scenarios (the flip zone's cells).
//!
//! In a scenario where less than measurable liquid fell at a cell, that cell has no type in
//! that scenario; a cell missing in any scenario has no pattern.

use crate::accumulate::Totals;
use crate::accumulate::MEASURABLE_LIQUID;
use rayon::prelude::*;

/// Precipitation types in the order ties are broken (the first largest wins).
pub const TYPES: [&str; 4] = ["snow", "ice_pellets", "freezing_rain", "rain"];

/// Dominant type of one cell of one scenario: `Some(index into TYPES)`, `None` when less than
/// measurable fell; `Err(())` when the cell is missing.
fn dominant(t: &Totals, i: usize) -> Result<Option<usize>, ()> {
    let liquid = t.liquid[i];
    if liquid.is_nan() {
        return Err(());
    }
    if liquid < MEASURABLE_LIQUID {
        return Ok(None);
    }
    let (snow, ip, fzra) = (t.snow_liquid[i], t.ice_pellets[i], t.freezing_rain[i]);
    let parts = [snow, ip, fzra, (liquid - snow - ip - fzra).max(0.0)];
    let mut best = 0;
    for k in 1..4 {
        if parts[k] > parts[best] {
            best = k;
        }
    }
    Ok(Some(best))
}

/// Per-cell flip pattern: (baseline type, 0..=3 or 4 for none; bit set of types occurring) and
/// the count of scenarios of each type, for cells where at least two types occur.
pub type Pattern = (usize, u8);

/// A cell's flip pattern and the number of scenarios in which each type dominates.
pub type TypeFlip = (Pattern, [u16; 4]);

/// The flip pattern of every cell of `n` over the scenarios `totals` (`None` where fewer than
/// two types occur or a scenario is missing); `baseline` indexes the model as issued.
pub fn flip_cells(n: usize, totals: &[&Totals], baseline: usize) -> Vec<Option<TypeFlip>> {
    (0..n)
        .into_par_iter()
        .map(|i| {
            let mut counts = [0u16; 4];
            for t in totals {
                match dominant(t, i) {
                    Err(()) => return None,
                    Ok(Some(k)) => counts[k] += 1,
                    Ok(None) => {}
                }
            }
            let set = (0..4).fold(0u8, |s, k| if counts[k] > 0 { s | 1 << k } else { s });
            if set.count_ones() < 2 {
                return None;
            }
            let base = dominant(totals[baseline], i).ok().flatten().unwrap_or(4);
            Some(((base, set), counts))
        })
        .collect()
}
