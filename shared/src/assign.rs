//! Point-in-polygon assignment of points to areas through an R-tree of the areas' bounding boxes
//! (Guttman 1984, SIGMOD '84, 47–57), with the exact test on the candidates.
//!
//! **Boundary rule.** A point belongs to the closed polygons (interior or boundary) that contain
//! it; when several do — a point on a shared edge or vertex, or in an overlap — it goes to the one
//! that comes **first in the layer's order** (the lowest index, which is the lowest fid as the
//! layer is read). So every point is counted once or not at all.

use geo::{coordinate_position::CoordPos, CoordinatePosition};
use geo_types::{Coord, MultiPolygon};
use rayon::prelude::*;
use rstar::{primitives::GeomWithData, primitives::Rectangle, RTree, AABB};

/// The areas of each point.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Assignment {
    /// Per point: the index of its area, or `None` outside every area.
    pub area: Vec<Option<u32>>,
    /// Points outside every area.
    pub outside: u64,
    /// Points in more than one closed area (on a shared boundary, or where areas overlap),
    /// each given to the first of them.
    pub on_shared_boundary: u64,
}

/// Assigns each point (`x[k]`, `y[k]`) to an area of `areas` by the boundary rule above.
/// The areas and points must be in the same CRS. Non-finite points are outside.
pub fn assign(areas: &[MultiPolygon<f64>], x: &[f64], y: &[f64]) -> Assignment {
    let boxes: Vec<GeomWithData<Rectangle<[f64; 2]>, u32>> = areas
        .iter()
        .enumerate()
        .filter_map(|(i, polygon)| {
            use geo::BoundingRect;
            polygon.bounding_rect().map(|r| {
                GeomWithData::new(
                    Rectangle::from_corners([r.min().x, r.min().y], [r.max().x, r.max().y]),
                    i as u32,
                )
            })
        })
        .collect();
    let tree = RTree::bulk_load(boxes);
    let found: Vec<(Option<u32>, bool)> = x
        .par_iter()
        .zip(y.par_iter())
        .map(|(&px, &py)| {
            if !(px.is_finite() && py.is_finite()) {
                return (None, false);
            }
            let coord = Coord { x: px, y: py };
            let mut first: Option<u32> = None;
            let mut several = false;
            for candidate in tree.locate_in_envelope_intersecting(&AABB::from_point([px, py])) {
                let index = candidate.data;
                if areas[index as usize].coordinate_position(&coord) != CoordPos::Outside {
                    match first {
                        None => first = Some(index),
                        Some(f) => {
                            several = true;
                            first = Some(f.min(index));
                        }
                    }
                }
            }
            (first, several)
        })
        .collect();
    let outside = found.iter().filter(|(a, _)| a.is_none()).count() as u64;
    let on_shared_boundary = found.iter().filter(|(_, s)| *s).count() as u64;
    Assignment {
        area: found.into_iter().map(|(a, _)| a).collect(),
        outside,
        on_shared_boundary,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use geo_types::polygon;

    fn square(x0: f64, y0: f64, side: f64) -> MultiPolygon<f64> {
        MultiPolygon::new(vec![polygon![
            (x: x0, y: y0),
            (x: x0 + side, y: y0),
            (x: x0 + side, y: y0 + side),
            (x: x0, y: y0 + side),
            (x: x0, y: y0),
        ]])
    }

    /// Two unit squares sharing the edge x = 1, a third sharing only the corner (1, 1)… and
    /// points inside, on the shared edge, on the shared corner, and outside.
    #[test]
    fn a_point_on_a_shared_boundary_is_counted_once_in_the_first_area() {
        let areas = [
            square(0.0, 0.0, 1.0),
            square(1.0, 0.0, 1.0),
            square(1.0, 1.0, 1.0),
        ];
        let x = [0.5, 1.5, 1.0, 1.0, 1.5, 5.0, f64::NAN];
        let y = [0.5, 0.5, 0.5, 1.0, 1.5, 5.0, 0.0];
        let got = assign(&areas, &x, &y);
        assert_eq!(
            got.area,
            vec![Some(0), Some(1), Some(0), Some(0), Some(2), None, None]
        );
        assert_eq!(got.outside, 2);
        assert_eq!(got.on_shared_boundary, 2);
        // Reversing the layer order moves the boundary points to the (new) first area.
        let reversed = [areas[2].clone(), areas[1].clone(), areas[0].clone()];
        let got = assign(&reversed, &x, &y);
        assert_eq!(got.area[2], Some(1));
        assert_eq!(got.area[3], Some(0));
    }

    /// A point in a hole is outside the holed polygon (and inside the island in the hole).
    #[test]
    fn holes_are_outside() {
        let holed = MultiPolygon::new(vec![geo_types::Polygon::new(
            square(0.0, 0.0, 3.0).0[0].exterior().clone(),
            vec![square(1.0, 1.0, 1.0).0[0].exterior().clone()],
        )]);
        let got = assign(&[holed, square(1.0, 1.0, 1.0)], &[1.5, 0.5], &[1.5, 0.5]);
        assert_eq!(got.area, vec![Some(1), Some(0)]);
        assert_eq!(got.outside, 0);
    }
}
