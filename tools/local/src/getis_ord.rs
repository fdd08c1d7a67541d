//! Getis–Ord local statistics (Getis & Ord 1992, "The analysis of spatial association by use of
//! distance statistics", Geogr. Anal. 24(3); Ord & Getis 1995, "Local spatial autocorrelation
//! statistics: distributional issues and an application", Geogr. Anal. 27(4)) of non-negative
//! values x, with their analytic moments under randomisation and conditional-permutation p:
//!
//! - Gi  = Σ_{j≠i} w_ij x_j / Σ_{j≠i} x_j, moments over the n' = n − 1 other areas;
//! - Gi* = Σ_j w_ij x_j / Σ_j x_j with the area itself among its neighbours (self weight w_ii),
//!   moments over all n' = n areas.
//!
//! With W_i = Σ_j w_ij, S1_i = Σ_j w_ij² (j over the terms of the statistic), x̄ and s² the mean
//! and the n'-divisor variance of the values in the denominator (Ord & Getis 1995, eqs. 5–6):
//! E[G_i] = W_i / n', Var[G_i] = s² (n' S1_i − W_i²) / ((n' − 1) n'² x̄²), z = (G_i − E) / √Var.

use rayon::prelude::*;
use stance_core::weights::SparseWeights;

use crate::permutation::{conditional_counts, p_two_sided, Counts, Replicates};
use stance_core::normal::two_sided_p;

/// The local Getis–Ord statistics of every area (NaN for areas without neighbours).
#[derive(Debug, Clone, PartialEq)]
pub struct LocalG {
    /// G_i or G*_i.
    pub g: Vec<f64>,
    /// E[G_i].
    pub expected: Vec<f64>,
    /// Var[G_i].
    pub variance: Vec<f64>,
    /// (G_i − E) / √Var.
    pub z: Vec<f64>,
    /// Two-sided normal p of z.
    pub p_analytic: Vec<f64>,
    /// Two-sided conditional-permutation p (NaN without permutations).
    pub p_permutation: Vec<f64>,
    /// Permuted lags ≥ and ≤ the observed one, per area (what shards add up).
    pub counts: Vec<Counts>,
}

/// Errors of the statistics.
#[derive(Debug, Clone, PartialEq)]
pub enum GError {
    /// A value is negative or not finite (index of the area).
    BadValue(usize),
    /// Every value is 0 (the denominators vanish).
    AllZero,
}

/// Gi (`self_weights` None) or Gi* (`self_weights[i]` = w_ii) of `x` under the neighbour
/// weights `w` (no self-links). `progress` is told how many permutations are done.
///
/// # Errors
/// [`GError`] for a negative or non-finite value, or all values 0.
pub fn local_g(
    x: &[f64],
    w: &SparseWeights,
    self_weights: Option<&[f64]>,
    replicates: &Replicates,
    progress: &dyn Fn(usize),
) -> Result<LocalG, GError> {
    if let Some(i) = x.iter().position(|v| !(v.is_finite() && *v >= 0.0)) {
        return Err(GError::BadValue(i));
    }
    let total: f64 = x.iter().sum();
    if total <= 0.0 {
        return Err(GError::AllZero);
    }
    let squares: f64 = x.iter().map(|v| v * v).sum();
    let n = x.len() as f64;
    let rows: Vec<[f64; 6]> = (0..x.len())
        .into_par_iter()
        .map(|i| {
            let (js, ws) = w.row(i);
            if js.is_empty() {
                return [f64::NAN; 6];
            }
            let own = self_weights.map(|s| s[i]);
            let lag = w.lag(i, x);
            let (mut wi, mut s1): (f64, f64) = (ws.iter().sum(), ws.iter().map(|v| v * v).sum());
            let (numerator, sum, sum2, count) = match own {
                Some(wii) => {
                    wi += wii;
                    s1 += wii * wii;
                    (lag + wii * x[i], total, squares, n)
                }
                None => (lag, total - x[i], squares - x[i] * x[i], n - 1.0),
            };
            let mean = sum / count;
            let variance_x = sum2 / count - mean * mean;
            let g = numerator / sum;
            let expected = wi / count;
            let variance =
                variance_x * (count * s1 - wi * wi) / ((count - 1.0) * count * count * mean * mean);
            let z = (g - expected) / variance.sqrt();
            [g, expected, variance, z, two_sided_p(z), lag]
        })
        .collect();
    let column = |c: usize| rows.iter().map(|r| r[c]).collect::<Vec<f64>>();
    let lag = column(5);
    let tested: Vec<bool> = lag.iter().map(|l| l.is_finite()).collect();
    let counts = conditional_counts(x, w, &lag, &tested, replicates, progress);
    let p_permutation = (0..x.len())
        .map(|i| {
            if tested[i] && replicates.permutations > 0 {
                p_two_sided(counts[i], replicates.permutations)
            } else {
                f64::NAN
            }
        })
        .collect();
    Ok(LocalG {
        g: column(0),
        expected: column(1),
        variance: column(2),
        z: column(3),
        p_analytic: column(4),
        p_permutation,
        counts,
    })
}

/// Hot or cold spot: "hot" when G_i is above its expectation and `p` ≤ `alpha`, "cold" when
/// below, "not significant" otherwise; None when undefined.
pub fn hot_cold(g: f64, expected: f64, p: f64, alpha: f64) -> Option<&'static str> {
    if !(g.is_finite() && expected.is_finite() && p.is_finite()) {
        return None;
    }
    Some(if p > alpha {
        "not significant"
    } else if g > expected {
        "hot"
    } else {
        "cold"
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use stance_core::weights::{Neighbours, Standardisation};

    const NONE: Replicates = Replicates {
        permutations: 0,
        stream: 0,
        drawn: 0..0,
        given: None,
    };

    #[test]
    fn gi_and_gi_star_on_a_path_by_hand() {
        // Path 0 – 1 – 2 – 3, x = 1, 2, 3, 10, binary weights (worked by hand).
        let w = Neighbours {
            lists: vec![vec![1], vec![0, 2], vec![1, 3], vec![2]],
        }
        .standardise(Standardisation::Binary);
        let x = [1.0, 2.0, 3.0, 10.0];
        let g = local_g(&x, &w, None, &NONE, &|_| {}).expect("valid");
        // Area 1: G = (1 + 3) / (16 − 2) = 4/14; n' = 3, W = 2, S1 = 2, E = 2/3;
        // others 1, 3, 10: mean 14/3, s² = 110/3 − (14/3)² = 134/9;
        // Var = (134/9)(3·2 − 4) / (2 · 9 · (14/3)²) = (268/9) / 392 = 268/3528.
        assert_relative_eq!(g.g[1], 4.0 / 14.0, max_relative = 1e-14);
        assert_relative_eq!(g.expected[1], 2.0 / 3.0, max_relative = 1e-14);
        assert_relative_eq!(g.variance[1], 268.0 / 3528.0, max_relative = 1e-12);
        // Gi*: area 1 with w_11 = 1: G* = (1 + 2 + 3) / 16; n' = 4, W = 3, S1 = 3, E = 3/4;
        // mean 4, s² = 114/4 − 16 = 12.5; Var = 12.5 (12 − 9) / (3 · 16 · 16) = 37.5/768.
        let star = local_g(&x, &w, Some(&[1.0; 4]), &NONE, &|_| {}).expect("valid");
        assert_relative_eq!(star.g[1], 6.0 / 16.0, max_relative = 1e-14);
        assert_relative_eq!(star.expected[1], 0.75, max_relative = 1e-14);
        assert_relative_eq!(star.variance[1], 37.5 / 768.0, max_relative = 1e-12);
        assert!(local_g(&[1.0, -1.0, 2.0, 3.0], &w, None, &NONE, &|_| {}).is_err());
        assert!(local_g(&[0.0; 4], &w, None, &NONE, &|_| {}).is_err());
    }

    #[test]
    fn flags() {
        assert_eq!(hot_cold(0.5, 0.3, 0.01, 0.05), Some("hot"));
        assert_eq!(hot_cold(0.1, 0.3, 0.01, 0.05), Some("cold"));
        assert_eq!(hot_cold(0.5, 0.3, 0.2, 0.05), Some("not significant"));
        assert_eq!(hot_cold(f64::NAN, 0.3, 0.2, 0.05), None);
    }
}
