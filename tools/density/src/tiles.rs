//! Tiles of the grid: `--tile K/N` computes the class sums of one band of grid rows from the
//! points within the kernel's reach of it and writes them (exact doubles) for a later
//! `--merge-tiles` run, which assembles the whole grid and writes every surface as a run on one
//! machine does.
//!
//! Every tile run reads every record and plans exactly as the whole run (extent, cell,
//! bandwidth, method), so the bands of all tiles share one grid. With direct sums a band's
//! cells get the same terms in the same order as in the whole run (bit for bit); with the FFT
//! a tile convolves its band plus the kernel's reach and one row more on each side (a window
//! whose outer rows cannot reach the band, so linear binning at the window's edge changes
//! nothing in it), which equals the whole grid's convolution up to the transforms' round-off.
//!
//! Parts are named `<slice>_<class>` (slice index, class label): Σ w K per m², NaN outside the
//! mask, as [`crate::estimate::Estimator::sum`] gives them.

use std::collections::BTreeMap;
use std::ops::Range;

use serde_json::json;
use stance_core::error::{Error, Result};
use stance_core::grid::Grid;
use stance_core::host::shard::{TileData, TileRun, Tiling};
use stance_core::host::Run;
use stance_core::stance::Stance;

use crate::binning::Points;
use crate::convolve::radius_cells;
use crate::estimate::{self, Bandwidths, Estimator, Method};
use crate::input::Records;
use crate::kernel::Kernel;
use crate::params::{Config, DensityParams};
use crate::plan::Plan;

/// The part holding the sums of `class` in slice `slice`.
pub fn part(slice: usize, class: Stance) -> String {
    format!("{slice}_{class}")
}

/// The rows of tile `index` of `count` (a band of the grid's rows, north to south).
pub fn band(grid: &Grid, index: usize, count: usize) -> Range<usize> {
    stance_core::host::shard::block(index, count, grid.rows)
}

/// The rows a tile's FFT convolves: its band and the kernel's reach plus one row on each side,
/// within the grid.
pub fn window(grid: &Grid, kernel: Kernel, h_m: f64, index: usize, count: usize) -> Range<usize> {
    let rows = band(grid, index, count);
    let margin = radius_cells(kernel, h_m, grid.cell_m) + 1;
    rows.start.saturating_sub(margin)..(rows.end + margin).min(grid.rows)
}

/// Fingerprints a tiled run (its plan included) and, when merging, reads its tiles.
///
/// # Errors
/// A missing, duplicated or mismatched tile, named.
pub fn prepare(
    params: &DensityParams,
    config: &Config,
    plan: &Plan,
    run: &mut Run,
) -> Result<TileRun> {
    let grid = &plan.grid;
    let planned = json!({
        "bandwidth_m": plan.bandwidth.h,
        "method": format!("{:?}", plan.method).to_lowercase(),
        "grid": {
            "cols": grid.cols, "rows": grid.rows, "cell_m": grid.cell_m,
            "x_min": grid.x_min, "y_min": grid.y_min,
        },
    });
    TileRun::prepare(
        &config.tiling,
        (grid.rows, grid.cols),
        "stance-density",
        params,
        planned,
        run,
    )
}

/// The sums of every class with points in every slice on the tile's rows.
///
/// # Errors
/// The run was interrupted.
pub fn compute(
    config: &Config,
    records: &Records,
    plan: &Plan,
    slices: &[(String, Vec<usize>)],
    tiles: &TileRun,
    run: &Run,
) -> Result<TileData> {
    let rows = tiles.rows();
    let points = records.points();
    let mut data = TileData::default();
    let total = slices.len() * Stance::ALL.len();
    for (s, (_, members)) in slices.iter().enumerate() {
        let mut by_class: BTreeMap<Stance, Vec<usize>> = BTreeMap::new();
        for &i in members {
            by_class.entry(records.class_of[i]).or_default().push(i);
        }
        for (c, class) in Stance::ALL.into_iter().enumerate() {
            run.check_interrupted()?;
            run.progress
                .set(0.1 + 0.9 * (s * Stance::ALL.len() + c) as f64 / total as f64);
            let Some(idx) = by_class.get(&class) else {
                continue;
            };
            let sums = band_sum(config, plan, &points, idx, rows.clone())?;
            data.parts.insert(part(s, class), sums);
        }
    }
    Ok(data)
}

/// Σ w K of the points `indices` on the grid rows `rows`, from the points within reach only.
fn band_sum(
    config: &Config,
    plan: &Plan,
    points: &Points<'_>,
    indices: &[usize],
    rows: Range<usize>,
) -> Result<Vec<f64>> {
    let grid = &plan.grid;
    let h = plan.bandwidth.h;
    let reach = config.kernel.support_m(h);
    match plan.method {
        Method::Direct => {
            let near: Vec<usize> = indices
                .iter()
                .copied()
                .filter(|&i| {
                    let reached = estimate::rows_reached(grid, points.y[i], reach);
                    reached.start < rows.end && rows.start < reached.end
                })
                .collect();
            Ok(plan.estimator.direct_sum_rows(points, &near, rows))
        }
        Method::Fft => {
            let Tiling::Tile { index, count } = config.tiling else {
                return Err(Error::Failed("a tile's sums outside a tile run".into()));
            };
            let window = window(grid, config.kernel, h, index, count);
            let mut out = fft_band(
                grid,
                config.kernel,
                h,
                points,
                indices,
                rows.clone(),
                window,
            );
            if let Some(mask) = plan.estimator.mask() {
                let cols = grid.cols;
                let inside = &mask[rows.start * cols..rows.end * cols];
                for (v, inside) in out.iter_mut().zip(inside) {
                    if !*inside {
                        *v = f64::NAN;
                    }
                }
            }
            Ok(out)
        }
    }
}

/// Σ w K by linear binning and FFT on the grid rows `rows`, convolving only the rows `window`
/// (which must hold `rows` and the kernel's radius plus one row on each side, within the
/// grid) from the points near it: the whole grid's binned estimate on those rows, up to the
/// transforms' round-off.
pub fn fft_band(
    grid: &Grid,
    kernel: Kernel,
    h_m: f64,
    points: &Points<'_>,
    indices: &[usize],
    rows: Range<usize>,
    window: Range<usize>,
) -> Vec<f64> {
    let cell = grid.cell_m;
    let sub = Grid {
        x_min: grid.x_min,
        y_min: grid.y_min + (grid.rows - window.end) as f64 * cell,
        cell_m: cell,
        cols: grid.cols,
        rows: window.len(),
    };
    let (south, north) = (sub.y_min - cell, sub.y_max() + cell);
    let near: Vec<usize> = indices
        .iter()
        .copied()
        .filter(|&i| points.y[i] >= south && points.y[i] <= north)
        .collect();
    let estimator = Estimator::new(
        sub,
        kernel,
        Bandwidths::fixed(h_m),
        Method::Fft,
        None,
        false,
    );
    let sums = estimator.sum(points, &near);
    let from = (rows.start - window.start) * grid.cols;
    sums[from..from + rows.len() * grid.cols].to_vec()
}

/// The whole grid's sums of `class` in slice `slice`, from the merged tiles (None unless
/// merging).
///
/// # Errors
/// No tile holds the part (they were written for other records), or an unreadable tile.
pub fn merged_sum(tiles: &TileRun, slice: usize, class: Stance) -> Result<Option<Vec<f64>>> {
    if !tiles.is_merge() {
        return Ok(None);
    }
    tiles.merged(&part(slice, class)).map(Some)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Points spread over a 37 × 23 grid of 0.3-unit cells (a cell size with no exact binary
    /// form), some in the outer half cells where linear binning clamps.
    fn scene() -> (Grid, Vec<f64>, Vec<f64>, Vec<f64>) {
        let grid = Grid {
            x_min: 0.1,
            y_min: -0.7,
            cell_m: 0.3,
            cols: 23,
            rows: 37,
        };
        let (mut x, mut y, mut w) = (Vec::new(), Vec::new(), Vec::new());
        // A fixed low-discrepancy walk (golden-ratio steps), so the test needs no generator.
        for i in 0..400 {
            let u = (i as f64 * 0.618_033_988_749_895).fract();
            let v = (i as f64 * 0.754_877_666_246_693).fract();
            x.push(grid.x_min + u * grid.cols as f64 * grid.cell_m);
            y.push(grid.y_min + v * grid.rows as f64 * grid.cell_m);
            w.push(1.0 + (i % 3) as f64);
        }
        (grid, x, y, w)
    }

    #[test]
    fn direct_bands_equal_the_whole_grid_bit_for_bit() {
        let (grid, x, y, w) = scene();
        let points = Points {
            x: &x,
            y: &y,
            weight: Some(&w),
        };
        let all: Vec<usize> = (0..x.len()).collect();
        let h = 1.1;
        let whole = estimate::direct_sum(&grid, Kernel::Quartic, h, &points, &all);
        for count in [1, 2, 3, 7] {
            let mut merged = Vec::new();
            for index in 1..=count {
                let rows = band(&grid, index, count);
                let reach = Kernel::Quartic.support_m(h);
                let near: Vec<usize> = all
                    .iter()
                    .copied()
                    .filter(|&i| {
                        let r = estimate::rows_reached(&grid, y[i], reach);
                        r.start < rows.end && rows.start < r.end
                    })
                    .collect();
                merged.extend(estimate::direct_sum_rows(
                    &grid,
                    Kernel::Quartic,
                    h,
                    &points,
                    &near,
                    rows,
                ));
            }
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&merged), bits(&whole), "{count} bands");
        }
    }

    #[test]
    fn fft_bands_equal_the_whole_grid_within_round_off() {
        // The whole grid's FFT estimate is the reference; a band convolved on its window
        // differs only by round-off, bounded here by 1e-9 of the maximum (FFT round-off is
        // ~1e-15 of it).
        let (grid, x, y, w) = scene();
        let points = Points {
            x: &x,
            y: &y,
            weight: Some(&w),
        };
        let all: Vec<usize> = (0..x.len()).collect();
        for kernel in [Kernel::Quartic, Kernel::Gaussian, Kernel::Epanechnikov] {
            let h = 0.9;
            let whole =
                Estimator::new(grid, kernel, Bandwidths::fixed(h), Method::Fft, None, false)
                    .sum(&points, &all);
            let max = whole.iter().cloned().fold(0.0, f64::max);
            for count in [1, 2, 3, 7] {
                let mut merged = Vec::new();
                for index in 1..=count {
                    let rows = band(&grid, index, count);
                    let window = window(&grid, kernel, h, index, count);
                    merged.extend(fft_band(&grid, kernel, h, &points, &all, rows, window));
                }
                let worst = merged
                    .iter()
                    .zip(&whole)
                    .map(|(m, w)| (m - w).abs() / max)
                    .fold(0.0, f64::max);
                println!("{kernel:?}, {count} bands: largest difference {worst:e} of the maximum");
                for (k, (m, w)) in merged.iter().zip(&whole).enumerate() {
                    assert!(
                        (m - w).abs() <= 1e-9 * max,
                        "{kernel:?}, {count} bands, cell {k}: {m} vs {w}"
                    );
                }
            }
        }
    }
}
