//! Conditional permutation (Anselin 1995): area i keeps its own value and its |N(i)| neighbours
//! take |N(i)| values drawn without replacement from the other n − 1 areas; the pseudo p of a
//! local statistic that grows with the spatial lag Σ_j w_ij v_j counts the draws whose lag is at
//! least (or at most) the observed one.
//!
//! One set of draws serves every area: permutation r draws an ordered sample q_r of K + 1
//! distinct areas (K = the most neighbours of any area) and area i takes the first |N(i)|
//! entries of q_r that are not i itself — a uniform draw from the other areas for every i, so
//! each area's pseudo p is an exact permutation p-value (the p-values of different areas are
//! dependent). With equal weights in a row (binary or row-standardised) the permuted lag is a
//! prefix sum of q_r's values, so the test costs O(n · R). Permutation r draws from
//! [`Draws`]`::new(stream, r)`: results do not depend on the number of threads.

use rayon::prelude::*;
use stance_core::montecarlo::Draws;
use stance_core::weights::SparseWeights;

/// Values of the shared draws held at once (blocks of permutations are drawn in turn).
const SHARED_DRAW_VALUES: usize = 1 << 21;

/// How many permuted lags were ≥ and ≤ the observed lag, per area.
pub type Counts = [u32; 2];

/// The draws of a test: number of permutations and the random stream.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Replicates {
    /// Random relabellings R of the whole test (the p-values' denominator is R + 1).
    pub permutations: usize,
    /// Stream of permutation r's generator, [`Draws`]`::new(stream, r)`.
    pub stream: u64,
    /// The permutations drawn in this run: all of `0..permutations`, or a shard's block.
    pub drawn: std::ops::Range<usize>,
    /// Counts of every permutation gathered from shards: used instead of drawing.
    pub given: Option<Vec<Counts>>,
}

impl Replicates {
    /// All `permutations` drawn from `stream`.
    pub fn all(permutations: usize, stream: u64) -> Self {
        Replicates {
            permutations,
            stream,
            drawn: 0..permutations,
            given: None,
        }
    }
}

/// An ordered sample of `depth` distinct integers from `0..n`: the first `depth` steps of a
/// Fisher–Yates shuffle, the displaced entries kept in a map instead of an array of n.
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

/// One block of permutations: the samples, their values and the running sums of the values.
struct Block {
    used: usize,
    depth: usize,
    values: Vec<f64>,
    prefix: Vec<f64>,
    /// Where each area was drawn, (permutation, position), grouped by area in order of r.
    hits: Vec<(u32, u32)>,
    starts: Vec<u32>,
}

impl Block {
    fn draw(v: &[f64], depth: usize, first: usize, used: usize, stream: u64) -> Block {
        let n = v.len();
        let samples: Vec<Vec<u32>> = (first..first + used)
            .into_par_iter()
            .map(|r| ordered_sample(n, depth, &mut Draws::new(stream, r as u64)))
            .collect();
        let values: Vec<f64> = samples
            .iter()
            .flat_map(|q| q.iter().map(|&a| v[a as usize]))
            .collect();
        let mut prefix = vec![0.0; used * (depth + 1)];
        for r in 0..used {
            for m in 0..depth {
                prefix[r * (depth + 1) + m + 1] =
                    prefix[r * (depth + 1) + m] + values[r * depth + m];
            }
        }
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
        Block {
            used,
            depth,
            values,
            prefix,
            hits,
            starts,
        }
    }

    /// Adds area i's comparisons of the block's permuted lags with `observed`.
    fn count(&self, w: &SparseWeights, i: usize, observed: f64, count: &mut Counts) {
        let (js, ws) = w.row(i);
        let k = js.len();
        let equal = ws.iter().all(|x| *x == ws[0]);
        let mut own = self.hits[self.starts[i] as usize..self.starts[i + 1] as usize].iter();
        let mut next = own.next();
        let d = self.depth;
        for r in 0..self.used {
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
                let row = &self.prefix[r * (d + 1)..(r + 1) * (d + 1)];
                let sum = if skip == usize::MAX {
                    row[k]
                } else {
                    row[k + 1] - self.values[r * d + skip]
                };
                ws[0] * sum
            } else {
                let row = &self.values[r * d..(r + 1) * d];
                let taken = row.iter().enumerate().filter(|(m, _)| *m != skip);
                taken.zip(ws).map(|((_, x), wj)| wj * x).sum()
            };
            count[0] += u32::from(lag >= observed);
            count[1] += u32::from(lag <= observed);
        }
    }
}

/// Per area, how many conditionally permuted lags Σ_j w_ij v_π(j) were ≥ and ≤ `observed[i]`,
/// over the permutations `replicates.drawn` (or the counts given from shards); only areas with
/// `tested[i]` (and neighbours) are counted, the others stay [0, 0]. Permutation r's draws
/// depend only on r, so counts over disjoint blocks add up to the counts over their union.
/// `progress` is told how many permutations are done after each block.
pub fn conditional_counts(
    v: &[f64],
    w: &SparseWeights,
    observed: &[f64],
    tested: &[bool],
    replicates: &Replicates,
    progress: &dyn Fn(usize),
) -> Vec<Counts> {
    let n = v.len();
    if let Some(given) = &replicates.given {
        progress(replicates.permutations);
        return given.clone();
    }
    let (stream, span) = (replicates.stream, replicates.drawn.clone());
    let mut counts = vec![[0u32; 2]; n];
    if span.is_empty() || n < 2 {
        return counts;
    }
    let most = (0..n).map(|i| w.row(i).0.len()).max().unwrap_or(0);
    let depth = (most + 1).min(n);
    let block = (SHARED_DRAW_VALUES / depth)
        .min(span.len().div_ceil(10))
        .clamp(1, span.len());
    let mut first = span.start;
    while first < span.end {
        let used = block.min(span.end - first);
        let drawn = Block::draw(v, depth, first, used, stream);
        counts.par_iter_mut().enumerate().for_each(|(i, count)| {
            if tested[i] && !w.row(i).0.is_empty() && observed[i].is_finite() {
                drawn.count(w, i, observed[i], count);
            }
        });
        first += used;
        progress(first - span.start);
    }
    counts
}

/// Upper-tail rank p (Davison & Hinkley 1997, eq. 4.11): (1 + #{≥}) / (R + 1).
pub fn p_greater(count: Counts, permutations: usize) -> f64 {
    (1.0 + f64::from(count[0])) / (permutations as f64 + 1.0)
}

/// Two-sided rank p: min(1, 2 · min(p_greater, p_less)).
pub fn p_two_sided(count: Counts, permutations: usize) -> f64 {
    let r = permutations as f64 + 1.0;
    let smaller = (1.0 + f64::from(count[0].min(count[1]))) / r;
    (2.0 * smaller).min(1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use stance_core::weights::{Neighbours, Standardisation};

    /// A path 0 – 1 – … – (n − 1).
    fn path(n: usize) -> Neighbours {
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
        Neighbours { lists }
    }

    #[test]
    fn conditional_draws_match_the_exact_distribution() {
        // Area 0 of a 5-path has one neighbour; its permuted lag is a uniform draw from the
        // values of areas 1..4 (2, 3, 4, 5), so P(lag ≥ 4) = 1/2 exactly (worked by hand).
        // 20 000 draws: the share's standard error is 0.0035; 4.5 SE = 0.016.
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        let w = path(5).standardise(Standardisation::Binary);
        let observed = [4.0, f64::NAN, f64::NAN, f64::NAN, f64::NAN];
        let tested = [true, false, false, false, false];
        let replicates = Replicates::all(20_000, 3);
        let c = conditional_counts(&v, &w, &observed, &tested, &replicates, &|_| {});
        let share = f64::from(c[0][0]) / 20_000.0;
        assert!((share - 0.5).abs() < 0.016, "{share}");
        // P(lag ≤ 4) = 3/4.
        let share = f64::from(c[0][1]) / 20_000.0;
        assert!((share - 0.75).abs() < 0.016, "{share}");
        assert_eq!(c[1], [0, 0]);
    }

    #[test]
    fn counts_do_not_depend_on_threads() {
        let n = 300;
        let v: Vec<f64> = (0..n).map(|i| ((i * 37) % 11) as f64).collect();
        let w = path(n).standardise(Standardisation::Row);
        let observed: Vec<f64> = (0..n).map(|i| w.lag(i, &v)).collect();
        let tested = vec![true; n];
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("pool")
                .install(|| {
                    let replicates = Replicates::all(99, 5);
                    conditional_counts(&v, &w, &observed, &tested, &replicates, &|_| {})
                })
        };
        assert_eq!(run(1), run(2));
    }

    #[test]
    fn counts_over_blocks_add_up_to_the_whole() {
        // Shards: permutations 0..37, 37..60, 60..99 drawn apart and summed give exactly the
        // counts of 0..99 drawn at once.
        let n = 120;
        let v: Vec<f64> = (0..n).map(|i| ((i * 13) % 7) as f64).collect();
        let w = path(n).standardise(Standardisation::Binary);
        let observed: Vec<f64> = (0..n).map(|i| w.lag(i, &v)).collect();
        let tested = vec![true; n];
        let whole =
            conditional_counts(&v, &w, &observed, &tested, &Replicates::all(99, 8), &|_| {});
        let mut summed = vec![[0u32; 2]; n];
        for drawn in [0..37, 37..60, 60..99] {
            let part = Replicates {
                drawn,
                ..Replicates::all(99, 8)
            };
            let c = conditional_counts(&v, &w, &observed, &tested, &part, &|_| {});
            for (s, c) in summed.iter_mut().zip(&c) {
                s[0] += c[0];
                s[1] += c[1];
            }
        }
        assert_eq!(summed, whole);
    }

    #[test]
    fn rank_p_values() {
        // 999 replicates, 10 at least as large, 990 at most as large (worked by hand).
        assert!((p_greater([10, 990], 999) - 0.011).abs() < 1e-15);
        assert!((p_two_sided([10, 990], 999) - 0.022).abs() < 1e-15);
        assert!((p_two_sided([999, 999], 999) - 1.0).abs() < 1e-15);
    }
}
