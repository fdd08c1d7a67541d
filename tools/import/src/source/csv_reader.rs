//! Delimited text (RFC 4180): the delimiter guessed from the first records or forced, the
//! encoding decoded to UTF-8, coordinates with a decimal point or, when asked, a decimal comma.

use std::io::Read;
use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;

use super::columns::{self, Columns};
use super::{build_row, non_empty, source_srs, text, Request, Row};
use crate::dialect;

pub struct CsvReader {
    path: PathBuf,
    reader: csv::Reader<Box<dyn Read>>,
    size: u64,
    record: csv::StringRecord,
    columns: Columns<usize>,
    pub(super) srs: SpatialRef,
    pub(super) delimiter: u8,
    pub(super) encoding: String,
    pub(super) decimal_comma: bool,
    row: u64,
    /// Added to the reader's line numbers: with CRLF line ends a record's position is taken
    /// before the previous record's LF, one line early.
    line_shift: u64,
}

impl CsvReader {
    pub(super) fn open(path: &Path, request: &Request, tabs: bool) -> Result<Self> {
        let dialect = &request.dialect;
        let text = text::open(path, dialect.encoding)?;
        let line_shift = u64::from(text.sample.contains("\r\n"));
        let delimiter = dialect.delimiter.unwrap_or_else(|| {
            dialect::sniff_delimiter(&text.sample, text.complete).unwrap_or(if tabs {
                b'\t'
            } else {
                b','
            })
        });
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .flexible(true)
            .from_reader(text.reader);
        let headers: Vec<String> = reader
            .headers()
            .map_err(|e| csv_error(path, &e, 0, line_shift))?
            .iter()
            .map(|h| h.trim().to_owned())
            .collect();
        let missing = |name: &str| Error::ColumnNotFound {
            path: path.to_owned(),
            field: name.to_owned(),
            available: headers.join(", "),
        };
        let columns = columns::resolve(path, &headers, request, false, &missing)?;
        Ok(CsvReader {
            path: path.to_owned(),
            size: text.size,
            record: csv::StringRecord::new(),
            columns,
            srs: source_srs(request.source_crs.as_deref(), crs::wgs84)?,
            delimiter,
            encoding: text.encoding,
            decimal_comma: dialect.decimal_comma,
            reader,
            row: 0,
            line_shift,
        })
    }

    pub(super) fn next_row(&mut self) -> Result<Option<Row>> {
        let more = self
            .reader
            .read_record(&mut self.record)
            .map_err(|e| csv_error(&self.path, &e, self.row, self.line_shift))?;
        if !more {
            return Ok(None);
        }
        self.row += 1;
        let record = &self.record;
        let line = record
            .position()
            .map_or(self.row + 1, |p| p.line() + self.line_shift);
        let get = |i: &usize| record.get(*i).and_then(non_empty);
        build_row(&self.columns, self.row, get, None, self.decimal_comma)
            .map(Some)
            .map_err(|found| found.error(&self.path, line))
    }

    pub(super) fn fraction_read(&self) -> f64 {
        self.reader.position().byte() as f64 / self.size.max(1) as f64
    }
}

/// A CSV error as one line naming the file and line; invalid UTF-8 suggests `--encoding`.
fn csv_error(path: &Path, e: &csv::Error, row: u64, line_shift: u64) -> Error {
    match e.kind() {
        csv::ErrorKind::Utf8 { pos, .. } => text::not_utf8(
            path,
            pos.as_ref().map_or(row + 2, |p| p.line() + line_shift),
        ),
        _ => Error::InputFile {
            path: path.to_owned(),
            reason: format!("malformed CSV after data row {row}: {e}"),
        },
    }
}
