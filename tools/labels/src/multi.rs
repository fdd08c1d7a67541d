//! Agreement across all labellers: Fleiss' kappa (Fleiss 1971, Psychological Bulletin 76,
//! 378–382) and Krippendorff's alpha with the ordinal metric (Krippendorff 2004, *Content
//! Analysis*, 2nd ed., ch. 11).

/// Fleiss' kappa of a subjects × classes table of counts: `counts[i][j]` labellers put subject
/// `i` in class `j`; every subject has the same number m ≥ 2 of labels. NaN when undefined.
pub fn fleiss_kappa(counts: &[Vec<u64>]) -> f64 {
    let Some(first) = counts.first() else {
        return f64::NAN;
    };
    let k = first.len();
    let m: u64 = first.iter().sum();
    if m < 2 || counts.iter().any(|r| r.iter().sum::<u64>() != m) {
        return f64::NAN;
    }
    let (n, mf) = (counts.len() as f64, m as f64);
    let mut p_j = vec![0.0; k];
    let mut p_bar = 0.0;
    for row in counts {
        let squares: f64 = row.iter().map(|&c| (c * c) as f64).sum();
        p_bar += (squares - mf) / (mf * (mf - 1.0));
        for (j, &c) in row.iter().enumerate() {
            p_j[j] += c as f64;
        }
    }
    p_bar /= n;
    let p_e: f64 = p_j.iter().map(|s| (s / (n * mf)).powi(2)).sum();
    (p_bar - p_e) / (1.0 - p_e)
}

/// Krippendorff's alpha, ordinal metric, of units × labellers values (`None` = missing), classes
/// `0..k` in their order. Units with fewer than two values are not pairable and are left out.
/// NaN when undefined (no pairable unit, or one class only).
pub fn krippendorff_ordinal(units: &[Vec<Option<usize>>], k: usize) -> f64 {
    // Coincidence matrix: each ordered pair of values within a unit, weighted 1 / (m_u − 1).
    let mut o = vec![vec![0.0; k]; k];
    for unit in units {
        let values: Vec<usize> = unit.iter().flatten().copied().collect();
        let m = values.len();
        if m < 2 {
            continue;
        }
        let share = 1.0 / (m as f64 - 1.0);
        for (a, &c) in values.iter().enumerate() {
            for (b, &d) in values.iter().enumerate() {
                if a != b {
                    o[c][d] += share;
                }
            }
        }
    }
    let n_c: Vec<f64> = o.iter().map(|r| r.iter().sum()).collect();
    let n: f64 = n_c.iter().sum();
    let delta = |c: usize, d: usize| {
        let (lo, hi) = (c.min(d), c.max(d));
        let between: f64 = n_c[lo..=hi].iter().sum();
        let x = between - (n_c[c] + n_c[d]) / 2.0;
        x * x
    };
    let (mut observed, mut expected) = (0.0, 0.0);
    for c in 0..k {
        for d in 0..k {
            let dd = delta(c, d);
            observed += o[c][d] * dd;
            expected += n_c[c] * n_c[d] * dd;
        }
    }
    1.0 - (n - 1.0) * observed / expected
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// The worked example of 10 subjects, 14 raters and 5 categories that accompanies most
    /// presentations of Fleiss' kappa (stated from memory): P̄ = 0.378, P_e = 0.213, κ = 0.210.
    #[test]
    fn the_worked_example_of_ten_subjects_and_fourteen_raters() {
        let table: Vec<Vec<u64>> = [
            [0, 0, 0, 0, 14],
            [0, 2, 6, 4, 2],
            [0, 0, 3, 5, 6],
            [0, 3, 9, 2, 0],
            [2, 2, 8, 1, 1],
            [7, 7, 0, 0, 0],
            [3, 2, 6, 3, 0],
            [2, 5, 3, 2, 2],
            [6, 5, 2, 1, 0],
            [0, 2, 2, 3, 7],
        ]
        .iter()
        .map(|r| r.to_vec())
        .collect();
        assert_relative_eq!(fleiss_kappa(&table), 0.210, epsilon = 0.0005);
    }

    /// Two labellers and no missing values: Fleiss' kappa is Scott's pi, and Krippendorff's
    /// alpha tends to it; both are 1 for perfect agreement.
    #[test]
    fn perfect_agreement_is_one() {
        let units: Vec<Vec<Option<usize>>> =
            (0..9).map(|i| vec![Some(i % 3), Some(i % 3)]).collect();
        assert_relative_eq!(krippendorff_ordinal(&units, 3), 1.0, epsilon = 1e-12);
        let table: Vec<Vec<u64>> = (0..9)
            .map(|i| (0..3).map(|j| if j == i % 3 { 2 } else { 0 }).collect())
            .collect();
        assert_relative_eq!(fleiss_kappa(&table), 1.0, epsilon = 1e-12);
    }

    /// Krippendorff's alpha by hand for 3 units of 2 values: (0,1), (1,1), (2,2). Coincidences:
    /// o01 = o10 = 1, o11 = 2, o22 = 2; n_0 = 1, n_1 = 3, n_2 = 2, n = 6. Ordinal δ²:
    /// δ01 = (1 + 3 − 2)² = 4, δ02 = (6 − 1.5)² = 20.25, δ12 = (5 − 2.5)² = 6.25.
    /// α = 1 − 5 · (2 · 4) / (2 · (1·3·4 + 1·2·20.25 + 3·2·6.25)) = 1 − 40 / 180.
    #[test]
    fn ordinal_alpha_by_hand() {
        let units = vec![
            vec![Some(0), Some(1)],
            vec![Some(1), Some(1)],
            vec![Some(2), Some(2), None],
            vec![Some(2), None, None],
        ];
        assert_relative_eq!(
            krippendorff_ordinal(&units, 3),
            1.0 - 40.0 / 180.0,
            epsilon = 1e-12
        );
    }
}
