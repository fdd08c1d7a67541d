//! Bandwidth selection: the 2-D normal-reference rule (Bowman & Azzalini 1997, *Applied
//! Smoothing Techniques for Data Analysis*, eq. 2.4) and likelihood cross-validation
//! (Habbema, Hermans & van den Broek 1974; Silverman 1986 §3.4.4) on binned data.

use stance_core::grid::Grid;

use crate::binning::{self, Points};
use crate::convolve::{radius_cells, Convolver};
use crate::kernel::Kernel;

/// Normal-reference Gaussian sigma for 2-D data: σ = σ̄ · n^(−1/6), with σ̄² = (s_x² + s_y²)/2
/// the mean of the two coordinate variances and n the effective sample size (Σw)²/Σw² (Kish).
///
/// This is Bowman & Azzalini's h_i = σ_i (4/((d+2)n))^(1/(d+4)) for d = 2, made isotropic by
/// pooling the two variances. `None` for fewer than two points or zero spread.
pub fn normal_reference_sigma(points: &Points<'_>, indices: &[usize]) -> Option<f64> {
    let (mut sw, mut sw2, mut mx, mut my) = (0.0, 0.0, 0.0, 0.0);
    for &i in indices {
        let w = points.weight(i);
        sw += w;
        sw2 += w * w;
        mx += w * points.x[i];
        my += w * points.y[i];
    }
    if indices.len() < 2 || sw <= 0.0 {
        return None;
    }
    mx /= sw;
    my /= sw;
    let mut v = 0.0;
    for &i in indices {
        let w = points.weight(i);
        v += w * ((points.x[i] - mx).powi(2) + (points.y[i] - my).powi(2));
    }
    let n_eff = sw * sw / sw2;
    // Unbiased weighted variance with reliability weights, pooled over the two axes.
    let pooled = v / (sw - sw2 / sw) / 2.0;
    let sigma = pooled.sqrt() * n_eff.powf(-1.0 / 6.0);
    (sigma.is_finite() && sigma > 0.0).then_some(sigma)
}

/// The bandwidth of `kernel` whose per-coordinate standard deviation equals the Gaussian
/// `sigma` (quartic h = √8 σ, Epanechnikov h = √6 σ): matched by variance, not by the canonical
/// bandwidth, a simple and documented approximation.
pub fn bandwidth_for_sigma(kernel: Kernel, sigma: f64) -> f64 {
    sigma / kernel.sd_per_bandwidth()
}

/// One cross-validation score.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct CvScore {
    /// Candidate bandwidth (m).
    pub bandwidth_m: f64,
    /// Σ w_i ln f̂₋ᵢ(x_i); −∞ when some point has no neighbour within the kernel's reach.
    pub log_likelihood: f64,
}

/// Likelihood cross-validation on simply binned data: each point is moved to its cell centre,
/// G = (binned weights) ∗ K_h by FFT, and the leave-one-out density at point i in cell k is
/// f̂₋ᵢ = (G_k − w_i K_h(0)) / (W − w_i); the score is Σ w_i ln f̂₋ᵢ. This is exact LCV for the
/// binned data. Points outside `grid` are ignored. Returns one score per candidate.
pub fn likelihood_cv(
    grid: &Grid,
    kernel: Kernel,
    points: &Points<'_>,
    indices: &[usize],
    candidates_m: &[f64],
) -> Vec<CvScore> {
    let h_max = candidates_m.iter().cloned().fold(0.0, f64::max);
    let convolver = Convolver::new(
        grid.rows,
        grid.cols,
        radius_cells(kernel, h_max, grid.cell_m),
    );
    let bins = binning::simple_bin(grid, points, indices);
    let field = convolver.field_spectrum(&bins);
    let cells: Vec<Option<usize>> = indices
        .iter()
        .map(|&i| binning::cell_of(grid, points.x[i], points.y[i]))
        .collect();
    let total: f64 = indices
        .iter()
        .zip(&cells)
        .filter(|(_, c)| c.is_some())
        .map(|(&i, _)| points.weight(i))
        .sum();
    candidates_m
        .iter()
        .map(|&h| {
            let spectrum = convolver.kernel_spectrum(kernel, h, grid.cell_m);
            let g = convolver.convolve_sum(&[(&field, &spectrum)]);
            let k0 = kernel.value(0.0, h);
            let mut score = 0.0;
            for (&i, cell) in indices.iter().zip(&cells) {
                let Some(k) = cell else { continue };
                let w = points.weight(i);
                if w == 0.0 {
                    continue;
                }
                let loo = (g[*k] - w * k0) / (total - w);
                // FFT round-off leaves ~1e-16·max where the true leave-one-out sum is 0.
                score += if loo > 1e-12 * k0 {
                    w * loo.ln()
                } else {
                    f64::NEG_INFINITY
                };
            }
            CvScore {
                bandwidth_m: h,
                log_likelihood: score,
            }
        })
        .collect()
}

/// `count` candidates spaced geometrically from `low_m` to `high_m`.
pub fn geometric_candidates(low_m: f64, high_m: f64, count: usize) -> Vec<f64> {
    let steps = (count.max(2) - 1) as f64;
    (0..count.max(2))
        .map(|k| low_m * (high_m / low_m).powf(k as f64 / steps))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand::{Rng, SeedableRng};

    #[test]
    fn normal_reference_on_a_hand_worked_square() {
        // Four corners of a 2 × 2 square: s_x² = s_y² = 4/3, n = 4 → σ = √(4/3)·4^(−1/6).
        let x = [-1.0, 1.0, -1.0, 1.0];
        let y = [-1.0, -1.0, 1.0, 1.0];
        let points = Points {
            x: &x,
            y: &y,
            weight: None,
        };
        let sigma = normal_reference_sigma(&points, &[0, 1, 2, 3]).expect("sigma");
        assert_relative_eq!(
            sigma,
            (4.0f64 / 3.0).sqrt() * 4f64.powf(-1.0 / 6.0),
            max_relative = 1e-14
        );
        assert!(normal_reference_sigma(&points, &[0]).is_none());
        assert_relative_eq!(
            bandwidth_for_sigma(Kernel::Quartic, 1.0),
            8f64.sqrt(),
            max_relative = 1e-15
        );
    }

    #[test]
    fn likelihood_cv_equals_brute_force_leave_one_out() {
        // 60 points snapped to cell centres; brute force sums K over all pairs j ≠ i directly.
        // Tolerance 1e-9 relative: FFT round-off in G (≈1e-15 of its maximum) divided by the
        // smallest leave-one-out density, with margin.
        let grid = Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 10.0,
            cols: 40,
            rows: 30,
        };
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let (mut x, mut y, mut w) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..60 {
            let (px, py): (f64, f64) = (
                rng.random_range(100.0..300.0),
                rng.random_range(80.0..220.0),
            );
            x.push(((px / 10.0).floor() + 0.5) * 10.0);
            y.push(((py / 10.0).floor() + 0.5) * 10.0);
            w.push(rng.random_range(0.5..2.0));
        }
        let points = Points {
            x: &x,
            y: &y,
            weight: Some(&w),
        };
        let idx: Vec<usize> = (0..60).collect();
        let candidates = [40.0, 60.0, 90.0];
        let scores = likelihood_cv(&grid, Kernel::Quartic, &points, &idx, &candidates);
        let total: f64 = w.iter().sum();
        for (score, &h) in scores.iter().zip(&candidates) {
            let mut brute = 0.0;
            for i in 0..60 {
                let mut s = 0.0;
                for j in 0..60 {
                    if j != i {
                        let d2 = (x[i] - x[j]).powi(2) + (y[i] - y[j]).powi(2);
                        s += w[j] * Kernel::Quartic.value(d2, h);
                    }
                }
                brute += w[i] * (s / (total - w[i])).ln();
            }
            if brute.is_finite() {
                assert_relative_eq!(score.log_likelihood, brute, max_relative = 1e-9);
            } else {
                assert_eq!(score.log_likelihood, f64::NEG_INFINITY);
            }
        }
        assert!(scores.iter().any(|s| s.log_likelihood.is_finite()));
    }
}
