//! Distances and circles on the sphere, and the local degrees-per-metre scale.

use std::f64::consts::PI;

/// Mean Earth radius R₁ of GRS 80 (Moritz 2000, Geodetic Reference System 1980), the sphere of
/// the `geo` crate's haversine measure.
pub const EARTH_RADIUS_M: f64 = 6_371_008.8;

/// Great-circle distance in metres by the haversine formula on that sphere (Sinnott 1984, Sky
/// and Telescope 68(2), 159), computed by the `geo` crate.
pub fn metres_between(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    use geo::{Distance, Haversine};
    Haversine.distance(geo::Point::new(lon1, lat1), geo::Point::new(lon2, lat2))
}

fn metres_per_degree_lat() -> f64 {
    EARTH_RADIUS_M * PI / 180.0
}

/// Degrees per metre east and north at a latitude (local equirectangular plane).
pub fn degrees_per_metre(lat: f64) -> (f64, f64) {
    let per_lat = 1.0 / metres_per_degree_lat();
    (per_lat / lat.to_radians().cos(), per_lat)
}

/// A circle of `radius_m` around (`lon`, `lat`) on the sphere, as a lon/lat polygon: the
/// destination point at each bearing (Snyder 1987, Map Projections — A Working Manual,
/// eq. 5-5/5-6), computed by the `geo` crate.
pub fn circle_lonlat(
    lon: f64,
    lat: f64,
    radius_m: f64,
    vertices: usize,
) -> geo_types::Polygon<f64> {
    use geo::{Destination, Haversine};
    let centre = geo::Point::new(lon, lat);
    let mut ring: Vec<geo_types::Coord<f64>> = (0..vertices)
        .map(|i| {
            // Counter-clockwise from east, so the exterior ring has positive orientation.
            let bearing = 90.0 - 360.0 * i as f64 / vertices as f64;
            Haversine.destination(centre, bearing, radius_m).0
        })
        .collect();
    ring.push(ring[0]);
    geo_types::Polygon::new(geo_types::LineString::new(ring), vec![])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn haversine_worked_values() {
        // One degree of latitude: R·π/180 = 6 371 008.8 × 0.017453292519943295 m.
        let one_degree = metres_between(-140.0, 35.0, -140.0, 36.0);
        assert!((one_degree - 111_195.08).abs() < 0.01, "{one_degree}");
        // Along the equator the same holds for longitude.
        let equator = metres_between(0.0, 0.0, 1.0, 0.0);
        assert!((equator - 111_195.08).abs() < 0.01, "{equator}");
        assert_eq!(metres_between(-140.4, 35.0, -140.4, 35.0), 0.0);
    }

    #[test]
    fn circle_vertices_lie_at_the_radius_and_close_the_ring() {
        // The destination-point formula and the haversine are exact inverses on the sphere, so
        // every vertex is `radius_m` from the centre up to rounding (1 mm allowed).
        let circle = circle_lonlat(-140.25, 35.22, 5_000.0, 96);
        let ring: Vec<_> = circle.exterior().coords().copied().collect();
        assert_eq!(ring.len(), 97);
        assert_eq!(ring.first(), ring.last());
        for c in &ring {
            let d = metres_between(-140.25, 35.22, c.x, c.y);
            assert!((d - 5_000.0).abs() < 1e-3, "{d}");
        }
        // Counter-clockwise: the shoelace sum is positive.
        let twice_area: f64 = ring
            .windows(2)
            .map(|w| w[0].x * w[1].y - w[1].x * w[0].y)
            .sum();
        assert!(twice_area > 0.0);
    }
}
