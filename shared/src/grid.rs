//! A regular grid of square cells in the working CRS, the frame every surface of a run shares.

/// A north-up grid: `cols` × `rows` square cells of side `cell_m`, lower-left corner
/// (`x_min`, `y_min`). Values are stored row-major with row 0 at the **north** edge, as rasters are.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    /// Western edge (m).
    pub x_min: f64,
    /// Southern edge (m).
    pub y_min: f64,
    /// Cell side (m).
    pub cell_m: f64,
    /// Number of columns.
    pub cols: usize,
    /// Number of rows.
    pub rows: usize,
}

impl Grid {
    /// Northern edge (m).
    pub fn y_max(&self) -> f64 {
        self.y_min + self.rows as f64 * self.cell_m
    }

    /// Eastern edge (m).
    pub fn x_max(&self) -> f64 {
        self.x_min + self.cols as f64 * self.cell_m
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.cols * self.rows
    }

    /// True for a grid without cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Centre of cell (`col`, `row`), row 0 at the north edge.
    pub fn centre(&self, col: usize, row: usize) -> (f64, f64) {
        (
            self.x_min + (col as f64 + 0.5) * self.cell_m,
            self.y_max() - (row as f64 + 0.5) * self.cell_m,
        )
    }

    /// GDAL geotransform: [x_min, cell, 0, y_max, 0, −cell].
    pub fn geo_transform(&self) -> [f64; 6] {
        [
            self.x_min,
            self.cell_m,
            0.0,
            self.y_max(),
            0.0,
            -self.cell_m,
        ]
    }

    /// The grid described by a north-up GDAL geotransform and a size; `None` if the transform
    /// is rotated or its cells are not square (within 1e-9 relative).
    pub fn from_geo_transform(transform: &[f64; 6], cols: usize, rows: usize) -> Option<Grid> {
        let [x_min, width, rotation_x, y_max, rotation_y, height] = *transform;
        let square = ((width + height).abs() <= 1e-9 * width.abs()) && width > 0.0;
        if rotation_x != 0.0 || rotation_y != 0.0 || !square {
            return None;
        }
        Some(Grid {
            x_min,
            y_min: y_max - rows as f64 * width,
            cell_m: width,
            cols,
            rows,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn geo_transform_round_trips_and_centres_are_inside() {
        let grid = Grid {
            x_min: 1000.0,
            y_min: -500.0,
            cell_m: 250.0,
            cols: 4,
            rows: 3,
        };
        assert_eq!(grid.y_max(), 250.0);
        assert_eq!(grid.centre(0, 0), (1125.0, 125.0));
        assert_eq!(grid.centre(3, 2), (1875.0, -375.0));
        assert_eq!(
            Grid::from_geo_transform(&grid.geo_transform(), 4, 3),
            Some(grid)
        );
        assert_eq!(
            Grid::from_geo_transform(&[0.0, 1.0, 0.1, 0.0, 0.0, -1.0], 1, 1),
            None
        );
        assert_eq!(
            Grid::from_geo_transform(&[0.0, 1.0, 0.0, 0.0, 0.0, -2.0], 1, 1),
            None
        );
    }
}
