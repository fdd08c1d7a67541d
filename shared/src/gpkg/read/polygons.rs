//! Polygon layers into the working CRS: the one path by which every tool reads areas.

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use rusqlite::types::ValueRef;

use super::rows::{self, ColumnBuilder, LayerQuery};
use super::{crs, layer_srs, resolve_layer, Column, FieldWant};
use crate::error::{Error, Result};
use crate::gpkg::blob::{decode_polygons, PolygonBlob};

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
    let (layer, source_srs, polygons, fids, columns) =
        read_polygon_rows(path, layer, fields, empty)?;
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

type PolygonRows = (
    String,
    SpatialRef,
    Vec<geo_types::MultiPolygon<f64>>,
    Vec<i64>,
    Vec<Column>,
);

/// Reads a polygon layer into geo-types, in the layer's own CRS: the geometry blobs decoded
/// directly (see [`decode_polygons`]), rows read as [`rows::read_rows`] reads them.
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
    let names: Vec<&str> = fields.iter().map(|(name, _)| *name).collect();
    let query = LayerQuery::new(path, &connection, &layer, &names)?;
    let bad_field = |i: usize, fid: i64, message: String| Error::BadField {
        path: path.to_owned(),
        layer: layer.clone(),
        field: query.selected[i].clone(),
        message: format!("feature {fid}: {message}"),
    };
    let parts = rows::read_rows(
        path,
        &connection,
        &query,
        &bad,
        |rows| Areas::with_capacity(fields, rows),
        |out, fid, geometry, values| {
            let shape = match geometry {
                ValueRef::Null => return Err(bad(format!("feature {fid} has no geometry (NULL)"))),
                ValueRef::Blob(blob) => decode_polygons(blob),
                _ => PolygonBlob::Invalid,
            };
            match shape {
                PolygonBlob::Shape(shape) => out.polygons.push(shape),
                PolygonBlob::Empty => {
                    return Err(bad(format!("feature {fid} has an empty geometry")))
                }
                PolygonBlob::Other(code) => {
                    return Err(bad(format!(
                        "feature {fid} is not a polygon (WKB type {code}); expected polygons"
                    )))
                }
                PolygonBlob::Invalid => {
                    return Err(bad(format!(
                        "feature {fid} has an unreadable geometry blob"
                    )))
                }
            }
            out.fids.push(fid);
            rows::push_fields(&mut out.builders, values, fid, &bad_field)
        },
    )?;
    let total = parts.iter().map(|p| p.fids.len()).sum();
    let mut all = Areas::with_capacity(fields, total);
    for part in parts {
        all.fids.extend(part.fids);
        all.polygons.extend(part.polygons);
        for (mine, theirs) in all.builders.iter_mut().zip(part.builders) {
            mine.append(theirs);
        }
    }
    let Areas {
        fids,
        polygons,
        builders,
    } = all;
    if fids.is_empty() && empty == Empty::Refuse {
        return Err(bad("has no features".into()));
    }
    let columns = builders.into_iter().map(ColumnBuilder::finish).collect();
    Ok((layer, srs, polygons, fids, columns))
}

/// Rows of a polygon layer as read, before projection.
struct Areas {
    fids: Vec<i64>,
    polygons: Vec<geo_types::MultiPolygon<f64>>,
    builders: Vec<ColumnBuilder>,
}

impl Areas {
    fn with_capacity(fields: &[(&str, FieldWant)], rows: usize) -> Self {
        Areas {
            fids: Vec::with_capacity(rows),
            polygons: Vec::with_capacity(rows),
            builders: fields
                .iter()
                .map(|(_, want)| ColumnBuilder::new(*want, rows))
                .collect(),
        }
    }
}
