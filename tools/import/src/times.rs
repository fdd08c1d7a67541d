//! Record times: RFC 3339 / ISO 8601 by default, or the form `--time-format` gives (a strftime
//! pattern, or seconds / milliseconds since 1970). Day/month-ambiguous dates are never guessed.

use chrono::format::{Item, StrftimeItems};
use chrono::{DateTime, NaiveDate, NaiveDateTime};

/// How time texts are written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TimeFormat {
    /// RFC 3339 / ISO 8601 dates and date-times.
    Iso,
    /// Seconds since 1970-01-01T00:00:00Z (Unix time).
    EpochSeconds,
    /// Milliseconds since 1970-01-01T00:00:00Z.
    EpochMillis,
    /// A strftime-style pattern (`%d/%m/%Y %H:%M`); without a zone the time is taken as UTC.
    Pattern(String),
}

/// Why a time text was not read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeProblem {
    /// Not in the expected form.
    Unparseable,
    /// A numeric date whose day and month could be either way round (`03/04/2026`).
    AmbiguousDayMonth,
}

impl TimeFormat {
    /// The format a `--time-format` value names.
    ///
    /// # Errors
    /// A message when the pattern has an unknown `%` directive or no directive at all.
    pub fn parse_option(value: &str) -> Result<TimeFormat, String> {
        match value.trim() {
            "iso" | "rfc3339" => Ok(TimeFormat::Iso),
            "epoch" => Ok(TimeFormat::EpochSeconds),
            "epoch-ms" => Ok(TimeFormat::EpochMillis),
            pattern => {
                let items: Vec<Item<'_>> = StrftimeItems::new(pattern).collect();
                if items.iter().any(|i| matches!(i, Item::Error)) {
                    return Err(format!("'{pattern}' has an unknown % directive"));
                }
                if !pattern.contains('%') {
                    return Err(format!(
                        "'{pattern}' is not a strftime pattern (e.g. '%d/%m/%Y %H:%M'), epoch or epoch-ms"
                    ));
                }
                Ok(TimeFormat::Pattern(pattern.to_owned()))
            }
        }
    }

    /// UTC seconds of `text`.
    ///
    /// # Errors
    /// [`TimeProblem`] saying why it was not read.
    pub fn read(&self, text: &str) -> Result<i64, TimeProblem> {
        let text = text.trim();
        match self {
            TimeFormat::Iso => stance_core::time::parse_utc_seconds(text).ok_or_else(|| {
                if ambiguous_day_month(text) {
                    TimeProblem::AmbiguousDayMonth
                } else {
                    TimeProblem::Unparseable
                }
            }),
            TimeFormat::EpochSeconds => epoch(text, 1.0),
            TimeFormat::EpochMillis => epoch(text, 1000.0),
            TimeFormat::Pattern(p) => pattern(text, p).ok_or(TimeProblem::Unparseable),
        }
    }
}

fn epoch(text: &str, per_second: f64) -> Result<i64, TimeProblem> {
    if let Ok(whole) = text.parse::<i64>() {
        return Ok(whole.div_euclid(per_second as i64));
    }
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() && (v / per_second).abs() < 1e14 => {
            Ok((v / per_second).floor() as i64)
        }
        _ => Err(TimeProblem::Unparseable),
    }
}

fn pattern(text: &str, p: &str) -> Option<i64> {
    if let Ok(t) = DateTime::parse_from_str(text, p) {
        return Some(t.timestamp());
    }
    if let Ok(t) = NaiveDateTime::parse_from_str(text, p) {
        return Some(t.and_utc().timestamp());
    }
    NaiveDate::parse_from_str(text, p)
        .ok()
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|t| t.and_utc().timestamp())
}

/// Whether `text` starts with a numeric date `a/b/yyyy` (or `.`, `-`) where both `a` and `b`
/// could be a month: its reading depends on a convention the file does not state.
pub fn ambiguous_day_month(text: &str) -> bool {
    let mut parts = text.splitn(3, ['/', '.', '-']);
    let (Some(a), Some(b), Some(rest)) = (parts.next(), parts.next(), parts.next()) else {
        return false;
    };
    let year: String = rest.chars().take_while(char::is_ascii_digit).collect();
    let small = |s: &str| {
        (1..=2).contains(&s.len())
            && s.bytes().all(|c| c.is_ascii_digit())
            && s.parse::<u32>().is_ok_and(|v| (1..=12).contains(&v))
    };
    small(a) && small(b) && a != b && (year.len() == 2 || year.len() == 4)
}

#[cfg(test)]
mod tests {
    use super::*;

    // 2026-03-04T00:00:00Z = 20516 days × 86400 s (hand count from the calendar, as in
    // stance_core::time's tests).
    const MARCH_4: i64 = 1_772_582_400;

    #[test]
    fn ambiguous_dates_are_never_guessed() {
        assert_eq!(
            TimeFormat::Iso.read("03/04/2026"),
            Err(TimeProblem::AmbiguousDayMonth)
        );
        assert_eq!(
            TimeFormat::Iso.read("03.04.26 10:00"),
            Err(TimeProblem::AmbiguousDayMonth)
        );
        // Day > 12 or day = month: only one reading, but still not ISO: unparseable.
        assert_eq!(
            TimeFormat::Iso.read("13/04/2026"),
            Err(TimeProblem::Unparseable)
        );
        assert_eq!(
            TimeFormat::Iso.read("04/04/2026"),
            Err(TimeProblem::Unparseable)
        );
        assert_eq!(TimeFormat::Iso.read("2026-03-04"), Ok(MARCH_4));
    }

    #[test]
    fn patterns_and_epochs_read_the_same_instant() {
        let day_first = TimeFormat::parse_option("%d/%m/%Y %H:%M").expect("pattern");
        assert_eq!(day_first.read("04/03/2026 00:00"), Ok(MARCH_4));
        let date_only = TimeFormat::parse_option("%d/%m/%Y").expect("pattern");
        assert_eq!(date_only.read("04/03/2026"), Ok(MARCH_4));
        let zoned = TimeFormat::parse_option("%d/%m/%Y %H:%M %z").expect("pattern");
        assert_eq!(zoned.read("04/03/2026 02:00 +0200"), Ok(MARCH_4));
        assert_eq!(TimeFormat::EpochSeconds.read("1772582400"), Ok(MARCH_4));
        assert_eq!(TimeFormat::EpochMillis.read("1772582400999"), Ok(MARCH_4));
        assert_eq!(
            TimeFormat::EpochSeconds.read("soon"),
            Err(TimeProblem::Unparseable)
        );
        assert!(TimeFormat::parse_option("%Q").is_err());
        assert!(TimeFormat::parse_option("dd/mm/yyyy").is_err());
    }
}
