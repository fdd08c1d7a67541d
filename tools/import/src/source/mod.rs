//! Reading raw records from delimited text, JSON lines, spreadsheets or any vector source GDAL
//! reads.

mod columns;
mod csv_reader;
mod gdal_reader;
mod jsonl;
mod text;

use std::path::Path;

use encoding_rs::Encoding;
use gdal::spatial_ref::SpatialRef;
use gdal::vector::OGRwkbGeometryType;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;

use crate::checks::{Location, RawRecord};
use crate::dialect::{self, NumberProblem};
use columns::{Columns, Geometry};
use csv_reader::CsvReader;
use gdal_reader::GdalReader;
use jsonl::JsonlReader;
pub use text::encoding_for_label;

/// What to read from a source: its geometry, its CRS and its fields.
#[derive(Debug, Clone)]
pub struct Request {
    /// CSV columns holding the geometry (GDAL sources bring their own).
    pub geometry: GeometryColumns,
    /// CRS of the coordinates, when the source's own (or CSV's EPSG:4326) is not it.
    pub source_crs: Option<String>,
    /// The fields to read.
    pub fields: Fields,
    /// How text inputs are written.
    pub dialect: Dialect,
}

/// How a text input is written, as forced by the options (None: guessed).
#[derive(Debug, Clone, Default)]
pub struct Dialect {
    /// Field delimiter (`--delimiter`).
    pub delimiter: Option<u8>,
    /// Character encoding (`--encoding`).
    pub encoding: Option<&'static Encoding>,
    /// Coordinates written with a decimal comma (`--decimal-comma`).
    pub decimal_comma: bool,
}

/// CSV columns of the geometry: x and y, or WKT; unnamed x/y columns are found by their usual
/// names.
#[derive(Debug, Clone)]
pub struct GeometryColumns {
    pub x: Option<String>,
    pub y: Option<String>,
    pub wkt: Option<String>,
}

/// Names of the fields to read.
#[derive(Debug, Clone)]
pub struct Fields {
    pub stance: String,
    pub time: Option<String>,
    pub author: Option<String>,
    pub text: Option<String>,
    pub quality: Option<String>,
    pub keep: Vec<String>,
}

/// The raw text a rejected row is reported with (never author or text).
#[derive(Debug, Clone, Default)]
pub struct RawValues {
    pub x: Option<String>,
    pub y: Option<String>,
    pub stance: Option<String>,
    pub time: Option<String>,
    pub quality: Option<String>,
}

/// One row as read.
#[derive(Debug, Clone)]
pub struct Row {
    /// 1-based data row (CSV: line after the header) or feature id.
    pub source_row: u64,
    location: Location,
    x_raw: Option<String>,
    y_raw: Option<String>,
    stance: Option<String>,
    time: Option<String>,
    author: Option<String>,
    text: Option<String>,
    quality: Option<String>,
    /// Values of the kept fields.
    pub keep: Vec<Option<String>>,
}

impl Row {
    /// The record to check.
    pub fn record(&self) -> RawRecord<'_> {
        RawRecord {
            location: self.location.clone(),
            stance: self.stance.as_deref(),
            time: self.time.as_deref(),
            author: self.author.as_deref(),
            text: self.text.as_deref(),
            quality: self.quality.as_deref(),
        }
    }

    /// What the rejects table shows.
    pub fn raw_values(&self) -> RawValues {
        RawValues {
            x: self.x_raw.clone(),
            y: self.y_raw.clone(),
            stance: self.stance.clone(),
            time: self.time.clone(),
            quality: self.quality.clone(),
        }
    }
}

/// A source of rows.
pub enum Reader {
    Csv(CsvReader),
    Jsonl(JsonlReader),
    Gdal(GdalReader),
}

/// The kind of source, by the file's extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Delimited { tabs: bool },
    JsonLines,
    Spreadsheet,
    Vector,
}

fn kind_of(path: &Path) -> Kind {
    let extension = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    match extension.as_str() {
        "csv" | "txt" => Kind::Delimited { tabs: false },
        "tsv" | "tab" => Kind::Delimited { tabs: true },
        "jsonl" | "ndjson" => Kind::JsonLines,
        "xlsx" | "ods" => Kind::Spreadsheet,
        _ => Kind::Vector,
    }
}

/// Opens `path`: delimited text (`.csv`, `.tsv`, `.txt`), JSON lines (`.jsonl`, `.ndjson`),
/// spreadsheets (`.xlsx`, `.ods`, through GDAL) and anything else through GDAL.
///
/// # Errors
/// Missing file, unknown columns or fields, a source without CRS, undecodable text.
pub fn open(path: &Path, layer: Option<&str>, request: &Request) -> Result<Reader> {
    let kind = kind_of(path);
    if !path.exists() {
        return Err(Error::InputFile {
            path: path.to_owned(),
            reason: "no such file".into(),
        });
    }
    let dialect = &request.dialect;
    let text_only = dialect.delimiter.is_some() || dialect.encoding.is_some();
    if text_only && matches!(kind, Kind::Spreadsheet | Kind::Vector) {
        return Err(Error::argument(
            if dialect.delimiter.is_some() {
                "--delimiter"
            } else {
                "--encoding"
            },
            format!(
                "applies to text input only (.csv, .tsv, .txt, .jsonl, .ndjson); {} is not",
                path.display()
            ),
        ));
    }
    if kind == Kind::JsonLines && dialect.delimiter.is_some() {
        return Err(Error::argument(
            "--delimiter",
            format!(
                "applies to delimited text only; {} is JSON lines (one object per line)",
                path.display()
            ),
        ));
    }
    match kind {
        Kind::Delimited { tabs } => Ok(Reader::Csv(CsvReader::open(path, request, tabs)?)),
        Kind::JsonLines => Ok(Reader::Jsonl(JsonlReader::open(path, request)?)),
        Kind::Spreadsheet => Ok(Reader::Gdal(GdalReader::open(path, layer, request, true)?)),
        Kind::Vector => {
            let columns = &request.geometry;
            if columns.x.is_some() || columns.y.is_some() || columns.wkt.is_some() {
                return Err(Error::argument(
                    "--x-field/--y-field/--wkt-field",
                    format!(
                        "apply to text and spreadsheet input only; {} is read through GDAL with its own geometry",
                        path.display()
                    ),
                ));
            }
            Ok(Reader::Gdal(GdalReader::open(path, layer, request, false)?))
        }
    }
}

impl Reader {
    /// The next row, or None at the end.
    ///
    /// # Errors
    /// A malformed CSV record, invalid text, a decimal comma not announced, a GDAL failure.
    pub fn next_row(&mut self) -> Result<Option<Row>> {
        match self {
            Reader::Csv(r) => r.next_row(),
            Reader::Jsonl(r) => r.next_row(),
            Reader::Gdal(r) => r.next_row(),
        }
    }

    /// CRS of the coordinates.
    pub fn srs(&self) -> &SpatialRef {
        match self {
            Reader::Csv(r) => &r.srs,
            Reader::Jsonl(r) => &r.srs,
            Reader::Gdal(r) => &r.srs,
        }
    }

    /// The layer read (GDAL sources).
    pub fn layer_name(&self) -> Option<String> {
        match self {
            Reader::Gdal(r) => Some(r.layer.clone()),
            _ => None,
        }
    }

    /// Number of rows, when the source knows it without reading them (GDAL sources).
    pub fn rows_total(&self) -> Option<u64> {
        match self {
            Reader::Gdal(r) => Some(r.count),
            _ => None,
        }
    }

    /// Share of the input read so far, for progress.
    pub fn fraction_read(&self) -> f64 {
        match self {
            Reader::Csv(r) => r.fraction_read(),
            Reader::Jsonl(r) => r.fraction_read(),
            Reader::Gdal(r) => r.read as f64 / r.count.max(1) as f64,
        }
    }

    /// How the input was read, for the summary (format, delimiter, encoding, decimal comma).
    pub fn dialect_summary(&self) -> Value {
        match self {
            Reader::Csv(r) => json!({
                "format": "delimited text (RFC 4180)",
                "delimiter": dialect::delimiter_name(r.delimiter),
                "encoding": r.encoding,
                "decimal_comma": r.decimal_comma,
            }),
            Reader::Jsonl(r) => json!({
                "format": "JSON lines",
                "encoding": r.encoding,
            }),
            Reader::Gdal(r) => json!({ "format": r.driver }),
        }
    }
}

/// Reads the source CRS option or a default.
fn source_srs(
    source_crs: Option<&str>,
    default: impl FnOnce() -> Result<SpatialRef>,
) -> Result<SpatialRef> {
    match source_crs {
        Some(definition) => crs::parse(definition),
        None => default(),
    }
}

/// A coordinate written with a decimal comma while `--decimal-comma` was not given.
#[derive(Debug)]
pub struct DecimalCommaFound(pub String);

impl DecimalCommaFound {
    /// The error naming the file, the line and the option.
    pub fn error(self, path: &Path, line: u64) -> Error {
        Error::BadInput {
            path: path.to_owned(),
            message: format!(
                "line {line}: coordinate '{}' is written with a decimal comma; give --decimal-comma",
                self.0
            ),
        }
    }
}

/// Builds a row from a source's cells: `get` returns a column's trimmed, non-empty text;
/// `native` is the source's own geometry when the columns say so.
fn build_row<K>(
    columns: &Columns<K>,
    source_row: u64,
    get: impl Fn(&K) -> Option<String>,
    native: Option<Location>,
    decimal_comma: bool,
) -> std::result::Result<Row, DecimalCommaFound> {
    let opt = |k: &Option<K>| k.as_ref().and_then(&get);
    let (location, x_raw, y_raw) = match &columns.geometry {
        Geometry::Columns { x, y } => {
            let (xr, yr) = (get(x), get(y));
            let parse = |raw: &Option<String>| match raw.as_deref() {
                None => Ok(None),
                Some(text) => match dialect::parse_coordinate(text, decimal_comma) {
                    Ok(v) => Ok(Some(v)),
                    Err(NumberProblem::DecimalComma) => Err(DecimalCommaFound(text.to_owned())),
                    Err(NumberProblem::NotANumber) => Ok(None),
                },
            };
            let location = match (parse(&xr)?, parse(&yr)?) {
                (Some(xv), Some(yv)) => Location::Point(xv, yv),
                _ => Location::Missing(format!(
                    "{} {}",
                    xr.clone().unwrap_or_default(),
                    yr.clone().unwrap_or_default()
                )),
            };
            (location, xr, yr)
        }
        Geometry::Wkt(w) => {
            let raw = get(w);
            let location = match raw.as_deref() {
                None => Location::Missing(String::new()),
                Some(text) => parse_wkt(text),
            };
            (location, raw, None)
        }
        Geometry::Native => {
            let location = native.unwrap_or(Location::Missing(String::new()));
            let (x_raw, y_raw) = match &location {
                Location::Point(x, y) => (Some(x.to_string()), Some(y.to_string())),
                _ => (None, None),
            };
            (location, x_raw, y_raw)
        }
    };
    Ok(Row {
        source_row,
        location,
        x_raw,
        y_raw,
        stance: get(&columns.stance),
        time: opt(&columns.time),
        author: opt(&columns.author),
        text: opt(&columns.text),
        quality: opt(&columns.quality),
        keep: columns.keep.iter().map(&get).collect(),
    })
}

/// A trimmed, non-empty text.
fn non_empty(text: &str) -> Option<String> {
    let t = text.trim();
    (!t.is_empty()).then(|| t.to_owned())
}

pub(crate) fn parse_wkt(text: &str) -> Location {
    match gdal::vector::Geometry::from_wkt(text) {
        Err(_) => Location::Missing(text.chars().take(60).collect()),
        Ok(g) => location_of(&g),
    }
}

pub(crate) fn location_of(geometry: &gdal::vector::Geometry) -> Location {
    if geometry.is_empty() {
        return Location::Empty;
    }
    let kind = gdal::vector::geometry_type_flatten(geometry.geometry_type());
    if kind == OGRwkbGeometryType::wkbPoint {
        let (x, y, _) = geometry.get_point(0);
        Location::Point(x, y)
    } else {
        Location::NotPoint(geometry.geometry_name())
    }
}
