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
            assert!((got - want).abs() < 1e-10, "cell ({x}, {y}) class {k}: {got} vs {want}");
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
    assert!((best.bandwidth_m - want).abs() < 1e-9, "{} vs {want}", best.bandwidth_m);
}
