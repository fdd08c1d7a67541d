//! Kernel sums at grid points against KDEpy and SciPy (tests/reference/data/density.json,
//! written by tests/reference/make_density.py; versions are recorded in the file).

use stance_core::grid::Grid;
use stance_density::binning::Points;
use stance_density::estimate::{binning_error_bound, direct_sum, Bandwidths, Estimator, Method};
use stance_density::kernel::Kernel;

fn load() -> serde_json::Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/data/density.json"
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

#[test]
fn exact_and_binned_sums_match_kdepy_and_scipy() {
    let data = load();
    let (x, y, w) = (
        floats(&data["x"]),
        floats(&data["y"]),
        floats(&data["weight"]),
    );
    let g = &data["grid"];
    let grid = Grid {
        x_min: g["x_min"].as_f64().expect("x_min"),
        y_min: g["y_min"].as_f64().expect("y_min"),
        cell_m: g["cell_m"].as_f64().expect("cell"),
        cols: g["cols"].as_u64().expect("cols") as usize,
        rows: g["rows"].as_u64().expect("rows") as usize,
    };
    let points = Points {
        x: &x,
        y: &y,
        weight: Some(&w),
    };
    let all: Vec<usize> = (0..x.len()).collect();
    let total: f64 = w.iter().sum();
    for (kernel, bandwidth, key) in [
        (Kernel::Quartic, data["h_m"].as_f64().expect("h"), "quartic"),
        (
            Kernel::Epanechnikov,
            data["h_m"].as_f64().expect("h"),
            "epanechnikov",
        ),
        (
            Kernel::Gaussian,
            data["sigma_m"].as_f64().expect("sigma"),
            "gaussian",
        ),
    ] {
        let want = floats(&data[format!("{key}_per_m2")]);
        let source = data["sources"][key].as_str().expect("source");
        let max = want.iter().cloned().fold(0.0, f64::max);
        // Exact sums: both sides in double precision; 1e-9 of the maximum covers summation
        // order and the Gaussian's truncation at 5σ (mass beyond 3.7e-6 of one kernel, whose
        // value there is e^-12.5 ≈ 3.7e-6 of its peak; here < 1e-9 of the surface maximum is
        // not guaranteed for the Gaussian, so its bound is that tail: 3.7e-6 · W · K(0)).
        let direct = direct_sum(&grid, kernel, bandwidth, &points, &all);
        let tail = if kernel == Kernel::Gaussian {
            (-12.5f64).exp() * total * kernel.value(0.0, bandwidth)
        } else {
            0.0
        };
        for (k, (g, r)) in direct.iter().zip(&want).enumerate() {
            assert!(
                (g - r).abs() <= 1e-9 * max + tail,
                "{source}: direct at cell {k}: {g} vs {r}"
            );
        }
        // Binned FFT: within the linear-binning bound of `binning_error_bound` times W, plus the
        // Gaussian tail (observed at h/δ = 4.7: quartic 2.7% of the maximum, bound 54%).
        let estimator = Estimator::new(
            grid,
            kernel,
            Bandwidths::fixed(bandwidth),
            Method::Fft,
            None,
            false,
        );
        let binned = estimator.sum(&points, &all);
        let bound =
            binning_error_bound(kernel, bandwidth, grid.cell_m) * total + tail + 1e-12 * max;
        let worst = binned
            .iter()
            .zip(&want)
            .map(|(g, r)| (g - r).abs())
            .fold(0.0, f64::max);
        assert!(
            worst <= bound,
            "{source}: binned error {worst} exceeds {bound}"
        );
        eprintln!(
            "{source}: binned max error {:.3e} of the maximum (bound {:.3e})",
            worst / max,
            bound / max
        );
    }
}
