//! Reading point and polygon layers from a GeoPackage into the working CRS.

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use rusqlite::types::ValueRef;

mod btree;
mod polygons;
mod rows;

pub use polygons::{
    project_polygons, read_polygons, read_polygons_or_none, PolygonCrs, PolygonLayer,
};

use super::blob::{decode_point, PointBlob};
use super::{crs, quote_identifier as q};
use crate::error::{Error, Result};
use rows::{ColumnBuilder, Fields, LayerQuery};

/// How a requested field is to be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldWant {
    /// Text (numbers become their decimal text), dictionary-encoded.
    Text,
    /// A number; text that is not a number is an error.
    Real,
    /// A date-time parsed by [`crate::time::parse_utc_seconds`]; unparseable values are `None`.
    DateTime,
}

/// A text column stored as codes into a dictionary of distinct values.
#[derive(Debug, Clone, Default)]
pub struct TextColumn {
    /// Per row: index into `values`, or [`TextColumn::NULL`].
    pub codes: Vec<u32>,
    /// Distinct values in order of first appearance.
    pub values: Vec<String>,
}

impl TextColumn {
    /// Code of a NULL value.
    pub const NULL: u32 = u32::MAX;

    /// The value of row `i`.
    pub fn get(&self, i: usize) -> Option<&str> {
        self.values.get(self.codes[i] as usize).map(String::as_str)
    }
}

/// One column read from a layer.
#[derive(Debug, Clone)]
pub enum Column {
    /// Text values.
    Text(TextColumn),
    /// Numbers (None for NULL).
    Real(Vec<Option<f64>>),
    /// UTC seconds (None for NULL or unparseable).
    DateTime(Vec<Option<i64>>),
}

impl Column {
    /// The values as text, None where missing (numbers in their shortest decimal form,
    /// date-times as UTC seconds).
    pub fn as_texts(&self) -> Vec<Option<String>> {
        match self {
            Column::Text(t) => (0..t.codes.len())
                .map(|i| t.get(i).map(str::to_owned))
                .collect(),
            Column::Real(v) => v.iter().map(|x| x.map(|x| x.to_string())).collect(),
            Column::DateTime(v) => v.iter().map(|x| x.map(|x| x.to_string())).collect(),
        }
    }
}

/// Points of a layer, in the working CRS.
#[derive(Debug)]
pub struct PointLayer {
    /// Layer name as found.
    pub layer: String,
    /// Feature ids.
    pub fids: Vec<i64>,
    /// Easting (m).
    pub x: Vec<f64>,
    /// Northing (m).
    pub y: Vec<f64>,
    /// Requested columns, in the order asked.
    pub columns: Vec<Column>,
    /// The working CRS.
    pub srs: SpatialRef,
    /// The layer's own CRS.
    pub source_srs: SpatialRef,
}

/// The feature layers of a GeoPackage with their geometry type.
fn feature_layers(connection: &rusqlite::Connection) -> rusqlite::Result<Vec<(String, String)>> {
    let mut statement = connection.prepare(
        "SELECT c.table_name, coalesce(g.geometry_type_name, '') FROM gpkg_contents c
         LEFT JOIN gpkg_geometry_columns g ON g.table_name = c.table_name ORDER BY c.table_name",
    )?;
    let rows = statement.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
    rows.collect()
}

/// Resolves the layer to read: the one named, or the only layer of `geometry` type.
fn resolve_layer(
    path: &Path,
    connection: &rusqlite::Connection,
    wanted: Option<&str>,
    geometry: &[&str],
) -> Result<(String, String)> {
    let layers = feature_layers(connection).map_err(|e| Error::NotGeoPackage {
        path: path.to_owned(),
        reason: e.to_string(),
    })?;
    let list = |filter: &dyn Fn(&str) -> bool| {
        let names: Vec<&str> = layers
            .iter()
            .filter(|(_, g)| filter(g))
            .map(|(n, _)| n.as_str())
            .collect();
        if names.is_empty() {
            "none".to_owned()
        } else {
            names.join(", ")
        }
    };
    match wanted {
        Some(name) => layers
            .iter()
            .find(|(n, _)| n == name)
            .or_else(|| layers.iter().find(|(n, _)| n.eq_ignore_ascii_case(name)))
            .cloned()
            .ok_or_else(|| Error::LayerNotFound {
                path: path.to_owned(),
                layer: name.to_owned(),
                available: list(&|_| true),
            }),
        None => {
            let candidates: Vec<&(String, String)> = layers
                .iter()
                .filter(|(_, g)| geometry.iter().any(|w| g.eq_ignore_ascii_case(w)))
                .collect();
            match candidates.as_slice() {
                [one] => Ok((*one).clone()),
                [] => Err(Error::argument(
                    "--layer",
                    format!(
                        "{} has no {} layer (layers: {})",
                        path.display(),
                        geometry[0].to_lowercase(),
                        list(&|_| true)
                    ),
                )),
                _ => Err(Error::argument(
                    "--layer",
                    format!(
                        "{} has several {} layers; name one with --layer ({})",
                        path.display(),
                        geometry[0].to_lowercase(),
                        list(&|g| geometry.iter().any(|w| g.eq_ignore_ascii_case(w)))
                    ),
                )),
            }
        }
    }
}

/// The CRS of layer `layer` from `gpkg_spatial_ref_sys`, in traditional axis order.
fn layer_srs(path: &Path, connection: &rusqlite::Connection, layer: &str) -> Result<SpatialRef> {
    let bad = |message: String| Error::BadLayer {
        path: path.to_owned(),
        layer: layer.to_owned(),
        message,
    };
    let (srs_id, organization, code, definition): (i64, String, i64, String) = connection
        .query_row(
            "SELECT g.srs_id, s.organization, s.organization_coordsys_id, s.definition FROM gpkg_geometry_columns g
             JOIN gpkg_spatial_ref_sys s ON s.srs_id = g.srs_id WHERE g.table_name = ?1",
            [layer],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
        )
        .map_err(|e| bad(format!("cannot read its CRS ({e})")))?;
    if srs_id <= 0 || definition.trim().is_empty() || definition.eq_ignore_ascii_case("undefined") {
        return Err(bad(format!(
            "has no CRS (srs_id {srs_id}); assign one first, e.g. ogr2ogr -a_srs EPSG:4326, or import it with stance-import --source-crs"
        )));
    }
    if organization.eq_ignore_ascii_case("epsg") {
        if let Ok(srs) = crs::parse(&format!("EPSG:{code}")) {
            return Ok(srs);
        }
    }
    crs::parse(&definition).map_err(|e| bad(format!("its CRS cannot be used: {e}")))
}

fn table_columns(
    path: &Path,
    connection: &rusqlite::Connection,
    layer: &str,
) -> Result<Vec<(String, bool)>> {
    let mut statement = connection
        .prepare(&format!("PRAGMA table_info({})", q(layer)))
        .map_err(|e| Error::NotGeoPackage {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
    let rows = statement
        .query_map([], |r| {
            Ok((r.get::<_, String>(1)?, r.get::<_, i64>(5)? > 0))
        })
        .and_then(|rows| rows.collect::<std::result::Result<Vec<_>, _>>())
        .map_err(|e| Error::NotGeoPackage {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
    Ok(rows)
}

/// Finds `field` among `columns` (exact, then case-insensitive).
fn find_field<'c>(
    path: &Path,
    layer: &str,
    columns: &'c [(String, bool)],
    field: &str,
    skip: &[&str],
) -> Result<&'c str> {
    columns
        .iter()
        .find(|(c, _)| c == field)
        .or_else(|| columns.iter().find(|(c, _)| c.eq_ignore_ascii_case(field)))
        .map(|(c, _)| c.as_str())
        .ok_or_else(|| Error::FieldNotFound {
            path: path.to_owned(),
            layer: layer.to_owned(),
            field: field.to_owned(),
            available: columns
                .iter()
                .filter(|(c, pk)| !pk && !skip.contains(&c.as_str()))
                .map(|(c, _)| c.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        })
}

/// Reads a point layer of a GeoPackage with the requested fields, projected to the working CRS
/// (see [`crs::working`]).
///
/// Reads the rows through SQLite and decodes the GeoPackage point blobs directly (the hot path of
/// every tool). A NULL, empty, non-point or non-finite geometry is an error naming the first
/// offending feature.
///
/// # Errors
/// Missing file, layer or field; a layer that is not points, has no CRS or no features; a
/// non-numeric value in a [`FieldWant::Real`] field.
pub fn read_points(
    path: &Path,
    layer: Option<&str>,
    fields: &[(&str, FieldWant)],
    user_crs: Option<&str>,
) -> Result<PointLayer> {
    let connection = super::open_sqlite_read(path)?;
    let (layer, geometry_type) = resolve_layer(path, &connection, layer, &["POINT"])?;
    let bad = |message: String| Error::BadLayer {
        path: path.to_owned(),
        layer: layer.clone(),
        message,
    };
    if geometry_type.is_empty() {
        return Err(bad("has no geometry; expected a point layer".into()));
    }
    if !["POINT", "GEOMETRY"]
        .iter()
        .any(|g| geometry_type.eq_ignore_ascii_case(g))
    {
        return Err(bad(format!(
            "has {geometry_type} geometries; expected points"
        )));
    }
    let source_srs = layer_srs(path, &connection, &layer)?;
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
        |rows| PointRows::with_capacity(fields, rows),
        |out, fid, geometry, values| out.push(fid, geometry, values, &bad, &bad_field),
    )?;
    let mut whole = PointRows::with_capacity(fields, parts.iter().map(|p| p.fids.len()).sum());
    for part in parts {
        whole.append(part);
    }
    let PointRows {
        fids,
        mut x,
        mut y,
        builders,
    } = whole;
    if fids.is_empty() {
        return Err(bad("has no features".into()));
    }
    let srs = crs::working(user_crs, &source_srs, || {
        crs::lonlat_centre(&source_srs, &x, &y)
    })?;
    if source_srs.to_wkt().ok() != srs.to_wkt().ok() {
        crs::transform(&source_srs, &srs, &mut x, &mut y)?;
    }
    if let Some(i) = x
        .iter()
        .zip(&y)
        .position(|(a, b)| !a.is_finite() || !b.is_finite())
    {
        return Err(bad(format!(
            "feature {} cannot be projected to the working CRS {}",
            fids[i],
            crs::label(&srs)
        )));
    }
    Ok(PointLayer {
        layer,
        fids,
        x,
        y,
        columns: builders.into_iter().map(ColumnBuilder::finish).collect(),
        srs,
        source_srs,
    })
}

/// Rows of a point layer as read, before projection.
struct PointRows {
    fids: Vec<i64>,
    x: Vec<f64>,
    y: Vec<f64>,
    builders: Vec<ColumnBuilder>,
}

impl PointRows {
    fn with_capacity(fields: &[(&str, FieldWant)], rows: usize) -> Self {
        PointRows {
            fids: Vec::with_capacity(rows),
            x: Vec::with_capacity(rows),
            y: Vec::with_capacity(rows),
            builders: fields
                .iter()
                .map(|(_, want)| ColumnBuilder::new(*want, rows))
                .collect(),
        }
    }

    /// Checks and appends one row: its fid, geometry blob and the requested fields' values.
    fn push(
        &mut self,
        fid: i64,
        geometry: ValueRef<'_>,
        values: &Fields<'_, '_>,
        bad: &dyn Fn(String) -> Error,
        bad_field: &dyn Fn(usize, i64, String) -> Error,
    ) -> Result<()> {
        let point = match geometry {
            ValueRef::Null => {
                return Err(bad(format!(
                    "feature {fid} has no geometry (NULL); every record needs a point"
                )))
            }
            ValueRef::Blob(b) => decode_point(b),
            _ => PointBlob::Invalid,
        };
        match point {
            PointBlob::Point(px, py) if px.is_finite() && py.is_finite() => {
                self.x.push(px);
                self.y.push(py);
            }
            PointBlob::Point(..) => {
                return Err(bad(format!(
                    "feature {fid} has a non-finite coordinate (NaN or infinity)"
                )))
            }
            PointBlob::Empty => {
                return Err(bad(format!(
                    "feature {fid} has an empty geometry; every record needs a point"
                )))
            }
            PointBlob::Other(code) => {
                return Err(bad(format!(
                    "feature {fid} is not a point (WKB type {code}); expected points"
                )))
            }
            PointBlob::Invalid => {
                return Err(bad(format!(
                    "feature {fid} has an unreadable geometry blob"
                )))
            }
        }
        self.fids.push(fid);
        rows::push_fields(&mut self.builders, values, fid, bad_field)
    }

    /// Appends the rows of `later` (which follow these in fid order).
    fn append(&mut self, later: PointRows) {
        self.fids.extend(later.fids);
        self.x.extend(later.x);
        self.y.extend(later.y);
        for (mine, theirs) in self.builders.iter_mut().zip(later.builders) {
            mine.append(theirs);
        }
    }
}

/// Features of `layer` whose geometry is not a valid (multi)polygon in the OGC simple-features
/// sense — self-intersecting or unclosed rings, holes outside their shell, overlapping parts —
/// with the first reason for each, as the `geo` crate's validation reports it. Point-in-polygon
/// answers on such shapes depend on the algorithm, so tools that count points in areas warn.
pub fn invalid_polygons(layer: &PolygonLayer) -> Vec<(i64, String)> {
    use geo::algorithm::Validation;
    use rayon::prelude::*;
    layer
        .polygons
        .par_iter()
        .zip(&layer.fids)
        .filter_map(|(shape, fid)| {
            shape
                .check_validation()
                .err()
                .map(|reason| (*fid, reason.to_string()))
        })
        .collect()
}

#[cfg(test)]
mod tests;
