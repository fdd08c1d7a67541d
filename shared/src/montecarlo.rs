//! Monte Carlo helpers: one seed per replicate (so results do not depend on the number of
//! threads) and rank-based p-values (Besag & Clifford 1991; Davison & Hinkley 1997, eq. 4.11).

use rand::{RngCore, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_xoshiro::Xoshiro256PlusPlus;

/// SplitMix64 finaliser (Steele, Lea & Flood 2014): a bijective mix of 64 bits.
pub fn mix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The seed of replicate `index` of a run seeded with `seed`: independent of thread count and
/// of the order in which replicates run.
pub fn replicate_seed(seed: u64, index: u64) -> u64 {
    mix64(mix64(seed) ^ mix64(index.wrapping_add(0x5851_F42D_4C95_7F2D)))
}

/// A ChaCha8 generator for replicate `index` (ChaCha output is stable across platforms and
/// crate versions of the same major release).
pub fn replicate_rng(seed: u64, index: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(replicate_seed(seed, index))
}

/// Uniform integers for the hot loops of permutation tests (hundreds of millions of draws):
/// Xoshiro256++ (Blackman & Vigna 2021), seeded per replicate like [`replicate_rng`], each 64-bit
/// output split into two 32-bit halves, mapped to `0..n` by Lemire's (2019) multiply-and-reject
/// method, which is exactly uniform. About four times cheaper per draw than ChaCha8.
#[derive(Debug, Clone)]
pub struct Draws {
    rng: Xoshiro256PlusPlus,
    spare: Option<u32>,
}

impl Draws {
    /// The generator of replicate `index` of a run seeded with `seed`.
    pub fn new(seed: u64, index: u64) -> Self {
        Draws {
            rng: Xoshiro256PlusPlus::seed_from_u64(replicate_seed(seed, index)),
            spare: None,
        }
    }

    #[inline]
    fn next_u32(&mut self) -> u32 {
        match self.spare.take() {
            Some(v) => v,
            None => {
                let v = self.rng.next_u64();
                self.spare = Some(v as u32);
                (v >> 32) as u32
            }
        }
    }

    /// A uniform integer in `0..n` (`n` ≥ 1).
    #[inline]
    pub fn below(&mut self, n: u32) -> u32 {
        debug_assert!(n > 0);
        let mut m = u64::from(self.next_u32()) * u64::from(n);
        if (m as u32) < n {
            // Reject the few low products that would over-represent some values.
            let threshold = n.wrapping_neg() % n;
            while (m as u32) < threshold {
                m = u64::from(self.next_u32()) * u64::from(n);
            }
        }
        (m >> 32) as u32
    }

    /// Shuffles `values` in place (Fisher–Yates, Durstenfeld's form).
    pub fn shuffle<T>(&mut self, values: &mut [T]) {
        for k in (1..values.len()).rev() {
            let j = self.below(k as u32 + 1) as usize;
            values.swap(k, j);
        }
    }
}

/// Monte Carlo p-value p = (1 + #{replicates ≥ observed}) / (R + 1) for an upper-tail test.
///
/// Ties count against the observed value (conservative). Returns 1 for R = 0.
pub fn upper_tail_p(observed: f64, replicates: &[f64]) -> f64 {
    let at_least = replicates.iter().filter(|r| **r >= observed).count();
    (1 + at_least) as f64 / (replicates.len() + 1) as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::Rng;

    #[test]
    fn replicate_seeds_are_distinct_and_stable() {
        let seeds: std::collections::HashSet<u64> =
            (0..10_000).map(|i| replicate_seed(7, i)).collect();
        assert_eq!(seeds.len(), 10_000);
        assert_ne!(replicate_seed(7, 0), replicate_seed(8, 0));
        let a: f64 = replicate_rng(7, 3).random();
        let b: f64 = replicate_rng(7, 3).random();
        assert_eq!(a, b);
    }

    #[test]
    fn draws_are_uniform_and_reproducible() {
        // Chi-square goodness of fit over 7 cells (6 degrees of freedom): the 0.999 quantile is
        // 22.46 (any chi-square table), so a correct generator fails this about once in 1000
        // seeds; seed 1 is fixed, so the check is deterministic.
        let mut draws = Draws::new(1, 0);
        let mut cells = [0u32; 7];
        let total = 70_000;
        for _ in 0..total {
            cells[draws.below(7) as usize] += 1;
        }
        let expected = f64::from(total) / 7.0;
        let chi2: f64 = cells
            .iter()
            .map(|&c| (f64::from(c) - expected).powi(2) / expected)
            .sum();
        assert!(chi2 < 22.46, "chi-square {chi2} over {cells:?}");
        // Large n: a value near 2^32 still lands in range, and draws repeat per seed.
        let big = u32::MAX - 5;
        assert!((0..1000).all(|_| draws.below(big) < big));
        let a: Vec<u32> = (0..5).map(|_| Draws::new(9, 4).below(1000)).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        let mut s: Vec<u32> = (0..100).collect();
        Draws::new(3, 3).shuffle(&mut s);
        let mut sorted = s.clone();
        sorted.sort_unstable();
        assert_eq!(sorted, (0..100).collect::<Vec<_>>());
        assert_ne!(s, sorted);
    }

    #[test]
    fn upper_tail_p_counts_ties_and_the_observation() {
        // Worked by hand: observed 5 among replicates {1, 5, 7, 2}: 2 at least as large → 3/5.
        assert_eq!(upper_tail_p(5.0, &[1.0, 5.0, 7.0, 2.0]), 0.6);
        assert_eq!(upper_tail_p(10.0, &[1.0; 999]), 0.001);
        assert_eq!(upper_tail_p(1.0, &[]), 1.0);
    }
}
