//! Tolerance of the log ratio of two densities (the log relative risk) by random relabelling of
//! the pooled points of the two classes, one Monte Carlo p-value per cell: Kelsall & Diggle
//! (1995), *Bernoulli* 1, 3–16, §6; tolerance contours after Hazelton & Davies (2009),
//! *Biometrical Journal* 51(1), 98–109, and Davies & Hazelton (2010), *Statistics in Medicine*
//! 29(23), 2423–2437.

use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::Rng;
use rayon::prelude::*;
use stance_core::montecarlo::replicate_rng;

use crate::binning::Points;
use crate::compare;
use crate::estimate::Estimator;

/// Two values of ρ closer than this count as tied (ties count against the observation).
///
/// FFT round-off in ρ is ~1e-12 where densities are tiny; without a tolerance, cells where
/// every relabelling gives the same ρ would get random p-values from round-off.
pub const TIE_TOLERANCE: f64 = 1e-9;

/// Per-cell Monte Carlo p-values (Besag & Clifford 1991): `upper` for A elevated,
/// p = (1 + #{ρ* ≥ ρ}) / (R + 1), `lower` for B elevated, p = (1 + #{ρ* ≤ ρ}) / (R + 1);
/// NaN where the pooled density is below the ρ floor (nothing to test) or outside the mask.
#[derive(Debug, Clone)]
pub struct PValues {
    /// Upper-tail p (A elevated).
    pub upper: Vec<f64>,
    /// Lower-tail p (B elevated).
    pub lower: Vec<f64>,
}

/// Inputs of [`relabelling_p_values`].
#[derive(Debug)]
pub struct Relabelling<'a> {
    /// The estimator (grid, kernel, bandwidths).
    pub estimator: &'a Estimator,
    /// All points.
    pub points: &'a Points<'a>,
    /// Indices of the A points.
    pub a: &'a [usize],
    /// Indices of the B points.
    pub b: &'a [usize],
    /// Σ w K over A ∪ B (invariant under relabelling).
    pub pooled_sum: &'a [f64],
    /// Observed ρ.
    pub observed: &'a [f64],
    /// Floor c of ρ.
    pub floor: f64,
    /// Number of relabellings R.
    pub permutations: usize,
    /// Run seed; relabelling i uses `replicate_rng(seed, i)`.
    pub seed: u64,
}

/// Runs `permutations` random relabellings in parallel and turns their counts into p-values
/// ([`relabelling_counts`] over every relabelling, then [`p_values`]).
///
/// Returns `None` when `stop` is set during the run. `done` is called with the number of
/// relabellings finished.
pub fn relabelling_p_values(
    job: &Relabelling<'_>,
    stop: &AtomicBool,
    done: &(dyn Fn(usize) + Sync),
) -> Option<PValues> {
    let counts = relabelling_counts(job, 0..job.permutations, stop, done)?;
    Some(p_values(job, &counts))
}

/// Per cell, how many relabellings gave ρ* ≥ ρ (upper) and ρ* ≤ ρ (lower).
#[derive(Debug, Clone, PartialEq)]
pub struct Counts {
    /// #{ρ* ≥ ρ} per cell.
    pub upper: Vec<u32>,
    /// #{ρ* ≤ ρ} per cell.
    pub lower: Vec<u32>,
}

/// Cells where ρ is tested: the pooled density at or above the floor.
fn testable(job: &Relabelling<'_>, weight_pooled: f64) -> Vec<bool> {
    job.pooled_sum
        .iter()
        .map(|s| s.is_finite() && s / weight_pooled >= job.floor && job.floor > 0.0)
        .collect()
}

/// Runs the relabellings `drawn` (of `0..permutations`) in parallel. Relabelling i draws its A
/// set of |A| points from A ∪ B by a partial Fisher–Yates shuffle with its own generator, so
/// results are identical for any number of threads (counts are summed, an order-free
/// reduction), and counts over disjoint blocks of relabellings add up to those over their
/// union. The B sum is the pooled sum minus the A sum (the estimate is linear in the points).
///
/// Returns `None` when `stop` is set during the run. `done` is called with the number of
/// relabellings finished.
pub fn relabelling_counts(
    job: &Relabelling<'_>,
    drawn: std::ops::Range<usize>,
    stop: &AtomicBool,
    done: &(dyn Fn(usize) + Sync),
) -> Option<Counts> {
    let cells = job.observed.len();
    let pooled: Vec<usize> = job.a.iter().chain(job.b).copied().collect();
    let n_a = job.a.len();
    let weight_pooled = job.points.total_weight(&pooled);
    let finished = AtomicUsize::new(0);
    let testable = testable(job, weight_pooled);
    let (upper, lower) = drawn
        .into_par_iter()
        .fold(
            || (vec![0u32; cells], vec![0u32; cells]),
            |(mut upper, mut lower), i| {
                if stop.load(Ordering::Relaxed) {
                    return (upper, lower);
                }
                let mut rng = replicate_rng(job.seed, i as u64);
                let mut labels = pooled.clone();
                for k in 0..n_a {
                    let j = rng.random_range(k..labels.len());
                    labels.swap(k, j);
                }
                let a_set = &labels[..n_a];
                let weight_a = job.points.total_weight(a_set);
                let weight_b = weight_pooled - weight_a;
                let sum_a = job.estimator.sum(job.points, a_set);
                for k in 0..cells {
                    if !testable[k] {
                        continue;
                    }
                    let f_a = sum_a[k] / weight_a;
                    let f_b = (job.pooled_sum[k] - sum_a[k]) / weight_b;
                    let rho = ((f_a + job.floor) / (f_b + job.floor)).ln();
                    if rho >= job.observed[k] - TIE_TOLERANCE {
                        upper[k] += 1;
                    }
                    if rho <= job.observed[k] + TIE_TOLERANCE {
                        lower[k] += 1;
                    }
                }
                let n = finished.fetch_add(1, Ordering::Relaxed) + 1;
                done(n);
                (upper, lower)
            },
        )
        .reduce(
            || (vec![0u32; cells], vec![0u32; cells]),
            |(mut u1, mut l1), (u2, l2)| {
                u1.iter_mut().zip(&u2).for_each(|(a, b)| *a += b);
                l1.iter_mut().zip(&l2).for_each(|(a, b)| *a += b);
                (u1, l1)
            },
        );
    if stop.load(Ordering::Relaxed) {
        return None;
    }
    Some(Counts { upper, lower })
}

/// The p-values of `counts` gathered over all `job.permutations` relabellings.
pub fn p_values(job: &Relabelling<'_>, counts: &Counts) -> PValues {
    let pooled: Vec<usize> = job.a.iter().chain(job.b).copied().collect();
    let testable = testable(job, job.points.total_weight(&pooled));
    let denominator = (job.permutations + 1) as f64;
    let p = |counts: &[u32]| -> Vec<f64> {
        counts
            .iter()
            .zip(&testable)
            .map(|(c, t)| {
                if *t {
                    f64::from(c + 1) / denominator
                } else {
                    f64::NAN
                }
            })
            .collect()
    };
    PValues {
        upper: p(&counts.upper),
        lower: p(&counts.lower),
    }
}

/// Observed ρ with its floor, from the two class sums (see [`compare::log_ratio`]).
pub fn observed_log_ratio(pair: &compare::Pair<'_>) -> (Vec<f64>, f64) {
    let floor = compare::log_ratio_floor(pair);
    (
        compare::log_ratio(pair.a, pair.b, pair.weight_a, pair.weight_b, floor),
        floor,
    )
}
