//! Polygon layers into the working CRS: the one path by which every tool reads areas.

use std::collections::HashMap;
use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use gdal::vector::LayerAccess;

use super::{
    crs, find_field, layer_srs, resolve_layer, table_columns, Column, FieldWant, TextColumn,
};
use crate::error::{Error, Result};

/// Polygons of a layer with requested fields, in the working CRS.
#[derive(Debug)]
pub struct PolygonLayer {
    /// Layer name.
    pub layer: String,
    /// Feature ids.
    pub fids: Vec<i64>,
    /// Geometries in `srs` (polygons are wrapped as one-part multipolygons).
    pub polygons: Vec<geo_types::MultiPolygon<f64>>,
    /// Requested columns, in the order asked.
    pub columns: Vec<Column>,
    /// The CRS of `polygons`: the working CRS.
    pub srs: SpatialRef,
    /// The layer's own CRS (outputs derived from the layer keep it).
    pub source_srs: SpatialRef,
}

/// Which CRS polygons are read into.
#[derive(Debug, Clone, Copy)]
pub enum PolygonCrs<'a> {
    /// The working CRS chosen from `--crs` (given here) and the layer, as for points
    /// (see [`crs::working`]).
    Working(Option<&'a str>),
    /// A working CRS already chosen (e.g. the points' or a surface's).
    Into(&'a SpatialRef),
    /// The coordinates as stored, in the layer's own CRS: for checks that compare stored
    /// coordinates. Tools measure distances, so they use `Working` or `Into`.
    AsStored,
}

/// Reads a polygon layer with the requested fields, projected to the working CRS: the one path
/// by which every tool reads areas, so every distance a user gives is metres whatever the CRS
/// of the layer.
///
/// # Errors
/// Missing file, layer or field; a layer that is not polygons, has no CRS or no features; a
/// NULL or empty geometry; a vertex that cannot be projected; a non-numeric value in a
/// [`FieldWant::Real`] field.
pub fn read_polygons(
    path: &Path,
    layer: Option<&str>,
    fields: &[(&str, FieldWant)],
    target: PolygonCrs<'_>,
) -> Result<PolygonLayer> {
    read_polygon_layer(path, layer, fields, target, Empty::Refuse)
}

/// [`read_polygons`] for a layer that may rightly hold no features, e.g. the clusters of a
/// scan that found none: an empty layer comes back with no polygons instead of an error.
///
/// # Errors
/// As [`read_polygons`], except for an empty layer.
pub fn read_polygons_or_none(
    path: &Path,
    layer: Option<&str>,
    fields: &[(&str, FieldWant)],
    target: PolygonCrs<'_>,
) -> Result<PolygonLayer> {
    read_polygon_layer(path, layer, fields, target, Empty::Accept)
}

/// Whether a layer without features is an error.
#[derive(Clone, Copy, PartialEq)]
enum Empty {
    Refuse,
    Accept,
}

fn read_polygon_layer(
    path: &Path,
    layer: Option<&str>,
    fields: &[(&str, FieldWant)],
    target: PolygonCrs<'_>,
    empty: Empty,
) -> Result<PolygonLayer> {
    let (layer, source_srs, polygons, fids, texts) = read_polygon_rows(path, layer, fields, empty)?;
    let mut columns = Vec::with_capacity(fields.len());
    for ((field, want), values) in fields.iter().zip(texts) {
        columns.push(text_to_column(path, &layer, field, *want, &fids, values)?);
    }
    let mut out = PolygonLayer {
        layer,
        fids,
        polygons,
        columns,
        srs: source_srs.clone(),
        source_srs,
    };
    let srs = match target {
        PolygonCrs::AsStored => return Ok(out),
        PolygonCrs::Into(srs) => srs.clone(),
        PolygonCrs::Working(user) => {
            let (xs, ys) = polygon_vertices(&out.polygons);
            crs::working(user, &out.source_srs, || {
                crs::lonlat_centre(&out.source_srs, &xs, &ys)
            })?
        }
    };
    project_polygons(&mut out.polygons, &out.source_srs, &srs, &out.layer)?;
    out.srs = srs;
    Ok(out)
}

/// Every vertex of `polygons`, exterior then interior rings, in order.
fn polygon_vertices(polygons: &[geo_types::MultiPolygon<f64>]) -> (Vec<f64>, Vec<f64>) {
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    for polygon in polygons {
        for part in &polygon.0 {
            for ring in std::iter::once(part.exterior()).chain(part.interiors()) {
                for c in &ring.0 {
                    xs.push(c.x);
                    ys.push(c.y);
                }
            }
        }
    }
    (xs, ys)
}

/// Projects every vertex of `polygons` in place from `from` to `to` (nothing when they are the
/// same CRS); a vertex that cannot be projected is an error naming the layer.
///
/// # Errors
/// [`Error::Crs`] when PROJ fails or gives non-finite coordinates.
pub fn project_polygons(
    polygons: &mut [geo_types::MultiPolygon<f64>],
    from: &SpatialRef,
    to: &SpatialRef,
    layer: &str,
) -> Result<()> {
    if from.to_wkt().ok() == to.to_wkt().ok() {
        return Ok(());
    }
    let (mut xs, mut ys) = polygon_vertices(polygons);
    crs::transform(from, to, &mut xs, &mut ys)?;
    if xs.iter().chain(&ys).any(|v| !v.is_finite()) {
        return Err(Error::Crs {
            definition: crs::label(to),
            message: format!(
                "some vertices of layer '{layer}' cannot be projected to it from {}",
                crs::label(from)
            ),
        });
    }
    let mut k = 0;
    for polygon in polygons.iter_mut() {
        for part in &mut polygon.0 {
            let mut set = |ring: &mut geo_types::LineString<f64>| {
                for c in &mut ring.0 {
                    c.x = xs[k];
                    c.y = ys[k];
                    k += 1;
                }
            };
            part.exterior_mut(|r| set(r));
            part.interiors_mut(|rings| {
                for r in rings {
                    set(r);
                }
            });
        }
    }
    Ok(())
}

/// A field read as text turned into the column kind asked for.
fn text_to_column(
    path: &Path,
    layer: &str,
    field: &str,
    want: FieldWant,
    fids: &[i64],
    values: Vec<Option<String>>,
) -> Result<Column> {
    Ok(match want {
        FieldWant::Text => {
            let mut column = TextColumn::default();
            let mut index: HashMap<String, u32> = HashMap::new();
            for value in values {
                let code = match value {
                    None => TextColumn::NULL,
                    Some(v) => *index.entry(v.clone()).or_insert_with(|| {
                        column.values.push(v);
                        (column.values.len() - 1) as u32
                    }),
                };
                column.codes.push(code);
            }
            Column::Text(column)
        }
        FieldWant::Real => {
            let mut numbers = Vec::with_capacity(values.len());
            for (value, fid) in values.iter().zip(fids) {
                numbers.push(match value.as_deref().map(str::trim) {
                    None => None,
                    Some(text) => Some(text.parse::<f64>().map_err(|_| Error::BadField {
                        path: path.to_owned(),
                        layer: layer.to_owned(),
                        field: field.to_owned(),
                        message: format!("feature {fid} has '{text}'; expected a number"),
                    })?),
                });
            }
            Column::Real(numbers)
        }
        FieldWant::DateTime => Column::DateTime(
            values
                .iter()
                .map(|v| v.as_deref().and_then(crate::time::parse_utc_seconds))
                .collect(),
        ),
    })
}

type PolygonRows = (
    String,
    SpatialRef,
    Vec<geo_types::MultiPolygon<f64>>,
    Vec<i64>,
    Vec<Vec<Option<String>>>,
);

/// Reads a polygon layer through GDAL into geo-types, in the layer's own CRS, fields as text.
fn read_polygon_rows(
    path: &Path,
    layer: Option<&str>,
    fields: &[(&str, FieldWant)],
    empty: Empty,
) -> Result<PolygonRows> {
    let connection = crate::gpkg::open_sqlite_read(path)?;
    let (layer, geometry_type) =
        resolve_layer(path, &connection, layer, &["MULTIPOLYGON", "POLYGON"])?;
    let bad = |message: String| Error::BadLayer {
        path: path.to_owned(),
        layer: layer.clone(),
        message,
    };
    if !["POLYGON", "MULTIPOLYGON", "GEOMETRY"]
        .iter()
        .any(|g| geometry_type.eq_ignore_ascii_case(g))
    {
        return Err(bad(format!(
            "has {} geometries; expected polygons",
            if geometry_type.is_empty() {
                "no"
            } else {
                &geometry_type
            }
        )));
    }
    let srs = layer_srs(path, &connection, &layer)?;
    let columns = table_columns(path, &connection, &layer)?;
    let mut names = Vec::new();
    for (field, _) in fields {
        names.push(find_field(path, &layer, &columns, field, &[])?.to_owned());
    }
    drop(connection);
    let dataset = crate::gpkg::open_geopackage(path)?;
    let mut gdal_layer = dataset
        .layer_by_name(&layer)
        .map_err(|e| bad(e.to_string()))?;
    let indices: Vec<usize> = names
        .iter()
        .map(|n| {
            gdal_layer
                .defn()
                .field_index(n)
                .map_err(|e| bad(e.to_string()))
        })
        .collect::<Result<_>>()?;
    let mut fids = Vec::new();
    let mut polygons = Vec::new();
    let mut texts = vec![Vec::new(); names.len()];
    for feature in gdal_layer.features() {
        let fid = feature.fid().map(|f| f as i64).unwrap_or(-1);
        let geometry = feature
            .geometry()
            .ok_or_else(|| bad(format!("feature {fid} has no geometry (NULL)")))?;
        if geometry.is_empty() {
            return Err(bad(format!("feature {fid} has an empty geometry")));
        }
        let converted: geo_types::Geometry<f64> = geometry
            .try_into()
            .map_err(|e: gdal::errors::GdalError| bad(format!("feature {fid}: {e}")))?;
        let multi = match converted {
            geo_types::Geometry::Polygon(p) => geo_types::MultiPolygon::new(vec![p]),
            geo_types::Geometry::MultiPolygon(m) => m,
            other => {
                return Err(bad(format!(
                    "feature {fid} is a {other:?}; expected polygons"
                )
                .chars()
                .take(200)
                .collect()))
            }
        };
        fids.push(fid);
        polygons.push(multi);
        for (slot, index) in texts.iter_mut().zip(&indices) {
            slot.push(
                feature
                    .field_as_string(*index)
                    .map_err(|e| bad(e.to_string()))?,
            );
        }
    }
    if fids.is_empty() && empty == Empty::Refuse {
        return Err(bad("has no features".into()));
    }
    Ok((layer, srs, polygons, fids, texts))
}
