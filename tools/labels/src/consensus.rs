//! The consensus label of a record from several labellers, and its confidence.
//!
//! **Rule.** The class most labellers give (majority, or plurality with three or more classes
//! present). A tie between classes is broken by the labellers' accuracy on the reference subset:
//! the tied class whose voters have the larger summed accuracy wins. Without a reference subset,
//! or when those sums tie too (within 1e-12), the record is *undecided* (no consensus class).
//!
//! **Confidence.** `share`: the share of labellers giving the consensus class. With a reference
//! subset, also `posterior`: the probability of the consensus class given all the labels under
//! the class-conditional independence model of Dawid & Skene (1979, Applied Statistics 28,
//! 20–28), with each labeller's confusion matrix and the class shares estimated from the reference
//! subset (half a count added to every cell so no label is impossible).

/// The consensus of one record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Consensus {
    /// The class, or None (undecided).
    pub class: Option<usize>,
    /// Labellers giving the most common class.
    pub votes: usize,
    /// votes / labellers.
    pub share: f64,
    /// Posterior probability of `class` (NaN without a reference subset or when undecided).
    pub posterior: f64,
    /// Every labeller gives the same class.
    pub unanimous: bool,
}

/// What the reference subset gives the consensus.
#[derive(Debug, Clone, PartialEq)]
pub struct Calibration {
    /// Accuracy of each labeller on the reference subset.
    pub accuracy: Vec<f64>,
    /// `ln P(label l | class t)` per labeller: `[labeller][t][l]`.
    pub log_confusion: Vec<Vec<Vec<f64>>>,
    /// `ln` of the class shares of the reference subset.
    pub log_prior: Vec<f64>,
}

impl Calibration {
    /// From each labeller's confusion counts on the reference (`[labeller][t][l]`), half a count
    /// added to every cell and to every class of the prior.
    pub fn new(matrices: &[Vec<Vec<u64>>]) -> Self {
        let k = matrices.first().map_or(0, Vec::len);
        let accuracy = matrices
            .iter()
            .map(|m| {
                let total: u64 = m.iter().flatten().sum();
                (0..k).map(|c| m[c][c]).sum::<u64>() as f64 / total as f64
            })
            .collect();
        let log_confusion = matrices
            .iter()
            .map(|m| {
                m.iter()
                    .map(|row| {
                        let total = row.iter().sum::<u64>() as f64 + 0.5 * k as f64;
                        row.iter()
                            .map(|&c| ((c as f64 + 0.5) / total).ln())
                            .collect()
                    })
                    .collect()
            })
            .collect();
        let prior_counts: Vec<f64> = matrices.first().map_or_else(Vec::new, |m| {
            m.iter()
                .map(|r| r.iter().sum::<u64>() as f64 + 0.5)
                .collect()
        });
        let total: f64 = prior_counts.iter().sum();
        Calibration {
            accuracy,
            log_confusion,
            log_prior: prior_counts.iter().map(|c| (c / total).ln()).collect(),
        }
    }

    /// Posterior probabilities of the classes given one record's labels.
    pub fn posterior(&self, labels: &[usize]) -> Vec<f64> {
        let log: Vec<f64> = (0..self.log_prior.len())
            .map(|t| {
                self.log_prior[t]
                    + labels
                        .iter()
                        .enumerate()
                        .map(|(j, &l)| self.log_confusion[j][t][l])
                        .sum::<f64>()
            })
            .collect();
        let top = log.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let e: Vec<f64> = log.iter().map(|v| (v - top).exp()).collect();
        let total: f64 = e.iter().sum();
        e.iter().map(|v| v / total).collect()
    }
}

/// The consensus of one record's `labels` (one per labeller, classes `0..k`).
pub fn consensus(labels: &[usize], k: usize, calibration: Option<&Calibration>) -> Consensus {
    let mut votes = vec![0usize; k];
    for &l in labels {
        votes[l] += 1;
    }
    let most = votes.iter().copied().max().unwrap_or(0);
    let tied: Vec<usize> = (0..k).filter(|&c| votes[c] == most).collect();
    let class = match (tied.as_slice(), calibration) {
        ([only], _) => Some(*only),
        (_, Some(cal)) => break_tie(labels, &tied, &cal.accuracy),
        _ => None,
    };
    let posterior = match (class, calibration) {
        (Some(c), Some(cal)) => cal.posterior(labels)[c],
        _ => f64::NAN,
    };
    Consensus {
        class,
        votes: most,
        share: most as f64 / labels.len() as f64,
        posterior,
        unanimous: most == labels.len(),
    }
}

/// The tied class whose voters have the largest summed accuracy; None if that ties too.
fn break_tie(labels: &[usize], tied: &[usize], accuracy: &[f64]) -> Option<usize> {
    let weight = |c: usize| -> f64 {
        labels
            .iter()
            .zip(accuracy)
            .filter(|(&l, _)| l == c)
            .map(|(_, a)| a)
            .sum()
    };
    let mut ranked: Vec<(usize, f64)> = tied.iter().map(|&c| (c, weight(c))).collect();
    ranked.sort_by(|a, b| b.1.total_cmp(&a.1));
    match ranked.as_slice() {
        [(c, w), (_, v), ..] if w - v > 1e-12 => Some(*c),
        [(c, _)] => Some(*c),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn majority_and_unanimity() {
        let got = consensus(&[2, 2, 0], 3, None);
        assert_eq!(got.class, Some(2));
        assert_eq!(got.votes, 2);
        assert!(!got.unanimous);
        assert!(consensus(&[1, 1], 3, None).unanimous);
    }

    #[test]
    fn a_tie_is_undecided_without_reference_and_goes_to_the_more_accurate_with_it() {
        assert_eq!(consensus(&[0, 2], 3, None).class, None);
        // Labeller 1 (label 2) is right 9 times in 10, labeller 0 (label 0) 5 in 10.
        let good = vec![vec![3, 0, 0], vec![0, 3, 0], vec![0, 1, 3]];
        let poor = vec![vec![2, 1, 0], vec![1, 1, 1], vec![1, 1, 2]];
        let cal = Calibration::new(&[poor, good]);
        let got = consensus(&[0, 2], 3, Some(&cal));
        assert_eq!(got.class, Some(2));
        assert!(got.posterior > 0.5 && got.posterior < 1.0);
        let total: f64 = cal.posterior(&[0, 2]).iter().sum();
        assert_relative_eq!(total, 1.0, epsilon = 1e-12);
    }

    #[test]
    fn equal_accuracies_leave_a_tie_undecided() {
        let m = vec![vec![2, 0, 0], vec![0, 2, 0], vec![0, 0, 2]];
        let cal = Calibration::new(&[m.clone(), m]);
        assert_eq!(consensus(&[0, 2], 3, Some(&cal)).class, None);
    }
}
