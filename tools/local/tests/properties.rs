//! Property tests of the local statistics on random attributes of a rook lattice.
//!
//! - Σ_i LJC_i = 2 BB: the local univariate join counts add up to twice the global BB count
//!   (Anselin & Li 2019, section 3: each BB join is counted from both ends).
//! - Gi* with binary weights is unchanged by rescaling the values (the statistic is a ratio and
//!   its moments scale with x̄ and s; Ord & Getis 1995), and its z has E = W_i / n.

use proptest::prelude::*;
use stance_core::weights::{Neighbours, Standardisation};
use stance_local::getis_ord::local_g;
use stance_local::joincount::{global_join_counts, local_join_counts, JoinKind};
use stance_local::permutation::Replicates;

const NONE: Replicates = Replicates {
    permutations: 0,
    stream: 0,
    drawn: 0..0,
    given: None,
};

/// Rook neighbours of a rows × cols lattice.
fn lattice(rows: usize, cols: usize) -> Neighbours {
    let id = |r: usize, c: usize| (r * cols + c) as u32;
    let lists = (0..rows * cols)
        .map(|i| {
            let (r, c) = (i / cols, i % cols);
            let mut l = vec![];
            if r > 0 {
                l.push(id(r - 1, c));
            }
            if c > 0 {
                l.push(id(r, c - 1));
            }
            if c + 1 < cols {
                l.push(id(r, c + 1));
            }
            if r + 1 < rows {
                l.push(id(r + 1, c));
            }
            l
        })
        .collect();
    Neighbours { lists }
}

proptest! {
    #[test]
    fn local_join_counts_add_up_to_twice_bb(x in proptest::collection::vec(any::<bool>(), 30)) {
        let w = lattice(5, 6).standardise(Standardisation::Binary);
        let local = local_join_counts(JoinKind::Univariate, &x, &x, &w, &NONE, &|_| {});
        let global = global_join_counts(&x, &w);
        let sum: f64 = local.join_count.iter().sum();
        prop_assert_eq!(sum, 2.0 * global.bb.count);
        prop_assert_eq!(global.bb.count + global.ww.count + global.bw.count, global.joins);
    }

    #[test]
    fn gi_star_is_scale_free(
        x in proptest::collection::vec(0.0f64..100.0, 30),
        scale in 0.01f64..1000.0,
    ) {
        prop_assume!(x.iter().sum::<f64>() > 1.0);
        let w = lattice(5, 6).standardise(Standardisation::Binary);
        let own = vec![1.0; 30];
        let a = local_g(&x, &w, Some(&own), &NONE, &|_| {}).expect("valid");
        let scaled: Vec<f64> = x.iter().map(|v| v * scale).collect();
        let b = local_g(&scaled, &w, Some(&own), &NONE, &|_| {}).expect("valid");
        for i in 0..30 {
            prop_assert!((a.g[i] - b.g[i]).abs() <= 1e-12 * a.g[i].abs().max(1.0));
            if a.z[i].is_finite() {
                prop_assert!((a.z[i] - b.z[i]).abs() <= 1e-8 * a.z[i].abs().max(1.0));
            }
            let neighbours = w.row(i).0.len() as f64;
            prop_assert!((a.expected[i] - (neighbours + 1.0) / 30.0).abs() < 1e-15);
        }
    }
}
