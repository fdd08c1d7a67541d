//! A labeller against the hand-coded reference: the confusion matrix (rows: reference class,
//! columns: the labeller's class), per-class precision, recall and F1, with Wilson score
//! intervals for precision and recall (Wilson 1927, JASA 22, 209–212).

/// A proportion with its Wilson score interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Proportion {
    /// successes / trials (NaN with no trials).
    pub estimate: f64,
    /// Lower bound of the interval.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
    /// Trials.
    pub trials: u64,
}

/// The Wilson score interval of `successes` in `trials` at normal quantile `z`.
pub fn wilson(successes: u64, trials: u64, z: f64) -> Proportion {
    if trials == 0 {
        return Proportion {
            estimate: f64::NAN,
            lower: f64::NAN,
            upper: f64::NAN,
            trials,
        };
    }
    let n = trials as f64;
    let p = successes as f64 / n;
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z / (1.0 + z2 / n) * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    Proportion {
        estimate: p,
        lower: (centre - half).max(0.0),
        upper: (centre + half).min(1.0),
        trials,
    }
}

/// Precision, recall and F1 of one class.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClassScores {
    /// Share of the records labelled with the class that the reference puts in it.
    pub precision: Proportion,
    /// Share of the reference's records of the class that the labeller finds.
    pub recall: Proportion,
    /// Harmonic mean of precision and recall (NaN when undefined).
    pub f1: f64,
}

/// A labeller's scores on the reference subset.
#[derive(Debug, Clone, PartialEq)]
pub struct Scores {
    /// Counts: `matrix[reference][label]`.
    pub matrix: Vec<Vec<u64>>,
    /// Per class.
    pub classes: Vec<ClassScores>,
    /// Share of records labelled as the reference labels them.
    pub accuracy: Proportion,
}

/// Scores of `labels` against `reference` (classes `0..k`) at normal quantile `z`.
pub fn scores(reference: &[usize], labels: &[usize], k: usize, z: f64) -> Scores {
    let matrix = crate::kappa::table(reference, labels, k);
    let classes = (0..k)
        .map(|c| {
            let labelled: u64 = matrix.iter().map(|r| r[c]).sum();
            let actual: u64 = matrix[c].iter().sum();
            let precision = wilson(matrix[c][c], labelled, z);
            let recall = wilson(matrix[c][c], actual, z);
            let (p, r) = (precision.estimate, recall.estimate);
            ClassScores {
                precision,
                recall,
                f1: 2.0 * p * r / (p + r),
            }
        })
        .collect();
    let correct: u64 = (0..k).map(|c| matrix[c][c]).sum();
    Scores {
        accuracy: wilson(correct, reference.len() as u64, z),
        matrix,
        classes,
    }
}

/// The row-normalised matrix: `P[t][l]` = share of reference class `t` labelled `l`.
pub fn row_shares(matrix: &[Vec<u64>]) -> Vec<Vec<f64>> {
    matrix
        .iter()
        .map(|r| {
            let total: u64 = r.iter().sum();
            r.iter().map(|&c| c as f64 / total as f64).collect()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Wilson (1927) interval, 95 %, for 8 of 10, written out from the formula by hand:
    /// centre (0.8 + 1.92/10) / 1.384 = 0.716763, half 1.96/1.384 · √(0.016 + 0.0096040)
    /// = 0.226750 → [0.4902, 0.9433] (the values usually tabulated for this case).
    #[test]
    fn wilson_interval_of_eight_in_ten() {
        let z = stance_core::normal::quantile(0.975);
        assert_relative_eq!(z, 1.959_964, epsilon = 1e-5);
        let got = wilson(8, 10, z);
        assert_relative_eq!(got.lower, 0.4902, epsilon = 1e-4);
        assert_relative_eq!(got.upper, 0.9433, epsilon = 1e-4);
    }

    #[test]
    fn scores_of_a_small_table() {
        // reference: 0 0 0 1 1 2 ; labels: 0 0 1 1 1 2
        let got = scores(&[0, 0, 0, 1, 1, 2], &[0, 0, 1, 1, 1, 2], 3, 1.96);
        assert_eq!(
            got.matrix,
            vec![vec![2, 1, 0], vec![0, 2, 0], vec![0, 0, 1]]
        );
        assert_relative_eq!(got.classes[0].precision.estimate, 1.0);
        assert_relative_eq!(got.classes[0].recall.estimate, 2.0 / 3.0);
        assert_relative_eq!(got.classes[1].precision.estimate, 2.0 / 3.0);
        assert_relative_eq!(got.classes[0].f1, 0.8);
        assert_relative_eq!(got.accuracy.estimate, 5.0 / 6.0);
    }
}
