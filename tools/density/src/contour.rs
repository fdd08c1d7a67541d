//! Contour polygons of a thresholded surface by marching squares (Lorensen & Cline 1987,
//! *SIGGRAPH* 21(4), the 2-D case): rings traced by the `contour` crate with linear
//! interpolation along cell edges, nested here.

use contour::ContourBuilder;
use geo_types::{Coord, LineString, Polygon};
use stance_core::grid::Grid;

/// Rings enclosing less than this fraction of a cell are left out: they are the degenerate
/// rings (a point or a line walked back and forth) around cells exactly at the level.
pub const MIN_RING_CELLS: f64 = 1e-6;

/// Polygons around the cells where `values ≤ level`, in the grid's coordinates (m).
///
/// Vertices lie on the segments between cell centres where the linearly interpolated value
/// equals `level`; NaN cells take the value `outside` (> `level`). Contours that reach the edge
/// of the grid close along the grid's outer border. Exteriors run counter-clockwise, holes
/// clockwise.
pub fn polygons_at_or_below(
    grid: &Grid,
    values: &[f64],
    level: f64,
    outside: f64,
) -> Vec<Polygon<f64>> {
    if grid.cols == 0 || grid.rows == 0 || values.len() != grid.len() {
        return Vec::new();
    }
    // The crate encloses values ≥ its threshold: negate (exact in floating point). Cell (r, c)
    // sits at (c + ½, r + ½) in its frame, row 0 the northern row.
    let negated: Vec<f64> = values
        .iter()
        .map(|v| if v.is_nan() { -outside } else { -v })
        .collect();
    let builder = ContourBuilder::new(grid.cols, grid.rows, true)
        .x_origin(grid.x_min)
        .x_step(grid.cell_m)
        .y_origin(grid.y_max())
        .y_step(-grid.cell_m);
    let Ok(lines) = builder.lines(&negated, &[-level]) else {
        return Vec::new();
    };
    let min_area2 = 2.0 * MIN_RING_CELLS * grid.cell_m * grid.cell_m;
    let rings: Vec<Vec<Coord<f64>>> = lines
        .into_iter()
        .flat_map(|line| line.into_inner().0 .0)
        .filter_map(|ring| {
            let mut ring = ring.0;
            ring.dedup();
            (ring.len() >= 4 && signed_area2(&ring).abs() >= min_area2).then_some(ring)
        })
        .collect();
    assemble(rings)
}

/// Twice the signed area (positive counter-clockwise) of a closed ring.
fn signed_area2(ring: &[Coord<f64>]) -> f64 {
    ring.windows(2)
        .map(|w| w[0].x * w[1].y - w[1].x * w[0].y)
        .sum()
}

/// Even–odd point-in-ring test.
fn inside(ring: &[Coord<f64>], p: Coord<f64>) -> bool {
    let mut odd = false;
    for w in ring.windows(2) {
        let (a, b) = (w[0], w[1]);
        if (a.y > p.y) != (b.y > p.y) && p.x < a.x + (p.y - a.y) / (b.y - a.y) * (b.x - a.x) {
            odd = !odd;
        }
    }
    odd
}

type Bounds = (f64, f64, f64, f64);

fn bounds(ring: &[Coord<f64>]) -> Bounds {
    ring.iter().fold(
        (
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ),
        |(x0, y0, x1, y1), p| (x0.min(p.x), y0.min(p.y), x1.max(p.x), y1.max(p.y)),
    )
}

/// Nests non-crossing rings: depth = number of rings enclosing a ring; even depths are
/// exteriors, odd depths holes of the deepest enclosing exterior.
///
/// Kept by hand rather than the crate's own polygons: the crate gives each hole to the first
/// polygon whose exterior contains or touches a point of it, and on the demo's p-value grid
/// (552 × 455 cells) that put one hole outside its shell, where rings touch at cells exactly at
/// the level.
fn assemble(rings: Vec<Vec<Coord<f64>>>) -> Vec<Polygon<f64>> {
    let boxes: Vec<Bounds> = rings.iter().map(|r| bounds(r)).collect();
    let probe = |k: usize| rings[k][0];
    let encloses = |outer: usize, k: usize| -> bool {
        let (x0, y0, x1, y1) = boxes[outer];
        let p = probe(k);
        outer != k && p.x >= x0 && p.x <= x1 && p.y >= y0 && p.y <= y1 && inside(&rings[outer], p)
    };
    let depth: Vec<usize> = (0..rings.len())
        .map(|k| (0..rings.len()).filter(|&o| encloses(o, k)).count())
        .collect();
    let mut holes: Vec<Vec<usize>> = vec![Vec::new(); rings.len()];
    for k in 0..rings.len() {
        if depth[k] & 1 == 1 {
            if let Some(parent) =
                (0..rings.len()).find(|&o| depth[o] + 1 == depth[k] && encloses(o, k))
            {
                holes[parent].push(k);
            }
        }
    }
    let oriented = |k: usize, ccw: bool| -> LineString<f64> {
        let mut ring = rings[k].clone();
        if (signed_area2(&ring) > 0.0) != ccw {
            ring.reverse();
        }
        LineString::from(ring)
    };
    (0..rings.len())
        .filter(|&k| depth[k] & 1 == 0)
        .map(|k| {
            Polygon::new(
                oriented(k, true),
                holes[k].iter().map(|&h| oriented(h, false)).collect(),
            )
        })
        .collect()
}

/// Area of a polygon (m²), exterior minus holes.
pub fn area_m2(polygon: &Polygon<f64>) -> f64 {
    let exterior = signed_area2(&polygon.exterior().0).abs() / 2.0;
    let holes: f64 = polygon
        .interiors()
        .iter()
        .map(|h| signed_area2(&h.0).abs() / 2.0)
        .sum();
    exterior - holes
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn grid(cols: usize, rows: usize) -> Grid {
        Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 1.0,
            cols,
            rows,
        }
    }

    #[test]
    fn one_cell_gives_a_diamond() {
        // Values 0 at one centre, 1 elsewhere, level 0.5: crossings half-way between centres,
        // a diamond of half-diagonal 0.5 → area 0.5.
        let mut v = vec![1.0; 9];
        v[4] = 0.0;
        let polygons = polygons_at_or_below(&grid(3, 3), &v, 0.5, 1.0);
        assert_eq!(polygons.len(), 1);
        assert_relative_eq!(area_m2(&polygons[0]), 0.5, max_relative = 1e-12);
        assert!(signed_area2(&polygons[0].exterior().0) > 0.0);
    }

    #[test]
    fn a_ring_of_cells_has_a_hole_and_edges_close() {
        // A 5×5 block inside, its centre cell outside: one polygon with one hole. The block
        // touches the grid edge, where the frame closes it.
        let mut v = vec![0.0; 25];
        v[12] = 1.0;
        let polygons = polygons_at_or_below(&grid(5, 5), &v, 0.5, 1.0);
        assert_eq!(polygons.len(), 1);
        assert_eq!(polygons[0].interiors().len(), 1);
        // Exterior: centres 0.5…4.5 expanded by half a cell to a 5 × 5 square, four corners cut
        // by triangles of legs 1/2 (area 1/8 each): 25 − 0.5; hole: a diamond of area 0.5.
        assert_relative_eq!(
            area_m2(&polygons[0]),
            25.0 - 0.5 - 0.5,
            max_relative = 1e-12
        );
        let none = polygons_at_or_below(&grid(5, 5), &[f64::NAN; 25], 0.5, 1.0);
        assert!(none.is_empty());
    }

    #[test]
    fn a_cell_exactly_at_the_level_gives_no_degenerate_ring() {
        // The centre cell equals the level and its neighbours are above: the interpolated
        // crossings all fall on its centre, a ring of zero area, which is left out.
        let mut v = vec![1.0; 9];
        v[4] = 0.5;
        assert!(polygons_at_or_below(&grid(3, 3), &v, 0.5, 1.0).is_empty());
        // Just below the level it is a real (small) diamond: half-diagonals 0.1 → area 0.02.
        v[4] = 0.5 - 0.5 / 9.0;
        let polygons = polygons_at_or_below(&grid(3, 3), &v, 0.5, 1.0);
        assert_eq!(polygons.len(), 1);
        assert_relative_eq!(area_m2(&polygons[0]), 0.02, max_relative = 1e-9);
    }

    #[test]
    fn islands_in_holes_keep_their_own_holes() {
        // 13 × 13 cells, Chebyshev distance d from the centre cell; inside (0 ≤ 0.5) where
        // d = 1 or d ∈ {4, 5}: an outer annulus and, inside its hole, an island with a hole.
        // Crossings lie half-way between centres (values 0 and 1, level 0.5), so each square
        // of side s cells has its four corners cut by triangles of legs ½: area s² − ½.
        // Outer: (11² − ½) − (7² − ½) = 72; island: (3² − ½) − ½ (a one-cell diamond) = 8.
        let v: Vec<f64> = (0..169)
            .map(|k| {
                let (r, c) = (k / 13, k % 13);
                let d = (r as i64 - 6).abs().max((c as i64 - 6).abs());
                if d == 1 || d == 4 || d == 5 {
                    0.0
                } else {
                    1.0
                }
            })
            .collect();
        let mut polygons = polygons_at_or_below(&grid(13, 13), &v, 0.5, 1.0);
        polygons.sort_by(|a, b| area_m2(b).total_cmp(&area_m2(a)));
        assert_eq!(polygons.len(), 2);
        assert_eq!(polygons[0].interiors().len(), 1);
        assert_eq!(polygons[1].interiors().len(), 1);
        assert_relative_eq!(area_m2(&polygons[0]), 72.0, max_relative = 1e-12);
        assert_relative_eq!(area_m2(&polygons[1]), 8.0, max_relative = 1e-12);
        for p in &polygons {
            assert!(
                signed_area2(&p.exterior().0) > 0.0,
                "exterior counter-clockwise"
            );
            assert!(signed_area2(&p.interiors()[0].0) < 0.0, "hole clockwise");
        }
    }

    #[test]
    fn crossings_are_interpolated_and_nan_is_outside() {
        // One row of three cells 0, 0.4, NaN at level 0.1 (NaN → outside = 1): only the first
        // cell is inside. East, the contour crosses between centres 0.5 and 1.5 at
        // 0.5 + 0.1/0.4 = 0.75; west, north and south it closes on the grid's border (x = 0,
        // y = 1, y = 0) half-way along the cell. A kite of diagonals 0.75 and 1: area 0.375.
        let v = [0.0, 0.4, f64::NAN];
        let polygons = polygons_at_or_below(&grid(3, 1), &v, 0.1, 1.0);
        assert_eq!(polygons.len(), 1);
        let xs: Vec<f64> = polygons[0].exterior().0.iter().map(|c| c.x).collect();
        let max_x = xs.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        assert_relative_eq!(max_x, 0.75, max_relative = 1e-12);
        assert_relative_eq!(area_m2(&polygons[0]), 0.375, max_relative = 1e-12);
        // The NaN cell alone, at a level above every number: NaN stays outside.
        let only_nan = polygons_at_or_below(&grid(3, 1), &[2.0, 2.0, f64::NAN], 0.1, 1.0);
        assert!(only_nan.is_empty());
    }
}
