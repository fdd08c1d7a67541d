//! Time slices of records: calendar month, ISO 8601 week, quarter, or everything, in UTC.

use chrono::{DateTime, Datelike};

/// How records are split in time.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Slice {
    /// Calendar months (suffix `_2026_03`).
    Month,
    /// ISO 8601 weeks, Monday first (suffix `_2026_w09`).
    Week,
    /// Calendar quarters (suffix `_2026_q1`).
    Quarter,
    /// One set of surfaces from every record (no suffix).
    All,
}

/// The layer-name suffix of the slice holding UTC second `seconds`, e.g. `2026_03`; `None` for
/// [`Slice::All`] or a time outside chrono's range.
pub fn key(slice: Slice, seconds: i64) -> Option<String> {
    let t = DateTime::from_timestamp(seconds, 0)?;
    match slice {
        Slice::Month => Some(format!("{:04}_{:02}", t.year(), t.month())),
        Slice::Quarter => Some(format!("{:04}_q{}", t.year(), (t.month() - 1) / 3 + 1)),
        Slice::Week => {
            let week = t.iso_week();
            Some(format!("{:04}_w{:02}", week.year(), week.week()))
        }
        Slice::All => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_by_hand() {
        // 2026-03-04T00:00:00Z = 1_772_582_400 s (20516 days × 86400); ISO week 10 of 2026
        // (1 January 2026 is a Thursday, so week 1 starts on Monday 29 December 2025).
        let t = 1_772_582_400;
        assert_eq!(key(Slice::Month, t).as_deref(), Some("2026_03"));
        assert_eq!(key(Slice::Quarter, t).as_deref(), Some("2026_q1"));
        assert_eq!(key(Slice::Week, t).as_deref(), Some("2026_w10"));
        assert_eq!(key(Slice::All, t), None);
        // 2025-12-29 belongs to ISO week 1 of 2026.
        assert_eq!(key(Slice::Week, 1_766_966_400).as_deref(), Some("2026_w01"));
    }
}
