//! The trend of one area: its series of shares over the usable periods, the Mann–Kendall test,
//! Sen's slope, and the trend class.

use stance_core::stance::Stance;

use crate::mann_kendall::{self, MannKendall};
use crate::sen::{sen_slope, SenSlope};
use crate::tally::cases_at_risk;

/// What makes a series and how it is tested.
#[derive(Debug, Clone, PartialEq)]
pub struct Rule {
    /// The class counted as cases.
    pub case: Stance,
    /// The classes at risk (include `case`).
    pub at_risk: Vec<Stance>,
    /// A period enters an area's series with at least this many records at risk (and ≥ 1).
    pub min_records: u64,
    /// An area with fewer usable periods is "too few records".
    pub min_periods: usize,
    /// Significance level (of the trend class, the slope interval and the autocorrelation lags).
    pub alpha: f64,
    /// z_{1−α/2}.
    pub z: f64,
    /// Correct the variance for serial correlation (Hamed & Rao 1998).
    pub autocorrelation: bool,
}

/// The trend of one area.
#[derive(Debug, Clone, PartialEq)]
pub struct AreaTrend {
    /// Periods in the series.
    pub periods_used: usize,
    /// The test and the slope (None: too few periods).
    pub test: Option<(MannKendall, SenSlope)>,
}

/// The trend classes written to the `trend` field.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TrendClass {
    /// Significant upward trend of the share.
    Rising,
    /// Significant downward trend of the share.
    Falling,
    /// No significant trend.
    Steady,
    /// Fewer usable periods than the minimum.
    TooFewRecords,
}

impl TrendClass {
    /// Every class, in the order of the summary.
    pub const ALL: [TrendClass; 4] = [
        TrendClass::Rising,
        TrendClass::Falling,
        TrendClass::Steady,
        TrendClass::TooFewRecords,
    ];

    /// The field value.
    pub fn label(self) -> &'static str {
        match self {
            TrendClass::Rising => "rising",
            TrendClass::Falling => "falling",
            TrendClass::Steady => "steady",
            TrendClass::TooFewRecords => "too few records",
        }
    }
}

/// The series of an area: (period index, share) for each period with at least
/// max(1, `min_records`) records at risk.
pub fn series(counts: &[[u64; 3]], first: i64, rule: &Rule) -> (Vec<f64>, Vec<f64>) {
    let mut t = Vec::new();
    let mut x = Vec::new();
    for (p, cell) in counts.iter().enumerate() {
        let (cases, at_risk) = cases_at_risk(cell, rule.case, &rule.at_risk);
        if at_risk >= rule.min_records.max(1) {
            t.push((first + p as i64) as f64);
            x.push(cases as f64 / at_risk as f64);
        }
    }
    (t, x)
}

/// The test of an area's counts per period (see [`series`]).
pub fn area_trend(counts: &[[u64; 3]], first: i64, rule: &Rule) -> AreaTrend {
    let (t, x) = series(counts, first, rule);
    let periods_used = x.len();
    if periods_used < rule.min_periods.max(3) {
        return AreaTrend {
            periods_used,
            test: None,
        };
    }
    let plain = mann_kendall::test(&x);
    let test = sen_slope(&x, &t, plain.variance, rule.z).map(|first_slope| {
        if !rule.autocorrelation {
            return (plain, first_slope);
        }
        let corrected = mann_kendall::hamed_rao(&x, &t, first_slope.slope, rule.alpha);
        let slope = sen_slope(&x, &t, corrected.variance, rule.z).unwrap_or(first_slope);
        (corrected, slope)
    });
    AreaTrend { periods_used, test }
}

/// The class of an area from its test and its adjusted p-value.
pub fn classify(trend: &AreaTrend, p_adjusted: f64, alpha: f64) -> TrendClass {
    match &trend.test {
        None => TrendClass::TooFewRecords,
        Some((mk, _)) if p_adjusted < alpha && mk.s > 0.0 => TrendClass::Rising,
        Some((mk, _)) if p_adjusted < alpha && mk.s < 0.0 => TrendClass::Falling,
        Some(_) => TrendClass::Steady,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rule(min_records: u64, min_periods: usize) -> Rule {
        Rule {
            case: Stance::Oppose,
            at_risk: vec![Stance::Oppose, Stance::Support],
            min_records,
            min_periods,
            alpha: 0.05,
            z: 1.959963984540054,
            autocorrelation: false,
        }
    }

    #[test]
    fn periods_below_the_minimum_are_skipped() {
        // Neutral records are not at risk: the second period has 1 at risk, the third none.
        let counts = [[1, 0, 3], [1, 5, 0], [0, 4, 0], [2, 0, 2]];
        let (t, x) = series(&counts, 10, &rule(2, 2));
        assert_eq!(t, vec![10.0, 13.0]);
        assert_eq!(x, vec![0.25, 0.5]);
        let trend = area_trend(&counts, 10, &rule(2, 3));
        assert_eq!(trend.periods_used, 2);
        assert_eq!(classify(&trend, f64::NAN, 0.05), TrendClass::TooFewRecords);
    }

    #[test]
    fn a_steadily_rising_share_is_rising() {
        let counts: Vec<[u64; 3]> = (0..10).map(|k| [10 + 5 * k, 0, 100 - 5 * k]).collect();
        let trend = area_trend(&counts, 0, &rule(1, 4));
        let (mk, sen) = trend.test.expect("tested");
        assert_eq!(mk.s, 45.0);
        assert!(mk.p < 0.001 && sen.slope > 0.0 && sen.low > 0.0);
        assert_eq!(classify(&trend, mk.p, 0.05), TrendClass::Rising);
        assert_eq!(classify(&trend, 0.2, 0.05), TrendClass::Steady);
    }
}
