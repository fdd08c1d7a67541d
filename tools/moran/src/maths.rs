//! Global and local Moran's I (Moran 1950; Cliff & Ord 1981, *Spatial Processes*, ch. 2;
//! Anselin 1995, "Local indicators of spatial association — LISA", Geogr. Anal. 27(2)), with
//! conditional-randomisation moments (Sokal, Oden & Thomson 1998, Geogr. Anal. 30(4), eqs. A7–A8),
//! permutation tests, and the Empirical Bayes standardised rate (Assunção & Reis 1999,
//! Stat. Med. 18(16)).
//!
//! Scales: local I_i = (z_i / m2) Σ_j w_ij z_j with m2 = Σ z² / n, the n-divisor scale of
//! Anselin (1995, eq. 7 with m2 as the variance); the (n − 1)-divisor scale is (n − 1)/n times
//! this. In the global I, n counts the areas with neighbours (islands carry no weight in S0).
//! The reference checks (tests/) compare both with R spdep and PySAL esda.

use std::ops::Range;

use rayon::prelude::*;
use stance_core::montecarlo::{mix64, Draws};
use stance_core::weights::SparseWeights;

/// The direction of a test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Alternative {
    /// Either direction: p = min(1, 2 · min(p_greater, p_less)).
    TwoSided,
    /// Positive association (clustering of like values).
    Greater,
    /// Negative association (dispersion).
    Less,
}

/// How the permutation tests are run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Inference {
    /// Random relabellings (0 = none).
    pub permutations: usize,
    /// Seed of the relabellings (replicate r uses its own stream, so threads do not matter).
    pub seed: u64,
    /// Direction of the tests.
    pub alternative: Alternative,
}

/// A run's share of the permutations when they are split over several runs (shards): which
/// it draws, and the results of the others, gathered from the shards. The default draws all.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Part {
    /// The permutations drawn (None: all of them).
    pub drawn: Option<Range<usize>>,
    /// Global I of every permutation, in permutation order (then none is drawn).
    pub global: Option<Vec<f64>>,
    /// Per area, how many permuted Ii were ≥ and ≤ the observed one over every permutation
    /// (then none is drawn).
    pub local: Option<Vec<[u32; 2]>>,
}

/// Errors of the statistics.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MoranError {
    /// The values do not vary: Moran's I is 0/0.
    #[error("all values are equal ({0}); Moran's I is undefined for a constant field")]
    Constant(f64),
    /// Too few areas with neighbours for the variances (n − 3 in a denominator).
    #[error("{0} area(s) have neighbours; Moran's I needs at least 4")]
    TooFew(usize),
    /// Counts gathered from shards are not one per area.
    #[error("the shards hold counts for {given} areas, the layer has {areas}")]
    Counts {
        /// Counts given.
        given: usize,
        /// Areas.
        areas: usize,
    },
    /// A value is missing or not finite.
    #[error("value {index} is not a finite number")]
    NotFinite {
        /// Index of the area.
        index: usize,
    },
    /// Rates need positive bases and non-negative events.
    #[error("area {index}: {message}")]
    BadRate {
        /// Index of the area.
        index: usize,
        /// What is wrong.
        message: String,
    },
}

pub use stance_core::normal::{erfc, upper_tail as normal_upper_tail};

/// The analytic p-value of a standard normal deviate `z` under `alternative`.
pub fn normal_p(z: f64, alternative: Alternative) -> f64 {
    match alternative {
        Alternative::Greater => normal_upper_tail(z),
        Alternative::Less => normal_upper_tail(-z),
        Alternative::TwoSided => (2.0 * normal_upper_tail(z.abs())).min(1.0),
    }
}

/// Rank p-values from counts of replicates at least as large / as small as the observation,
/// p = (1 + count) / (R + 1) (Davison & Hinkley 1997, eq. 4.11); two-sided folds the smaller tail:
/// min(1, 2 · min(p_greater, p_less)).
pub fn permutation_p(
    at_least: usize,
    at_most: usize,
    replicates: usize,
    alternative: Alternative,
) -> f64 {
    let r = (replicates + 1) as f64;
    let greater = (1 + at_least) as f64 / r;
    let less = (1 + at_most) as f64 / r;
    match alternative {
        Alternative::Greater => greater,
        Alternative::Less => less,
        Alternative::TwoSided => (2.0 * greater.min(less)).min(1.0),
    }
}

/// Global Moran's I with its moments and tests.
#[derive(Debug, Clone, PartialEq)]
pub struct GlobalMoran {
    /// I = (n / S0) Σ_i z_i Σ_j w_ij z_j / Σ z_i².
    pub i: f64,
    /// E[I] = −1 / (n − 1).
    pub expected: f64,
    /// Var[I] under normality (Cliff & Ord 1981, eq. 2.33).
    pub variance_normality: f64,
    /// Var[I] under randomisation (Cliff & Ord 1981, eq. 2.34).
    pub variance_randomisation: f64,
    /// (I − E[I]) / √Var_normality.
    pub z_normality: f64,
    /// (I − E[I]) / √Var_randomisation.
    pub z_randomisation: f64,
    /// Analytic p from `z_normality`.
    pub p_normality: f64,
    /// Analytic p from `z_randomisation`.
    pub p_randomisation: f64,
    /// Permutation p (NaN without permutations).
    pub p_permutation: f64,
    /// Mean of I over the permutations (NaN without permutations).
    pub permutation_mean: f64,
    /// I of each permutation drawn (or given), in permutation order.
    pub permutation_values: Vec<f64>,
    /// n used in the formulas (areas with neighbours).
    pub n: usize,
    /// Weight sums.
    pub s0: f64,
    /// Weight sums.
    pub s1: f64,
    /// Weight sums.
    pub s2: f64,
}

fn check_values(x: &[f64]) -> Result<(), MoranError> {
    if let Some(index) = x.iter().position(|v| !v.is_finite()) {
        return Err(MoranError::NotFinite { index });
    }
    if x.iter().all(|v| *v == x[0]) {
        return Err(MoranError::Constant(x.first().copied().unwrap_or(f64::NAN)));
    }
    Ok(())
}

/// Values centred on their mean (over every area, islands included).
fn centred(x: &[f64]) -> Vec<f64> {
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    x.iter().map(|v| v - mean).collect()
}

fn cross_product(w: &SparseWeights, z: &[f64]) -> f64 {
    (0..z.len()).map(|i| z[i] * w.lag(i, z)).sum()
}

/// Permutations whose cross products are computed in one pass over the weights.
const BLOCK: usize = 8;

/// Global permutations between two progress reports (a multiple of [`BLOCK`], so the blocks,
/// and the values, are the same as without reports).
const PROGRESS_STEP: usize = 64 * BLOCK;

/// Σ_i z_π(i) Σ_j w_ij z_π(j) for the permutations π of `replicates` (at most [`BLOCK`]; replicate
/// r shuffles with [`Draws`]`::new(seed, r)`). The permuted values are interleaved so that one
/// pass over the weights serves the whole block; each sum is formed in the same order as
/// [`cross_product`], so a replicate's value does not depend on its block.
fn block_cross_products(
    w: &SparseWeights,
    z: &[f64],
    replicates: &[u64],
    seed: u64,
) -> [f64; BLOCK] {
    let n = z.len();
    let mut interleaved = vec![0.0; n * BLOCK];
    let mut shuffled = z.to_vec();
    for (k, &r) in replicates.iter().enumerate().take(BLOCK) {
        shuffled.copy_from_slice(z);
        Draws::new(seed, r).shuffle(&mut shuffled);
        for (j, v) in shuffled.iter().enumerate() {
            interleaved[j * BLOCK + k] = *v;
        }
    }
    let mut total = [0.0; BLOCK];
    for i in 0..n {
        let (js, ws) = w.row(i);
        let mut lag = [0.0; BLOCK];
        for (j, wj) in js.iter().zip(ws) {
            let values: &[f64; BLOCK] = interleaved[*j as usize * BLOCK..][..BLOCK]
                .try_into()
                .unwrap_or(&[0.0; BLOCK]);
            for k in 0..BLOCK {
                lag[k] += wj * values[k];
            }
        }
        let own = &interleaved[i * BLOCK..(i + 1) * BLOCK];
        for k in 0..BLOCK {
            total[k] += own[k] * lag[k];
        }
    }
    total
}

/// Global Moran's I of `x` under weights `w`, with `permutations` random relabellings seeded by
/// `seed` (replicate r uses [`Draws`]`::new(seed, r)`, so results do not depend on threads).
///
/// # Errors
/// [`MoranError`] for non-finite or constant values, or fewer than 4 areas with neighbours.
/// `progress` is told how many permutations are done, now and then.
pub fn global_moran(
    x: &[f64],
    w: &SparseWeights,
    inference: &Inference,
    progress: &dyn Fn(usize),
) -> Result<GlobalMoran, MoranError> {
    global_moran_part(x, w, inference, &Part::default(), progress)
}

/// [`global_moran`] drawing only the permutations of `part` (or taking their values from it).
/// The p-value and mean rest on the permutations drawn or given.
///
/// # Errors
/// As [`global_moran`].
pub fn global_moran_part(
    x: &[f64],
    w: &SparseWeights,
    inference: &Inference,
    part: &Part,
    progress: &dyn Fn(usize),
) -> Result<GlobalMoran, MoranError> {
    let Inference {
        permutations,
        seed,
        alternative,
    } = *inference;
    check_values(x)?;
    let with_neighbours = (0..w.len()).filter(|&i| !w.row(i).0.is_empty()).count();
    if with_neighbours < 4 {
        return Err(MoranError::TooFew(with_neighbours));
    }
    let z = centred(x);
    let zz: f64 = z.iter().map(|v| v * v).sum();
    let z4: f64 = z.iter().map(|v| v.powi(4)).sum();
    let kurtosis = x.len() as f64 * z4 / (zz * zz);
    let m = w.moments();
    let n = with_neighbours as f64;
    let i = n / m.s0 * cross_product(w, &z) / zz;
    let expected = -1.0 / (n - 1.0);
    let s02 = m.s0 * m.s0;
    let variance_normality =
        (n * n * m.s1 - n * m.s2 + 3.0 * s02) / (s02 * (n * n - 1.0)) - expected * expected;
    let variance_randomisation = (n * (m.s1 * (n * n - 3.0 * n + 3.0) - n * m.s2 + 3.0 * s02)
        - kurtosis * (m.s1 * (n * n - n) - 2.0 * n * m.s2 + 6.0 * s02))
        / ((n - 1.0) * (n - 2.0) * (n - 3.0) * s02)
        - expected * expected;
    let z_normality = (i - expected) / variance_normality.sqrt();
    let z_randomisation = (i - expected) / variance_randomisation.sqrt();
    let replicates = if let Some(given) = &part.global {
        given.clone()
    } else {
        let drawn = part.drawn.clone().unwrap_or(0..permutations);
        let indices: Vec<u64> = drawn.map(|r| r as u64).collect();
        let mut replicates: Vec<f64> = Vec::with_capacity(indices.len());
        for block in indices.chunks(PROGRESS_STEP) {
            replicates.extend(
                block
                    .par_chunks(BLOCK)
                    .flat_map_iter(|chunk| {
                        block_cross_products(w, &z, chunk, seed)
                            .into_iter()
                            .take(chunk.len())
                            .map(|c| n / m.s0 * c / zz)
                    })
                    .collect::<Vec<f64>>(),
            );
            progress(replicates.len());
        }
        replicates
    };
    let (p_permutation, permutation_mean) = if replicates.is_empty() {
        (f64::NAN, f64::NAN)
    } else {
        let at_least = replicates.iter().filter(|v| **v >= i).count();
        let at_most = replicates.iter().filter(|v| **v <= i).count();
        (
            permutation_p(at_least, at_most, replicates.len(), alternative),
            replicates.iter().sum::<f64>() / replicates.len() as f64,
        )
    };
    Ok(GlobalMoran {
        i,
        expected,
        variance_normality,
        variance_randomisation,
        z_normality,
        z_randomisation,
        p_normality: normal_p(z_normality, alternative),
        p_randomisation: normal_p(z_randomisation, alternative),
        p_permutation,
        permutation_mean,
        permutation_values: replicates,
        n: with_neighbours,
        s0: m.s0,
        s1: m.s1,
        s2: m.s2,
    })
}

/// Local Moran's I of every area; islands hold NaN.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalMoran {
    /// I_i = (z_i / m2) Σ_j w_ij z_j, m2 = Σ z² / n (the n-divisor scale).
    pub local_i: Vec<f64>,
    /// E[Ii] under conditional randomisation: −z_i² W_i / ((n − 1) m2).
    pub expected: Vec<f64>,
    /// Var[Ii] under conditional randomisation:
    /// (z_i/m2)² · n/(n − 2) · (W_i(2) − W_i²/(n − 1)) · (m2 − z_i²/(n − 1)).
    pub variance: Vec<f64>,
    /// (Ii − E[Ii]) / √Var[Ii].
    pub z: Vec<f64>,
    /// Analytic p from `z`.
    pub p_analytic: Vec<f64>,
    /// Conditional-permutation pseudo p (NaN without permutations).
    pub p_permutation: Vec<f64>,
    /// Per area, how many permuted Ii drawn (or given) were ≥ and ≤ the observed one.
    pub permutation_counts: Vec<[u32; 2]>,
    /// The centred value z_i = x_i − x̄.
    pub centred: Vec<f64>,
    /// Its spatial lag Σ_j w_ij z_j.
    pub lag: Vec<f64>,
}

/// Stream offset so local permutations never reuse the global ones' seeds.
const LOCAL_STREAM: u64 = 0x4C4F_4341_4C5F_4D49;

/// Local Moran's I with analytic conditional moments and conditional-permutation pseudo
/// p-values.
///
/// Conditional permutation (Anselin 1995): area i keeps its value and its |N(i)| neighbours'
/// values are replaced by |N(i)| values drawn without replacement from the other n − 1 areas.
/// One set of random draws serves every area: permutation r draws an ordered
/// sample q_r of K + 1 distinct areas (K = the largest number of neighbours) and area i takes the
/// first |N(i)| entries of q_r that are not i itself, which is a uniform draw from the other
/// areas for every i, so each area's pseudo p is an exact permutation p-value. Sharing the
/// draws makes the p-values of different areas dependent and makes the test
/// O(n · R) instead of O(n · R · |N|): with equal weights in a row (every weights method of the
/// toolbox) the permuted lag is a prefix sum of q_r's values. Permutation r draws from
/// [`Draws`]`::new(mix64(seed ^ LOCAL_STREAM), r)`, so results do not depend on threads.
///
/// # Errors
/// [`MoranError`] for non-finite or constant values.
/// `progress` is told how many permutations are done, now and then.
pub fn local_moran(
    x: &[f64],
    w: &SparseWeights,
    inference: &Inference,
    progress: &dyn Fn(usize),
) -> Result<LocalMoran, MoranError> {
    local_moran_part(x, w, inference, &Part::default(), progress)
}

/// [`local_moran`] drawing only the permutations of `part` (or taking their counts from it).
/// The p-values rest on the permutations drawn or given.
///
/// # Errors
/// As [`local_moran`]; [`MoranError::Counts`] when the given counts are not one per area.
pub fn local_moran_part(
    x: &[f64],
    w: &SparseWeights,
    inference: &Inference,
    part: &Part,
    progress: &dyn Fn(usize),
) -> Result<LocalMoran, MoranError> {
    let Inference {
        permutations,
        seed,
        alternative,
    } = *inference;
    check_values(x)?;
    let n = x.len();
    let nf = n as f64;
    let z = centred(x);
    let m2 = z.iter().map(|v| v * v).sum::<f64>() / nf;
    let rows: Vec<[f64; 6]> = (0..n)
        .into_par_iter()
        .map(|i| {
            let (js, ws) = w.row(i);
            if js.is_empty() {
                return [f64::NAN; 6];
            }
            let lag = w.lag(i, &z);
            let ii = z[i] / m2 * lag;
            let wi: f64 = ws.iter().sum();
            let wi2: f64 = ws.iter().map(|v| v * v).sum();
            let expected = -(z[i] * z[i] * wi) / ((nf - 1.0) * m2);
            let variance = (z[i] / m2).powi(2)
                * (nf / (nf - 2.0))
                * (wi2 - wi * wi / (nf - 1.0))
                * (m2 - z[i] * z[i] / (nf - 1.0));
            let zi = (ii - expected) / variance.sqrt();
            [ii, expected, variance, zi, normal_p(zi, alternative), lag]
        })
        .collect();
    let column = |c: usize| rows.iter().map(|r| r[c]).collect::<Vec<f64>>();
    let ii = column(0);
    let (counts, counted) = match &part.local {
        Some(given) if given.len() != n => {
            return Err(MoranError::Counts {
                given: given.len(),
                areas: n,
            })
        }
        Some(given) => (given.clone(), permutations),
        None if permutations == 0 || n < 2 => (Vec::new(), 0),
        None => {
            let drawn = part.drawn.clone().unwrap_or(0..permutations);
            let stream = mix64(seed ^ LOCAL_STREAM);
            let len = drawn.len();
            let counts = local_permutation_counts(&z, m2, w, &ii, (drawn, stream), progress);
            (counts, len)
        }
    };
    let p_permutation = if counted == 0 {
        vec![f64::NAN; n]
    } else {
        counts
            .iter()
            .zip(&ii)
            .map(|(&[at_least, at_most], value)| {
                if value.is_nan() {
                    f64::NAN
                } else {
                    permutation_p(at_least as usize, at_most as usize, counted, alternative)
                }
            })
            .collect()
    };
    Ok(LocalMoran {
        expected: column(1),
        variance: column(2),
        z: column(3),
        p_analytic: column(4),
        p_permutation,
        permutation_counts: counts,
        lag: column(5),
        local_i: ii,
        centred: z,
    })
}

/// Values of the shared draws held at once (bounds memory when some area has very many
/// neighbours: blocks of permutations are drawn in turn).
const SHARED_DRAW_VALUES: usize = 1 << 21;

/// An ordered sample of `depth` distinct integers from `0..n`: the first `depth` steps of a
/// Fisher–Yates shuffle, with the displaced entries kept in a map instead of an array of n.
fn ordered_sample(n: usize, depth: usize, draws: &mut Draws) -> Vec<u32> {
    let mut displaced: std::collections::HashMap<u32, u32> =
        std::collections::HashMap::with_capacity(depth * 2);
    let mut out = Vec::with_capacity(depth);
    for m in 0..depth as u32 {
        let j = m + draws.below(n as u32 - m);
        let at_j = displaced.get(&j).copied().unwrap_or(j);
        let at_m = displaced.get(&m).copied().unwrap_or(m);
        displaced.insert(j, at_m);
        out.push(at_j);
    }
    out
}

/// Per area, how many permuted Ii were ≥ and ≤ the observed one (see [`local_moran`]).
/// `replicates` is (the permutations drawn, random stream). Permutation r draws its sample from
/// its own stream, so the block size (bounded for memory and for progress reports) changes
/// nothing.
fn local_permutation_counts(
    z: &[f64],
    m2: f64,
    w: &SparseWeights,
    ii: &[f64],
    (drawn, stream): (Range<usize>, u64),
    progress: &dyn Fn(usize),
) -> Vec<[u32; 2]> {
    let n = z.len();
    let most = (0..n).map(|i| w.row(i).0.len()).max().unwrap_or(0);
    let depth = (most + 1).min(n);
    let permutations = drawn.len();
    let mut counts = vec![[0u32; 2]; n];
    if permutations == 0 {
        return counts;
    }
    let block = (SHARED_DRAW_VALUES / depth)
        .min(permutations.div_ceil(10))
        .clamp(1, permutations);
    let mut done = 0;
    while done < permutations {
        let first = drawn.start + done;
        let used = block.min(permutations - done);
        let samples: Vec<Vec<u32>> = (first..first + used)
            .into_par_iter()
            .map(|r| ordered_sample(n, depth, &mut Draws::new(stream, r as u64)))
            .collect();
        // Values of each sample and their running sums: prefix[r][m] = Σ_{l<m} values[r][l].
        let values: Vec<f64> = samples
            .iter()
            .flat_map(|q| q.iter().map(|&a| z[a as usize]))
            .collect();
        let mut prefix = vec![0.0; used * (depth + 1)];
        for r in 0..used {
            for m in 0..depth {
                prefix[r * (depth + 1) + m + 1] =
                    prefix[r * (depth + 1) + m] + values[r * depth + m];
            }
        }
        // Where each area was drawn: (permutation, position), grouped by area, in order of r.
        let mut starts = vec![0u32; n + 1];
        for q in &samples {
            for &a in q {
                starts[a as usize + 1] += 1;
            }
        }
        for a in 0..n {
            starts[a + 1] += starts[a];
        }
        let mut fill = starts.clone();
        let mut hits = vec![(0u32, 0u32); used * depth];
        for (r, q) in samples.iter().enumerate() {
            for (m, &a) in q.iter().enumerate() {
                hits[fill[a as usize] as usize] = (r as u32, m as u32);
                fill[a as usize] += 1;
            }
        }
        counts.par_iter_mut().enumerate().for_each(|(i, count)| {
            let (js, ws) = w.row(i);
            let k = js.len();
            if k == 0 || ii[i].is_nan() {
                return;
            }
            let scale = z[i] / m2;
            let equal = ws.iter().all(|v| *v == ws[0]);
            let mut own = hits[starts[i] as usize..starts[i + 1] as usize].iter();
            let mut next = own.next();
            for r in 0..used {
                // Position of area i among the first k entries of sample r, if drawn there.
                let mut skip = usize::MAX;
                if let Some(&(hr, hm)) = next {
                    if hr as usize == r {
                        if (hm as usize) < k {
                            skip = hm as usize;
                        }
                        next = own.next();
                    }
                }
                let lag = if equal {
                    let row = &prefix[r * (depth + 1)..(r + 1) * (depth + 1)];
                    ws[0]
                        * if skip == usize::MAX {
                            row[k]
                        } else {
                            row[k + 1] - z[i]
                        }
                } else {
                    let row = &values[r * depth..(r + 1) * depth];
                    let taken = row.iter().enumerate().filter(|(m, _)| *m != skip);
                    taken.zip(ws).map(|((_, v), wj)| wj * v).sum()
                };
                let ii_r = scale * lag;
                count[0] += u32::from(ii_r >= ii[i]);
                count[1] += u32::from(ii_r <= ii[i]);
            }
        });
        done += used;
        progress(done);
    }
    counts
}

/// Cluster type of an area by the quadrant of (z_i, lag_i), both centred on the mean, when its
/// p ≤ `alpha`: a value or lag ≥ 0 counts as high.
pub fn cluster_type(centred: f64, lag: f64, p: f64, alpha: f64) -> Option<&'static str> {
    if !(p.is_finite() && centred.is_finite() && lag.is_finite()) {
        return None;
    }
    if p > alpha {
        return Some("not significant");
    }
    Some(match (centred >= 0.0, lag >= 0.0) {
        (true, true) => "high-high",
        (false, false) => "low-low",
        (true, false) => "high-low",
        (false, true) => "low-high",
    })
}

/// Assunção–Reis (1999) Empirical Bayes standardised rates:
/// p_i = e_i / b_i, β = Σe / Σb, α = Σ b_i (p_i − β)² / Σb − β / (Σb / n) (set to 0 when
/// negative, Marshall 1991), v_i = α + β / b_i, z_i = (p_i − β) / √v_i.
///
/// # Errors
/// [`MoranError::BadRate`] for a base ≤ 0, negative events or non-finite values.
pub fn eb_standardised_rates(events: &[f64], base: &[f64]) -> Result<Vec<f64>, MoranError> {
    for (index, (e, b)) in events.iter().zip(base).enumerate() {
        if !(e.is_finite() && b.is_finite()) {
            return Err(MoranError::NotFinite { index });
        }
        if *b <= 0.0 {
            return Err(MoranError::BadRate {
                index,
                message: format!("base {b} must be positive for an Empirical Bayes rate"),
            });
        }
        if *e < 0.0 {
            return Err(MoranError::BadRate {
                index,
                message: format!("events {e} must not be negative"),
            });
        }
    }
    let n = events.len() as f64;
    let (event_sum, base_sum): (f64, f64) = (events.iter().sum(), base.iter().sum());
    let beta = event_sum / base_sum;
    let spread: f64 = events
        .iter()
        .zip(base)
        .map(|(e, b)| b * (e / b - beta).powi(2))
        .sum::<f64>()
        / base_sum;
    let alpha = (spread - beta / (base_sum / n)).max(0.0);
    Ok(events
        .iter()
        .zip(base)
        .map(|(e, b)| (e / b - beta) / (alpha + beta / b).sqrt())
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use stance_core::weights::{Neighbours, Standardisation};

    #[test]
    fn erfc_against_python_math() {
        // Python 3.11 math.erfc / statistics.NormalDist printed to 17 digits.
        assert_relative_eq!(erfc(0.5), 0.4795001221869535, max_relative = 1e-14);
        assert_relative_eq!(erfc(1.0), 0.15729920705028513, max_relative = 1e-14);
        assert_relative_eq!(erfc(3.0), 2.209049699858544e-05, max_relative = 1e-13);
        assert_relative_eq!(erfc(6.0), 2.1519736712498913e-17, max_relative = 1e-12);
        assert_relative_eq!(
            normal_upper_tail(1.959963984540054),
            0.025,
            max_relative = 1e-13
        );
        assert_relative_eq!(
            normal_upper_tail(-1.0),
            0.8413447460685429,
            max_relative = 1e-14
        );
    }

    /// A path of 4 areas 0 – 1 – 2 – 3 with values 1, 2, 3, 10: worked by hand below.
    fn path() -> (Vec<f64>, SparseWeights) {
        let n = Neighbours {
            lists: vec![vec![1], vec![0, 2], vec![1, 3], vec![2]],
        };
        (
            vec![1.0, 2.0, 3.0, 10.0],
            n.standardise(Standardisation::Row),
        )
    }

    #[test]
    fn local_moran_on_a_path_by_hand() {
        // Mean 4; z = −3, −2, −1, 6; Σz² = 50, m2 = 12.5.
        // Lags (row): −2, (−3 − 1)/2 = −2, (−2 + 6)/2 = 2, −1.
        // Ii = z·lag/m2: 6/12.5 = 0.48, 4/12.5 = 0.32, −2/12.5 = −0.16, −6/12.5 = −0.48.
        let (x, w) = path();
        let l = local_moran(
            &x,
            &w,
            &Inference {
                permutations: 0,
                seed: 1,
                alternative: Alternative::TwoSided,
            },
            &|_| {},
        )
        .expect("valid");
        for (g, e) in l.local_i.iter().zip([0.48, 0.32, -0.16, -0.48]) {
            assert_relative_eq!(*g, e, max_relative = 1e-14);
        }
        // E[I0] = −z0² W0 / ((n−1) m2) = −9 / 37.5 = −0.24.
        assert_relative_eq!(l.expected[0], -0.24, max_relative = 1e-14);
        // Var[I1] = (z1/m2)² · n/(n−2) · (W(2) − W²/(n−1)) · (m2 − z1²/(n−1))
        //         = (0.16)² · 2 · (0.5 − 1/3) · (12.5 − 4/3) = 0.0256 · 2 · (1/6) · (33.5/3).
        assert_relative_eq!(
            l.variance[1],
            0.0256 * 2.0 / 6.0 * (33.5 / 3.0),
            max_relative = 1e-14
        );
        assert_eq!(
            cluster_type(l.centred[3], l.lag[3], 0.01, 0.05),
            Some("high-low")
        );
        assert_eq!(
            cluster_type(l.centred[0], l.lag[0], 0.01, 0.05),
            Some("low-low")
        );
        assert_eq!(
            cluster_type(l.centred[0], l.lag[0], 0.2, 0.05),
            Some("not significant")
        );
    }

    #[test]
    fn global_moran_on_a_path_by_hand() {
        // Row weights: S0 = 4, n = 4; Σ z·lag = 6 + 4 − 2 − 6 = 2 → I = (4/4) · 2/50 = 0.04.
        let (x, w) = path();
        let g = global_moran(
            &x,
            &w,
            &Inference {
                permutations: 99,
                seed: 7,
                alternative: Alternative::Greater,
            },
            &|_| {},
        )
        .expect("valid");
        assert_relative_eq!(g.i, 0.04, max_relative = 1e-14);
        assert_relative_eq!(g.expected, -1.0 / 3.0, max_relative = 1e-14);
        assert!(g.p_permutation > 0.0 && g.p_permutation <= 1.0);
    }

    #[test]
    fn constant_nan_and_islands() {
        let (_, w) = path();
        assert_eq!(
            global_moran(
                &[2.0; 4],
                &w,
                &Inference {
                    permutations: 0,
                    seed: 1,
                    alternative: Alternative::Greater
                },
                &|_| {}
            ),
            Err(MoranError::Constant(2.0))
        );
        assert!(local_moran(
            &[1.0, f64::NAN, 2.0, 3.0],
            &w,
            &Inference {
                permutations: 0,
                seed: 1,
                alternative: Alternative::Greater
            },
            &|_| {}
        )
        .is_err());
        let island = Neighbours {
            lists: vec![vec![1], vec![0, 2], vec![1], vec![]],
        }
        .standardise(Standardisation::Row);
        let l = local_moran(
            &[1.0, 2.0, 3.0, 4.0],
            &island,
            &Inference {
                permutations: 9,
                seed: 1,
                alternative: Alternative::TwoSided,
            },
            &|_| {},
        )
        .expect("valid");
        assert!(l.local_i[3].is_nan() && l.p_permutation[3].is_nan());
        assert!(l.local_i[0].is_finite());
        assert_eq!(
            global_moran(
                &[1.0, 2.0, 3.0, 4.0],
                &island,
                &Inference {
                    permutations: 0,
                    seed: 1,
                    alternative: Alternative::Greater
                },
                &|_| {}
            ),
            Err(MoranError::TooFew(3))
        );
    }

    #[test]
    fn permutations_do_not_depend_on_threads() {
        let n = 400;
        let x: Vec<f64> = (0..n).map(|i| ((i * 37) % 101) as f64).collect();
        let lists = (0..n)
            .map(|i| {
                let mut l = vec![];
                if i > 0 {
                    l.push(i as u32 - 1);
                }
                if i + 1 < n {
                    l.push(i as u32 + 1);
                }
                l
            })
            .collect();
        let w = Neighbours { lists }.standardise(Standardisation::Row);
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("pool")
                .install(|| {
                    (
                        local_moran(
                            &x,
                            &w,
                            &Inference {
                                permutations: 199,
                                seed: 5,
                                alternative: Alternative::TwoSided,
                            },
                            &|_| {},
                        )
                        .expect("valid"),
                        global_moran(
                            &x,
                            &w,
                            &Inference {
                                permutations: 199,
                                seed: 5,
                                alternative: Alternative::TwoSided,
                            },
                            &|_| {},
                        )
                        .expect("valid"),
                    )
                })
        };
        assert_eq!(run(1), run(2));
    }

    #[test]
    fn permutation_p_folding() {
        // 999 replicates, 10 at least as large, 990 at most as large.
        assert_relative_eq!(permutation_p(10, 990, 999, Alternative::Greater), 0.011);
        assert_relative_eq!(permutation_p(10, 990, 999, Alternative::TwoSided), 0.022);
        assert_relative_eq!(permutation_p(999, 999, 999, Alternative::TwoSided), 1.0);
    }

    #[test]
    fn eb_rates_reject_zero_base() {
        assert!(eb_standardised_rates(&[1.0, 2.0], &[10.0, 0.0]).is_err());
        assert!(eb_standardised_rates(&[-1.0, 2.0], &[10.0, 5.0]).is_err());
        // Equal rates: every standardised rate is 0.
        let z = eb_standardised_rates(&[1.0, 2.0, 3.0], &[10.0, 20.0, 30.0]).expect("valid");
        assert!(z.iter().all(|v| v.abs() < 1e-15));
    }
}
