//! Agreement between two labellers on K ordered classes: Cohen's kappa (Cohen 1960) and weighted
//! kappa (Cohen 1968), each with the large-sample standard error of Fleiss, Cohen & Everitt
//! (1969, Psychological Bulletin 72, 323–327). Unweighted kappa is weighted kappa with the
//! identity as agreement weights.

/// Agreement weights of weighted kappa.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weighting {
    /// w_ij = 1 if i = j, else 0 (Cohen 1960).
    None,
    /// w_ij = 1 − |i − j| / (K − 1).
    Linear,
    /// w_ij = 1 − (i − j)² / (K − 1)² (Fleiss & Cohen 1973).
    Quadratic,
}

impl Weighting {
    /// The agreement weight of cells `i`, `j` among `k` classes.
    pub fn weight(self, i: usize, j: usize, k: usize) -> f64 {
        let d = i.abs_diff(j) as f64;
        let span = (k.max(2) - 1) as f64;
        match self {
            Weighting::None => f64::from(u8::from(i == j)),
            Weighting::Linear => 1.0 - d / span,
            Weighting::Quadratic => 1.0 - (d * d) / (span * span),
        }
    }
}

/// Kappa with its standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kappa {
    /// The estimate (NaN when chance agreement is 1: one class only).
    pub kappa: f64,
    /// Large-sample standard error (Fleiss, Cohen & Everitt 1969).
    pub se: f64,
    /// Observed (weighted) agreement.
    pub observed: f64,
    /// (Weighted) agreement expected by chance.
    pub expected: f64,
    /// Records compared.
    pub n: u64,
}

/// The K × K table of two label vectors (`a[r]` row, `b[r]` column), classes `0..k`.
pub fn table(a: &[usize], b: &[usize], k: usize) -> Vec<Vec<u64>> {
    let mut t = vec![vec![0u64; k]; k];
    for (&i, &j) in a.iter().zip(b) {
        t[i][j] += 1;
    }
    t
}

/// Kappa of a K × K table of counts (rows: first labeller) with agreement weights `w`.
pub fn kappa(counts: &[Vec<u64>], w: Weighting) -> Kappa {
    let k = counts.len();
    let n: u64 = counts.iter().flatten().sum();
    let nf = n as f64;
    let p: Vec<Vec<f64>> = counts
        .iter()
        .map(|r| r.iter().map(|&c| c as f64 / nf).collect())
        .collect();
    let rows: Vec<f64> = p.iter().map(|r| r.iter().sum()).collect();
    let cols: Vec<f64> = (0..k).map(|j| p.iter().map(|r| r[j]).sum()).collect();
    let wt = |i, j| w.weight(i, j, k);
    let (mut observed, mut expected) = (0.0, 0.0);
    for i in 0..k {
        for j in 0..k {
            observed += wt(i, j) * p[i][j];
            expected += wt(i, j) * rows[i] * cols[j];
        }
    }
    let kappa = (observed - expected) / (1.0 - expected);
    // Fleiss, Cohen & Everitt (1969), eq. for var(κ_w) under the alternative.
    let row_w: Vec<f64> = (0..k)
        .map(|i| (0..k).map(|j| cols[j] * wt(i, j)).sum())
        .collect();
    let col_w: Vec<f64> = (0..k)
        .map(|j| (0..k).map(|i| rows[i] * wt(i, j)).sum())
        .collect();
    let mut sum = 0.0;
    for i in 0..k {
        for j in 0..k {
            let d = wt(i, j) - (row_w[i] + col_w[j]) * (1.0 - kappa);
            sum += p[i][j] * d * d;
        }
    }
    let last = kappa - expected * (1.0 - kappa);
    let variance = (sum - last * last) / (nf * (1.0 - expected).powi(2));
    Kappa {
        kappa,
        se: variance.max(0.0).sqrt(),
        observed,
        expected,
        n,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// The classic 2 × 2 example (stated from memory, as reproduced in many textbooks and the
    /// encyclopaedia entry on Cohen's kappa): two readers of 50 proposals, yes/yes 20, yes/no 5,
    /// no/yes 10, no/no 15 → p_o = 0.7, p_e = 0.5, κ = 0.4.
    #[test]
    fn the_classic_two_by_two_example() {
        let k = kappa(&[vec![20, 5], vec![10, 15]], Weighting::None);
        assert_relative_eq!(k.observed, 0.7, epsilon = 1e-12);
        assert_relative_eq!(k.expected, 0.5, epsilon = 1e-12);
        assert_relative_eq!(k.kappa, 0.4, epsilon = 1e-12);
        // Two classes: linear and quadratic weights are the identity.
        let l = kappa(&[vec![20, 5], vec![10, 15]], Weighting::Quadratic);
        assert_relative_eq!(l.kappa, 0.4, epsilon = 1e-12);
        assert_relative_eq!(l.se, k.se, epsilon = 1e-12);
    }

    /// The 2 × 2 standard error of Fleiss, Cohen & Everitt (1969), written out by hand:
    /// var = [Σ p_ii (1 − (p_i. + p_.i)(1 − κ))² + (1 − κ)² Σ_{i≠j} p_ij (p_.i + p_j.)²
    ///        − (κ − p_e (1 − κ))²] / (n (1 − p_e)²).
    #[test]
    fn the_standard_error_is_the_closed_form() {
        let (n, k, pe): (f64, f64, f64) = (50.0, 0.4, 0.5);
        let (p11, p12, p21, p22): (f64, f64, f64, f64) = (0.4, 0.1, 0.2, 0.3);
        let (r1, r2, c1, c2): (f64, f64, f64, f64) = (0.5, 0.5, 0.6, 0.4);
        let diag = p11 * (1.0 - (r1 + c1) * (1.0 - k)).powi(2)
            + p22 * (1.0 - (r2 + c2) * (1.0 - k)).powi(2);
        let off = (1.0 - k) * (1.0 - k) * (p12 * (c1 + r2).powi(2) + p21 * (c2 + r1).powi(2));
        let var = (diag + off - (k - pe * (1.0 - k)).powi(2)) / (n * (1.0 - pe) * (1.0 - pe));
        let got = kappa(&[vec![20, 5], vec![10, 15]], Weighting::None);
        assert_relative_eq!(got.se, var.sqrt(), epsilon = 1e-12);
    }

    #[test]
    fn perfect_agreement_is_one_with_zero_error() {
        let got = kappa(
            &[vec![3, 0, 0], vec![0, 4, 0], vec![0, 0, 5]],
            Weighting::Linear,
        );
        assert_relative_eq!(got.kappa, 1.0, epsilon = 1e-12);
        assert!(got.se.abs() < 1e-9);
    }

    #[test]
    fn weights_of_three_ordered_classes() {
        assert_relative_eq!(Weighting::Linear.weight(0, 2, 3), 0.0);
        assert_relative_eq!(Weighting::Linear.weight(0, 1, 3), 0.5);
        assert_relative_eq!(Weighting::Quadratic.weight(0, 1, 3), 0.75);
        assert_relative_eq!(Weighting::None.weight(1, 1, 3), 1.0);
    }
}
