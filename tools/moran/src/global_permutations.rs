//! The kernel of the global permutation test: for random relabellings π of the centred values
//! z, the cross products C_π = Σ_i z_π(i) Σ_j w_ij z_π(j) (Cliff & Ord 1981, ch. 2: the
//! randomisation distribution of Moran's I is that of n/S0 · C_π / Σz²).
//!
//! Method: blocks of [`BLOCK`] permutations per pass over the weights. Each replicate r draws
//! its relabelling with [`Draws`]`::new(seed, r)` (a Fisher–Yates shuffle of the area labels);
//! the block's permuted values are stored interleaved, one `[f64; BLOCK]` per area, so one pass
//! over the links gathers every replicate of the block at once with vector arithmetic (AVX-512
//! or AVX2 where the processor has them). Every replicate's sum is formed in the same order,
//! row by row and link by link with a separate multiply and add, so its value does not depend on
//! the block size, the vector width or the number of threads.

use std::sync::Mutex;

use rayon::prelude::*;
use stance_core::montecarlo::Draws;
use stance_core::weights::SparseWeights;

/// Permutations gathered in one pass over the weights.
const BLOCK: usize = 16;

/// Permutations between two progress reports (a multiple of [`BLOCK`]).
const PROGRESS_STEP: usize = 32 * BLOCK;

/// One worker's buffers: each replicate's shuffled copy of the values, then the block's values
/// interleaved by area.
struct Scratch {
    shuffled: Vec<f64>,
    lanes: Vec<[f64; BLOCK]>,
}

impl Scratch {
    fn new(n: usize) -> Self {
        Scratch {
            shuffled: vec![0.0; n * BLOCK],
            lanes: vec![[0.0; BLOCK]; n],
        }
    }

    /// Lays out `z` relabelled by each replicate of `replicates` (at most [`BLOCK`]; unused
    /// lanes hold 0): each replicate shuffles its own copy (which stays in the core's cache),
    /// then the copies are interleaved in one sequential pass.
    fn fill(&mut self, z: &[f64], replicates: &[u64], seed: u64) {
        let n = z.len();
        let used = replicates.len().min(BLOCK);
        for (copy, &r) in self.shuffled.chunks_exact_mut(n).zip(replicates) {
            copy.copy_from_slice(z);
            Draws::new(seed, r).shuffle(copy);
        }
        let shuffled = &self.shuffled;
        for (j, lane) in self.lanes.iter_mut().enumerate() {
            for (k, value) in lane.iter_mut().enumerate().take(used) {
                *value = shuffled[k * n + j];
            }
            lane[used..].fill(0.0);
        }
    }
}

/// Σ_i v_i Σ_j w_ij v_j for each lane of `lanes`.
#[inline(always)]
fn pass(w: &SparseWeights, lanes: &[[f64; BLOCK]]) -> [f64; BLOCK] {
    let mut total = [0.0; BLOCK];
    for (own, span) in lanes.iter().zip(w.offsets.windows(2)) {
        let (js, ws) = (
            &w.neighbours[span[0]..span[1]],
            &w.weights[span[0]..span[1]],
        );
        let mut lag = [0.0; BLOCK];
        for (j, wj) in js.iter().zip(ws) {
            let values = &lanes[*j as usize];
            for k in 0..BLOCK {
                lag[k] += wj * values[k];
            }
        }
        for k in 0..BLOCK {
            total[k] += own[k] * lag[k];
        }
    }
    total
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
fn pass_avx512(w: &SparseWeights, lanes: &[[f64; BLOCK]]) -> [f64; BLOCK] {
    pass(w, lanes)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn pass_avx2(w: &SparseWeights, lanes: &[[f64; BLOCK]]) -> [f64; BLOCK] {
    pass(w, lanes)
}

/// [`pass`] in the widest vectors the processor has (separate multiplies and adds in every
/// width, so the sums are the same).
fn pass_widest(w: &SparseWeights, lanes: &[[f64; BLOCK]]) -> [f64; BLOCK] {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx512f") {
            // SAFETY: the processor supports AVX-512F (checked above).
            return unsafe { pass_avx512(w, lanes) };
        }
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2 (checked above).
            return unsafe { pass_avx2(w, lanes) };
        }
    }
    pass(w, lanes)
}

/// Buffers lent to rayon's jobs and given back when a job ends, so a run allocates (and the
/// kernel zeroes) one set per concurrent job rather than one per job.
struct Lent<'p> {
    scratch: Option<Scratch>,
    pool: &'p Mutex<Vec<Scratch>>,
}

impl<'p> Lent<'p> {
    fn take(pool: &'p Mutex<Vec<Scratch>>, n: usize) -> Self {
        let scratch = pool.lock().ok().and_then(|mut p| p.pop());
        Lent {
            scratch: Some(scratch.unwrap_or_else(|| Scratch::new(n))),
            pool,
        }
    }
}

impl Drop for Lent<'_> {
    fn drop(&mut self) {
        if let (Some(scratch), Ok(mut pool)) = (self.scratch.take(), self.pool.lock()) {
            pool.push(scratch);
        }
    }
}

/// C_π for the replicates 0..`permutations` of a run seeded with `seed`, in replicate order.
/// `z` holds the centred values (one per row of `w`); `progress` is told how many are done.
pub fn cross_products(
    w: &SparseWeights,
    z: &[f64],
    (permutations, seed): (usize, u64),
    progress: &dyn Fn(usize),
) -> Vec<f64> {
    let indices: Vec<u64> = (0..permutations as u64).collect();
    let pool = Mutex::new(Vec::new());
    let mut sums = Vec::with_capacity(permutations);
    for part in indices.chunks(PROGRESS_STEP) {
        let blocks: Vec<[f64; BLOCK]> = part
            .par_chunks(BLOCK)
            .map_init(
                || Lent::take(&pool, z.len()),
                |lent, chunk| {
                    let scratch = lent.scratch.get_or_insert_with(|| Scratch::new(z.len()));
                    scratch.fill(z, chunk, seed);
                    pass_widest(w, &scratch.lanes)
                },
            )
            .collect();
        for (chunk, block) in part.chunks(BLOCK).zip(&blocks) {
            sums.extend_from_slice(&block[..chunk.len()]);
        }
        progress(sums.len());
    }
    sums
}
