//! Times the global Moran's I with its permutation test on a queen lattice of 250 × 280 areas (the size of the
//! 70,000-area benchmark: 556,824 links when every cell keeps its 3 to 8 queen neighbours).
//!
//! `cargo run --release -p stance-moran --example global_timing [PERMUTATIONS] [THREADS]`

use stance_core::weights::{Neighbours, Standardisation};
use stance_moran::maths::{global_moran, Alternative, Inference};

fn main() {
    let mut args = std::env::args().skip(1);
    let permutations: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(999);
    let threads: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(2);
    let (rows, cols) = (250usize, 280usize);
    let mut lists = vec![Vec::new(); rows * cols];
    for r in 0..rows {
        for c in 0..cols {
            for dr in [-1i64, 0, 1] {
                for dc in [-1i64, 0, 1] {
                    let (rr, cc) = (r as i64 + dr, c as i64 + dc);
                    if (dr, dc) != (0, 0)
                        && rr >= 0
                        && cc >= 0
                        && rr < rows as i64
                        && cc < cols as i64
                    {
                        lists[r * cols + c].push((rr as usize * cols + cc as usize) as u32);
                    }
                }
            }
        }
    }
    let w = Neighbours { lists }.standardise(Standardisation::Row);
    let z: Vec<f64> = (0..rows * cols)
        .map(|i| ((i * 7919) % 1009) as f64 - 504.0)
        .collect();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("pool");
    shuffle_only(rows * cols, permutations);
    for round in 0..3 {
        let start = std::time::Instant::now();
        let inference = Inference {
            permutations,
            seed: 1,
            alternative: Alternative::TwoSided,
        };
        let g = pool
            .install(|| global_moran(&z, &w, &inference, &|_| {}))
            .expect("valid values");
        println!(
            "round {round}: global Moran, {permutations} permutations over {} links: {:.3} s (mean {:e})",
            w.neighbours.len(),
            start.elapsed().as_secs_f64(),
            g.permutation_mean
        );
    }
}

/// The floor: the 999 Fisher–Yates shuffles alone on one thread.
fn shuffle_only(n: usize, permutations: usize) {
    let start = std::time::Instant::now();
    let mut labels: Vec<u32> = vec![0; n];
    let mut acc = 0u64;
    for r in 0..permutations as u64 {
        for (j, l) in labels.iter_mut().enumerate() {
            *l = j as u32;
        }
        stance_core::montecarlo::Draws::new(1, r).shuffle(&mut labels);
        acc += u64::from(labels[7]);
    }
    println!(
        "shuffles only (1 thread): {:.3} s ({acc})",
        start.elapsed().as_secs_f64()
    );
}
