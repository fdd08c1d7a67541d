//! Linear binning of weighted points onto the centres of a grid: Jones & Lotwick (1983) as
//! used for binned kernel estimates by Wand (1994), *J. Comput. Graph. Stat.* 3(4), 433–445.

use stance_core::grid::Grid;

/// Weighted points in the working CRS (m).
#[derive(Debug, Clone, Copy)]
pub struct Points<'a> {
    /// Easting (m).
    pub x: &'a [f64],
    /// Northing (m).
    pub y: &'a [f64],
    /// Weight of each point (non-negative), or `None` for weight 1.
    pub weight: Option<&'a [f64]>,
}

impl Points<'_> {
    /// Weight of point `i`.
    pub fn weight(&self, i: usize) -> f64 {
        self.weight.map_or(1.0, |w| w[i])
    }

    /// Total weight of the points `indices`.
    pub fn total_weight(&self, indices: &[usize]) -> f64 {
        match self.weight {
            None => indices.len() as f64,
            Some(w) => indices.iter().map(|&i| w[i]).sum(),
        }
    }
}

/// Fractional (column, row) index of `(x, y)` measured from the centre of cell (0, 0); row 0 north.
pub fn fractional_index(grid: &Grid, x: f64, y: f64) -> (f64, f64) {
    (
        (x - grid.x_min) / grid.cell_m - 0.5,
        (grid.y_max() - y) / grid.cell_m - 0.5,
    )
}

/// Linear binning: each point's weight is shared among the four surrounding cell centres in
/// proportion to the bilinear weights (1 − fx)(1 − fy), fx(1 − fy), (1 − fx)fy, fx·fy, so that
/// the binned estimate at a centre equals the exact sum with K replaced by its bilinear
/// interpolant between centres. Points beyond the outer centres are clamped onto them
/// (the grid margin makes this rare); points outside the grid are skipped.
///
/// Returns the binned weights, row-major (row 0 north), `grid.len()` values.
pub fn linear_bin(grid: &Grid, points: &Points<'_>, indices: &[usize]) -> Vec<f64> {
    let mut bins = vec![0.0; grid.len()];
    add_linear(grid, points, indices, &mut bins);
    bins
}

/// [`linear_bin`] into an existing buffer (added to its values).
pub fn add_linear(grid: &Grid, points: &Points<'_>, indices: &[usize], bins: &mut [f64]) {
    let (cols, rows) = (grid.cols, grid.rows);
    let max_c = (cols - 1) as f64;
    let max_r = (rows - 1) as f64;
    for &i in indices {
        let (fc, fr) = fractional_index(grid, points.x[i], points.y[i]);
        if !(fc >= -0.5 && fr >= -0.5 && fc <= max_c + 0.5 && fr <= max_r + 0.5) {
            continue;
        }
        let fc = fc.clamp(0.0, max_c);
        let fr = fr.clamp(0.0, max_r);
        let c0 = (fc.floor() as usize).min(cols.saturating_sub(2));
        let r0 = (fr.floor() as usize).min(rows.saturating_sub(2));
        let tc = fc - c0 as f64;
        let tr = fr - r0 as f64;
        let w = points.weight(i);
        let c1 = (c0 + 1).min(cols - 1);
        let r1 = (r0 + 1).min(rows - 1);
        bins[r0 * cols + c0] += w * (1.0 - tc) * (1.0 - tr);
        bins[r0 * cols + c1] += w * tc * (1.0 - tr);
        bins[r1 * cols + c0] += w * (1.0 - tc) * tr;
        bins[r1 * cols + c1] += w * tc * tr;
    }
}

/// The cell containing `(x, y)` as a flat index, or `None` outside the grid.
pub fn cell_of(grid: &Grid, x: f64, y: f64) -> Option<usize> {
    let c = ((x - grid.x_min) / grid.cell_m).floor();
    let r = ((grid.y_max() - y) / grid.cell_m).floor();
    if c >= 0.0 && r >= 0.0 && (c as usize) < grid.cols && (r as usize) < grid.rows {
        Some(r as usize * grid.cols + c as usize)
    } else {
        None
    }
}

/// Simple (nearest-centre) binning: each point's weight goes to the cell that contains it.
pub fn simple_bin(grid: &Grid, points: &Points<'_>, indices: &[usize]) -> Vec<f64> {
    let mut bins = vec![0.0; grid.len()];
    for &i in indices {
        if let Some(k) = cell_of(grid, points.x[i], points.y[i]) {
            bins[k] += points.weight(i);
        }
    }
    bins
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn grid() -> Grid {
        Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 10.0,
            cols: 4,
            rows: 3,
        }
    }

    #[test]
    fn linear_binning_keeps_mass_and_centroid() {
        // A point a quarter of the way from centre (1, 1) to centre (2, 1) and half-way down to
        // row 2: weights 3/8, 1/8, 3/8, 1/8 by hand.
        let x = [17.5];
        let y = [10.0];
        let w = [2.0];
        let points = Points {
            x: &x,
            y: &y,
            weight: Some(&w),
        };
        let bins = linear_bin(&grid(), &points, &[0]);
        assert_relative_eq!(bins.iter().sum::<f64>(), 2.0, max_relative = 1e-15);
        assert_relative_eq!(bins[4 + 1], 2.0 * 0.375, max_relative = 1e-15);
        assert_relative_eq!(bins[4 + 2], 2.0 * 0.125, max_relative = 1e-15);
        assert_relative_eq!(bins[8 + 1], 2.0 * 0.375, max_relative = 1e-15);
        assert_relative_eq!(bins[8 + 2], 2.0 * 0.125, max_relative = 1e-15);
    }

    #[test]
    fn points_outside_are_skipped_and_edges_clamped() {
        let x = [-5.0, 1.0, 39.0];
        let y = [5.0, 29.0, 1.0];
        let points = Points {
            x: &x,
            y: &y,
            weight: None,
        };
        let bins = linear_bin(&grid(), &points, &[0, 1, 2]);
        assert_relative_eq!(bins.iter().sum::<f64>(), 2.0, max_relative = 1e-15);
        assert_eq!(bins[0], 1.0);
        assert_eq!(bins[11], 1.0);
        assert_eq!(cell_of(&grid(), 39.0, 1.0), Some(11));
        assert_eq!(cell_of(&grid(), 40.0, 1.0), None);
    }
}
