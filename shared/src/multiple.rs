//! Multiple-testing adjustments of p-values, each as its paper defines it: Bonferroni, Holm
//! (1979, step-down), Benjamini & Hochberg (1995, step-up false discovery rate) and Benjamini &
//! Yekutieli (2001, under any dependence).

/// How p-values are adjusted for the many tests of a map (also the command-line choice).
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Adjustment {
    /// no adjustment.
    None,
    /// min(1, m·p), family-wise error (Bonferroni 1936).
    Bonferroni,
    /// Holm (1979) step-down, family-wise error, never larger than Bonferroni.
    Holm,
    /// Benjamini & Hochberg (1995) step-up false discovery rate.
    BenjaminiHochberg,
    /// Benjamini & Yekutieli (2001) false discovery rate under any dependence.
    BenjaminiYekutieli,
}

/// Adjusted p-values in the input order; NaN entries stay NaN and do not count toward m.
///
/// For sorted p(1) ≤ … ≤ p(m): BH p̃(i) = min over j ≥ i of min(1, m/j · p(j)); BY multiplies
/// by Σ 1/k; Holm p̃(i) = max over j ≤ i of min(1, (m − j + 1) · p(j)).
pub fn adjust(p: &[f64], method: Adjustment) -> Vec<f64> {
    let mut order: Vec<usize> = (0..p.len()).filter(|&i| !p[i].is_nan()).collect();
    let m = order.len();
    let mut out = p.to_vec();
    if m == 0 || method == Adjustment::None {
        return out;
    }
    if method == Adjustment::Bonferroni {
        for &i in &order {
            out[i] = (p[i] * m as f64).min(1.0);
        }
        return out;
    }
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    if method == Adjustment::Holm {
        let mut running = 0.0f64;
        for (rank, &i) in order.iter().enumerate() {
            running = running.max(((m - rank) as f64 * p[i]).min(1.0));
            out[i] = running;
        }
        return out;
    }
    let harmonic: f64 = if method == Adjustment::BenjaminiYekutieli {
        (1..=m).map(|i| 1.0 / i as f64).sum()
    } else {
        1.0
    };
    let mut running = f64::INFINITY;
    for (rank, &i) in order.iter().enumerate().rev() {
        let value = (harmonic * m as f64 / (rank + 1) as f64 * p[i]).min(1.0);
        running = running.min(value);
        out[i] = running;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    // Reference: R 4.2 `p.adjust(c(0.01, 0.04, 0.03, 0.005, 0.2), method)`, values worked by
    // hand from the definitions (m = 5; sorted 0.005, 0.01, 0.03, 0.04, 0.2):
    // BH: 0.025, 0.025, 0.05, 0.05, 0.2 → in input order 0.025, 0.05, 0.05, 0.025, 0.2.
    const P: [f64; 5] = [0.01, 0.04, 0.03, 0.005, 0.2];

    #[test]
    fn benjamini_hochberg_by_hand() {
        let got = adjust(&P, Adjustment::BenjaminiHochberg);
        for (g, e) in got.iter().zip([0.025, 0.05, 0.05, 0.025, 0.2]) {
            assert_relative_eq!(*g, e, max_relative = 1e-12);
        }
    }

    #[test]
    fn benjamini_yekutieli_is_bh_times_the_harmonic_sum() {
        let h = 1.0 + 0.5 + 1.0 / 3.0 + 0.25 + 0.2; // 2.283333…
        let got = adjust(&P, Adjustment::BenjaminiYekutieli);
        for (g, e) in got.iter().zip([0.025, 0.05, 0.05, 0.025, 0.2]) {
            assert_relative_eq!(*g, f64::min(e * h, 1.0), max_relative = 1e-12);
        }
    }

    #[test]
    fn holm_step_down_by_hand() {
        // Holm (1979): sorted 0.005, 0.01, 0.03, 0.04, 0.2 times 5, 4, 3, 2, 1 = 0.025, 0.04,
        // 0.09, 0.08, 0.2; running maximum 0.025, 0.04, 0.09, 0.09, 0.2; in input order:
        let got = adjust(&P, Adjustment::Holm);
        for (g, e) in got.iter().zip([0.04, 0.09, 0.09, 0.025, 0.2]) {
            assert_relative_eq!(*g, e, max_relative = 1e-12);
        }
    }

    #[test]
    fn bonferroni_none_and_nan() {
        assert_eq!(
            adjust(&P, Adjustment::Bonferroni),
            vec![0.05, 0.2, 0.15, 0.025, 1.0]
        );
        assert_eq!(adjust(&P, Adjustment::None), P.to_vec());
        let with_nan = adjust(&[0.01, f64::NAN, 0.02], Adjustment::Bonferroni);
        assert_eq!(with_nan[0], 0.02);
        assert!(with_nan[1].is_nan());
        assert_eq!(with_nan[2], 0.04);
    }
}
