//! Comparing two classes: difference, square-root difference, share and the log ratio of their
//! normalised densities, the log relative risk of Kelsall & Diggle (1995, *Bernoulli* 1(1/2),
//! 3–16).

/// The floor added to both normalised densities in the log ratio, as a fraction of the
/// maximum pooled density on the grid: ρ = ln((f_A + c)/(f_B + c)), c = 1e-4 · max f_pool.
/// It keeps ρ finite where a class has no points within reach, and pulls ρ towards 0 where
/// both densities are negligible (below 1/10,000 of the peak).
pub const LOG_RATIO_FLOOR_FRACTION: f64 = 1e-4;

/// Cells whose A + B intensity is below this fraction of its maximum get no share (nodata):
/// the share of almost nothing is noise.
pub const SHARE_FLOOR_FRACTION: f64 = 1e-3;

/// Sums of the two classes on the grid (Σ w K per m², NaN outside the mask) with their total
/// weights.
#[derive(Debug, Clone, Copy)]
pub struct Pair<'a> {
    /// Σ w K of class A.
    pub a: &'a [f64],
    /// Σ w K of class B.
    pub b: &'a [f64],
    /// Total weight of A.
    pub weight_a: f64,
    /// Total weight of B.
    pub weight_b: f64,
}

/// The floor c of [`LOG_RATIO_FLOOR_FRACTION`] for a pair: 1e-4 · max over cells of
/// (A + B)/(W_A + W_B).
pub fn log_ratio_floor(pair: &Pair<'_>) -> f64 {
    let total = pair.weight_a + pair.weight_b;
    let max = pair
        .a
        .iter()
        .zip(pair.b)
        .map(|(a, b)| (a + b) / total)
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    LOG_RATIO_FLOOR_FRACTION * max
}

/// ρ(x) = ln((A/W_A + c)/(B/W_B + c)) per cell (NaN stays NaN).
pub fn log_ratio(a: &[f64], b: &[f64], weight_a: f64, weight_b: f64, floor: f64) -> Vec<f64> {
    a.iter()
        .zip(b)
        .map(|(a, b)| ((a / weight_a + floor) / (b / weight_b + floor)).ln())
        .collect()
}

/// A − B.
pub fn diff(a: &[f64], b: &[f64]) -> Vec<f64> {
    a.iter().zip(b).map(|(a, b)| a - b).collect()
}

/// √A − √B (negative round-off from the FFT clipped to 0 before the root).
pub fn sqrt_diff(a: &[f64], b: &[f64]) -> Vec<f64> {
    a.iter()
        .zip(b)
        .map(|(a, b)| a.max(0.0).sqrt() - b.max(0.0).sqrt())
        .collect()
}

/// A/(A + B), NaN where A + B < [`SHARE_FLOOR_FRACTION`] · max(A + B).
pub fn share(a: &[f64], b: &[f64]) -> Vec<f64> {
    let max = a
        .iter()
        .zip(b)
        .map(|(a, b)| a + b)
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    let floor = SHARE_FLOOR_FRACTION * max;
    a.iter()
        .zip(b)
        .map(|(a, b)| {
            let s = a + b;
            if s >= floor && s > 0.0 {
                (a.max(0.0) / s).clamp(0.0, 1.0)
            } else {
                f64::NAN
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn hand_worked_comparisons() {
        let a = [4.0, 0.0, 1e-9, f64::NAN];
        let b = [1.0, 2.0, 0.0, 1.0];
        assert_eq!(diff(&a, &b)[..3], [3.0, -2.0, 1e-9]);
        assert_relative_eq!(sqrt_diff(&a, &b)[0], 1.0);
        let s = share(&a, &b);
        assert_relative_eq!(s[0], 0.8);
        assert_eq!(s[1], 0.0);
        assert!(
            s[2].is_nan(),
            "A + B below 1e-3 of the maximum has no share"
        );
        assert!(s[3].is_nan());
        // W_A = 2, W_B = 1: f_A = (2, 0), f_B = (1, 2); max pooled = 5/3 → c = 1e-4·5/3.
        let pair = Pair {
            a: &a[..2],
            b: &b[..2],
            weight_a: 2.0,
            weight_b: 1.0,
        };
        let c = log_ratio_floor(&pair);
        assert_relative_eq!(c, 1e-4 * 5.0 / 3.0, max_relative = 1e-15);
        let rho = log_ratio(&a[..2], &b[..2], 2.0, 1.0, c);
        assert_relative_eq!(rho[0], ((2.0 + c) / (1.0 + c)).ln(), max_relative = 1e-15);
        assert_relative_eq!(rho[1], (c / (2.0 + c)).ln(), max_relative = 1e-15);
    }
}
