//! The statistics of a run, from the class indices of the labels (pure: plain vectors in and
//! out). Classes are 0..K in their order (oppose, neutral, support).

use crate::confusion::{self, Scores};
use crate::consensus::{self, Calibration, Consensus};
use crate::correct::{self, Corrected, Misclassification};
use crate::kappa::{self, Kappa, Weighting};
use crate::multi;

/// Agreement of one pair of labellers.
#[derive(Debug, Clone, PartialEq)]
pub struct Pair {
    /// Indices of the two labellers.
    pub a: usize,
    /// Second labeller.
    pub b: usize,
    /// Cohen's kappa.
    pub kappa: Kappa,
    /// Weighted kappa.
    pub weighted: Kappa,
    /// The K × K table.
    pub table: Vec<Vec<u64>>,
}

/// Agreement across labellers.
#[derive(Debug, Clone, PartialEq)]
pub struct Agreement {
    /// Every pair.
    pub pairs: Vec<Pair>,
    /// Fleiss' kappa.
    pub fleiss: f64,
    /// Krippendorff's ordinal alpha.
    pub alpha: f64,
    /// Share of records where every labeller agrees.
    pub unanimous: f64,
}

/// Pairwise and overall agreement of `labels[labeller][record]` on `k` classes.
pub fn agreement(labels: &[Vec<usize>], k: usize, weighting: Weighting) -> Agreement {
    let n = labels.first().map_or(0, Vec::len);
    let mut pairs = Vec::new();
    for a in 0..labels.len() {
        for b in a + 1..labels.len() {
            let table = kappa::table(&labels[a], &labels[b], k);
            pairs.push(Pair {
                a,
                b,
                kappa: kappa::kappa(&table, Weighting::None),
                weighted: kappa::kappa(&table, weighting),
                table,
            });
        }
    }
    let rows: Vec<Vec<u64>> = (0..n)
        .map(|r| {
            let mut row = vec![0u64; k];
            labels.iter().for_each(|l| row[l[r]] += 1);
            row
        })
        .collect();
    let units: Vec<Vec<Option<usize>>> = (0..n)
        .map(|r| labels.iter().map(|l| Some(l[r])).collect())
        .collect();
    let unanimous = rows
        .iter()
        .filter(|r| r.contains(&(labels.len() as u64)))
        .count();
    Agreement {
        pairs,
        fleiss: multi::fleiss_kappa(&rows),
        alpha: multi::krippendorff_ordinal(&units, k),
        unanimous: unanimous as f64 / n as f64,
    }
}

/// Each labeller against the reference (hand-coded records only).
pub fn scores(labels: &[Vec<usize>], reference: &[Option<usize>], k: usize, z: f64) -> Vec<Scores> {
    let coded: Vec<usize> = (0..reference.len())
        .filter(|&r| reference[r].is_some())
        .collect();
    let truth: Vec<usize> = coded.iter().filter_map(|&r| reference[r]).collect();
    labels
        .iter()
        .map(|l| {
            let given: Vec<usize> = coded.iter().map(|&r| l[r]).collect();
            confusion::scores(&truth, &given, k, z)
        })
        .collect()
}

/// The consensus of every record.
pub fn consensus_all(labels: &[Vec<usize>], k: usize, scores: Option<&[Scores]>) -> Vec<Consensus> {
    let calibration = scores.map(|s| {
        let matrices: Vec<Vec<Vec<u64>>> = s.iter().map(|s| s.matrix.clone()).collect();
        Calibration::new(&matrices)
    });
    let n = labels.first().map_or(0, Vec::len);
    (0..n)
        .map(|r| {
            let given: Vec<usize> = labels.iter().map(|l| l[r]).collect();
            consensus::consensus(&given, k, calibration.as_ref())
        })
        .collect()
}

/// Agreement and corrected shares of one area.
#[derive(Debug, Clone, PartialEq)]
pub struct AreaResult {
    /// Records in the area.
    pub records: u64,
    /// Share of them where every labeller agrees (None without records).
    pub unanimous: Option<f64>,
    /// Cohen's kappa per pair (None below the minimum of records, or undefined).
    pub kappa: Vec<Option<f64>>,
    /// Corrected shares of the corrected labeller.
    pub corrected: Option<Corrected>,
}

/// What the per-area statistics need.
#[derive(Debug, Clone, Copy)]
pub struct AreaInputs<'a> {
    /// `labels[labeller][record]`.
    pub labels: &'a [Vec<usize>],
    /// Area of each record.
    pub area_of: &'a [Option<usize>],
    /// Number of areas.
    pub areas: usize,
    /// Classes.
    pub k: usize,
    /// Fewest records for a kappa.
    pub min_records: u64,
    /// The labeller corrected and its misclassification.
    pub correct: Option<(usize, &'a Misclassification)>,
}

/// The statistics of every area.
pub fn per_area(input: AreaInputs) -> Vec<AreaResult> {
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); input.areas];
    for (r, a) in input.area_of.iter().enumerate() {
        if let Some(a) = a {
            members[*a].push(r);
        }
    }
    members.iter().map(|rows| one_area(&input, rows)).collect()
}

fn one_area(input: &AreaInputs, rows: &[usize]) -> AreaResult {
    let labels: Vec<Vec<usize>> = input
        .labels
        .iter()
        .map(|l| rows.iter().map(|&r| l[r]).collect())
        .collect();
    let n = rows.len() as u64;
    let m = labels.len();
    let unanimous = rows
        .iter()
        .enumerate()
        .filter(|(i, _)| labels.iter().all(|l| l[*i] == labels[0][*i]))
        .count();
    let mut kappa = Vec::new();
    for a in 0..m {
        for b in a + 1..m {
            let value = (n >= input.min_records).then(|| {
                kappa::kappa(
                    &kappa::table(&labels[a], &labels[b], input.k),
                    Weighting::None,
                )
                .kappa
            });
            kappa.push(value.filter(|v| v.is_finite()));
        }
    }
    let corrected = input.correct.and_then(|(j, mis)| {
        let mut counts = vec![0u64; input.k];
        labels[j].iter().for_each(|&c| counts[c] += 1);
        correct::correct(&counts, mis)
    });
    AreaResult {
        records: n,
        unanimous: (n > 0).then(|| unanimous as f64 / n as f64),
        kappa,
        corrected,
    }
}
