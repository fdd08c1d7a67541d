//! Global permutation statistics pinned bit for bit from the kernel before issue 17 (blocks of 8
//! interleaved permutations, one pass over the weights per block). Any faster kernel must give
//! the same replicate values in the same order, so the same p and the same permutation mean
//! (a sum of all 999 replicates in order, so a single changed bit in one replicate shows).
//! The pins were printed by this test (`PRINT_PINS=1`) on commit 84680ff, before the change.

use stance_core::weights::{Neighbours, Standardisation};
use stance_moran::maths::{global_moran, Alternative, Inference};

/// An irregular lattice of `cols × rows` cells: queen links where a deterministic hash allows,
/// rook links always, a few cells cut off as islands, and uneven rows (3 to 8 neighbours).
fn irregular(cols: usize, rows: usize) -> Neighbours {
    let hash = |a: usize, b: usize| (a.wrapping_mul(2_654_435_761) ^ b.wrapping_mul(40_503)) % 7;
    let mut lists = vec![Vec::new(); cols * rows];
    for r in 0..rows {
        for c in 0..cols {
            let i = r * cols + c;
            if i % 97 == 13 {
                continue; // an island
            }
            for (dr, dc) in [
                (-1i64, -1i64),
                (-1, 0),
                (-1, 1),
                (0, -1),
                (0, 1),
                (1, -1),
                (1, 0),
                (1, 1),
            ] {
                let (rr, cc) = (r as i64 + dr, c as i64 + dc);
                if rr < 0 || cc < 0 || rr >= rows as i64 || cc >= cols as i64 {
                    continue;
                }
                let j = rr as usize * cols + cc as usize;
                let diagonal = dr != 0 && dc != 0;
                if j % 97 == 13 || (diagonal && hash(i.min(j), i.max(j)) < 3) {
                    continue;
                }
                lists[i].push(j as u32);
            }
        }
    }
    Neighbours { lists }
}

/// Values with a weak spatial trend plus a deterministic pseudo-random part.
fn values(cols: usize, rows: usize) -> Vec<f64> {
    (0..cols * rows)
        .map(|i| {
            let (r, c) = (i / cols, i % cols);
            let h = (i as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15);
            let noise = ((h ^ (h >> 29)).wrapping_mul(0xBF58_476D_1CE4_E5B9) >> 11) as f64
                / (1u64 << 53) as f64;
            0.03 * (r + c) as f64 / (cols + rows) as f64 + noise
        })
        .collect()
}

fn run(
    style: Standardisation,
    permutations: usize,
    seed: u64,
    alt: Alternative,
) -> (f64, f64, f64) {
    let (cols, rows) = (61, 47);
    let w = irregular(cols, rows).standardise(style);
    let g = global_moran(
        &values(cols, rows),
        &w,
        &Inference {
            permutations,
            seed,
            alternative: alt,
        },
        &|_| {},
    )
    .expect("valid");
    (g.i, g.p_permutation, g.permutation_mean)
}

#[test]
fn global_permutations_match_the_pinned_values() {
    let cases = [
        (Standardisation::Row, 999, 42, Alternative::TwoSided),
        (Standardisation::Binary, 999, 7, Alternative::Greater),
        (Standardisation::Row, 13, 3, Alternative::Less),
        (Standardisation::Row, 1, 11, Alternative::TwoSided),
    ];
    let got: Vec<(f64, f64, f64)> = cases
        .iter()
        .map(|&(s, n, seed, a)| run(s, n, seed, a))
        .collect();
    if std::env::var_os("PRINT_PINS").is_some() {
        for (i, p, mean) in &got {
            println!(
                "({:#018x}, {:#018x}, {:#018x}), // I {i}, p {p}, mean {mean}",
                i.to_bits(),
                p.to_bits(),
                mean.to_bits()
            );
        }
    }
    let pinned: [(u64, u64, u64); 4] = PINS;
    for (k, ((i, p, mean), (pi, pp, pm))) in got.iter().zip(pinned).enumerate() {
        assert_eq!(i.to_bits(), pi, "case {k}: I");
        assert_eq!(p.to_bits(), pp, "case {k}: p");
        assert_eq!(mean.to_bits(), pm, "case {k}: permutation mean");
    }
}

/// (I, p, permutation mean) as bits, printed before the change (values in the comments).
const PINS: [(u64, u64, u64); 4] = [
    // I -0.0029240138937761, p 0.818, mean -0.0005377377444071701
    (0xbf67f41a017f8865, 0x3fea2d0e56041893, 0xbf419edf0355b975),
    // I -0.0036242475193324756, p 0.626, mean -0.00012541777568592224
    (0xbf6db099122e385d, 0x3fe4083126e978d5, 0xbf2070527d649830),
    // I -0.0029240138937761, p 0.2857142857142857, mean 0.004128873319182139
    (0xbf67f41a017f8865, 0x3fd2492492492492, 0x3f70e96ffe00e0aa),
    // I -0.0029240138937761, p 1, mean -0.029615044607199957
    (0xbf67f41a017f8865, 0x3ff0000000000000, 0xbf9e5368003ae296),
];
