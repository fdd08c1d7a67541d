//! The Mann–Kendall trend test (Mann 1945; Kendall 1975): the score S of a series in time
//! order, its variance under no trend with the correction for tied values, the standardised
//! score Z with the continuity correction and its two-sided p-value; optionally the variance
//! inflated for serial correlation after Hamed & Rao (1998).

use stance_core::normal::two_sided_p;

use stance_core::normal::quantile as normal_quantile;

/// The test of one series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MannKendall {
    /// Values in the series.
    pub n: usize,
    /// S = Σ_{i<j} sign(x_j − x_i).
    pub s: f64,
    /// Variance of S under no trend (tie-corrected; inflated when autocorrelation is corrected).
    pub variance: f64,
    /// (S − sign S) / √variance; 0 when S = 0 or the variance is not positive.
    pub z: f64,
    /// Two-sided normal p-value of `z`.
    pub p: f64,
}

/// S = Σ_{i<j} sign(x_j − x_i) of a series in time order.
pub fn score(x: &[f64]) -> f64 {
    let mut s = 0i64;
    for i in 0..x.len() {
        for j in i + 1..x.len() {
            s += match x[j].partial_cmp(&x[i]) {
                Some(std::cmp::Ordering::Greater) => 1,
                Some(std::cmp::Ordering::Less) => -1,
                _ => 0,
            };
        }
    }
    s as f64
}

/// Sizes of the groups of equal values (groups of one included).
fn tie_groups(x: &[f64]) -> Vec<usize> {
    let mut sorted = x.to_vec();
    sorted.sort_by(f64::total_cmp);
    let mut groups = Vec::new();
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i + 1;
        while j < sorted.len() && sorted[j] == sorted[i] {
            j += 1;
        }
        groups.push(j - i);
        i = j;
    }
    groups
}

/// Var(S) = [n(n−1)(2n+5) − Σ t(t−1)(2t+5)] / 18 over the groups of t tied values
/// (Kendall 1975).
pub fn variance(x: &[f64]) -> f64 {
    let term = |t: usize| {
        let t = t as f64;
        t * (t - 1.0) * (2.0 * t + 5.0)
    };
    let ties: f64 = tie_groups(x).into_iter().map(term).sum();
    (term(x.len()) - ties) / 18.0
}

/// Z = (S − 1)/√V for S > 0, (S + 1)/√V for S < 0, 0 otherwise (continuity correction).
pub fn z_score(s: f64, variance: f64) -> f64 {
    if s == 0.0 || variance <= 0.0 {
        return 0.0;
    }
    (s - s.signum()) / variance.sqrt()
}

/// The test of series `x` (in time order) with the tie-corrected variance.
pub fn test(x: &[f64]) -> MannKendall {
    finish(x.len(), score(x), variance(x))
}

fn finish(n: usize, s: f64, variance: f64) -> MannKendall {
    let z = z_score(s, variance);
    MannKendall {
        n,
        s,
        variance,
        z,
        p: two_sided_p(z),
    }
}

/// Mid-ranks (1-based; ties share the mean of their ranks).
pub fn ranks(x: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut out = vec![0.0; x.len()];
    let mut i = 0;
    while i < order.len() {
        let mut j = i + 1;
        while j < order.len() && x[order[j]] == x[order[i]] {
            j += 1;
        }
        let mid = (i + j + 1) as f64 / 2.0;
        for &k in &order[i..j] {
            out[k] = mid;
        }
        i = j;
    }
    out
}

/// Sample autocorrelation of `x` at lags 0..=`lags` (the biased estimator, divisor n).
pub fn autocorrelation(x: &[f64], lags: usize) -> Vec<f64> {
    let n = x.len();
    let mean = x.iter().sum::<f64>() / n as f64;
    let y: Vec<f64> = x.iter().map(|v| v - mean).collect();
    let cov = |k: usize| (0..n - k).map(|i| y[i] * y[i + k]).sum::<f64>() / n as f64;
    let c0 = cov(0);
    (0..=lags.min(n - 1)).map(|k| cov(k) / c0).collect()
}

/// The test of series `x` at times `t` with the variance corrected for serial correlation
/// (Hamed & Rao 1998): the series is detrended by `slope` (Sen's slope per unit of `t`), the
/// autocorrelation ρ_k of the ranks of the detrended values is taken at lags 1…n−1, and the
/// lags outside ±z_{1−α/2}/√n (significant at `alpha`) inflate the variance by
/// n/n* = 1 + 2/(n(n−1)(n−2)) Σ (n−k)(n−k−1)(n−k−2) ρ_k.
pub fn hamed_rao(x: &[f64], t: &[f64], slope: f64, alpha: f64) -> MannKendall {
    let n = x.len();
    let plain = test(x);
    if n < 3 {
        return plain;
    }
    let detrended: Vec<f64> = x.iter().zip(t).map(|(v, t)| v - slope * t).collect();
    let rho = autocorrelation(&ranks(&detrended), n - 1);
    let bound = normal_quantile(1.0 - alpha / 2.0) / (n as f64).sqrt();
    let nf = n as f64;
    let sum: f64 = (1..rho.len())
        .filter(|&k| rho[k].abs() > bound)
        .map(|k| {
            let m = (n - k) as f64;
            m * (m - 1.0) * (m - 2.0) * rho[k]
        })
        .sum();
    let factor = 1.0 + 2.0 / (nf * (nf - 1.0) * (nf - 2.0)) * sum;
    finish(n, plain.s, plain.variance * factor)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Worked by hand: x = 1, 3, 2, 4: pairs (1,3)+ (1,2)+ (1,4)+ (3,2)− (3,4)+ (2,4)+ → S = 4;
    /// Var = 4·3·13/18 = 8.6667; Z = 3/√8.6667 = 1.01905.
    #[test]
    fn hand_worked_series() {
        let r = test(&[1.0, 3.0, 2.0, 4.0]);
        assert_eq!(r.s, 4.0);
        assert_relative_eq!(r.variance, 156.0 / 18.0, max_relative = 1e-15);
        assert_relative_eq!(r.z, 3.0 / (156.0f64 / 18.0).sqrt(), max_relative = 1e-15);
    }

    /// Ties: x = 1, 1, 2, 2, 2: S = 6; Var = (5·4·15 − 2·1·9 − 3·2·11)/18 = (300 − 18 − 66)/18 = 12.
    #[test]
    fn tie_correction_by_hand() {
        let r = test(&[1.0, 1.0, 2.0, 2.0, 2.0]);
        assert_eq!(r.s, 6.0);
        assert_relative_eq!(r.variance, 12.0, max_relative = 1e-15);
    }

    #[test]
    fn flat_series_has_no_trend() {
        let r = test(&[0.5; 6]);
        assert_eq!((r.s, r.variance, r.z, r.p), (0.0, 0.0, 0.0, 1.0));
    }

    #[test]
    fn mid_ranks() {
        assert_eq!(ranks(&[3.0, 1.0, 3.0, 2.0]), vec![3.5, 1.0, 3.5, 2.0]);
    }
}
