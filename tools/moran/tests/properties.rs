//! Property tests (proptest): relabelling the areas (permuting their order together with the
//! weights) leaves global Moran's I and its analytic moments unchanged (Cliff & Ord 1981: I
//! depends on the values and weights, not on the order in which areas are listed).

use proptest::prelude::*;
use stance_core::weights::{Neighbours, Standardisation};
use stance_moran::maths::{global_moran, Alternative, Inference};

/// A rook lattice of `cols × rows` cells: a fixed, connected neighbour structure.
fn lattice(cols: usize, rows: usize) -> Neighbours {
    let mut links = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            let i = (r * cols + c) as u32;
            if c + 1 < cols {
                links.push((i, i + 1));
                links.push((i + 1, i));
            }
            if r + 1 < rows {
                links.push((i, i + cols as u32));
                links.push((i + cols as u32, i));
            }
        }
    }
    Neighbours::from_links(cols * rows, links)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]

    #[test]
    fn relabelling_areas_leaves_global_morans_i_unchanged(
        values in prop::collection::vec(-100.0f64..100.0, 20),
        order in Just((0..20usize).collect::<Vec<_>>()).prop_shuffle(),
        row_standardised in any::<bool>(),
    ) {
        let nb = lattice(5, 4);
        let style = if row_standardised { Standardisation::Row } else { Standardisation::Binary };
        let mean = values.iter().sum::<f64>() / 20.0;
        prop_assume!(values.iter().any(|v| (v - mean).abs() > 1e-6));
        let original = global_moran(&values, &nb.standardise(style), &Inference { permutations: 0, seed: 1, alternative: Alternative::TwoSided }, &|_| {}).expect("moran");
        // Area `old` becomes area new_of[old].
        let mut new_of = [0u32; 20];
        for (new, old) in order.iter().enumerate() {
            new_of[*old] = new as u32;
        }
        let links: Vec<(u32, u32)> = (0..20)
            .flat_map(|i| nb.lists[i].iter().map(move |j| (i, *j as usize)))
            .map(|(i, j)| (new_of[i], new_of[j]))
            .collect();
        let relabelled = Neighbours::from_links(20, links);
        let permuted: Vec<f64> = order.iter().map(|old| values[*old]).collect();
        let again = global_moran(&permuted, &relabelled.standardise(style), &Inference { permutations: 0, seed: 1, alternative: Alternative::TwoSided }, &|_| {}).expect("moran");
        // 1e-12 relative: the same sums in another order differ only by rounding.
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * (1.0 + a.abs().max(b.abs()));
        prop_assert!(close(original.i, again.i), "I {} vs {}", original.i, again.i);
        prop_assert!(close(original.variance_randomisation, again.variance_randomisation));
    }
}
