//! Properties of the estimator: a single point, total mass, edge correction, calibration.

use geo_types::{polygon, MultiPolygon};
use rand::{Rng, SeedableRng};
use stance_core::grid::Grid;
use stance_density::binning::Points;
use stance_density::estimate::{Bandwidths, Estimator, Method};
use stance_density::kernel::Kernel;
use stance_density::{compare, mask, tolerance};
use std::sync::atomic::AtomicBool;

fn grid(cols: usize, rows: usize, cell: f64) -> Grid {
    Grid {
        x_min: 0.0,
        y_min: 0.0,
        cell_m: cell,
        cols,
        rows,
    }
}

#[test]
fn a_single_point_at_a_centre_reproduces_the_kernel_and_mass_is_kept() {
    // A point on a cell centre bins exactly, so the FFT surface is the sampled kernel up to
    // round-off (1e-12 of the peak; plus the Gaussian's value at its 5σ cut). Σ f·δ² equals W up to the Riemann-sum error of a smooth
    // kernel on cells h/δ = 10 (< 1e-3 relative; the Gaussian also loses 3.7e-6 past 5σ).
    let g = grid(41, 41, 10.0);
    let (x, y) = ([205.0], [205.0]);
    let w = [3.0];
    let points = Points {
        x: &x,
        y: &y,
        weight: Some(&w),
    };
    for kernel in [Kernel::Quartic, Kernel::Gaussian, Kernel::Epanechnikov] {
        let h = if kernel == Kernel::Gaussian {
            30.0
        } else {
            100.0
        };
        for method in [Method::Fft, Method::Direct] {
            let e = Estimator::new(g, kernel, Bandwidths::fixed(h), method, None, false);
            let s = e.sum(&points, &[0]);
            let peak = 3.0 * kernel.value(0.0, h);
            // The Gaussian is cut at 5σ, where it is e^-12.5 of its peak.
            let cut = if kernel == Kernel::Gaussian {
                peak * (-12.5f64).exp()
            } else {
                0.0
            };
            for r in 0..41 {
                for c in 0..41 {
                    let (cx, cy) = g.centre(c, r);
                    let want = 3.0 * kernel.value((cx - 205.0).powi(2) + (cy - 205.0).powi(2), h);
                    assert!(
                        (s[r * 41 + c] - want).abs() <= 1e-12 * peak + cut,
                        "{kernel:?} {method:?} {r} {c}: {} vs {want}",
                        s[r * 41 + c]
                    );
                }
            }
            let mass: f64 = s.iter().sum::<f64>() * 100.0;
            // Epanechnikov's slope jumps at d = h, so its Riemann error is O(δ/h) (observed 1.3e-3).
            let tolerance = if kernel == Kernel::Epanechnikov {
                5e-3
            } else {
                1e-3
            };
            assert!(
                (mass / 3.0 - 1.0).abs() < tolerance,
                "{kernel:?}: mass {mass}"
            );
        }
    }
}

#[test]
fn edge_correction_is_flat_in_a_square_mask() {
    // Points on a 25 m lattice filling a 5 km square (intensity 1/625 per m²), cells of 100 m,
    // quartic h = 800 m. Uncorrected, the edge cells fall to about half; corrected, every cell
    // in the mask is within 5% of the true intensity (common practice, no source).
    let g = grid(60, 60, 100.0);
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for i in 0..200 {
        for j in 0..200 {
            x.push(500.0 + 12.5 + 25.0 * i as f64);
            y.push(500.0 + 12.5 + 25.0 * j as f64);
        }
    }
    let square = polygon![(x: 500.0, y: 500.0), (x: 5500.0, y: 500.0), (x: 5500.0, y: 5500.0), (x: 500.0, y: 5500.0)];
    let m = mask::rasterise(&g, &[MultiPolygon(vec![square])]);
    let points = Points {
        x: &x,
        y: &y,
        weight: None,
    };
    let all: Vec<usize> = (0..x.len()).collect();
    let truth = 1.0 / 625.0;
    let plain = Estimator::new(
        g,
        Kernel::Quartic,
        Bandwidths::fixed(800.0),
        Method::Fft,
        Some(m.clone()),
        false,
    )
    .sum(&points, &all);
    let corrected = Estimator::new(
        g,
        Kernel::Quartic,
        Bandwidths::fixed(800.0),
        Method::Fft,
        Some(m.clone()),
        true,
    )
    .sum(&points, &all);
    let corner = 5 * 60 + 5;
    assert!(
        plain[corner] < 0.4 * truth,
        "uncorrected corner {}",
        plain[corner] / truth
    );
    for (k, inside) in m.iter().enumerate() {
        if *inside {
            assert!(
                (corrected[k] / truth - 1.0).abs() < 0.05,
                "cell {k}: {}",
                corrected[k] / truth
            );
        } else {
            assert!(corrected[k].is_nan());
        }
    }
}

#[test]
fn random_labels_flag_about_five_percent_of_cells() {
    // 20 data sets of 400 uniform points with random labels, 99 relabellings each: the per-cell
    // Monte Carlo test is exact under exchangeability, so the expected share flagged at 0.05 is
    // 5% (≤ with ties). Cells are strongly correlated; the band 2.5–7.5% for the mean over data
    // sets is about ±3 standard errors of that mean, estimated from pilot runs.
    let g = grid(30, 30, 100.0);
    let mut shares = Vec::new();
    for set in 0..20u64 {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(100 + set);
        let n = 400;
        let x: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..3000.0)).collect();
        let y: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..3000.0)).collect();
        let points = Points {
            x: &x,
            y: &y,
            weight: None,
        };
        let (a, b): (Vec<usize>, Vec<usize>) = (0..n).partition(|_| rng.random_bool(0.5));
        let e = Estimator::new(
            g,
            Kernel::Quartic,
            Bandwidths::fixed(600.0),
            Method::Fft,
            None,
            false,
        );
        let (sa, sb) = (e.sum(&points, &a), e.sum(&points, &b));
        let pair = compare::Pair {
            a: &sa,
            b: &sb,
            weight_a: a.len() as f64,
            weight_b: b.len() as f64,
        };
        let (rho, floor) = tolerance::observed_log_ratio(&pair);
        let pooled: Vec<f64> = sa.iter().zip(&sb).map(|(p, q)| p + q).collect();
        let job = tolerance::Relabelling {
            estimator: &e,
            points: &points,
            a: &a,
            b: &b,
            pooled_sum: &pooled,
            observed: &rho,
            floor,
            permutations: 99,
            seed: set,
        };
        let p = tolerance::relabelling_p_values(&job, &AtomicBool::new(false), &|_| {})
            .expect("not stopped");
        let tested: Vec<f64> = p.upper.iter().copied().filter(|v| v.is_finite()).collect();
        shares.push(tested.iter().filter(|v| **v <= 0.05).count() as f64 / tested.len() as f64);
    }
    let mean = shares.iter().sum::<f64>() / shares.len() as f64;
    assert!(
        (0.025..=0.075).contains(&mean),
        "mean share flagged {mean}: {shares:?}"
    );
}

#[test]
fn relabelling_does_not_depend_on_threads() {
    let g = grid(20, 20, 100.0);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let x: Vec<f64> = (0..300).map(|_| rng.random_range(0.0..2000.0)).collect();
    let y: Vec<f64> = (0..300).map(|_| rng.random_range(0.0..2000.0)).collect();
    let points = Points {
        x: &x,
        y: &y,
        weight: None,
    };
    let a: Vec<usize> = (0..150).collect();
    let b: Vec<usize> = (150..300).collect();
    let e = Estimator::new(
        g,
        Kernel::Quartic,
        Bandwidths::fixed(500.0),
        Method::Fft,
        None,
        false,
    );
    let (sa, sb) = (e.sum(&points, &a), e.sum(&points, &b));
    let pair = compare::Pair {
        a: &sa,
        b: &sb,
        weight_a: 150.0,
        weight_b: 150.0,
    };
    let (rho, floor) = tolerance::observed_log_ratio(&pair);
    let pooled: Vec<f64> = sa.iter().zip(&sb).map(|(p, q)| p + q).collect();
    let job = tolerance::Relabelling {
        estimator: &e,
        points: &points,
        a: &a,
        b: &b,
        pooled_sum: &pooled,
        observed: &rho,
        floor,
        permutations: 30,
        seed: 9,
    };
    let run = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool")
            .install(|| {
                tolerance::relabelling_p_values(&job, &AtomicBool::new(false), &|_| {})
                    .expect("run")
                    .upper
            })
    };
    let one = run(1);
    assert_eq!(
        one.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
        run(3).iter().map(|v| v.to_bits()).collect::<Vec<_>>()
    );
}
