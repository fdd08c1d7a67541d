//! Property tests (proptest): the intensity surface integrates to the (weighted) point count.

use proptest::prelude::*;
use stance_core::grid::Grid;
use stance_density::binning::Points;
use stance_density::estimate::{Bandwidths, Estimator, Method};
use stance_density::kernel::Kernel;

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Σ f·δ² = Σ w for points whose kernel lies inside the grid. Tolerance 5e-3 relative: the
    /// Riemann sum of a kernel sampled at h/δ ≥ 8 (quartic and Gaussian errors are O((δ/h)²),
    /// observed < 1e-3; linear binning conserves mass exactly).
    #[test]
    fn intensity_integrates_to_the_weighted_count(
        coordinates in prop::collection::vec((300.0f64..700.0, 300.0f64..700.0, 0.0f64..5.0), 1..60),
        h in 80.0f64..150.0,
        gaussian in any::<bool>(),
    ) {
        let grid = Grid { x_min: 0.0, y_min: 0.0, cell_m: 10.0, cols: 100, rows: 100 };
        let x: Vec<f64> = coordinates.iter().map(|c| c.0).collect();
        let y: Vec<f64> = coordinates.iter().map(|c| c.1).collect();
        let w: Vec<f64> = coordinates.iter().map(|c| c.2).collect();
        let total: f64 = w.iter().sum();
        prop_assume!(total > 1e-6);
        // Keep the Gaussian's 5σ cut inside the grid: σ = h/4 here.
        let (kernel, bandwidth) = if gaussian { (Kernel::Gaussian, h / 4.0) } else { (Kernel::Quartic, h) };
        let estimator = Estimator::new(grid, kernel, Bandwidths::fixed(bandwidth), Method::Fft, None, false);
        let indices: Vec<usize> = (0..x.len()).collect();
        let surface = estimator.sum(&Points { x: &x, y: &y, weight: Some(&w) }, &indices);
        let mass: f64 = surface.iter().sum::<f64>() * grid.cell_m * grid.cell_m;
        prop_assert!((mass - total).abs() <= 5e-3 * total, "mass {mass} vs weights {total}");
    }
}
