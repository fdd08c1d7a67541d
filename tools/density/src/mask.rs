//! Rasterising a polygon mask onto grid cell centres by even–odd scanlines (Foley et al. 1990,
//! *Computer Graphics: Principles and Practice*, §3.6 polygon scan conversion).

use geo_types::MultiPolygon;
use stance_core::grid::Grid;

/// One flag per cell (row 0 north): true where the cell centre lies inside any of `polygons`
/// (even–odd within a polygon, so holes are outside; union across polygons).
pub fn rasterise(grid: &Grid, polygons: &[MultiPolygon<f64>]) -> Vec<bool> {
    let mut mask = vec![false; grid.len()];
    let mut crossings: Vec<f64> = Vec::new();
    for multi in polygons {
        for polygon in &multi.0 {
            for r in 0..grid.rows {
                let y = grid.y_max() - (r as f64 + 0.5) * grid.cell_m;
                crossings.clear();
                for ring in std::iter::once(polygon.exterior()).chain(polygon.interiors()) {
                    for w in ring.0.windows(2) {
                        let (a, b) = (w[0], w[1]);
                        if (a.y > y) != (b.y > y) {
                            crossings.push(a.x + (y - a.y) / (b.y - a.y) * (b.x - a.x));
                        }
                    }
                }
                crossings.sort_by(f64::total_cmp);
                for pair in crossings.chunks_exact(2) {
                    let first =
                        ((pair[0] - grid.x_min) / grid.cell_m - 0.5).ceil().max(0.0) as usize;
                    let last = ((pair[1] - grid.x_min) / grid.cell_m - 0.5).floor();
                    if last < 0.0 {
                        continue;
                    }
                    let last = (last as usize).min(grid.cols.saturating_sub(1));
                    for c in first..=last {
                        mask[r * grid.cols + c] = true;
                    }
                }
            }
        }
    }
    mask
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo_types::{polygon, MultiPolygon};

    #[test]
    fn square_with_a_hole() {
        let grid = Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 1.0,
            cols: 6,
            rows: 6,
        };
        let square = polygon!(
            exterior: [(x: 0.9, y: 0.9), (x: 5.1, y: 0.9), (x: 5.1, y: 5.1), (x: 0.9, y: 5.1)],
            interiors: [[(x: 2.9, y: 2.9), (x: 3.1, y: 2.9), (x: 3.1, y: 3.1), (x: 2.9, y: 3.1)]],
        );
        let mask = rasterise(&grid, &[MultiPolygon(vec![square])]);
        // Centres 1.5 … 4.5 inside in both directions: 4 × 4 = 16; the hole holds no centre.
        assert_eq!(mask.iter().filter(|m| **m).count(), 16);
        assert!(!mask[0] && mask[6 + 1]);
    }
}
