//! Plane geometry of small lon/lat rings: point in quad, shoelace area, closing a ring.

use geo_types::{Coord, LineString, Polygon};

/// Crossing-number test; points exactly on an edge are measure-zero here because
/// no snapped coordinate lies near the only ring this is used for.
pub fn ring_contains(ring: &[[f64; 2]; 4], lon: f64, lat: f64) -> bool {
    let mut inside = false;
    for (i, j) in [(0, 3), (1, 0), (2, 1), (3, 2)] {
        let [xi, yi] = ring[i];
        let [xj, yj] = ring[j];
        if (yi > lat) != (yj > lat) && lon < (xj - xi) * (lat - yi) / (yj - yi) + xi {
            inside = !inside;
        }
    }
    inside
}

/// Signed area in square degrees (positive when counter-clockwise) of an open ring.
pub fn shoelace_area_deg2(ring: &[[f64; 2]]) -> f64 {
    let n = ring.len();
    0.5 * (0..n)
        .map(|i| {
            let [x1, y1] = ring[i];
            let [x2, y2] = ring[(i + 1) % n];
            x1 * y2 - x2 * y1
        })
        .sum::<f64>()
}

/// A polygon from an open ring, closed by repeating its first vertex.
pub fn closed_polygon(ring: &[[f64; 2]]) -> Polygon<f64> {
    let mut coords: Vec<Coord<f64>> = ring.iter().map(|&[x, y]| Coord { x, y }).collect();
    if let Some(&first) = coords.first() {
        coords.push(first);
    }
    Polygon::new(LineString::new(coords), Vec::new())
}
