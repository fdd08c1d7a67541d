//! The grid of the surfaces: the extent of the data (or of the mask), a readable default cell
//! size, and the cells covering the extent plus the kernel's reach.

use geo_types::MultiPolygon;
use stance_core::error::{Error, Result};
use stance_core::grid::Grid;

use crate::binning::Points;

/// An axis-aligned extent in the working CRS (m).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Extent {
    /// Western edge.
    pub x_min: f64,
    /// Southern edge.
    pub y_min: f64,
    /// East–west size.
    pub width: f64,
    /// North–south size.
    pub height: f64,
}

impl Extent {
    /// The default cell size: the longer side / 500, rounded up to two significant digits.
    pub fn default_cell_m(&self) -> f64 {
        nice(self.width.max(self.height) / 500.0)
    }
}

/// The extent of the points `indices`, or of the exterior rings of the mask polygons when given.
pub fn data_extent(
    points: &Points<'_>,
    indices: &[usize],
    mask: Option<&[MultiPolygon<f64>]>,
) -> Extent {
    let (mut x0, mut y0, mut x1, mut y1) = (
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    );
    let mut take = |x: f64, y: f64| {
        x0 = x0.min(x);
        y0 = y0.min(y);
        x1 = x1.max(x);
        y1 = y1.max(y);
    };
    match mask {
        Some(polygons) => {
            for m in polygons {
                for p in &m.0 {
                    for c in p.exterior().0.iter() {
                        take(c.x, c.y);
                    }
                }
            }
        }
        None => {
            for &i in indices {
                take(points.x[i], points.y[i]);
            }
        }
    }
    Extent {
        x_min: x0,
        y_min: y0,
        width: (x1 - x0).max(0.0),
        height: (y1 - y0).max(0.0),
    }
}

/// `v` rounded up to two significant digits (a readable cell size); 1 m at least.
pub fn nice(v: f64) -> f64 {
    if !(v.is_finite() && v > 1.0) {
        return 1.0;
    }
    let magnitude = 10f64.powf(v.log10().floor() - 1.0);
    (v / magnitude).ceil() * magnitude
}

/// The grid covering `extent` plus `margin` (m) on every side, snapped to multiples of the cell.
///
/// # Errors
/// [`Error::BadArgument`] when it exceeds `max_cells`, suggesting a cell size that fits.
pub fn make_grid(extent: Extent, margin: f64, cell_m: f64, max_cells: u64) -> Result<Grid> {
    let Extent {
        x_min: x,
        y_min: y,
        width: w,
        height: h,
    } = extent;
    let x_min = ((x - margin) / cell_m).floor() * cell_m;
    let y_min = ((y - margin) / cell_m).floor() * cell_m;
    let cols_f = ((x + w + margin - x_min) / cell_m).ceil().max(1.0);
    let rows_f = ((y + h + margin - y_min) / cell_m).ceil().max(1.0);
    let cells = cols_f * rows_f;
    if cells > max_cells as f64 {
        let too_many = |c: f64| {
            ((w + 2.0 * margin) / c + 2.0) * ((h + 2.0 * margin) / c + 2.0) > max_cells as f64
        };
        let mut suggested = nice(cell_m * (cells / max_cells as f64).sqrt());
        while too_many(suggested) {
            suggested = nice(suggested * 1.01);
        }
        return Err(Error::argument(
            "--cell-m",
            format!(
                "{cell_m} m gives {cells:.0} cells, more than --max-cells {max_cells}; \
                 use --cell-m {suggested} or larger"
            ),
        ));
    }
    Ok(Grid {
        x_min,
        y_min,
        cell_m,
        cols: cols_f as usize,
        rows: rows_f as usize,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_rounds_up_to_two_digits() {
        // 1234 → 1300 (magnitude 10² for 1234 = 1.234e3), 0.3 → the 1 m floor.
        assert_eq!(nice(1234.0), 1300.0);
        assert_eq!(nice(220.0), 220.0);
        assert_eq!(nice(0.3), 1.0);
    }

    #[test]
    fn grid_snaps_to_cells_and_refuses_too_many() {
        let extent = Extent {
            x_min: 105.0,
            y_min: 5.0,
            width: 90.0,
            height: 40.0,
        };
        // Margin 10: x from 95 → floor to 90, to 205 → 12 columns of 10; y from −5 → −10,
        // to 55 → 7 rows.
        let grid = make_grid(extent, 10.0, 10.0, 1000).expect("fits");
        assert_eq!(
            (grid.x_min, grid.y_min, grid.cols, grid.rows),
            (90.0, -10.0, 12, 7)
        );
        let error = make_grid(extent, 10.0, 10.0, 50).expect_err("84 cells > 50");
        assert!(error.to_string().contains("use --cell-m"), "{error}");
    }
}
