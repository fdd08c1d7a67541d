//! Records counted per unit (the study area, an area, a cluster), period and stance class.

use stance_core::stance::Stance;

/// Counts of each class (oppose, neutral, support) per unit and period.
#[derive(Debug, Clone, PartialEq)]
pub struct Tally {
    /// Index of the first period.
    pub first: i64,
    /// Periods from the first to the last.
    pub periods: usize,
    /// Per unit, per period: records of each class.
    pub counts: Vec<Vec<[u64; 3]>>,
}

/// The range of periods holding a record: (first index, number of periods), None when no
/// record has a period.
pub fn period_range(period_of: &[Option<i64>]) -> Option<(i64, usize)> {
    let first = period_of.iter().flatten().min()?;
    let last = period_of.iter().flatten().max()?;
    Some((*first, usize::try_from(last - first + 1).ok()?))
}

/// Counts the records with a period in `first .. first + periods` into `units` units;
/// `unit_of(i)` is the unit of record i (None: counted nowhere).
pub fn tally(
    period_of: &[Option<i64>],
    classes: &[Stance],
    (first, periods): (i64, usize),
    units: usize,
    unit_of: impl Fn(usize) -> Option<usize>,
) -> Tally {
    let mut counts = vec![vec![[0u64; 3]; periods]; units];
    for (i, (period, class)) in period_of.iter().zip(classes).enumerate() {
        let (Some(period), Some(unit)) = (period, unit_of(i)) else {
            continue;
        };
        let Ok(p) = usize::try_from(period - first) else {
            continue;
        };
        if p < periods && unit < units {
            counts[unit][p][*class as usize] += 1;
        }
    }
    Tally {
        first,
        periods,
        counts,
    }
}

/// Records of `case` and of the `at_risk` classes in one cell of counts.
pub fn cases_at_risk(cell: &[u64; 3], case: Stance, at_risk: &[Stance]) -> (u64, u64) {
    let at_risk = at_risk.iter().map(|s| cell[*s as usize]).sum();
    (cell[case as usize], at_risk)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_by_unit_period_and_class() {
        let periods = [Some(5), Some(7), None, Some(5)];
        let classes = [
            Stance::Oppose,
            Stance::Support,
            Stance::Oppose,
            Stance::Oppose,
        ];
        let range = period_range(&periods).expect("range");
        assert_eq!(range, (5, 3));
        let units = [Some(0), Some(1), Some(0), None];
        let t = tally(&periods, &classes, range, 2, |i| units[i]);
        assert_eq!(t.counts[0], vec![[1, 0, 0], [0, 0, 0], [0, 0, 0]]);
        assert_eq!(t.counts[1], vec![[0, 0, 0], [0, 0, 0], [0, 0, 1]]);
        let cell = [3, 2, 5];
        let at_risk = [Stance::Oppose, Stance::Support];
        assert_eq!(cases_at_risk(&cell, Stance::Oppose, &at_risk), (3, 8));
    }
}
