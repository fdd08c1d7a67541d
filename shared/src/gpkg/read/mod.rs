//! Reading point and polygon layers from a GeoPackage into the working CRS.

use std::collections::HashMap;
use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use rusqlite::types::ValueRef;

mod polygons;

pub use polygons::{
    project_polygons, read_polygons, read_polygons_or_none, PolygonCrs, PolygonLayer,
};

use super::blob::{decode_point, PointBlob};
use super::{crs, quote_identifier as q};
use crate::error::{Error, Result};

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
    let query = PointQuery::new(path, &connection, &layer, fields)?;
    let ranges = query
        .fid_ranges(&connection)
        .map_err(|e| bad(e.to_string()))?;
    let bad_field = |i: usize, fid: i64, message: String| Error::BadField {
        path: path.to_owned(),
        layer: layer.clone(),
        field: query.selected[i].clone(),
        message: format!("feature {fid}: {message}"),
    };
    // Large layers are read in fid ranges on parallel connections (SQLite decodes rows on one
    // core per connection); the parts are joined in fid order, so the result is the same.
    let mut pieces: Vec<Result<PointRows>> = if ranges.len() == 1 {
        vec![read_point_rows(
            &connection,
            &query.sql,
            ranges[0],
            fields,
            &bad,
            &bad_field,
        )]
    } else {
        use rayon::prelude::*;
        ranges
            .par_iter()
            .map(|range| {
                let own = super::open_sqlite_read(path)?;
                read_point_rows(&own, &query.sql, *range, fields, &bad, &bad_field)
            })
            .collect()
    };
    let mut whole = match pieces.is_empty() {
        true => PointRows::new(fields),
        false => pieces.remove(0)?,
    };
    for piece in pieces {
        whole.append(piece?);
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

/// The SELECT of a point layer's fid, geometry and requested fields over a fid range.
struct PointQuery {
    /// The statement, with `?1` and `?2` the first and last fid.
    sql: String,
    /// The requested fields as named in the table.
    selected: Vec<String>,
    /// The fid column.
    primary_key: String,
    /// The layer.
    layer: String,
}

impl PointQuery {
    fn new(
        path: &Path,
        connection: &rusqlite::Connection,
        layer: &str,
        fields: &[(&str, FieldWant)],
    ) -> Result<Self> {
        let geometry_column: String = connection
            .query_row(
                "SELECT column_name FROM gpkg_geometry_columns WHERE table_name = ?1",
                [layer],
                |r| r.get(0),
            )
            .map_err(|e| Error::BadLayer {
                path: path.to_owned(),
                layer: layer.to_owned(),
                message: e.to_string(),
            })?;
        let columns = table_columns(path, connection, layer)?;
        let primary_key = columns
            .iter()
            .find(|(_, pk)| *pk)
            .map(|(c, _)| c.clone())
            .unwrap_or_else(|| "rowid".into());
        let mut selected = Vec::with_capacity(fields.len());
        for (field, _) in fields {
            selected.push(
                find_field(path, layer, &columns, field, &[geometry_column.as_str()])?.to_owned(),
            );
        }
        let mut sql = format!("SELECT {}, {}", q(&primary_key), q(&geometry_column));
        for s in &selected {
            sql.push_str(", ");
            sql.push_str(&q(s));
        }
        sql.push_str(&format!(
            " FROM {} WHERE {pk} >= ?1 AND {pk} <= ?2",
            q(layer),
            pk = q(&primary_key)
        ));
        Ok(PointQuery {
            sql,
            selected,
            primary_key,
            layer: layer.to_owned(),
        })
    }

    /// The fid ranges to read: one, or up to four of equal span for layers over 200,000 fids.
    fn fid_ranges(&self, connection: &rusqlite::Connection) -> rusqlite::Result<Vec<(i64, i64)>> {
        let (low, high): (Option<i64>, Option<i64>) = connection.query_row(
            &format!(
                "SELECT min({pk}), max({pk}) FROM {}",
                q(&self.layer),
                pk = q(&self.primary_key)
            ),
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )?;
        let (low, high) = (low.unwrap_or(0), high.unwrap_or(-1));
        let span = (high as i128 - low as i128 + 1).max(0);
        let parts: i128 = if span > 200_000 {
            rayon::current_num_threads().clamp(1, 4) as i128
        } else {
            1
        };
        Ok((0..parts)
            .map(|k| {
                let a = low as i128 + span * k / parts;
                let b = low as i128 + span * (k + 1) / parts - 1;
                (a as i64, b as i64)
            })
            .collect())
    }
}

/// Rows of a point layer as read, before projection.
struct PointRows {
    fids: Vec<i64>,
    x: Vec<f64>,
    y: Vec<f64>,
    builders: Vec<ColumnBuilder>,
}

impl PointRows {
    fn new(fields: &[(&str, FieldWant)]) -> Self {
        PointRows {
            fids: Vec::new(),
            x: Vec::new(),
            y: Vec::new(),
            builders: fields
                .iter()
                .map(|(_, want)| ColumnBuilder::new(*want))
                .collect(),
        }
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

/// Reads and checks the rows with fid in `range` of the prepared point query `sql`.
fn read_point_rows(
    connection: &rusqlite::Connection,
    sql: &str,
    range: (i64, i64),
    fields: &[(&str, FieldWant)],
    bad: &dyn Fn(String) -> Error,
    bad_field: &dyn Fn(usize, i64, String) -> Error,
) -> Result<PointRows> {
    let mut statement = connection.prepare(sql).map_err(|e| bad(e.to_string()))?;
    let mut rows = statement
        .query([range.0, range.1])
        .map_err(|e| bad(e.to_string()))?;
    let mut out = PointRows::new(fields);
    while let Some(row) = rows.next().map_err(|e| bad(e.to_string()))? {
        let fid: i64 = row.get(0).map_err(|e| bad(e.to_string()))?;
        let geometry = row.get_ref(1).map_err(|e| bad(e.to_string()))?;
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
                out.x.push(px);
                out.y.push(py);
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
        out.fids.push(fid);
        for (i, builder) in out.builders.iter_mut().enumerate() {
            let value = row.get_ref(i + 2).map_err(|e| bad(e.to_string()))?;
            builder
                .push(value)
                .map_err(|message| bad_field(i, fid, message))?;
        }
    }
    Ok(out)
}

/// Distinct values up to which a text is looked up by comparing it with each value in turn
/// (cheaper than hashing it; stance labels have a handful of values).
const FEW_VALUES: usize = 8;

/// The code of `text` if the column has seen it.
fn known_code(column: &TextColumn, index: &HashMap<String, u32>, text: &str) -> Option<u32> {
    if column.values.len() <= FEW_VALUES {
        column
            .values
            .iter()
            .position(|v| v == text)
            .map(|p| p as u32)
    } else {
        index.get(text).copied()
    }
}

enum ColumnBuilder {
    Text(TextColumn, HashMap<String, u32>),
    Real(Vec<Option<f64>>),
    DateTime(Vec<Option<i64>>),
}

impl ColumnBuilder {
    fn new(want: FieldWant) -> Self {
        match want {
            FieldWant::Text => ColumnBuilder::Text(TextColumn::default(), HashMap::new()),
            FieldWant::Real => ColumnBuilder::Real(Vec::new()),
            FieldWant::DateTime => ColumnBuilder::DateTime(Vec::new()),
        }
    }

    fn push(&mut self, value: ValueRef<'_>) -> std::result::Result<(), String> {
        match self {
            ColumnBuilder::Text(column, index) => {
                // Look up by borrowed text first: most rows repeat a few labels, so the hot
                // path allocates nothing.
                let text: Option<std::borrow::Cow<'_, str>> = match value {
                    ValueRef::Null => None,
                    ValueRef::Integer(i) => Some(i.to_string().into()),
                    ValueRef::Real(r) => Some(r.to_string().into()),
                    ValueRef::Text(t) => Some(String::from_utf8_lossy(t)),
                    ValueRef::Blob(_) => return Err("holds a binary value; expected text".into()),
                };
                let code = match text {
                    None => TextColumn::NULL,
                    Some(text) => match known_code(column, index, text.as_ref()) {
                        Some(code) => code,
                        None => {
                            let code = column.values.len() as u32;
                            column.values.push(text.clone().into_owned());
                            index.insert(text.into_owned(), code);
                            code
                        }
                    },
                };
                column.codes.push(code);
            }
            ColumnBuilder::Real(values) => values.push(match value {
                ValueRef::Null => None,
                ValueRef::Integer(i) => Some(i as f64),
                ValueRef::Real(r) => Some(r),
                ValueRef::Text(t) => {
                    let text = String::from_utf8_lossy(t);
                    match text.trim().parse::<f64>() {
                        Ok(v) => Some(v),
                        Err(_) => return Err(format!("value '{text}' is not a number")),
                    }
                }
                ValueRef::Blob(_) => return Err("holds a binary value; expected a number".into()),
            }),
            ColumnBuilder::DateTime(values) => values.push(match value {
                ValueRef::Text(t) => crate::time::parse_utc_seconds(&String::from_utf8_lossy(t)),
                _ => None,
            }),
        }
        Ok(())
    }

    /// Appends a builder of the same kind filled from later rows; text codes are renumbered
    /// so that values stay in order of first appearance.
    fn append(&mut self, later: ColumnBuilder) {
        match (self, later) {
            (ColumnBuilder::Text(column, index), ColumnBuilder::Text(theirs, _)) => {
                let map: Vec<u32> = theirs
                    .values
                    .into_iter()
                    .map(|value| match index.get(&value) {
                        Some(code) => *code,
                        None => {
                            let code = column.values.len() as u32;
                            column.values.push(value.clone());
                            index.insert(value, code);
                            code
                        }
                    })
                    .collect();
                column.codes.extend(theirs.codes.into_iter().map(|c| {
                    if c == TextColumn::NULL {
                        c
                    } else {
                        map[c as usize]
                    }
                }));
            }
            (ColumnBuilder::Real(mine), ColumnBuilder::Real(theirs)) => mine.extend(theirs),
            (ColumnBuilder::DateTime(mine), ColumnBuilder::DateTime(theirs)) => mine.extend(theirs),
            _ => unreachable!("builders of one field share a kind"),
        }
    }

    fn finish(self) -> Column {
        match self {
            ColumnBuilder::Text(c, _) => Column::Text(c),
            ColumnBuilder::Real(v) => Column::Real(v),
            ColumnBuilder::DateTime(v) => Column::DateTime(v),
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
