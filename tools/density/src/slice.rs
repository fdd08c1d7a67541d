//! Time slices of records: calendar month, ISO 8601 week, quarter, or everything, in UTC.

use std::collections::BTreeMap;

use stance_core::time::Period;

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
    let period = match slice {
        Slice::Month => Period::Month,
        Slice::Quarter => Period::Quarter,
        Slice::Week => Period::Week,
        Slice::All => return None,
    };
    period.index(seconds).map(|i| period.suffix(i))
}

/// Records `0..n` grouped into slices, by key in order, with the number of records left out
/// for want of a usable time. Without `times`, or for [`Slice::All`], one slice with the empty
/// key holds every record.
pub fn group(
    slice: Slice,
    times: Option<&[Option<i64>]>,
    n: usize,
) -> (Vec<(String, Vec<usize>)>, usize) {
    let times = match (times, slice) {
        (_, Slice::All) | (None, _) => return (vec![(String::new(), (0..n).collect())], 0),
        (Some(times), _) => times,
    };
    let mut map: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    let mut missing = 0usize;
    for (i, t) in times.iter().enumerate() {
        match t.and_then(|t| key(slice, t)) {
            Some(k) => map.entry(k).or_default().push(i),
            None => missing += 1,
        }
    }
    (map.into_iter().collect(), missing)
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

    #[test]
    fn grouping_by_month_leaves_out_missing_times() {
        // 1_772_582_400 is 2026-03-04 (above); minus 31 days (2,678,400 s) is 2026-02-01.
        let times = [
            Some(1_772_582_400),
            None,
            Some(1_772_582_400 - 2_678_400),
            Some(1_772_582_400),
        ];
        let (slices, missing) = group(Slice::Month, Some(&times), times.len());
        assert_eq!(missing, 1);
        assert_eq!(
            slices,
            vec![
                ("2026_02".to_owned(), vec![2]),
                ("2026_03".to_owned(), vec![0, 3])
            ]
        );
        let (all, none) = group(Slice::All, Some(&times), 4);
        assert_eq!((all, none), (vec![(String::new(), vec![0, 1, 2, 3])], 0));
    }
}
