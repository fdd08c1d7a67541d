//! Overlay layers read from the input and taken to the map: polygon outlines (cluster circles
//! grouped by the side they lean to, when the layer has a `leans_to` field) and point markers.

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{read_points, read_polygons, FieldWant, PolygonCrs};
use stance_core::gpkg::{crs, open_sqlite_read};

use crate::frame::MapFrame;
use crate::palette::{side_slot, side_style, PLAIN_LINE};
use crate::projection::feature_rings;
use crate::scene::{Overlay, OverlayLines};

/// The field of a cluster layer naming each cluster's side (written by stance-scan).
pub const SIDE_FIELD: &str = "leans_to";

/// Geometry type of a feature layer from `gpkg_geometry_columns`.
fn geometry_type(path: &Path, layer: &str) -> Result<String> {
    let connection = open_sqlite_read(path)?;
    connection
        .query_row(
            "SELECT geometry_type_name FROM gpkg_geometry_columns WHERE lower(table_name) = lower(?1)",
            [layer],
            |r| r.get::<_, String>(0),
        )
        .map_err(|_| {
            let available = stance_core::gpkg::list_tables(path)
                .map(|t| {
                    t.into_iter()
                        .filter(|(_, kind)| kind == "features")
                        .map(|(n, _)| n)
                        .collect::<Vec<_>>()
                        .join(", ")
                })
                .unwrap_or_default();
            Error::LayerNotFound {
                path: path.to_owned(),
                layer: layer.to_owned(),
                available: if available.is_empty() {
                    "no feature layers".into()
                } else {
                    available
                },
            }
        })
}

/// Whether `layer` has a column named `column` (case-insensitive).
fn has_column(path: &Path, layer: &str, column: &str) -> Result<bool> {
    let connection = open_sqlite_read(path)?;
    let found: std::result::Result<i64, _> = connection.query_row(
        "SELECT count(*) FROM pragma_table_info(?1) WHERE lower(name) = lower(?2)",
        [layer, column],
        |r| r.get(0),
    );
    Ok(found.unwrap_or(0) > 0)
}

/// Rings grouped by side, sides in legend order (support/high, oppose/low, neutral, others by
/// name); features without a side go under "no side".
fn group_by_side(rings: Vec<Vec<Vec<(f64, f64)>>>, sides: &[Option<String>]) -> Vec<OverlayLines> {
    let mut groups: Vec<OverlayLines> = Vec::new();
    for (feature, side) in rings.into_iter().zip(sides) {
        let label = side
            .as_deref()
            .map(str::trim)
            .filter(|s| !s.is_empty())
            .unwrap_or("no side")
            .to_owned();
        let at = match groups.iter().position(|g| g.label == label) {
            Some(at) => at,
            None => {
                let style = if side.is_some() {
                    side_style(&label)
                } else {
                    PLAIN_LINE
                };
                groups.push(OverlayLines {
                    style,
                    label,
                    lines: Vec::new(),
                });
                groups.len() - 1
            }
        };
        groups[at].lines.extend(feature);
    }
    groups.sort_by(|a, b| (side_slot(&a.label), &a.label).cmp(&(side_slot(&b.label), &b.label)));
    groups
}

/// An overlay layer in pixel coordinates of `frame`, taken to `map_srs`.
///
/// # Errors
/// A missing layer, a geometry type that is not polygons or points, or a failed transformation.
pub fn read_overlay(
    path: &Path,
    name: &str,
    map_srs: &SpatialRef,
    frame: &MapFrame,
) -> Result<Overlay> {
    let kind = geometry_type(path, name)?.to_ascii_uppercase();
    let to_px = |(x, y): (f64, f64)| frame.to_px(x, y);
    match kind.as_str() {
        "POLYGON" | "MULTIPOLYGON" => {
            let by_side = has_column(path, name, SIDE_FIELD)?;
            let fields: &[(&str, FieldWant)] = if by_side {
                &[(SIDE_FIELD, FieldWant::Text)]
            } else {
                &[]
            };
            let layer = read_polygons(path, Some(name), fields, PolygonCrs::Into(map_srs))?;
            let rings: Vec<Vec<Vec<(f64, f64)>>> = feature_rings(&layer.polygons)
                .into_iter()
                .map(|feature| {
                    feature
                        .into_iter()
                        .map(|mut ring| {
                            // Close the ring so the outline has no gap.
                            if let Some(first) = ring.first().copied() {
                                ring.push(first);
                            }
                            ring.into_iter().map(to_px).collect()
                        })
                        .collect()
                })
                .collect();
            let groups = if by_side {
                group_by_side(rings, &layer.columns[0].as_texts())
            } else {
                vec![OverlayLines {
                    label: layer.layer.clone(),
                    style: PLAIN_LINE,
                    lines: rings.into_iter().flatten().collect(),
                }]
            };
            Ok(Overlay {
                name: layer.layer,
                by_side,
                groups,
                points: Vec::new(),
            })
        }
        "POINT" => {
            let wkt = map_srs.to_wkt().map_err(|e| Error::Crs {
                definition: crs::label(map_srs),
                message: e.to_string(),
            })?;
            let layer = read_points(path, Some(name), &[], Some(&wkt))?;
            Ok(Overlay {
                name: layer.layer,
                by_side: false,
                groups: Vec::new(),
                points: layer.x.into_iter().zip(layer.y).map(to_px).collect(),
            })
        }
        other => Err(Error::BadLayer {
            path: path.to_owned(),
            layer: name.to_owned(),
            message: format!("has {other} geometries; an overlay must be polygons or points"),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rings_group_by_side_in_legend_order() {
        let ring = |x: f64| vec![vec![(x, 0.0), (x + 1.0, 0.0), (x, 1.0)]];
        let sides = [
            Some("neutral+support".to_owned()),
            Some("oppose".to_owned()),
            None,
            Some("oppose".to_owned()),
        ];
        let groups = group_by_side(vec![ring(0.0), ring(1.0), ring(2.0), ring(3.0)], &sides);
        let labels: Vec<&str> = groups.iter().map(|g| g.label.as_str()).collect();
        assert_eq!(labels, ["oppose", "neutral+support", "no side"]);
        assert_eq!(groups[0].lines.len(), 2);
        assert_eq!(groups[0].style, side_style("oppose"));
    }
}
