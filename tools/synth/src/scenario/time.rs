//! Posting times: uniform over nine months of 2026, or within the burst's month.

use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// First second of the scenario, 2026-01-01T00:00:00Z.
pub const TIME_START_UNIX_S: i64 = 1_767_225_600;
/// Last second of the scenario, 2026-09-30T23:59:59Z.
pub const TIME_END_UNIX_S: i64 = 1_790_812_799;

pub(super) const SECONDS_PER_DAY: i64 = 86_400;
/// Days from 2026-01-01 to the first day of each month, January to October.
pub(super) const MONTH_START_DAY: [i64; 10] = [0, 31, 59, 90, 120, 151, 181, 212, 243, 273];

/// A posting time in UTC seconds: uniform within `month` (1..=9) of 2026 when given, else over
/// the whole scenario.
pub fn draw_time(rng: &mut ChaCha8Rng, month: Option<u32>) -> i64 {
    match month {
        Some(month) => {
            let month = month as usize;
            let start = TIME_START_UNIX_S + MONTH_START_DAY[month - 1] * SECONDS_PER_DAY;
            let end = TIME_START_UNIX_S + MONTH_START_DAY[month] * SECONDS_PER_DAY - 1;
            rng.random_range(start..=end)
        }
        None => rng.random_range(TIME_START_UNIX_S..=TIME_END_UNIX_S),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn month_starts_are_the_calendar_of_2026() {
        // 2026 is not a leap year: January 31, February 28, March 31, April 30, May 31,
        // June 30, July 31, August 31, September 30 days.
        let lengths = [31, 28, 31, 30, 31, 30, 31, 31, 30];
        for (m, days) in lengths.iter().enumerate() {
            assert_eq!(MONTH_START_DAY[m + 1] - MONTH_START_DAY[m], *days);
        }
        // The last second is 2026-09-30T23:59:59Z, one second before October.
        assert_eq!(
            TIME_END_UNIX_S,
            TIME_START_UNIX_S + MONTH_START_DAY[9] * SECONDS_PER_DAY - 1
        );
        // 2026-01-01T00:00:00Z: 56 years of days since 1970, 14 of them leap years.
        assert_eq!(TIME_START_UNIX_S, (56 * 365 + 14) * SECONDS_PER_DAY);
    }
}
