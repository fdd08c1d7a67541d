//! The map's CRS: polygons taken to it as rings, and its name for the footnote and summary.

use gdal::spatial_ref::SpatialRef;
use stance_core::gpkg::crs;

/// Polygons as rings of map coordinates, one list of rings per feature.
pub type FeatureRings = Vec<Vec<Vec<(f64, f64)>>>;

/// Every ring of every polygon (already in the map's CRS: polygons are read into it).
pub fn feature_rings(polygons: &[geo_types::MultiPolygon<f64>]) -> FeatureRings {
    polygons
        .iter()
        .map(|multi| {
            multi
                .0
                .iter()
                .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
                .map(|ring| ring.0.iter().map(|c| (c.x, c.y)).collect())
                .collect()
        })
        .collect()
}

/// `EPSG:n` or the CRS's name; a PROJ string for an unnamed CRS (e.g. the centred LAEA).
pub fn crs_text(srs: &SpatialRef) -> String {
    crs::summary_text(srs)
}
