//! Points to areas through an R-tree of the areas' bounding boxes (Guttman 1984) and the exact
//! test on the candidates. A point in several closed areas (on a shared boundary) goes to the
//! first in the layer's order, the rule of the toolbox's per-area counts.

use geo::{coordinate_position::CoordPos, BoundingRect, CoordinatePosition};
use geo_types::{Coord, MultiPolygon};
use rayon::prelude::*;
use rstar::{primitives::GeomWithData, primitives::Rectangle, RTree, AABB};

/// Per point: the index of its area, or None outside every area (or not finite).
pub fn assign(areas: &[MultiPolygon<f64>], x: &[f64], y: &[f64]) -> Vec<Option<usize>> {
    let boxes: Vec<GeomWithData<Rectangle<[f64; 2]>, usize>> = areas
        .iter()
        .enumerate()
        .filter_map(|(i, polygon)| {
            polygon.bounding_rect().map(|r| {
                let corners = ([r.min().x, r.min().y], [r.max().x, r.max().y]);
                GeomWithData::new(Rectangle::from_corners(corners.0, corners.1), i)
            })
        })
        .collect();
    let tree = RTree::bulk_load(boxes);
    x.par_iter()
        .zip(y.par_iter())
        .map(|(&px, &py)| {
            if !(px.is_finite() && py.is_finite()) {
                return None;
            }
            let coord = Coord { x: px, y: py };
            tree.locate_in_envelope_intersecting(&AABB::from_point([px, py]))
                .map(|c| c.data)
                .filter(|&i| areas[i].coordinate_position(&coord) != CoordPos::Outside)
                .min()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo_types::polygon;

    fn square(x0: f64) -> MultiPolygon<f64> {
        MultiPolygon::new(vec![polygon![
            (x: x0, y: 0.0), (x: x0 + 1.0, y: 0.0), (x: x0 + 1.0, y: 1.0), (x: x0, y: 1.0), (x: x0, y: 0.0),
        ]])
    }

    #[test]
    fn shared_edges_go_to_the_first_area() {
        let got = assign(
            &[square(0.0), square(1.0)],
            &[0.5, 1.0, 1.5, 3.0],
            &[0.5; 4],
        );
        assert_eq!(got, vec![Some(0), Some(0), Some(1), None]);
    }
}
