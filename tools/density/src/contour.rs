//! Contour polygons of a thresholded surface by marching squares (Lorensen & Cline 1987,
//! *SIGGRAPH* 21(4), the 2-D case), saddles resolved by the mean of the four corners.

use std::collections::HashMap;

use geo_types::{Coord, LineString, Polygon};
use stance_core::grid::Grid;

/// Polygons around the cells where `values ≤ level`, in the grid's coordinates (m).
///
/// Vertices lie on the segments between cell centres where the linearly interpolated value
/// equals `level`; NaN cells take the value `outside` (> `level`) and so does a frame of cells
/// around the grid, so every contour closes. Exteriors run counter-clockwise, holes clockwise.
pub fn polygons_at_or_below(
    grid: &Grid,
    values: &[f64],
    level: f64,
    outside: f64,
) -> Vec<Polygon<f64>> {
    let outside = (outside - level).max(f64::MIN_POSITIVE);
    let width = grid.cols + 2;
    let height = grid.rows + 2;
    // s ≤ 0 inside; the frame and NaN cells take `outside`.
    let s = |r: usize, c: usize| -> f64 {
        if r == 0 || c == 0 || r > grid.rows || c > grid.cols {
            return outside;
        }
        let v = values[(r - 1) * grid.cols + (c - 1)];
        if v.is_nan() {
            outside
        } else {
            v - level
        }
    };
    let node = |r: usize, c: usize| -> (f64, f64) {
        (
            grid.x_min + (c as f64 - 0.5) * grid.cell_m,
            grid.y_max() - (r as f64 - 0.5) * grid.cell_m,
        )
    };
    // Edge ids: 2·(r·width + c) for the edge to the east of node (r, c), +1 for the edge south.
    let point_on_edge = |id: usize| -> Coord<f64> {
        let n = id / 2;
        let (r, c) = (n / width, n % width);
        let (r1, c1) = if id & 1 == 0 { (r, c + 1) } else { (r + 1, c) };
        let (s0, s1) = (s(r, c), s(r1, c1));
        let t = if s0 == s1 {
            0.5
        } else {
            (s0 / (s0 - s1)).clamp(0.0, 1.0)
        };
        let (x0, y0) = node(r, c);
        let (x1, y1) = node(r1, c1);
        Coord {
            x: x0 + t * (x1 - x0),
            y: y0 + t * (y1 - y0),
        }
    };
    let mut segments: Vec<[usize; 2]> = Vec::new();
    for r in 0..height - 1 {
        for c in 0..width - 1 {
            let (tl, tr, br, bl) = (s(r, c), s(r, c + 1), s(r + 1, c + 1), s(r + 1, c));
            let case = (usize::from(tl <= 0.0) << 3)
                | (usize::from(tr <= 0.0) << 2)
                | (usize::from(br <= 0.0) << 1)
                | usize::from(bl <= 0.0);
            if case == 0 || case == 15 {
                continue;
            }
            let top = 2 * (r * width + c);
            let bottom = 2 * ((r + 1) * width + c);
            let left = 2 * (r * width + c) + 1;
            let right = 2 * (r * width + c + 1) + 1;
            let centre_inside = (tl + tr + br + bl) / 4.0 <= 0.0;
            let mut push = |a: usize, b: usize| segments.push([a, b]);
            match case {
                1 | 14 => push(left, bottom),
                2 | 13 => push(bottom, right),
                3 | 12 => push(left, right),
                4 | 11 => push(top, right),
                6 | 9 => push(top, bottom),
                7 | 8 => push(left, top),
                5 => {
                    if centre_inside {
                        push(top, left);
                        push(right, bottom);
                    } else {
                        push(top, right);
                        push(left, bottom);
                    }
                }
                10 => {
                    if centre_inside {
                        push(top, right);
                        push(left, bottom);
                    } else {
                        push(left, top);
                        push(bottom, right);
                    }
                }
                _ => {}
            }
        }
    }
    // Every crossed edge is shared by exactly two segments (the frame closes all contours).
    let mut by_edge: HashMap<usize, Vec<usize>> = HashMap::new();
    for (k, seg) in segments.iter().enumerate() {
        for e in seg {
            by_edge.entry(*e).or_default().push(k);
        }
    }
    let mut used = vec![false; segments.len()];
    let mut rings: Vec<Vec<Coord<f64>>> = Vec::new();
    for start in 0..segments.len() {
        if used[start] {
            continue;
        }
        used[start] = true;
        let first_edge = segments[start][0];
        let mut edge = segments[start][1];
        let mut ring = vec![point_on_edge(first_edge)];
        let mut current = start;
        while edge != first_edge {
            ring.push(point_on_edge(edge));
            let next = by_edge
                .get(&edge)
                .and_then(|list| list.iter().copied().find(|k| *k != current && !used[*k]));
            let Some(next) = next else { break };
            used[next] = true;
            let [a, b] = segments[next];
            edge = if a == edge { b } else { a };
            current = next;
        }
        if ring.len() >= 3 {
            ring.push(ring[0]);
            rings.push(ring);
        }
    }
    assemble(rings)
}

/// Twice the signed area (positive counter-clockwise).
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
}
