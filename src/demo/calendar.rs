//! Proleptic Gregorian date arithmetic for valid times, so the demo needs no date crate.

/// Days since 1970-01-01 of a proleptic Gregorian date. Out-of-range months and days roll over
/// (day 32 of January is 1 February), so the function never fails.
///
/// The era arithmetic is H. Hinnant's `days_from_civil` ("chrono-Compatible Low-Level Date
/// Algorithms", public-domain note), which counts from 1 March so the leap day is last.
pub(crate) fn days_from_civil(year: i32, month: u32, day: u32) -> i64 {
    let months = i64::from(year) * 12 + i64::from(month.max(1)) - 1;
    let y = months.div_euclid(12) - i64::from(months.rem_euclid(12) < 2);
    let m = months.rem_euclid(12) + 1;
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468 + i64::from(day.max(1)) - 1
}

/// The proleptic Gregorian date (year, month, day) of `days` since 1970-01-01 (Hinnant's
/// `civil_from_days`, the inverse of [`days_from_civil`]).
pub(crate) fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    (year, month as u32, day as u32)
}

/// ISO 8601 / RFC 3339 UTC timestamp `YYYY-MM-DDTHH:00:00Z` of `hours` after the given start.
pub(crate) fn iso_after(start: (i32, u32, u32, u32), hours: u64) -> String {
    let (year, month, day, hour) = start;
    let total = days_from_civil(year, month, day) * 24 + i64::from(hour) + hours as i64;
    let (y, m, d) = civil_from_days(total.div_euclid(24));
    format!("{y:04}-{m:02}-{d:02}T{:02}:00:00Z", total.rem_euclid(24))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unix_epoch_offsets() {
        // POSIX time: 2000-01-01T00:00:00Z is 946684800 s (`date -u -d 2000-01-01 +%s`).
        assert_eq!(days_from_civil(2000, 1, 1), 946_684_800 / 86_400);
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(civil_from_days(946_684_800 / 86_400), (2000, 1, 1));
    }

    #[test]
    fn gregorian_leap_rules() {
        // Gregorian calendar (ISO 8601): leap every 4 years, not centuries, but every 400.
        assert_eq!(iso_after((2024, 2, 28, 21), 6), "2024-02-29T03:00:00Z");
        assert_eq!(iso_after((2100, 2, 28, 12), 24), "2100-03-01T12:00:00Z");
        assert_eq!(iso_after((2000, 2, 28, 12), 24), "2000-02-29T12:00:00Z");
        assert_eq!(iso_after((2025, 12, 31, 21), 6), "2026-01-01T03:00:00Z");
        assert_eq!(iso_after((2026, 1, 14, 0), 6), "2026-01-14T06:00:00Z");
    }

    #[test]
    fn round_trip_over_four_centuries() {
        for days in (-200_000..200_000).step_by(97) {
            let (y, m, d) = civil_from_days(days);
            assert_eq!(days_from_civil(y as i32, m, d), days);
        }
    }
}
