//! Class breaks for choropleth maps: quantiles (Hyndman & Fan 1996, type 7) and equal
//! intervals (Slocum et al. 2009, Thematic Cartography, ch. 5).

/// How a numeric field is cut into classes.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Classing {
    /// Classes holding about the same number of areas.
    Quantile,
    /// Classes of equal width between the minimum and the maximum.
    EqualInterval,
}

/// Sample quantile of sorted `values` at probability `p`, Hyndman & Fan (1996) type 7 (R's
/// default): h = (n − 1) p, Q = x[⌊h⌋] + (h − ⌊h⌋)(x[⌊h⌋+1] − x[⌊h⌋]).
fn quantile_sorted(values: &[f64], p: f64) -> f64 {
    let h = (values.len() - 1) as f64 * p;
    let low = h.floor() as usize;
    let high = (low + 1).min(values.len() - 1);
    values[low] + (h - low as f64) * (values[high] - values[low])
}

/// Breaks b₀ < b₁ < … < b_k of at most `classes` classes over the finite `values`; class i is
/// [bᵢ, bᵢ₊₁), the last one closed. Ties that make two breaks equal merge their classes, so
/// fewer classes may come back. Empty when no value is finite; one class [v, v] for a constant.
pub fn breaks(values: &[f64], classes: usize, classing: Classing) -> Vec<f64> {
    let mut sorted: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if sorted.is_empty() || classes == 0 {
        return Vec::new();
    }
    sorted.sort_by(f64::total_cmp);
    let (min, max) = (sorted[0], sorted[sorted.len() - 1]);
    if min == max {
        return vec![min, max];
    }
    let mut out: Vec<f64> = (0..=classes)
        .map(|k| {
            let p = k as f64 / classes as f64;
            match classing {
                Classing::Quantile => quantile_sorted(&sorted, p),
                Classing::EqualInterval => min + (max - min) * p,
            }
        })
        .collect();
    // Exact ends, whatever the rounding of the formulas.
    out[0] = min;
    out[classes] = max;
    out.dedup_by(|b, a| *b <= *a);
    out
}

/// Index of the class of `value` given `breaks` (see [`breaks`]); `None` for NaN or no classes.
pub fn class_of(value: f64, breaks: &[f64]) -> Option<usize> {
    if value.is_nan() || breaks.len() < 2 {
        return None;
    }
    let classes = breaks.len() - 1;
    // The number of inner breaks at or below the value.
    let index = breaks[1..classes].partition_point(|b| *b <= value);
    Some(index.min(classes - 1))
}

/// A short label for class [`lower`, `upper`] with `digits` significant digits.
pub fn class_label(lower: f64, upper: f64) -> String {
    format!("{} – {}", format_number(lower), format_number(upper))
}

/// A number for a legend: integers as is, others with about 3 significant digits.
pub fn format_number(value: f64) -> String {
    if value == 0.0 || !value.is_finite() {
        return if value == 0.0 {
            "0".into()
        } else {
            value.to_string()
        };
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-3..5).contains(&magnitude) {
        return format!("{value:.2e}");
    }
    let decimals = (2 - magnitude).max(0) as usize;
    let text = format!("{value:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        text
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantile_breaks_by_hand() {
        // 1..=9, 4 classes: h = 8p → breaks at x[0], x[2], x[4], x[6], x[8] = 1, 3, 5, 7, 9.
        let values: Vec<f64> = (1..=9).map(f64::from).collect();
        assert_eq!(
            breaks(&values, 4, Classing::Quantile),
            [1.0, 3.0, 5.0, 7.0, 9.0]
        );
        // 1, 2, 3, 10 with 2 classes: median h = 1.5 → 2 + 0.5 (3 − 2) = 2.5.
        assert_eq!(
            breaks(&[10.0, 1.0, 3.0, 2.0], 2, Classing::Quantile),
            [1.0, 2.5, 10.0]
        );
    }

    #[test]
    fn equal_interval_breaks_by_hand() {
        assert_eq!(
            breaks(&[0.0, 10.0, 3.0, f64::NAN], 5, Classing::EqualInterval),
            [0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
    }

    #[test]
    fn ties_merge_classes_and_degenerate_inputs_are_handled() {
        // Seven zeros and a 1: the quantile breaks 0, 0, 0, 0.x collapse.
        let values = [0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0];
        let b = breaks(&values, 4, Classing::Quantile);
        assert_eq!(b, [0.0, 1.0]);
        assert_eq!(breaks(&[2.0, 2.0], 3, Classing::Quantile), [2.0, 2.0]);
        assert!(breaks(&[], 3, Classing::Quantile).is_empty());
        assert!(breaks(&[f64::NAN], 3, Classing::EqualInterval).is_empty());
    }

    #[test]
    fn classes_are_half_open_with_the_last_one_closed() {
        let b = [0.0, 2.0, 4.0, 6.0];
        assert_eq!(class_of(0.0, &b), Some(0));
        assert_eq!(class_of(1.99, &b), Some(0));
        assert_eq!(class_of(2.0, &b), Some(1));
        assert_eq!(class_of(6.0, &b), Some(2));
        assert_eq!(class_of(-1.0, &b), Some(0));
        assert_eq!(class_of(7.0, &b), Some(2));
        assert_eq!(class_of(f64::NAN, &b), None);
        assert_eq!(class_of(2.0, &[2.0, 2.0]), Some(0));
    }

    #[test]
    fn numbers_are_short() {
        assert_eq!(format_number(0.0), "0");
        assert_eq!(format_number(1234.0), "1234");
        assert_eq!(format_number(12.3456), "12.3");
        assert_eq!(format_number(-0.012345), "-0.0123");
        assert_eq!(format_number(2.5), "2.5");
        assert_eq!(format_number(1.5e6), "1.50e6");
        assert_eq!(class_label(0.0, 2.5), "0 – 2.5");
    }
}
