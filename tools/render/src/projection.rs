//! The map's CRS: polygons taken to it as rings, and its name for the footnote and summary.

use gdal::spatial_ref::SpatialRef;
use stance_core::error::Result;
use stance_core::gpkg::crs;

/// Polygons as rings of map coordinates, one list of rings per feature.
pub type FeatureRings = Vec<Vec<Vec<(f64, f64)>>>;

/// Every ring of every polygon, transformed from `from` to `to` when they differ.
///
/// # Errors
/// A transformation that fails.
pub fn project_rings(
    polygons: &[geo_types::MultiPolygon<f64>],
    from: &SpatialRef,
    to: &SpatialRef,
) -> Result<FeatureRings> {
    let mut features: FeatureRings = polygons
        .iter()
        .map(|multi| {
            multi
                .0
                .iter()
                .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
                .map(|ring| ring.0.iter().map(|c| (c.x, c.y)).collect())
                .collect()
        })
        .collect();
    if from.to_wkt().ok() != to.to_wkt().ok() {
        let (mut xs, mut ys): (Vec<f64>, Vec<f64>) =
            features.iter().flatten().flatten().copied().unzip();
        crs::transform(from, to, &mut xs, &mut ys)?;
        for (point, (x, y)) in features
            .iter_mut()
            .flatten()
            .flatten()
            .zip(xs.into_iter().zip(ys))
        {
            *point = (x, y);
        }
    }
    Ok(features)
}

/// `EPSG:n` or the CRS's name; a PROJ string for an unnamed CRS (e.g. the centred LAEA).
pub fn crs_text(srs: &SpatialRef) -> String {
    let label = crs::label(srs);
    if label.eq_ignore_ascii_case("unknown") || label == "unnamed CRS" {
        srs.to_proj4().map(|p| p.trim().to_owned()).unwrap_or(label)
    } else {
        label
    }
}
