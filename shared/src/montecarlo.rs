//! Monte Carlo helpers: one seed per replicate (so results do not depend on the number of
//! threads) and rank-based p-values (Besag & Clifford 1991; Davison & Hinkley 1997, eq. 4.11).

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

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
    fn upper_tail_p_counts_ties_and_the_observation() {
        // Worked by hand: observed 5 among replicates {1, 5, 7, 2}: 2 at least as large → 3/5.
        assert_eq!(upper_tail_p(5.0, &[1.0, 5.0, 7.0, 2.0]), 0.6);
        assert_eq!(upper_tail_p(10.0, &[1.0; 999]), 0.001);
        assert_eq!(upper_tail_p(1.0, &[]), 1.0);
    }
}
