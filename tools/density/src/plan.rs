//! The plan of a run before any surface: the bandwidth (given, normal-reference rule or
//! likelihood cross-validation), the grid, the mask on it, and the estimator (Abramson-adaptive
//! when asked).

use geo_types::MultiPolygon;
use stance_core::error::{Error, Result};
use stance_core::grid::Grid;
use stance_core::host::shard::Tiling;
use stance_core::host::Run;

use crate::bandwidth::{self, CvScore};
use crate::binning::{self, Points};
use crate::estimate::{self, Bandwidths, Estimator, Method};
use crate::input::Records;
use crate::layout::{self, Extent};
use crate::mask;
use crate::memory::{self, Shape};
use crate::params::{BandwidthRule, Config, MethodChoice};

/// How the bandwidth was chosen.
#[derive(Debug, Clone)]
pub struct Selection {
    /// The bandwidth in use (m): selected × `--bandwidth-scale`.
    pub h: f64,
    /// The bandwidth given or selected (m), before the scale.
    pub selected: f64,
    /// How it was chosen (for the summary).
    pub how: String,
    /// The normal-reference bandwidth (m), when the points have a spread.
    pub rule_h: Option<f64>,
    /// Scores of the cross-validation candidates (empty unless `--bandwidth cv`).
    pub cv_scores: Vec<CvScore>,
}

/// Everything the surfaces are computed with.
#[derive(Debug)]
pub struct Plan {
    /// The bandwidth.
    pub bandwidth: Selection,
    /// The grid.
    pub grid: Grid,
    /// The estimator on the grid (in a tiled run, direct sums only: the tiles' method is
    /// [`Plan::method`]).
    pub estimator: Estimator,
    /// How the kernel sums are computed (the same in every tile of a tiled run).
    pub method: Method,
    /// Geometric mean of the pilot estimate (per m²) of an adaptive estimate.
    pub pilot_geometric_mean: Option<f64>,
    /// Points outside the mask (they add nothing).
    pub dropped_outside_mask: usize,
}

/// Chooses the bandwidth and the grid and builds the estimator on the pooled points.
///
/// # Errors
/// A bandwidth that cannot be chosen, a grid too large, not enough memory.
pub fn plan(
    config: &Config,
    run: &Run,
    records: &Records,
    mask_polygons: Option<&[MultiPolygon<f64>]>,
) -> Result<Plan> {
    let points = &records.points();
    let pooled: Vec<usize> = (0..points.x.len()).collect();
    let extent = layout::data_extent(points, &pooled, mask_polygons);
    let cell_m = config.cell_m.unwrap_or_else(|| extent.default_cell_m());
    let frame = Frame { extent, cell_m };
    let bandwidth = select_bandwidth(config, run, points, &frame)?;
    let h = bandwidth.h;
    let masked = mask_polygons.is_some();
    let grid = surface_grid(config, run, &frame, h, masked)?;
    // The memory of a fixed-bandwidth run (or of an adaptive run's pilot), before any grid is
    // allocated; an adaptive run is checked again once its levels are known.
    let shape = Shape {
        grid: &grid,
        records: records.len(),
        weighted: records.weights.is_some(),
        timed: records.times.is_some(),
        levels: 1,
        h_m: h,
        h_max_m: h,
        method: choose(config, &grid, h, 1, points.x.len()),
        masked,
    };
    guard(config, run, &shape)?;
    run.log(format!(
        "bandwidth {h:.1} m ({}), grid {}×{} cells of {cell_m} m",
        bandwidth.how, grid.cols, grid.rows
    ));
    let mask = mask_polygons.map(|m| mask::rasterise(&grid, m));
    let dropped_outside_mask = match &mask {
        Some(m) => pooled
            .iter()
            .filter(|&&i| binning::cell_of(&grid, points.x[i], points.y[i]).is_none_or(|k| !m[k]))
            .count(),
        None => 0,
    };
    if dropped_outside_mask > 0 {
        run.log(format!(
            "warning: {dropped_outside_mask} points lie outside the mask and add nothing"
        ));
    }
    let (bandwidths, pilot_geometric_mean) = if config.adaptive {
        let method = choose(config, &grid, h, 1, points.x.len());
        let pilot = Estimator::new(
            grid,
            config.kernel,
            Bandwidths::fixed(h),
            method,
            None,
            false,
        );
        let pilot_sum = pilot.sum(points, &pooled);
        let (b, g) = estimate::abramson(&grid, &pilot_sum, points, h);
        (b, Some(g))
    } else {
        (Bandwidths::fixed(h), None)
    };
    let h_max = bandwidths.levels_m.iter().cloned().fold(0.0, f64::max);
    let levels = bandwidths.levels_m.len();
    let method = choose(config, &grid, h_max, levels, points.x.len());
    if levels > 1 {
        // The adaptive levels' spectra are padded for the largest bandwidth.
        let shape = Shape {
            levels,
            h_max_m: h_max,
            method,
            ..shape
        };
        guard(config, run, &shape)?;
    }
    // A tiled run never transforms the whole grid: its tiles sum on their own bands.
    let whole_method = match config.tiling {
        Tiling::Whole => method,
        _ => Method::Direct,
    };
    let estimator = Estimator::new(
        grid,
        config.kernel,
        bandwidths,
        whole_method,
        mask,
        config.edge_correct,
    );
    Ok(Plan {
        bandwidth,
        grid,
        estimator,
        method,
        pilot_geometric_mean,
        dropped_outside_mask,
    })
}

/// The extent to cover and the cell size.
struct Frame {
    extent: Extent,
    cell_m: f64,
}

fn select_bandwidth(
    config: &Config,
    run: &Run,
    points: &Points<'_>,
    frame: &Frame,
) -> Result<Selection> {
    let pooled: Vec<usize> = (0..points.x.len()).collect();
    let rule_sigma = bandwidth::normal_reference_sigma(points, &pooled);
    let rule_h = rule_sigma.map(|s| bandwidth::bandwidth_for_sigma(config.kernel, s));
    let mut cv_scores = Vec::new();
    let (selected, how) = match (config.bandwidth_m, config.bandwidth, rule_h) {
        (Some(h), _, _) => (h, "given (--bandwidth-m)".to_owned()),
        (None, _, None) => {
            return Err(Error::argument(
                "--bandwidth",
                "the points have no spread (fewer than two distinct locations); give --bandwidth-m",
            ))
        }
        (None, BandwidthRule::Rule, Some(h_rule)) => (
            h_rule,
            "2-D normal-reference rule (Bowman & Azzalini 1997, eq. 2.4), matched by kernel variance"
                .to_owned(),
        ),
        (None, BandwidthRule::Cv, Some(h_rule)) => {
            let (best, scores) = cross_validate(config, run, points, frame, h_rule)?;
            cv_scores = scores;
            (best, "likelihood cross-validation on binned data".to_owned())
        }
    };
    let h = selected * config.bandwidth_scale;
    if !(h.is_finite() && h > 0.0) {
        return Err(Error::argument(
            "--bandwidth-scale",
            format!("gives bandwidth {h} m; expected a positive bandwidth"),
        ));
    }
    Ok(Selection {
        h,
        selected,
        how,
        rule_h,
        cv_scores,
    })
}

/// Likelihood cross-validation over 15 candidates from 1/4 to 2 × the rule bandwidth `h_rule`
/// whose kernels reach at least two cells: the best candidate and every score.
fn cross_validate(
    config: &Config,
    run: &Run,
    points: &Points<'_>,
    frame: &Frame,
    h_rule: f64,
) -> Result<(f64, Vec<CvScore>)> {
    let cell_m = frame.cell_m;
    let candidates: Vec<f64> = bandwidth::geometric_candidates(h_rule / 4.0, h_rule * 2.0, 15)
        .into_iter()
        .filter(|h| config.kernel.support_m(*h) >= 2.0 * cell_m)
        .collect();
    let (Some(&first), Some(&last)) = (candidates.first(), candidates.last()) else {
        return Err(Error::argument(
            "--cell-m",
            format!(
                "{cell_m} m is too coarse for cross-validation around the rule bandwidth \
                 {h_rule:.0} m; use a smaller cell"
            ),
        ));
    };
    let margin = config.kernel.support_m(last);
    let grid = layout::make_grid(frame.extent, margin, cell_m, config.max_cells)?;
    run.log(format!(
        "cross-validating {} bandwidths on a {}×{} grid",
        candidates.len(),
        grid.cols,
        grid.rows
    ));
    let pooled: Vec<usize> = (0..points.x.len()).collect();
    let scores = bandwidth::likelihood_cv(&grid, config.kernel, points, &pooled, &candidates);
    let best = scores
        .iter()
        .filter(|s| s.log_likelihood.is_finite())
        .max_by(|a, b| a.log_likelihood.total_cmp(&b.log_likelihood))
        .copied();
    let Some(best) = best else {
        return Err(Error::argument(
            "--bandwidth",
            "cv: every candidate leaves some point with no neighbour; give --bandwidth-m",
        ));
    };
    if best.bandwidth_m == first || best.bandwidth_m == last {
        run.log(format!(
            "warning: the cross-validated bandwidth {:.0} m is at the end of the candidates \
             (tied locations favour the smallest)",
            best.bandwidth_m
        ));
    }
    Ok((best.bandwidth_m, scores))
}

/// The grid of the surfaces for bandwidth `h`: the extent plus the kernel's reach (none when
/// masked), within `--max-cells` (the memory is checked by the caller, [`memory::estimate`]).
fn surface_grid(config: &Config, run: &Run, frame: &Frame, h: f64, masked: bool) -> Result<Grid> {
    let cell_m = frame.cell_m;
    let margin = config.kernel.support_m(h);
    let grid_margin = if masked { 0.0 } else { margin };
    let grid = layout::make_grid(frame.extent, grid_margin, cell_m, config.max_cells)?;
    let padded = (grid.rows as f64 + margin / cell_m) * (grid.cols as f64 + margin / cell_m);
    if padded > 4.0 * config.max_cells as f64 {
        return Err(Error::argument(
            "--bandwidth-m",
            format!(
                "{h:.0} m spans {:.0} cells; the padded FFT grid would exceed 4 × --max-cells",
                margin / cell_m
            ),
        ));
    }
    if margin < 2.0 * cell_m {
        run.log(format!(
            "warning: the kernel reaches {margin:.0} m, under two cells of {cell_m} m; \
             the surfaces will be spiky"
        ));
    }
    Ok(grid)
}

/// Refuses a run whose estimated peak (see [`memory::estimate`]) is over `--max-memory-mb`.
fn guard(config: &Config, run: &Run, shape: &Shape<'_>) -> Result<()> {
    let advice = match config.tiling {
        Tiling::Whole => "use a larger --cell-m or a --mask-layer",
        _ => "use a larger --cell-m, a --mask-layer or more tiles",
    };
    let bytes = memory::estimate(config, shape);
    run.guard_memory(bytes as u64, &memory::what(config, shape), advice)
}

/// The method of `--method`, the cheaper one for `auto`.
fn choose(config: &Config, grid: &Grid, h_max: f64, levels: usize, n: usize) -> Method {
    match config.method {
        MethodChoice::Fft => Method::Fft,
        MethodChoice::Direct => Method::Direct,
        MethodChoice::Auto => Estimator::cheaper_method(grid, config.kernel, h_max, levels, n),
    }
}
