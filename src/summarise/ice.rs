//! Ice accretion from freezing rain, per cell, for the decision products.
//!
//! The accumulate stage gives the whole field ([`Totals::ice_accretion`]); the weighted
//! distributions read one cell of every scenario at a time, so they use this per-cell form of
//! the same rule, which keeps the stack of scenarios from being copied.

use crate::accumulate::Totals;
use crate::diagnose::slr::FREEZING_RAIN_ACCRETION_RATIO;

/// Ice accretion at cell `i`, mm of ice: the freezing-rain liquid times
/// [`FREEZING_RAIN_ACCRETION_RATIO`] (Sanders & Barjenbruch 2016), as
/// [`Totals::ice_accretion`] computes it for the whole field (NaN where missing).
///
/// ```
/// let mut t = trackswing::accumulate::Totals::new(1);
/// t.freezing_rain[0] = 10.0;
/// let a = trackswing::summarise::ice::ice_accretion(&t, 0);
/// assert!((a - 7.2).abs() < 1e-5);
/// assert_eq!(a, t.ice_accretion()[0]);
/// ```
pub fn ice_accretion(t: &Totals, i: usize) -> f32 {
    (t.freezing_rain[i] as f64 * FREEZING_RAIN_ACCRETION_RATIO) as f32
}
