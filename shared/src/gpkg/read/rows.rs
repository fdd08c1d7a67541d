//! Rows of a feature layer — fid, geometry blob and requested fields — read straight from the
//! file's pages where that gives what SQLite gives (see [`super::btree`]), else through SQLite;
//! and the columns they fill.

use std::collections::HashMap;
use std::path::Path;

use rusqlite::types::ValueRef;

use super::btree;
use super::{find_field, table_columns, Column, FieldWant, TextColumn};
use crate::error::{Error, Result};
use crate::gpkg::quote_identifier as q;

/// The requested fields of one row, however it was read.
pub(super) enum Fields<'r, 's> {
    /// A record decoded from a leaf page (wanted columns: fid, geometry, then the fields).
    Direct(&'r btree::Record<'s>),
    /// A row of the SQL query (fid, geometry, then the fields).
    Sql(&'r rusqlite::Row<'s>),
}

impl Fields<'_, '_> {
    /// The value of the `i`-th requested field.
    pub(super) fn value(&self, i: usize) -> ValueRef<'_> {
        match self {
            Fields::Direct(record) => record.value(i + 2),
            Fields::Sql(row) => row.get_ref(i + 2).unwrap_or(ValueRef::Null),
        }
    }
}

/// Appends one row's requested fields to their columns; a value of the wrong kind is an error
/// naming the feature (through `bad_field`, given the field's index).
pub(super) fn push_fields(
    builders: &mut [ColumnBuilder],
    values: &Fields<'_, '_>,
    fid: i64,
    bad_field: &dyn Fn(usize, i64, String) -> Error,
) -> Result<()> {
    for (i, builder) in builders.iter_mut().enumerate() {
        builder
            .push(values.value(i))
            .map_err(|message| bad_field(i, fid, message))?;
    }
    Ok(())
}

/// Reads every row of `query`'s layer in fid order, in parts filled in parallel: each part
/// starts from `init(rows)` (`rows` its likely number of rows) and takes its rows with
/// `row(part, fid, geometry, fields)`. The parts come back in fid order; the first error in fid
/// order is returned.
///
/// # Errors
/// What `row` returns; SQLite's errors (through `bad`).
pub(super) fn read_rows<S, I, F>(
    path: &Path,
    connection: &rusqlite::Connection,
    query: &LayerQuery,
    bad: &(dyn Fn(String) -> Error + Sync),
    init: I,
    row: F,
) -> Result<Vec<S>>
where
    S: Send,
    I: Fn(usize) -> S + Sync,
    F: Fn(&mut S, i64, ValueRef<'_>, &Fields<'_, '_>) -> Result<()> + Sync,
{
    let parts = match read_rows_direct(path, connection, query, &init, &row) {
        Some(parts) => parts,
        None => read_rows_sql(path, connection, query, bad, &init, &row),
    };
    parts.into_iter().collect()
}

/// The parts read straight from the file's pages, or None when the file cannot be read that
/// way (then SQLite reads the same rows).
pub(super) fn read_rows_direct<S, I, F>(
    path: &Path,
    connection: &rusqlite::Connection,
    query: &LayerQuery,
    init: &I,
    row: &F,
) -> Option<Vec<Result<S>>>
where
    S: Send,
    I: Fn(usize) -> S + Sync,
    F: Fn(&mut S, i64, ValueRef<'_>, &Fields<'_, '_>) -> Result<()> + Sync,
{
    let lock = btree::ReadLock::take(connection).ok()?;
    let mut wanted = vec![query.primary_key.as_str(), query.geometry_column.as_str()];
    wanted.extend(query.selected.iter().map(String::as_str));
    let scan = btree::TableScan::open(path, &lock, &query.layer, &wanted).ok()?;
    let parts = match scan.leaf_count() {
        0..=63 => 1,
        _ => rayon::current_num_threads().clamp(1, 8),
    };
    scan.scan(parts, init, |out, rowid, record| {
        let fid = match record.value(0) {
            ValueRef::Integer(fid) => fid,
            _ => rowid,
        };
        row(out, fid, record.value(1), &Fields::Direct(record))
    })
    .ok()
}

/// The parts read through SQLite: fid ranges on parallel connections for large layers (SQLite
/// decodes rows on one core per connection).
pub(super) fn read_rows_sql<S, I, F>(
    path: &Path,
    connection: &rusqlite::Connection,
    query: &LayerQuery,
    bad: &(dyn Fn(String) -> Error + Sync),
    init: &I,
    row: &F,
) -> Vec<Result<S>>
where
    S: Send,
    I: Fn(usize) -> S + Sync,
    F: Fn(&mut S, i64, ValueRef<'_>, &Fields<'_, '_>) -> Result<()> + Sync,
{
    let ranges = match query.fid_ranges(connection) {
        Ok(ranges) => ranges,
        Err(e) => return vec![Err(bad(e.to_string()))],
    };
    let read = |connection: &rusqlite::Connection, range: (i64, i64)| -> Result<S> {
        let mut statement = connection
            .prepare(&query.sql)
            .map_err(|e| bad(e.to_string()))?;
        let mut rows = statement
            .query([range.0, range.1])
            .map_err(|e| bad(e.to_string()))?;
        let mut out = init(0);
        while let Some(r) = rows.next().map_err(|e| bad(e.to_string()))? {
            let fid: i64 = r.get(0).map_err(|e| bad(e.to_string()))?;
            let geometry = r.get_ref(1).map_err(|e| bad(e.to_string()))?;
            row(&mut out, fid, geometry, &Fields::Sql(r))?;
        }
        Ok(out)
    };
    if ranges.len() == 1 {
        return vec![read(connection, ranges[0])];
    }
    use rayon::prelude::*;
    ranges
        .par_iter()
        .map(|range| read(&crate::gpkg::open_sqlite_read(path)?, *range))
        .collect()
}

/// The SELECT of a feature layer's fid, geometry and requested fields over a fid range.
pub(super) struct LayerQuery {
    /// The statement, with `?1` and `?2` the first and last fid.
    sql: String,
    /// The requested fields as named in the table.
    pub(super) selected: Vec<String>,
    /// The fid column.
    primary_key: String,
    /// The geometry column.
    geometry_column: String,
    /// The layer.
    layer: String,
}

impl LayerQuery {
    /// The query of `fields` (names as the user gave them) of `layer`.
    ///
    /// # Errors
    /// A layer without a geometry column; a field it does not have.
    pub(super) fn new(
        path: &Path,
        connection: &rusqlite::Connection,
        layer: &str,
        fields: &[&str],
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
        for field in fields {
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
        Ok(LayerQuery {
            sql,
            selected,
            primary_key,
            geometry_column,
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

/// A column being read: values of one requested field, in row order.
pub(super) enum ColumnBuilder {
    Text(TextColumn, HashMap<String, u32>),
    Real(Vec<Option<f64>>),
    DateTime(Vec<Option<i64>>),
}

impl ColumnBuilder {
    pub(super) fn new(want: FieldWant, rows: usize) -> Self {
        match want {
            FieldWant::Text => ColumnBuilder::Text(
                TextColumn {
                    codes: Vec::with_capacity(rows),
                    values: Vec::new(),
                },
                HashMap::new(),
            ),
            FieldWant::Real => ColumnBuilder::Real(Vec::with_capacity(rows)),
            FieldWant::DateTime => ColumnBuilder::DateTime(Vec::with_capacity(rows)),
        }
    }

    /// Appends one row's value; a message when it is not of the kind wanted.
    pub(super) fn push(&mut self, value: ValueRef<'_>) -> std::result::Result<(), String> {
        match self {
            ColumnBuilder::Text(column, index) => {
                // Look up by borrowed text first: most rows repeat a few labels, so the hot
                // path allocates nothing; with a few known values, their bytes are compared
                // before any UTF-8 check (a value already known is valid text).
                if let (ValueRef::Text(t), true) = (value, column.values.len() <= FEW_VALUES) {
                    if let Some(code) = column.values.iter().position(|v| v.as_bytes() == t) {
                        column.codes.push(code as u32);
                        return Ok(());
                    }
                }
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
    pub(super) fn append(&mut self, later: ColumnBuilder) {
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

    pub(super) fn finish(self) -> Column {
        match self {
            ColumnBuilder::Text(c, _) => Column::Text(c),
            ColumnBuilder::Real(v) => Column::Real(v),
            ColumnBuilder::DateTime(v) => Column::DateTime(v),
        }
    }
}
