//! JSON lines (one JSON object per line, RFC 8259 text): fields by name, nested fields by a
//! dotted path (`location.lon`); a line that is not a JSON object is a dropped row.

use std::collections::VecDeque;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use serde_json::{Map, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;

use super::columns::{self, Columns};
use super::{build_row, non_empty, source_srs, text, Request, Row};
use crate::checks::Location;

/// A non-blank line: its number, and its object (None when it is not a JSON object).
type Line = (u64, Option<Map<String, Value>>);

pub struct JsonlReader {
    path: PathBuf,
    lines: BufReader<Box<dyn Read>>,
    buffer: Vec<u8>,
    read_bytes: u64,
    size: u64,
    line: u64,
    /// Lines read ahead while looking for the first record: (line, the object or None).
    pending: VecDeque<Line>,
    columns: Columns<String>,
    decimal_comma: bool,
    pub(super) srs: SpatialRef,
    pub(super) encoding: String,
}

impl JsonlReader {
    pub(super) fn open(path: &Path, request: &Request) -> Result<Self> {
        let text = text::open(path, request.dialect.encoding)?;
        let mut reader = JsonlReader {
            path: path.to_owned(),
            lines: BufReader::with_capacity(1 << 16, text.reader),
            buffer: Vec::new(),
            read_bytes: 0,
            size: text.size,
            line: 0,
            pending: VecDeque::new(),
            columns: Columns {
                geometry: columns::Geometry::Native,
                stance: String::new(),
                time: None,
                author: None,
                text: None,
                quality: None,
                keep: Vec::new(),
            },
            decimal_comma: request.dialect.decimal_comma,
            srs: source_srs(request.source_crs.as_deref(), crs::wgs84)?,
            encoding: text.encoding,
        };
        let mut names = Vec::new();
        while let Some((line, object)) = reader.next_line()? {
            reader.pending.push_back((line, object.clone()));
            if let Some(object) = object {
                paths(&object, "", &mut names);
                break;
            }
        }
        let missing = |name: &str| Error::ColumnNotFound {
            path: path.to_owned(),
            field: name.to_owned(),
            available: format!("{} (in the first record)", names.join(", ")),
        };
        reader.columns = columns::resolve(path, &names, request, false, &missing)?.named(&names);
        Ok(reader)
    }

    /// The next non-blank line: its number and its object, or None when it is not one.
    fn next_line(&mut self) -> Result<Option<Line>> {
        loop {
            self.buffer.clear();
            let n = self
                .lines
                .read_until(b'\n', &mut self.buffer)
                .map_err(|e| Error::InputFile {
                    path: self.path.clone(),
                    reason: e.to_string(),
                })?;
            if n == 0 {
                return Ok(None);
            }
            self.read_bytes += n as u64;
            self.line += 1;
            let Ok(line) = std::str::from_utf8(&self.buffer) else {
                return Err(text::not_utf8(&self.path, self.line));
            };
            if line.trim().is_empty() {
                continue;
            }
            let object = match serde_json::from_str::<Value>(line) {
                Ok(Value::Object(map)) => Some(map),
                _ => None,
            };
            return Ok(Some((self.line, object)));
        }
    }

    pub(super) fn next_row(&mut self) -> Result<Option<Row>> {
        let next = match self.pending.pop_front() {
            Some(item) => Some(item),
            None => self.next_line()?,
        };
        let Some((line, object)) = next else {
            return Ok(None);
        };
        let Some(object) = object else {
            return Ok(Some(Row::malformed(line)));
        };
        let get = |path: &String| lookup(&object, path).and_then(value_text);
        build_row(&self.columns, line, get, None, self.decimal_comma)
            .map(Some)
            .map_err(|found| found.error(&self.path, line))
    }

    pub(super) fn fraction_read(&self) -> f64 {
        self.read_bytes as f64 / self.size.max(1) as f64
    }
}

impl Row {
    /// A row whose line could not be read as a record.
    fn malformed(line: u64) -> Row {
        Row {
            source_row: line,
            location: Location::Malformed,
            x_raw: None,
            y_raw: None,
            stance: None,
            time: None,
            author: None,
            text: None,
            quality: None,
            keep: Vec::new(),
        }
    }
}

/// Every leaf path of `object` (`a.b.c`), in order.
fn paths(object: &Map<String, Value>, prefix: &str, out: &mut Vec<String>) {
    for (key, value) in object {
        let path = if prefix.is_empty() {
            key.clone()
        } else {
            format!("{prefix}.{key}")
        };
        match value {
            Value::Object(inner) => paths(inner, &path, out),
            _ => out.push(path),
        }
    }
}

/// The value at `path`: a key holding the whole path first, then the dotted parts.
fn lookup<'a>(object: &'a Map<String, Value>, path: &str) -> Option<&'a Value> {
    if let Some(v) = object.get(path) {
        return Some(v);
    }
    let mut parts = path.split('.');
    let mut value = object.get(parts.next()?)?;
    for part in parts {
        value = value.as_object()?.get(part)?;
    }
    Some(value)
}

/// A value as text: strings as they are, numbers and booleans written out, null as absent,
/// arrays and objects as compact JSON.
fn value_text(value: &Value) -> Option<String> {
    match value {
        Value::Null => None,
        Value::String(s) => non_empty(s),
        Value::Number(n) => Some(n.to_string()),
        Value::Bool(b) => Some(b.to_string()),
        other => Some(other.to_string()),
    }
}
