//! Date-time parsing: RFC 3339 and the ISO 8601 date and date-time forms records carry.

use chrono::{DateTime, NaiveDate, NaiveDateTime, Utc};

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
