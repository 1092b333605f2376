//! One step's precipitation from the accumulations a model file holds, for every reader.
//!
//! Models write precipitation as totals over windows: per output interval (3 h buckets), from
//! the run's start (running totals), or resetting every few hours (6 h buckets written hourly).
//! The engine needs the amount that fell between two consecutive valid times. This solver finds
//! it from whatever windows the files hold, the same way for GRIB2 and for the rasters GDAL reads.

use chrono::{DateTime, Utc};

/// One accumulation a file holds: its window (start, end) and the reader's handle to its values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Accumulation<I> {
    pub start: DateTime<Utc>,
    pub end: DateTime<Utc>,
    pub id: I,
}

/// The handles whose values add up (`plus`) and those to subtract (`minus`) to give the
/// precipitation that fell between `prev` and `end`; `None` when the windows do not give it.
///
/// First a chain of consecutive windows from `prev` to `end`, each hop the longest window that
/// starts where the last ended and stays within `end` (one window where a file holds exactly that
/// interval); else the difference of two windows from a common start that end at `end` and at
/// `prev` (running totals, or buckets that reset less often than the output interval).
///
/// ```
/// use chrono::{TimeZone, Utc};
/// use trackswing::read::accumulation::{step_amount, Accumulation};
/// let h = |h: u32| Utc.with_ymd_and_hms(2026, 1, 10, h, 0, 0).unwrap();
/// // Running totals from 00 UTC: the 06–09 UTC amount is the 0–9 h total minus the 0–6 h one.
/// let running = [Accumulation { start: h(0), end: h(6), id: 'a' }, Accumulation { start: h(0), end: h(9), id: 'b' }];
/// assert_eq!(step_amount(&running, h(6), h(9)), Some((vec!['b'], vec!['a'])));
/// ```
pub fn step_amount<I: Copy>(
    windows: &[Accumulation<I>],
    prev: DateTime<Utc>,
    end: DateTime<Utc>,
) -> Option<(Vec<I>, Vec<I>)> {
    let mut chain = Vec::new();
    let mut cur = prev;
    while cur < end {
        match windows
            .iter()
            .filter(|w| w.start == cur && w.end <= end && w.start < w.end)
            .max_by_key(|w| w.end)
        {
            Some(next) => {
                chain.push(next.id);
                cur = next.end;
            }
            None => break,
        }
    }
    if cur == end {
        return Some((chain, vec![]));
    }
    windows
        .iter()
        .filter(|a| a.end == end && a.start < prev)
        .find_map(|a| {
            windows
                .iter()
                .find(|b| b.end == prev && b.start == a.start)
                .map(|b| (vec![a.id], vec![b.id]))
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::TimeZone;

    fn h(h: u32) -> DateTime<Utc> {
        Utc.with_ymd_and_hms(2026, 1, 10, h, 0, 0).unwrap()
    }

    fn w(start: u32, end: u32, id: usize) -> Accumulation<usize> {
        Accumulation {
            start: h(start),
            end: h(end),
            id,
        }
    }

    #[test]
    fn buckets_per_interval_are_taken_as_they_are() {
        let buckets = [w(0, 3, 0), w(3, 6, 1), w(6, 9, 2)];
        assert_eq!(step_amount(&buckets, h(3), h(6)), Some((vec![1], vec![])));
    }

    #[test]
    fn shorter_buckets_chain_over_a_longer_step() {
        // Hourly buckets under a three-hourly output step.
        let hourly = [w(3, 4, 0), w(4, 5, 1), w(5, 6, 2), w(3, 6, 9)];
        // The longest hop first: the 3 h bucket where the file has it.
        assert_eq!(step_amount(&hourly, h(3), h(6)), Some((vec![9], vec![])));
        assert_eq!(
            step_amount(&hourly[..3], h(3), h(6)),
            Some((vec![0, 1, 2], vec![]))
        );
    }

    #[test]
    fn buckets_resetting_every_six_hours_give_a_difference() {
        // 0–6 h bucket written at 3 h and 6 h: 3–6 h is the 0–6 total minus the 0–3 one.
        let resetting = [w(0, 3, 0), w(0, 6, 1), w(6, 9, 2), w(6, 12, 3)];
        assert_eq!(
            step_amount(&resetting, h(3), h(6)),
            Some((vec![1], vec![0]))
        );
        assert_eq!(
            step_amount(&resetting, h(9), h(12)),
            Some((vec![3], vec![2]))
        );
    }

    #[test]
    fn a_gap_gives_none() {
        let gap = [w(0, 3, 0), w(6, 9, 1)];
        assert_eq!(step_amount(&gap, h(3), h(6)), None);
        assert_eq!(step_amount(&gap, h(3), h(9)), None);
        // A chain that stops short still lets a difference answer.
        let running_and_one_bucket = [w(3, 4, 0), w(0, 3, 1), w(0, 6, 2)];
        assert_eq!(
            step_amount(&running_and_one_bucket, h(3), h(6)),
            Some((vec![2], vec![1]))
        );
    }
}
