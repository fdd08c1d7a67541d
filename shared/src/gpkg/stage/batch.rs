//! Rows buffered for multi-row INSERTs: one statement inserts up to [`MAX_ROWS`] rows, which
//! saves SQLite's per-statement work (bind, step, reset, cursor open and close) on long tables
//! such as a weights table of half a million links.

use rusqlite::types::Value;
use rusqlite::{Connection, Statement};

use super::q;
use crate::gpkg::blob::Envelope;

/// Bound parameters of one statement at most (SQLite's historical default limit).
const MAX_PARAMETERS: usize = 999;

/// Rows of one statement at most.
const MAX_ROWS: usize = 256;

/// The buffered rows of one table and the statement that inserts a full batch.
pub(super) struct Batch<'a> {
    connection: &'a Connection,
    table: String,
    columns: Vec<String>,
    capacity: usize,
    full: Statement<'a>,
    values: Vec<Value>,
    bounds: Vec<Option<Envelope>>,
}

/// `INSERT INTO table (columns…) VALUES (?, …), (?, …), …` with `rows` rows.
fn insert_rows(table: &str, columns: &[String], rows: usize) -> String {
    let row = format!("({})", vec!["?"; columns.len()].join(", "));
    format!(
        "INSERT INTO {} ({}) VALUES {}",
        q(table),
        columns.join(", "),
        vec![row; rows].join(", ")
    )
}

impl<'a> Batch<'a> {
    /// A batch for `table` with these (quoted) `columns`; prepares the full-batch statement.
    pub(super) fn new(
        connection: &'a Connection,
        table: &str,
        columns: &[String],
    ) -> rusqlite::Result<Self> {
        let capacity = (MAX_PARAMETERS / columns.len().max(1)).clamp(1, MAX_ROWS);
        let full = connection.prepare(&insert_rows(table, columns, capacity))?;
        Ok(Batch {
            connection,
            table: table.to_owned(),
            columns: columns.to_vec(),
            capacity,
            full,
            values: Vec::with_capacity(capacity * columns.len()),
            bounds: Vec::with_capacity(capacity),
        })
    }

    /// Buffers one row (one value per column) with the bounds of its geometry, inserting the
    /// batch when it is full; R-tree entries of inserted rows go to `entries`.
    pub(super) fn push(
        &mut self,
        row: impl IntoIterator<Item = Value>,
        bounds: Option<Envelope>,
        entries: &mut Vec<(i64, Envelope)>,
    ) -> rusqlite::Result<()> {
        self.values.extend(row);
        self.bounds.push(bounds);
        if self.bounds.len() == self.capacity {
            self.flush(entries)?;
        }
        Ok(())
    }

    /// Inserts the buffered rows (a full batch, or the rest at the end).
    pub(super) fn flush(&mut self, entries: &mut Vec<(i64, Envelope)>) -> rusqlite::Result<()> {
        let rows = self.bounds.len();
        if rows == 0 {
            return Ok(());
        }
        let mut rest;
        let statement = if rows == self.capacity {
            &mut self.full
        } else {
            rest = self
                .connection
                .prepare(&insert_rows(&self.table, &self.columns, rows))?;
            &mut rest
        };
        for (i, value) in self.values.iter().enumerate() {
            statement.raw_bind_parameter(i + 1, value)?;
        }
        statement.raw_execute()?;
        // The rows of one INSERT get consecutive rowids, the last one reported: each new rowid is
        // max(rowid) + 1 (the fid is not given and the table only grows during the load).
        let last = self.connection.last_insert_rowid();
        for (k, bounds) in self.bounds.drain(..).enumerate() {
            if let Some(e) = bounds {
                entries.push((last - (rows - 1 - k) as i64, e));
            }
        }
        self.values.clear();
        Ok(())
    }
}

impl<'a> Batch<'a> {
    /// The connection the rows go to.
    pub(super) fn connection(&self) -> &'a Connection {
        self.connection
    }
}
