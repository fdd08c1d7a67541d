//! Zonal statistics of a surface within polygons: mean, minimum and maximum over the cells whose
//! centres lie inside (scan-line even–odd fill, as in Foley et al. 1990, *Computer Graphics*,
//! §3.6), or weighted by the exact fraction of each cell inside the polygon (Sutherland &
//! Hodgman 1974, CACM 17(1), 32–42, clipping each ring to the cell).
//!
//! **Centre rule.** A cell counts when its centre is inside by the even–odd rule with half-open
//! edges (an edge crossing is counted when one end is strictly above the centre line and the
//! other is not; a centre exactly on a vertical edge belongs to the cell on its right). Polygons
//! that tile the plane therefore share no cell and miss none.
//!
//! Cells without data (NaN) are skipped; an area with no cell of data gets `None`.

use geo_types::{Coord, LineString, MultiPolygon};
use rayon::prelude::*;
use stance_core::grid::Grid;

/// Statistics of one area.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZoneStats {
    /// Mean (cell-fraction-weighted with `area_weighted`).
    pub mean: f64,
    /// Minimum over the cells counted.
    pub min: f64,
    /// Maximum over the cells counted.
    pub max: f64,
    /// Cells counted: a count (centres), or the sum of the cell fractions (area-weighted).
    pub cells: f64,
}

/// Zonal statistics of `values` (row 0 north, NaN = no data) on `grid` for every area; the
/// polygons must be in the grid's CRS.
pub fn zonal(
    grid: &Grid,
    values: &[f32],
    areas: &[MultiPolygon<f64>],
    area_weighted: bool,
) -> Vec<Option<ZoneStats>> {
    areas
        .par_iter()
        .map(|polygon| {
            let mut accumulator = Accumulator::default();
            if area_weighted {
                cell_fractions(grid, polygon, |col, row, fraction| {
                    accumulator.add(values[row * grid.cols + col], fraction)
                });
            } else {
                cell_centres(grid, polygon, |col, row| {
                    accumulator.add(values[row * grid.cols + col], 1.0)
                });
            }
            accumulator.finish()
        })
        .collect()
}

#[derive(Default)]
struct Accumulator {
    weighted_sum: f64,
    weight: f64,
    min: f64,
    max: f64,
    any: bool,
}

impl Accumulator {
    fn add(&mut self, value: f32, weight: f64) {
        if value.is_nan() || weight <= 0.0 {
            return;
        }
        let value = f64::from(value);
        self.weighted_sum += weight * value;
        self.weight += weight;
        if !self.any || value < self.min {
            self.min = value;
        }
        if !self.any || value > self.max {
            self.max = value;
        }
        self.any = true;
    }

    fn finish(self) -> Option<ZoneStats> {
        (self.any && self.weight > 0.0).then(|| ZoneStats {
            mean: self.weighted_sum / self.weight,
            min: self.min,
            max: self.max,
            cells: self.weight,
        })
    }
}

fn rings(polygon: &MultiPolygon<f64>) -> impl Iterator<Item = &LineString<f64>> {
    polygon
        .0
        .iter()
        .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
}

/// Rows of the grid (row 0 north) whose band overlaps [y_low, y_high], clamped to the grid.
fn row_range(grid: &Grid, y_low: f64, y_high: f64) -> Option<(usize, usize)> {
    let first = ((grid.y_max() - y_high) / grid.cell_m).floor().max(0.0);
    let last = ((grid.y_max() - y_low) / grid.cell_m).floor();
    let last = last.min(grid.rows as f64 - 1.0);
    (first <= last && last >= 0.0).then_some((first as usize, last as usize))
}

/// Calls `visit(col, row)` for every cell whose centre is inside `polygon` (centre rule above).
pub fn cell_centres(grid: &Grid, polygon: &MultiPolygon<f64>, mut visit: impl FnMut(usize, usize)) {
    use geo::BoundingRect;
    let Some(bounds) = polygon.bounding_rect() else {
        return;
    };
    let Some((first, last)) = row_range(grid, bounds.min().y, bounds.max().y) else {
        return;
    };
    let mut crossings: Vec<f64> = Vec::new();
    for row in first..=last {
        let (_, yc) = grid.centre(0, row);
        crossings.clear();
        for ring in rings(polygon) {
            for edge in ring.lines() {
                let (a, b) = (edge.start, edge.end);
                if (a.y > yc) != (b.y > yc) {
                    crossings.push(a.x + (yc - a.y) * (b.x - a.x) / (b.y - a.y));
                }
            }
        }
        crossings.sort_by(f64::total_cmp);
        for pair in crossings.chunks_exact(2) {
            // Centres with x0 <= xc < x1: col = ceil((x0 - x_min)/cell - 0.5) ..
            let start = ((pair[0] - grid.x_min) / grid.cell_m - 0.5).ceil().max(0.0);
            let end = ((pair[1] - grid.x_min) / grid.cell_m - 0.5).ceil();
            let end = end.min(grid.cols as f64);
            let mut col = start;
            while col < end {
                visit(col as usize, row);
                col += 1.0;
            }
        }
    }
}

/// Clips a closed ring (first point = last point or not) to the half-plane where
/// `sign · (coordinate[axis] − value) ≥ 0` (one Sutherland–Hodgman pass).
fn clip(ring: &[Coord<f64>], x_axis: bool, value: f64, keep_greater: bool) -> Vec<Coord<f64>> {
    let inside = |c: &Coord<f64>| {
        let v = if x_axis { c.x } else { c.y };
        if keep_greater {
            v >= value
        } else {
            v <= value
        }
    };
    let cut = |a: &Coord<f64>, b: &Coord<f64>| {
        let (va, vb) = if x_axis { (a.x, b.x) } else { (a.y, b.y) };
        let t = (value - va) / (vb - va);
        if x_axis {
            Coord {
                x: value,
                y: a.y + t * (b.y - a.y),
            }
        } else {
            Coord {
                x: a.x + t * (b.x - a.x),
                y: value,
            }
        }
    };
    let mut out = Vec::with_capacity(ring.len() + 4);
    let Some(mut previous) = ring.last() else {
        return out;
    };
    for current in ring {
        match (inside(previous), inside(current)) {
            (true, true) => out.push(*current),
            (true, false) => out.push(cut(previous, current)),
            (false, true) => {
                out.push(cut(previous, current));
                out.push(*current);
            }
            (false, false) => {}
        }
        previous = current;
    }
    out
}

/// Twice the signed area of a ring (shoelace; positive counter-clockwise).
fn signed_area2(ring: &[Coord<f64>]) -> f64 {
    let n = ring.len();
    (0..n)
        .map(|i| {
            let (a, b) = (ring[i], ring[(i + 1) % n]);
            a.x * b.y - b.x * a.y
        })
        .sum()
}

/// Calls `visit(col, row, fraction)` for every cell that `polygon` covers in part, with the
/// fraction of the cell's area inside (exteriors add, holes subtract, whatever their winding).
pub fn cell_fractions(
    grid: &Grid,
    polygon: &MultiPolygon<f64>,
    mut visit: impl FnMut(usize, usize, f64),
) {
    use geo::BoundingRect;
    let Some(bounds) = polygon.bounding_rect() else {
        return;
    };
    let Some((first, last)) = row_range(grid, bounds.min().y, bounds.max().y) else {
        return;
    };
    let col_first = ((bounds.min().x - grid.x_min) / grid.cell_m)
        .floor()
        .max(0.0) as usize;
    let col_last_f = ((bounds.max().x - grid.x_min) / grid.cell_m).floor();
    if col_last_f < 0.0 || col_first >= grid.cols {
        return;
    }
    let col_last = (col_last_f as usize).min(grid.cols - 1);
    // Each ring with the sign that makes its contribution positive for exteriors.
    let signed_rings: Vec<(Vec<Coord<f64>>, f64)> = polygon
        .0
        .iter()
        .flat_map(|p| {
            let exterior = std::iter::once((p.exterior(), 1.0));
            exterior.chain(p.interiors().iter().map(|r| (r, -1.0)))
        })
        .filter_map(|(ring, role)| {
            let coords: Vec<Coord<f64>> = ring.0.clone();
            let orientation = signed_area2(&coords).signum();
            (orientation != 0.0).then_some((coords, role * orientation))
        })
        .collect();
    let cell_area = grid.cell_m * grid.cell_m;
    let mut row_areas = vec![0.0; col_last + 1 - col_first];
    for row in first..=last {
        let y_top = grid.y_max() - row as f64 * grid.cell_m;
        let y_bottom = y_top - grid.cell_m;
        row_areas.iter_mut().for_each(|a| *a = 0.0);
        for (ring, sign) in &signed_rings {
            let strip = clip(&clip(ring, false, y_bottom, true), false, y_top, false);
            if strip.len() < 3 {
                continue;
            }
            for (k, col) in (col_first..=col_last).enumerate() {
                let x_left = grid.x_min + col as f64 * grid.cell_m;
                let cell = clip(
                    &clip(&strip, true, x_left, true),
                    true,
                    x_left + grid.cell_m,
                    false,
                );
                if cell.len() >= 3 {
                    row_areas[k] += sign * signed_area2(&cell) / 2.0;
                }
            }
        }
        for (k, area) in row_areas.iter().enumerate() {
            let fraction = (area / cell_area).clamp(0.0, 1.0);
            // Below 1e-12 of a cell is rounding on an edge shared with a neighbour cell.
            if fraction > 1e-12 {
                visit(col_first + k, row, fraction);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use geo_types::polygon;

    fn grid() -> Grid {
        // 4 × 3 cells of 10 m, x 0..40, y 0..30.
        Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 10.0,
            cols: 4,
            rows: 3,
        }
    }

    fn rect(x0: f64, y0: f64, x1: f64, y1: f64) -> MultiPolygon<f64> {
        MultiPolygon::new(vec![polygon![
            (x: x0, y: y0), (x: x1, y: y0), (x: x1, y: y1), (x: x0, y: y1), (x: x0, y: y0)
        ]])
    }

    /// Values 0..12 row-major, row 0 north (y 20..30).
    fn values() -> Vec<f32> {
        (0..12).map(|v| v as f32).collect()
    }

    #[test]
    fn centres_inside_give_mean_min_max() {
        // x 0..20, y 10..30: cells (0,0),(1,0),(0,1),(1,1) = values 0, 1, 4, 5.
        let got = zonal(&grid(), &values(), &[rect(0.0, 10.0, 20.0, 30.0)], false);
        let s = got[0].expect("defined in this test");
        assert_eq!((s.mean, s.min, s.max, s.cells), (2.5, 0.0, 5.0, 4.0));
    }

    /// Two polygons tiling the grid along x = 15 (through cell centres' column 1 at x = 15):
    /// every centre goes to exactly one of them.
    #[test]
    fn tiling_polygons_share_no_centre() {
        let areas = [rect(0.0, 0.0, 15.0, 30.0), rect(15.0, 0.0, 40.0, 30.0)];
        let mut count = vec![0u32; 12];
        for a in &areas {
            cell_centres(&grid(), a, |c, r| count[r * 4 + c] += 1);
        }
        assert!(count.iter().all(|&c| c == 1), "{count:?}");
    }

    /// Area-weighted: a polygon x 5..15, y 20..30 covers half of cells 0 and 1 → mean 0.5.
    /// Its reversed winding and a hole are handled.
    #[test]
    fn area_weighted_uses_exact_cell_fractions() {
        let got = zonal(&grid(), &values(), &[rect(5.0, 20.0, 15.0, 30.0)], true);
        let s = got[0].expect("defined in this test");
        assert_relative_eq!(s.mean, 0.5, max_relative = 1e-12);
        assert_relative_eq!(s.cells, 1.0, max_relative = 1e-12);
        // Clockwise ring: same result.
        let clockwise = MultiPolygon::new(vec![polygon![
            (x: 5.0, y: 20.0), (x: 5.0, y: 30.0), (x: 15.0, y: 30.0), (x: 15.0, y: 20.0), (x: 5.0, y: 20.0)
        ]]);
        assert_eq!(zonal(&grid(), &values(), &[clockwise], true)[0], got[0]);
        // The whole grid with a hole over cell (1,1) (value 5): mean of the other 11 cells.
        let outer = rect(0.0, 0.0, 40.0, 30.0).0[0].exterior().clone();
        let hole = rect(10.0, 10.0, 20.0, 20.0).0[0].exterior().clone();
        let holed = MultiPolygon::new(vec![geo_types::Polygon::new(outer, vec![hole])]);
        let s = zonal(&grid(), &values(), &[holed], true)[0].expect("defined in this test");
        assert_relative_eq!(s.mean, (66.0 - 5.0) / 11.0, max_relative = 1e-12);
        assert_relative_eq!(s.cells, 11.0, max_relative = 1e-12);
    }

    /// A triangle: fractions sum to its area in cells, whatever the cut.
    #[test]
    fn fractions_sum_to_the_polygon_area() {
        let triangle = MultiPolygon::new(vec![polygon![
            (x: 1.0, y: 2.0), (x: 37.0, y: 5.0), (x: 13.0, y: 29.0), (x: 1.0, y: 2.0)
        ]]);
        let mut total = 0.0;
        cell_fractions(&grid(), &triangle, |_, _, f| total += f);
        let area = 0.5 * ((37.0 - 1.0) * (29.0 - 2.0) - (13.0 - 1.0) * (5.0 - 2.0)) / 100.0;
        assert_relative_eq!(total, area, max_relative = 1e-12);
    }

    /// No data, or a polygon between centres: `None`.
    #[test]
    fn nodata_and_empty_zones() {
        let mut v = values();
        v[0] = f32::NAN;
        let got = zonal(
            &grid(),
            &v,
            &[rect(0.0, 20.0, 10.0, 30.0), rect(1.0, 1.0, 2.0, 2.0)],
            false,
        );
        assert_eq!(got, vec![None, None]);
    }
}
