//! Spatial segregation of the stance classes (Diggle, Zheng & Durr 2005, *Applied Statistics*
//! 54(3), 645–658): kernel estimates of the type probabilities p_k(x) = λ_k(x)/Σ_j λ_j(x) with
//! one bandwidth for every class, the bandwidth by likelihood cross-validation of the type
//! labels, the Monte Carlo test of spatially constant type probabilities by random relabelling,
//! and per-cell pointwise p-values for each class.
//!
//! What is implemented (written from memory of the paper):
//! - p̂_k(x) = Σ_i w_i K_h(x − x_i) 1[y_i = k] / Σ_i w_i K_h(x − x_i) on the grid's cell centres.
//!   With one bandwidth for every class, an edge correction divides numerator and denominator
//!   alike and cancels, so none is applied.
//! - Cross-validation: h maximising Σ_i w_i ln p̂₋ᵢ(y_i | x_i), the leave-one-out probability
//!   of each point's own label ([`type_cv`]).
//! - Test statistic T = Σ_x Σ_k (p̂_k(x) − p̄_k)² over the cell centres x in the data's region,
//!   p̄_k the (weighted) share of class k; the region is the cells (inside the mask, if any)
//!   where the pooled kernel intensity is at least [`REGION_FLOOR_FRACTION`] of its maximum.
//!   p = (1 + #{T* ≥ T})/(R + 1) over R random relabellings (the labels permuted among the
//!   points, locations fixed).
//! - Pointwise: for each class k and cell x in the region, p = (1 + #{p̂*_k(x) ≥ p̂_k(x)})/(R + 1),
//!   small where class k is more likely than the relabellings make it.
//!
//! [`loo_statistic_at_points`] is the variant summed over the data points with leave-one-out
//! estimates, for comparison with other implementations of the test.

use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::seq::SliceRandom;
use rayon::prelude::*;
use stance_core::grid::Grid;
use stance_core::montecarlo::replicate_rng;

use crate::bandwidth::CvScore;
use crate::binning::{self, Points};
use crate::convolve::{radius_cells, Convolver};
use crate::estimate::Estimator;
use crate::kernel::Kernel;
use crate::tolerance::TIE_TOLERANCE;

/// Number of classes (oppose, neutral, support).
pub const CLASSES: usize = 3;

/// Cells whose pooled intensity is below this fraction of its maximum lie outside the data's
/// region: the type probabilities there rest on almost no points.
pub const REGION_FLOOR_FRACTION: f64 = 1e-3;

/// Cells whose pooled sum is below this fraction of its maximum get no probability (NaN): FFT
/// round-off (~1e-16 of the peak) would otherwise decide the ratio far from every point.
pub const DEFINED_FLOOR_FRACTION: f64 = 1e-10;

/// p̂_k = S_k / Σ_j S_j per cell from the per-class kernel sums `sums[k]` (negative round-off
/// clipped to 0 first, so the classes sum to 1); NaN where the pooled sum is not finite
/// (outside the mask) or below [`DEFINED_FLOOR_FRACTION`] of its maximum.
pub fn probabilities(sums: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let cells = sums.first().map_or(0, Vec::len);
    let pooled: Vec<f64> = (0..cells)
        .map(|c| sums.iter().map(|s| s[c].max(0.0)).sum::<f64>())
        .collect();
    let nan_cells: Vec<bool> = (0..cells)
        .map(|c| sums.iter().any(|s| !s[c].is_finite()))
        .collect();
    let max = pooled
        .iter()
        .zip(&nan_cells)
        .filter(|(_, bad)| !**bad)
        .map(|(t, _)| *t)
        .fold(0.0, f64::max);
    let floor = (DEFINED_FLOOR_FRACTION * max).max(f64::MIN_POSITIVE);
    sums.iter()
        .map(|s| {
            (0..cells)
                .map(|c| {
                    if nan_cells[c] || pooled[c] < floor {
                        f64::NAN
                    } else {
                        s[c].max(0.0) / pooled[c]
                    }
                })
                .collect()
        })
        .collect()
}

/// The data's region: cells whose pooled sum is finite and ≥ [`REGION_FLOOR_FRACTION`] of its
/// maximum.
pub fn region(pooled: &[f64]) -> Vec<bool> {
    let max = pooled
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    pooled
        .iter()
        .map(|v| v.is_finite() && max > 0.0 && *v >= REGION_FLOOR_FRACTION * max)
        .collect()
}

/// Records' worth of kernel weight a cell needs for its type probabilities to be written: a
/// share estimated from fewer records than this is noise (our rule, stated in the summary).
pub const MIN_RECORDS_NEAR: f64 = 5.0;

/// Cells whose pooled kernel sum is at least [`MIN_RECORDS_NEAR`] times the kernel's peak
/// `peak` (K_h(0), per m²): as if five records sat on the cell centre.
pub fn supported(pooled: &[f64], peak: f64) -> Vec<bool> {
    pooled
        .iter()
        .map(|v| v.is_finite() && *v >= MIN_RECORDS_NEAR * peak)
        .collect()
}

/// T = Σ_{x in region} Σ_k (p̂_k(x) − p̄_k)².
pub fn statistic(probabilities: &[Vec<f64>], mean: &[f64], region: &[bool]) -> f64 {
    let mut t = 0.0;
    for (p, m) in probabilities.iter().zip(mean) {
        for (v, inside) in p.iter().zip(region) {
            if *inside {
                t += (v - m) * (v - m);
            }
        }
    }
    t
}

/// Likelihood cross-validation of the type labels on simply binned data: each point moves to
/// its cell centre, G_k = (binned class-k weights) ∗ K_h by FFT, and the leave-one-out
/// probability of point i's own class y_i in cell c is
/// p̂₋ᵢ = (G_{y_i}(c) − w_i K_h(0)) / (Σ_k G_k(c) − w_i K_h(0)); the score is Σ w_i ln p̂₋ᵢ
/// (−∞ when some point has no other point of its class within reach; points with no other
/// point at all within reach are left out). Exact for points on cell centres.
pub fn type_cv(
    grid: &Grid,
    kernel: Kernel,
    points: &Points<'_>,
    by_class: &[Vec<usize>],
    candidates_m: &[f64],
) -> Vec<CvScore> {
    let h_max = candidates_m.iter().copied().fold(0.0, f64::max);
    let convolver = Convolver::new(
        grid.rows,
        grid.cols,
        radius_cells(kernel, h_max, grid.cell_m),
    );
    let fields: Vec<_> = by_class
        .iter()
        .map(|idx| convolver.field_spectrum(&binning::simple_bin(grid, points, idx)))
        .collect();
    let cells: Vec<Vec<Option<usize>>> = by_class
        .iter()
        .map(|idx| {
            idx.iter()
                .map(|&i| binning::cell_of(grid, points.x[i], points.y[i]))
                .collect()
        })
        .collect();
    candidates_m
        .iter()
        .map(|&h| {
            let spectrum = convolver.kernel_spectrum(kernel, h, grid.cell_m);
            let g: Vec<Vec<f64>> = fields
                .iter()
                .map(|f| convolver.convolve_sum(&[(f, &spectrum)]))
                .collect();
            let k0 = kernel.value(0.0, h);
            let tiny = 1e-12 * k0;
            let mut score = 0.0;
            for (k, idx) in by_class.iter().enumerate() {
                for (&i, cell) in idx.iter().zip(&cells[k]) {
                    let Some(c) = *cell else { continue };
                    let w = points.weight(i);
                    if w == 0.0 {
                        continue;
                    }
                    let own = g[k][c] - w * k0;
                    let all = g.iter().map(|gj| gj[c]).sum::<f64>() - w * k0;
                    if all <= tiny {
                        continue;
                    }
                    score += if own > tiny {
                        w * (own / all).ln()
                    } else {
                        f64::NEG_INFINITY
                    };
                }
            }
            CvScore {
                bandwidth_m: h,
                log_likelihood: score,
            }
        })
        .collect()
}

/// Inputs of [`monte_carlo`].
#[derive(Debug)]
pub struct Relabelling<'a> {
    /// The estimator (grid, kernel, one bandwidth).
    pub estimator: &'a Estimator,
    /// All points.
    pub points: &'a Points<'a>,
    /// The points analysed.
    pub members: &'a [usize],
    /// Class (0…[`CLASSES`]−1) of each member.
    pub labels: &'a [u8],
    /// Σ w K over the members (invariant under relabelling).
    pub pooled_sum: &'a [f64],
    /// Cells of the data's region.
    pub region: &'a [bool],
    /// Observed p̂_k per class.
    pub observed: &'a [Vec<f64>],
    /// p̄_k per class.
    pub mean: &'a [f64],
    /// Number of relabellings R.
    pub permutations: usize,
    /// Run seed; relabelling i uses `replicate_rng(seed, i)`.
    pub seed: u64,
}

/// The test's outcome.
#[derive(Debug, Clone)]
pub struct TestOutcome {
    /// T of each relabelling.
    pub replicates: Vec<f64>,
    /// Per class, the pointwise p-value of each cell (NaN outside the region).
    pub pointwise: Vec<Vec<f64>>,
}

/// Per worker: T* of the relabellings it ran (by index) and its pointwise counts per class.
type Partial = (Vec<(usize, f64)>, Vec<Vec<u32>>);

/// Runs every relabelling ([`monte_carlo_counts`] over `0..permutations`) and turns the
/// result into the test's outcome ([`outcome`]). Returns `None` once `stop` is set.
pub fn monte_carlo(
    job: &Relabelling<'_>,
    stop: &AtomicBool,
    done: &(dyn Fn(usize) + Sync),
) -> Option<TestOutcome> {
    let counts = monte_carlo_counts(job, 0..job.permutations, stop, done)?;
    Some(outcome(job, &counts))
}

/// T* of each relabelling drawn (in order) and, per class and cell, how many had p̂*_k ≥ p̂_k.
#[derive(Debug, Clone, PartialEq)]
pub struct McCounts {
    /// T* of the relabellings, in relabelling order.
    pub statistics: Vec<f64>,
    /// Per class, per cell, the relabellings at least as high.
    pub counts: Vec<Vec<u32>>,
}

/// Runs the relabellings `drawn` in parallel, each permuting the labels among the members with
/// its own generator (results do not depend on the number of threads: counts are summed and
/// T* is stored by index; counts over disjoint blocks add up). Returns `None` once `stop` is
/// set.
pub fn monte_carlo_counts(
    job: &Relabelling<'_>,
    drawn: std::ops::Range<usize>,
    stop: &AtomicBool,
    done: &(dyn Fn(usize) + Sync),
) -> Option<McCounts> {
    let cells = job.pooled_sum.len();
    let classes = job.observed.len();
    let finished = AtomicUsize::new(0);
    let first = drawn.start;
    let empty = || -> Partial { (Vec::new(), vec![vec![0u32; cells]; classes]) };
    let (statistics, counts) = drawn
        .clone()
        .into_par_iter()
        .fold(empty, |(mut statistics, mut counts), r| {
            if stop.load(Ordering::Relaxed) {
                return (statistics, counts);
            }
            let mut rng = replicate_rng(job.seed, r as u64);
            let mut labels = job.labels.to_vec();
            labels.shuffle(&mut rng);
            let p = probabilities(&relabelled_sums(job, &labels, classes));
            statistics.push((r, statistic(&p, job.mean, job.region)));
            for (k, row) in counts.iter_mut().enumerate() {
                for (c, count) in row.iter_mut().enumerate() {
                    if job.region[c] && p[k][c] >= job.observed[k][c] - TIE_TOLERANCE {
                        *count += 1;
                    }
                }
            }
            done(finished.fetch_add(1, Ordering::Relaxed) + 1);
            (statistics, counts)
        })
        .reduce(empty, |(mut s1, mut c1), (s2, c2)| {
            s1.extend(s2);
            for (a, b) in c1.iter_mut().zip(&c2) {
                a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
            }
            (s1, c1)
        });
    if stop.load(Ordering::Relaxed) {
        return None;
    }
    let mut ordered = vec![0.0; drawn.len()];
    for (r, t) in statistics {
        ordered[r - first] = t;
    }
    Some(McCounts {
        statistics: ordered,
        counts,
    })
}

/// The test's outcome from the counts of all `job.permutations` relabellings.
pub fn outcome(job: &Relabelling<'_>, mc: &McCounts) -> TestOutcome {
    let denominator = (job.permutations + 1) as f64;
    let pointwise = mc
        .counts
        .iter()
        .map(|k| {
            k.iter()
                .zip(job.region)
                .map(|(c, inside)| {
                    if *inside {
                        f64::from(c + 1) / denominator
                    } else {
                        f64::NAN
                    }
                })
                .collect()
        })
        .collect();
    TestOutcome {
        replicates: mc.statistics.clone(),
        pointwise,
    }
}

/// Sums per class of one relabelling: the kernel sums of every class but the last, the last as
/// the pooled sum minus the others (the estimate is linear in the points).
fn relabelled_sums(job: &Relabelling<'_>, labels: &[u8], classes: usize) -> Vec<Vec<f64>> {
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); classes];
    for (&i, &l) in job.members.iter().zip(labels) {
        groups[usize::from(l)].push(i);
    }
    let mut sums: Vec<Vec<f64>> = groups[..classes - 1]
        .iter()
        .map(|g| job.estimator.sum(job.points, g))
        .collect();
    let last: Vec<f64> = (0..job.pooled_sum.len())
        .map(|c| job.pooled_sum[c] - sums.iter().map(|s| s[c]).sum::<f64>())
        .map(|v| v.max(0.0))
        .collect();
    sums.push(last);
    sums
}

/// The Monte Carlo p-value of the observed T: (1 + #{T* ≥ T})/(R + 1) (ties within
/// [`TIE_TOLERANCE`] relative count against the observation).
pub fn p_value(observed: f64, replicates: &[f64]) -> f64 {
    let tolerance = TIE_TOLERANCE * observed.abs().max(1.0);
    let at_least = replicates
        .iter()
        .filter(|t| **t >= observed - tolerance)
        .count();
    (1 + at_least) as f64 / (replicates.len() + 1) as f64
}

/// The test statistic summed over the data points with leave-one-out estimates and exact
/// Gaussian sums (σ = `sigma_m`): Σ_i Σ_k (p̂₋ᵢ(k | x_i) − n_k/n)², labels 0…`classes`−1.
pub fn loo_statistic_at_points(x: &[f64], y: &[f64], labels: &[u8], sigma_m: f64) -> f64 {
    let classes = labels
        .iter()
        .map(|&l| usize::from(l) + 1)
        .max()
        .unwrap_or(0);
    let n = x.len() as f64;
    let mut share = vec![0.0; classes];
    for &l in labels {
        share[usize::from(l)] += 1.0 / n;
    }
    let mut t = 0.0;
    for i in 0..x.len() {
        let mut by_class = vec![0.0; classes];
        for j in 0..x.len() {
            if i != j {
                let d2 = (x[i] - x[j]).powi(2) + (y[i] - y[j]).powi(2);
                by_class[usize::from(labels[j])] += (-0.5 * d2 / (sigma_m * sigma_m)).exp();
            }
        }
        let total: f64 = by_class.iter().sum();
        for (k, s) in by_class.iter().enumerate() {
            t += (s / total - share[k]).powi(2);
        }
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn probabilities_are_written_only_where_five_records_worth_of_weight_fall() {
        // Peak K_h(0) = 2 per m² (any value): a cell needs a pooled sum of 5 × 2 = 10.
        let pooled = [0.0, 9.99, 10.0, 250.0, f64::NAN];
        assert_eq!(
            supported(&pooled, 2.0),
            vec![false, false, true, true, false]
        );
    }

    #[test]
    fn probabilities_sum_to_one_and_region_and_statistic_by_hand() {
        let sums = vec![vec![1.0, 0.0, 2.0, f64::NAN], vec![3.0, 0.0, 2.0, f64::NAN]];
        let p = probabilities(&sums);
        assert_eq!(p[0][0], 0.25);
        assert_eq!(p[1][0], 0.75);
        assert!(p[0][1].is_nan() && p[0][3].is_nan());
        let region = region(&[4.0, 0.0, 4.0, f64::NAN]);
        assert_eq!(region, [true, false, true, false]);
        // Cells 0 and 2: (0.25 − 0.5)² + (0.75 − 0.5)² + 0 + 0 = 0.125.
        assert!((statistic(&p, &[0.5, 0.5], &region) - 0.125).abs() < 1e-15);
        assert_eq!(p_value(1.0, &[0.5, 1.0, 2.0]), 0.75);
    }
}
