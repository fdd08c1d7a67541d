//! The time slices of a surface: the layers `<surface>_<period>` that stance-density writes per
//! period (`Period::suffix`, e.g. `density_diff_2026_03`), found by name and put in time order.

use stance_core::time::{parse_utc_seconds, Period};

/// One time slice of a surface.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Slice {
    /// The raster table.
    pub table: String,
    /// Its kind of period.
    pub period: Period,
    /// Its period's index (`Period::index`).
    pub index: i64,
}

impl Slice {
    /// The period as people write it (`Period::label`).
    pub fn label(&self) -> String {
        self.period.label(self.index)
    }
}

/// The period a layer-name suffix names, when `Period::suffix` writes it exactly so:
/// `2026_03_04` (day), `2026_w10` (week), `2026_03` (month), `2026_q1` (quarter).
pub fn parse_suffix(text: &str) -> Option<(Period, i64)> {
    let parts: Vec<&str> = text.split('_').collect();
    let digits = |s: &str, n: usize| s.len() == n && s.bytes().all(|b| b.is_ascii_digit());
    let (period, date) = match parts.as_slice() {
        [y, m, d] if digits(y, 4) && digits(m, 2) && digits(d, 2) => {
            (Period::Day, format!("{y}-{m}-{d}"))
        }
        [y, m] if digits(y, 4) && digits(m, 2) => (Period::Month, format!("{y}-{m}-01")),
        [y, q] if digits(y, 4) && q.len() == 2 && q.starts_with('q') => {
            let quarter: u32 = q[1..].parse().ok()?;
            let month = quarter.checked_sub(1)? * 3 + 1;
            (Period::Quarter, format!("{y}-{month:02}-01"))
        }
        [y, w] if digits(y, 4) && w.len() == 3 && w.starts_with('w') => {
            // 4 January always lies in ISO week 1 (ISO 8601).
            let week: i64 = w[1..].parse().ok()?;
            let first = Period::Week.index(parse_utc_seconds(&format!("{y}-01-04"))?)?;
            let index = first + week - 1;
            return (Period::Week.suffix(index) == text).then_some((Period::Week, index));
        }
        _ => return None,
    };
    let index = period.index(parse_utc_seconds(&date)?)?;
    (period.suffix(index) == text).then_some((period, index))
}

/// The slices of `surface` among `tables`: each table `<surface>_<period>` (as stance-density
/// writes them), or `<a>_<period>_<b>` with `<a>_<b>` equal to `surface`, where `<period>` is
/// a period suffix; in time order, kinds of period apart (day, week, month, quarter).
pub fn slices_of(tables: &[String], surface: &str) -> Vec<Slice> {
    let mut found: Vec<Slice> = Vec::new();
    for table in tables {
        let trailing = table
            .strip_prefix(surface)
            .and_then(|t| t.strip_prefix('_'));
        let inner = surface.match_indices('_').filter_map(|(cut, _)| {
            let (head, tail) = (&surface[..cut], &surface[cut + 1..]);
            table
                .strip_prefix(head)
                .and_then(|t| t.strip_prefix('_'))
                .and_then(|t| t.strip_suffix(tail))
                .and_then(|t| t.strip_suffix('_'))
        });
        if let Some((period, index)) = trailing.into_iter().chain(inner).find_map(parse_suffix) {
            found.push(Slice {
                table: table.clone(),
                period,
                index,
            });
        }
    }
    found.sort_by_key(|s| (period_rank(s.period), s.index));
    found
}

/// Order of the kinds of period, shortest first.
fn period_rank(period: Period) -> u8 {
    match period {
        Period::Day => 0,
        Period::Week => 1,
        Period::Month => 2,
        Period::Quarter => 3,
    }
}

/// The kinds of period among `slices`, shortest first.
pub fn periods_present(slices: &[Slice]) -> Vec<Period> {
    let mut kinds: Vec<Period> = slices.iter().map(|s| s.period).collect();
    kinds.dedup();
    kinds
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suffixes_round_trip_through_period_suffix() {
        // 2026-03 is month index 2026 × 12 + 2 (Period::index counts months from year 0).
        assert_eq!(
            parse_suffix("2026_03"),
            Some((Period::Month, 2026 * 12 + 2))
        );
        assert_eq!(parse_suffix("2026_q1"), Some((Period::Quarter, 2026 * 4)));
        // 2026-03-04 is day 20516 since 1970-01-01 (20516 × 86400 = 1 772 582 400 s).
        assert_eq!(parse_suffix("2026_03_04"), Some((Period::Day, 20_516)));
        let (period, index) = parse_suffix("2026_w10").expect("week");
        assert_eq!(
            (period, period.label(index).as_str()),
            (Period::Week, "2026-W10")
        );
        for bad in [
            "2026_13",
            "2026_q5",
            "2026_w54",
            "26_03",
            "2026_3",
            "2026_03_32",
            "diff",
        ] {
            assert_eq!(parse_suffix(bad), None, "{bad}");
        }
    }

    #[test]
    fn slices_are_found_by_name_and_put_in_time_order() {
        // Names as stance-density writes them (run on sample-gpkg/veldmark.gpkg with
        // --time-field time_utc --slice month), and decoys.
        let tables: Vec<String> = [
            "density_diff_2026_04",
            "density_diff_2026_03",
            "density_log_ratio_2026_03",
            "density_log_ratio_p_upper_2026_03",
            "density_diff_2026_03_x",
            "density_diff",
            "density_diff_2026_q1",
            "run_2025_12_diff",
        ]
        .iter()
        .map(|s| (*s).to_owned())
        .collect();
        let found = slices_of(&tables, "density_diff");
        let names: Vec<&str> = found.iter().map(|s| s.table.as_str()).collect();
        assert_eq!(
            names,
            [
                "density_diff_2026_03",
                "density_diff_2026_04",
                "density_diff_2026_q1"
            ]
        );
        assert_eq!(found[0].label(), "2026-03");
        assert_eq!(periods_present(&found), [Period::Month, Period::Quarter]);
        // The period inside the name is found too.
        let found = slices_of(&tables, "run_diff");
        assert_eq!(found.len(), 1);
        assert_eq!(found[0].label(), "2025-12");
        // The p-value surfaces are not slices of the log ratio.
        let found = slices_of(&tables, "density_log_ratio");
        assert_eq!(found.len(), 1);
        assert!(slices_of(&tables, "density_share").is_empty());
    }
}
