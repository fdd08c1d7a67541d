//! Type probabilities, the segregation statistic and the cross-validation criterion of
//! Diggle, Zheng & Durr (2005) against spatstat 3.0.3 (spatstat.explore 3.0.6, R 4.2.2, Debian's
//! r-cran-spatstat): tests/reference/make_segregation.R → tests/reference/data/segregation.json.
//! 150 points of three classes on the centres of 50 m cells of a 1 km square; Gaussian kernel,
//! sigma 300 m (our gaussian kernel's bandwidth is sigma), no edge correction (it cancels in
//! the probabilities).

use stance_core::grid::Grid;
use stance_density::binning::{cell_of, Points};
use stance_density::estimate::direct_sum;
use stance_density::kernel::Kernel;
use stance_density::segregation::{loo_statistic_at_points, probabilities, type_cv};

fn load() -> serde_json::Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/data/segregation.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("reference JSON")).expect("JSON")
}

fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

struct Data {
    x: Vec<f64>,
    y: Vec<f64>,
    labels: Vec<u8>,
    by_class: Vec<Vec<usize>>,
}

fn data(reference: &serde_json::Value) -> Data {
    let (x, y) = (floats(&reference["x"]), floats(&reference["y"]));
    let labels: Vec<u8> = reference["class"]
        .as_array()
        .expect("class")
        .iter()
        .map(|c| match c.as_str() {
            Some("oppose") => 0,
            Some("neutral") => 1,
            _ => 2,
        })
        .collect();
    let by_class = (0..3u8)
        .map(|k| (0..labels.len()).filter(|&i| labels[i] == k).collect())
        .collect();
    Data {
        x,
        y,
        labels,
        by_class,
    }
}

fn grid() -> Grid {
    Grid {
        x_min: 0.0,
        y_min: 0.0,
        cell_m: 50.0,
        cols: 20,
        rows: 20,
    }
}

#[test]
fn type_probabilities_match_spatstat_on_every_cell() {
    // spatstat: lambda_k from densityfun (exact Gaussian sums, edge = FALSE) at the 400 cell
    // centres, p_k = lambda_k / sum. Ours: exact direct sums per class on the grid. Every pair
    // is closer than 5 sigma (our Gaussian truncation), so both are exact sums; tolerance 1e-10.
    let reference = load();
    let d = data(&reference);
    let points = Points {
        x: &d.x,
        y: &d.y,
        weight: None,
    };
    let g = grid();
    let sigma = reference["sigma_m"].as_f64().expect("sigma");
    let sums: Vec<Vec<f64>> = d
        .by_class
        .iter()
        .map(|idx| direct_sum(&g, Kernel::Gaussian, sigma, &points, idx))
        .collect();
    let p = probabilities(&sums);
    let (gx, gy) = (floats(&reference["grid_x"]), floats(&reference["grid_y"]));
    let expected: Vec<Vec<f64>> = reference["prob_grid"]
        .as_array()
        .expect("prob")
        .iter()
        .map(floats)
        .collect();
    for (j, (x, y)) in gx.iter().zip(&gy).enumerate() {
        let cell = cell_of(&g, *x, *y).expect("cell");
        for k in 0..3 {
            let (got, want) = (p[k][cell], expected[k][j]);
            assert!(
                (got - want).abs() < 1e-10,
                "cell ({x}, {y}) class {k}: {got} vs {want}"
            );
        }
    }
}

#[test]
fn segregation_statistic_at_points_matches_spatstat() {
    // spatstat's segregation.test sums over the data points with leave-one-out probabilities
    // (relrisk at = "points"); our loo_statistic_at_points is that variant. Tolerance 1e-9
    // relative: 450 squared differences of exact sums.
    let reference = load();
    let d = data(&reference);
    let sigma = reference["sigma_m"].as_f64().expect("sigma");
    let got = loo_statistic_at_points(&d.x, &d.y, &d.labels, sigma);
    let want = reference["segregation_statistic"].as_f64().expect("T");
    assert!((got - want).abs() < 1e-9 * want, "{got} vs {want}");
}

#[test]
fn type_cross_validation_matches_spatstat_likelihood_criterion() {
    // spatstat's bw.relrisk(method = "likelihood") criterion at each sigma is
    // −(1/n) Σ ln p̂₋ᵢ(y_i | x_i); ours is Σ ln p̂₋ᵢ on binned data, exact for points on cell
    // centres. Tolerance 1e-5 relative: our FFT kernel is truncated at 5 sigma, which for the
    // smallest sigmas (60 m: 300 m) drops terms of relative size ≤ exp(−12.5) ≈ 4e-6.
    // The chosen sigma (the criterion's optimum over the same candidates) must be the same.
    let reference = load();
    let d = data(&reference);
    let points = Points {
        x: &d.x,
        y: &d.y,
        weight: None,
    };
    let candidates = floats(&reference["cv_h"]);
    let criterion = floats(&reference["cv_criterion"]);
    let scores = type_cv(&grid(), Kernel::Gaussian, &points, &d.by_class, &candidates);
    let n = d.x.len() as f64;
    for (score, want) in scores.iter().zip(&criterion) {
        let got = -score.log_likelihood / n;
        assert!(
            (got - want).abs() < 1e-5 * want.abs(),
            "sigma {}: {got} vs {want}",
            score.bandwidth_m
        );
    }
    let best = scores
        .iter()
        .max_by(|a, b| a.log_likelihood.total_cmp(&b.log_likelihood))
        .expect("best");
    let want = reference["cv_sigma_m"].as_f64().expect("sigma");
    assert!(
        (best.bandwidth_m - want).abs() < 1e-9,
        "{} vs {want}",
        best.bandwidth_m
    );
}

#[test]
fn constant_type_probabilities_reject_at_about_alpha_on_any_thread_count() {
    // Property (Diggle, Zheng & Durr 2005: the Monte Carlo test is exact under random
    // labelling): 60 data sets of 200 uniform points with labels drawn independently with
    // constant probabilities 0.3/0.3/0.4, 39 relabellings each, α = 0.1. Under H0,
    // P(p ≤ 0.1) = 4/40 = 0.1, so the rejections are Binomial(60, 0.1): mean 6; accept 1–12
    // (P(X = 0) = 0.002, P(X ≥ 13) ≈ 0.007).
    use rand::{Rng, SeedableRng};
    use stance_density::estimate::{Bandwidths, Estimator, Method};
    use stance_density::segregation::{
        monte_carlo, p_value, probabilities, region, statistic, Relabelling,
    };
    use std::sync::atomic::AtomicBool;
    let g = grid();
    let estimator = Estimator::new(
        g,
        Kernel::Gaussian,
        Bandwidths::fixed(150.0),
        Method::Direct,
        None,
        false,
    );
    let stop = AtomicBool::new(false);
    let mut rejected = 0;
    for seed in 0..60u64 {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let n = 200;
        let x: Vec<f64> = (0..n).map(|_| rng.random::<f64>() * 1000.0).collect();
        let y: Vec<f64> = (0..n).map(|_| rng.random::<f64>() * 1000.0).collect();
        let labels: Vec<u8> = (0..n)
            .map(|_| {
                let u = rng.random::<f64>();
                if u < 0.3 {
                    0
                } else if u < 0.6 {
                    1
                } else {
                    2
                }
            })
            .collect();
        let points = Points {
            x: &x,
            y: &y,
            weight: None,
        };
        let members: Vec<usize> = (0..n).collect();
        let sums: Vec<Vec<f64>> = (0..3u8)
            .map(|k| {
                let idx: Vec<usize> = members
                    .iter()
                    .copied()
                    .filter(|&i| labels[i] == k)
                    .collect();
                estimator.sum(&points, &idx)
            })
            .collect();
        let p = probabilities(&sums);
        let pooled: Vec<f64> = (0..g.len())
            .map(|c| sums.iter().map(|s| s[c]).sum())
            .collect();
        let inside = region(&pooled);
        let mean: Vec<f64> = (0..3u8)
            .map(|k| labels.iter().filter(|&&l| l == k).count() as f64 / n as f64)
            .collect();
        let observed = statistic(&p, &mean, &inside);
        let job = Relabelling {
            estimator: &estimator,
            points: &points,
            members: &members,
            labels: &labels,
            pooled_sum: &pooled,
            region: &inside,
            observed: &p,
            mean: &mean,
            permutations: 39,
            seed,
        };
        let outcome = monte_carlo(&job, &stop, &|_| {}).expect("run");
        if seed == 0 {
            // The same replicates and pointwise p-values on one thread as on several.
            let one = rayon::ThreadPoolBuilder::new()
                .num_threads(1)
                .build()
                .expect("pool");
            let again = one
                .install(|| monte_carlo(&job, &stop, &|_| {}))
                .expect("run");
            assert_eq!(again.replicates, outcome.replicates);
            assert_eq!(
                format!("{:?}", again.pointwise),
                format!("{:?}", outcome.pointwise)
            );
        }
        if p_value(observed, &outcome.replicates) <= 0.1 {
            rejected += 1;
        }
    }
    eprintln!("{rejected} of 60 rejected at 0.1");
    assert!((1..=12).contains(&rejected), "{rejected} of 60");
}
