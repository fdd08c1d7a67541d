//! Sen's (1968) slope: the median of the pairwise slopes (x_j − x_i)/(t_j − t_i) over the pairs
//! with t_i < t_j, and its order-statistic confidence interval from the variance of the
//! Mann–Kendall score (Sen 1968, eq. 2.6).

/// Sen's slope with its interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SenSlope {
    /// Median pairwise slope.
    pub slope: f64,
    /// Lower end of the interval.
    pub low: f64,
    /// Upper end of the interval.
    pub high: f64,
}

fn median(sorted: &[f64]) -> f64 {
    let n = sorted.len();
    if n % 2 == 1 {
        sorted[n / 2]
    } else {
        0.5 * (sorted[n / 2 - 1] + sorted[n / 2])
    }
}

/// Slope and interval of series `x` at times `t` (increasing), with `variance` the variance of
/// the Mann–Kendall score and `z` = z_{1−α/2}. With N sorted slopes and C = z·√variance, the
/// interval runs from the slope of 1-based rank round((N − C)/2) to that of rank
/// round((N + C)/2) + 1, clamped to the slopes there are (rounding half to even). None with
/// fewer than two distinct times.
pub fn sen_slope(x: &[f64], t: &[f64], variance: f64, z: f64) -> Option<SenSlope> {
    let mut slopes = Vec::with_capacity(x.len() * x.len().saturating_sub(1) / 2);
    for i in 0..x.len() {
        for j in i + 1..x.len() {
            let dt = t[j] - t[i];
            if dt > 0.0 {
                slopes.push((x[j] - x[i]) / dt);
            }
        }
    }
    if slopes.is_empty() {
        return None;
    }
    slopes.sort_by(f64::total_cmp);
    let n = slopes.len() as f64;
    let c = z * variance.max(0.0).sqrt();
    let last = slopes.len() - 1;
    let low = (((n - c) / 2.0).round_ties_even() - 1.0).max(0.0) as usize;
    let high = (((n + c) / 2.0).round_ties_even()).max(0.0) as usize;
    Some(SenSlope {
        slope: median(&slopes),
        low: slopes[low.min(last)],
        high: slopes[high.min(last)],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: x = 1, 3, 2, 4 at t = 0…3: slopes 2, 0.5, 1, −1, 0.5, 2 → sorted −1, 0.5,
    /// 0.5, 1, 2, 2; median 0.75.
    #[test]
    fn median_of_pairwise_slopes() {
        let s = sen_slope(&[1.0, 3.0, 2.0, 4.0], &[0.0, 1.0, 2.0, 3.0], 0.0, 1.96).expect("slope");
        assert_eq!(s.slope, 0.75);
        // C = 0: ranks round(3) = 3 and round(3) + 1 = 4 (1-based): 0.5 and 1.
        assert_eq!((s.low, s.high), (0.5, 1.0));
    }

    #[test]
    fn a_single_time_has_no_slope() {
        assert!(sen_slope(&[1.0], &[0.0], 0.0, 1.96).is_none());
    }
}
