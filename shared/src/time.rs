//! Date-time parsing: RFC 3339 and the ISO 8601 date and date-time forms records carry.

use chrono::{DateTime, Datelike, NaiveDate, NaiveDateTime, Utc};

const DAY_SECONDS: i64 = 86_400;

/// A calendar period in UTC: the unit of time slices, space-time cylinders and trends.
///
/// Every period has an index on one integer line, so consecutive periods have consecutive
/// indices (a run of periods is a range) and the index orders periods in time.
#[derive(
    Debug,
    Clone,
    Copy,
    PartialEq,
    Eq,
    Hash,
    clap::ValueEnum,
    serde::Serialize,
    serde::Deserialize,
    schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Period {
    /// Calendar days (UTC).
    Day,
    /// ISO 8601 weeks, Monday first.
    Week,
    /// Calendar months.
    Month,
    /// Calendar quarters.
    Quarter,
}

impl Period {
    /// The index of the period holding UTC second `seconds`: days since 1970-01-01, weeks
    /// since Monday 1969-12-29, months since January of year 0, quarters since year 0.
    pub fn index(self, seconds: i64) -> Option<i64> {
        let days = seconds.div_euclid(DAY_SECONDS);
        match self {
            Period::Day => Some(days),
            // 1970-01-01 was a Thursday: Monday 1969-12-29 is 3 days earlier.
            Period::Week => Some((days + 3).div_euclid(7)),
            Period::Month | Period::Quarter => {
                let t = DateTime::from_timestamp(seconds, 0)?;
                let month = i64::from(t.year()) * 12 + i64::from(t.month0());
                Some(if self == Period::Month {
                    month
                } else {
                    month.div_euclid(3)
                })
            }
        }
    }

    /// UTC second at which period `index` starts.
    pub fn start_seconds(self, index: i64) -> Option<i64> {
        let date = match self {
            Period::Day => return index.checked_mul(DAY_SECONDS),
            Period::Week => {
                return index
                    .checked_mul(7)?
                    .checked_sub(3)?
                    .checked_mul(DAY_SECONDS)
            }
            Period::Month => month_start(index)?,
            Period::Quarter => month_start(index.checked_mul(3)?)?,
        };
        date.and_hms_opt(0, 0, 0).map(|t| t.and_utc().timestamp())
    }

    /// The period as people write it: `2026-03-04`, `2026-W10`, `2026-03`, `2026-Q1`.
    pub fn label(self, index: i64) -> String {
        let Some(date) = self
            .start_seconds(index)
            .and_then(|s| DateTime::from_timestamp(s, 0))
        else {
            return format!("period {index}");
        };
        match self {
            Period::Day => date.format("%Y-%m-%d").to_string(),
            Period::Week => {
                let week = date.iso_week();
                format!("{:04}-W{:02}", week.year(), week.week())
            }
            Period::Month => date.format("%Y-%m").to_string(),
            Period::Quarter => format!("{:04}-Q{}", date.year(), date.month0() / 3 + 1),
        }
    }

    /// The period as a layer-name suffix: `2026_03_04`, `2026_w10`, `2026_03`, `2026_q1`.
    pub fn suffix(self, index: i64) -> String {
        self.label(index).to_lowercase().replace('-', "_")
    }
}

fn month_start(month_index: i64) -> Option<NaiveDate> {
    let year = i32::try_from(month_index.div_euclid(12)).ok()?;
    let month = u32::try_from(month_index.rem_euclid(12)).ok()? + 1;
    NaiveDate::from_ymd_opt(year, month, 1)
}

/// Parses an RFC 3339 / ISO 8601 date or date-time into UTC seconds since 1970.
///
/// Accepted: `2026-03-04` (midnight UTC), `2026-03-04T05:06[:07[.fff]]` with `Z`, `±hh:mm`,
/// `±hhmm` or no zone (taken as UTC), `T` or a space between date and time, and the basic
/// forms `20260304` and `20260304T050607[Z]`. Returns `None` for anything else.
pub fn parse_utc_seconds(text: &str) -> Option<i64> {
    let text = text.trim();
    if text.is_empty() {
        return None;
    }
    if let Ok(t) = DateTime::parse_from_rfc3339(text) {
        return Some(t.with_timezone(&Utc).timestamp());
    }
    let normalised = text.replacen(' ', "T", 1);
    for format in [
        "%Y-%m-%dT%H:%M:%S%.f%:z",
        "%Y-%m-%dT%H:%M:%S%.f%z",
        "%Y-%m-%dT%H:%M%:z",
        "%Y-%m-%dT%H:%M%z",
        "%Y%m%dT%H%M%S%z",
    ] {
        if let Ok(t) = DateTime::parse_from_str(&normalised, format) {
            return Some(t.with_timezone(&Utc).timestamp());
        }
    }
    let zulu = normalised
        .strip_suffix('Z')
        .or_else(|| normalised.strip_suffix('z'))
        .unwrap_or(&normalised);
    for format in ["%Y-%m-%dT%H:%M:%S%.f", "%Y-%m-%dT%H:%M", "%Y%m%dT%H%M%S"] {
        if let Ok(t) = NaiveDateTime::parse_from_str(zulu, format) {
            return Some(t.and_utc().timestamp());
        }
    }
    for format in ["%Y-%m-%d", "%Y%m%d"] {
        if let Ok(d) = NaiveDate::parse_from_str(text, format) {
            return d.and_hms_opt(0, 0, 0).map(|t| t.and_utc().timestamp());
        }
    }
    None
}

/// Formats UTC seconds as RFC 3339 with the `Z` suffix.
pub fn format_utc(seconds: i64) -> String {
    DateTime::from_timestamp(seconds, 0)
        .map(|t| t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
        .unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Expected values: seconds since 1970 computed by hand from the calendar
    // (2026-03-04 = 20516 days after 1970-01-01; 20516 × 86400 = 1_772_582_400).
    const MARCH_4: i64 = 1_772_582_400;

    #[test]
    fn accepts_the_documented_forms() {
        let with_time = MARCH_4 + 5 * 3600 + 6 * 60 + 7;
        assert_eq!(parse_utc_seconds("2026-03-04"), Some(MARCH_4));
        assert_eq!(parse_utc_seconds("20260304"), Some(MARCH_4));
        assert_eq!(parse_utc_seconds("2026-03-04T05:06:07Z"), Some(with_time));
        assert_eq!(parse_utc_seconds("2026-03-04t05:06:07z"), Some(with_time));
        assert_eq!(parse_utc_seconds("2026-03-04 05:06:07"), Some(with_time));
        assert_eq!(
            parse_utc_seconds("2026-03-04T05:06:07.250Z"),
            Some(with_time)
        );
        assert_eq!(
            parse_utc_seconds("2026-03-04T07:06:07+02:00"),
            Some(with_time)
        );
        assert_eq!(
            parse_utc_seconds("2026-03-04T07:06:07+0200"),
            Some(with_time)
        );
        assert_eq!(parse_utc_seconds("2026-03-04T05:06Z"), Some(with_time - 7));
        assert_eq!(parse_utc_seconds("20260304T050607Z"), Some(with_time));
        assert_eq!(format_utc(with_time), "2026-03-04T05:06:07Z");
    }

    #[test]
    fn periods_by_hand() {
        // 2026-03-04 is a Wednesday (20516 days after Thursday 1970-01-01: 20516 = 7·2930 + 6,
        // Thursday + 6 days = Wednesday); its ISO week is 2026-W10 (1 January 2026 is a
        // Thursday, so week 1 starts on Monday 2025-12-29 and week 10 on Monday 2026-03-02).
        let t = MARCH_4 + 5 * 3600;
        assert_eq!(Period::Day.index(t), Some(20516));
        assert_eq!(Period::Day.label(20516), "2026-03-04");
        let week = Period::Week.index(t).expect("in range");
        assert_eq!(Period::Week.label(week), "2026-W10");
        assert_eq!(Period::Week.start_seconds(week), Some(MARCH_4 - 2 * 86_400));
        assert_eq!(Period::Week.suffix(week), "2026_w10");
        let month = Period::Month.index(t).expect("in range");
        assert_eq!(month, 2026 * 12 + 2);
        assert_eq!(Period::Month.label(month), "2026-03");
        assert_eq!(Period::Month.suffix(month), "2026_03");
        assert_eq!(
            Period::Month.start_seconds(month),
            Some(MARCH_4 - 3 * 86_400)
        );
        assert_eq!(Period::Month.label(month + 10), "2027-01");
        let quarter = Period::Quarter.index(t).expect("in range");
        assert_eq!(Period::Quarter.label(quarter), "2026-Q1");
        assert_eq!(Period::Quarter.label(quarter + 1), "2026-Q2");
        // Before 1970 the indices keep counting down without a gap.
        assert_eq!(Period::Day.index(-1), Some(-1));
        assert_eq!(Period::Week.index(-4 * 86_400), Some(-1));
    }

    #[test]
    fn consecutive_periods_have_consecutive_indices() {
        // Every day of 2026 through 2028 (a leap year in between): each period's index either
        // stays or grows by one from one day to the next, and each start maps back to itself.
        for period in [Period::Day, Period::Week, Period::Month, Period::Quarter] {
            let mut previous = period.index(1_767_225_600).expect("in range"); // 2026-01-01
            for day in 1..(3 * 366) {
                let t = 1_767_225_600 + day * 86_400;
                let i = period.index(t).expect("in range");
                assert!(
                    i == previous || i == previous + 1,
                    "{period:?} at day {day}"
                );
                let start = period.start_seconds(i).expect("in range");
                assert_eq!(period.index(start), Some(i));
                assert!(start <= t);
                previous = i;
            }
        }
    }

    #[test]
    fn rejects_the_rest() {
        for bad in [
            "",
            "yesterday",
            "2026-13-01",
            "2026-02-30",
            "04/03/2026",
            "2026-03-04T25:00:00Z",
            "1772582400",
        ] {
            assert_eq!(parse_utc_seconds(bad), None, "{bad}");
        }
    }
}
