//! Reading raw records from a CSV file or any vector source GDAL reads.

use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use gdal::vector::{LayerAccess, OGRwkbGeometryType, OwnedFeatureIterator};
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;

use crate::checks::{Location, RawRecord};

/// What to read from a source: its geometry, its CRS and its fields.
#[derive(Debug, Clone)]
pub struct Request {
    /// CSV columns holding the geometry (GDAL sources bring their own).
    pub geometry: GeometryColumns,
    /// CRS of the coordinates, when the source's own (or CSV's EPSG:4326) is not it.
    pub source_crs: Option<String>,
    /// The fields to read.
    pub fields: Fields,
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
    Gdal(GdalReader),
}

/// Opens `path`: `.csv`, `.tsv` and `.txt` with the CSV reader, anything else through GDAL.
///
/// # Errors
/// Missing file, unknown columns or fields, a source without CRS.
pub fn open(path: &Path, layer: Option<&str>, request: &Request) -> Result<Reader> {
    let extension = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    if ["csv", "tsv", "txt"].contains(&extension.as_str()) {
        Ok(Reader::Csv(CsvReader::open(
            path,
            request,
            extension == "tsv",
        )?))
    } else {
        let columns = &request.geometry;
        if columns.x.is_some() || columns.y.is_some() || columns.wkt.is_some() {
            return Err(Error::argument(
                "--x-field/--y-field/--wkt-field",
                format!(
                    "apply to CSV input only; {} is read through GDAL with its own geometry",
                    path.display()
                ),
            ));
        }
        Ok(Reader::Gdal(GdalReader::open(path, layer, request)?))
    }
}

impl Reader {
    /// The next row, or None at the end.
    ///
    /// # Errors
    /// A malformed CSV record or a GDAL read failure.
    pub fn next_row(&mut self) -> Result<Option<Row>> {
        match self {
            Reader::Csv(r) => r.next_row(),
            Reader::Gdal(r) => Ok(r.next_row()),
        }
    }

    /// CRS of the coordinates.
    pub fn srs(&self) -> &SpatialRef {
        match self {
            Reader::Csv(r) => &r.srs,
            Reader::Gdal(r) => &r.srs,
        }
    }

    /// The layer read (GDAL sources).
    pub fn layer_name(&self) -> Option<String> {
        match self {
            Reader::Csv(_) => None,
            Reader::Gdal(r) => Some(r.layer.clone()),
        }
    }

    /// Number of rows, when the source knows it without reading them (GDAL sources).
    pub fn rows_total(&self) -> Option<u64> {
        match self {
            Reader::Csv(_) => None,
            Reader::Gdal(r) => Some(r.count),
        }
    }

    /// Share of the input read so far, for progress.
    pub fn fraction_read(&self) -> f64 {
        match self {
            Reader::Csv(r) => r.reader.position().byte() as f64 / r.size.max(1) as f64,
            Reader::Gdal(r) => r.read as f64 / r.count.max(1) as f64,
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

enum Geometry {
    Columns { x: usize, y: usize },
    Wkt(usize),
}

pub struct CsvReader {
    path: PathBuf,
    reader: csv::Reader<std::fs::File>,
    size: u64,
    record: csv::StringRecord,
    geometry: Geometry,
    stance: usize,
    time: Option<usize>,
    author: Option<usize>,
    text: Option<usize>,
    quality: Option<usize>,
    keep: Vec<usize>,
    srs: SpatialRef,
    row: u64,
}

impl CsvReader {
    fn open(path: &Path, request: &Request, tabs: bool) -> Result<Self> {
        let fields = &request.fields;
        let file = std::fs::File::open(path).map_err(|e| Error::InputFile {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
        let size = file.metadata().map(|m| m.len()).unwrap_or(0);
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(if tabs { b'\t' } else { b',' })
            .flexible(true)
            .from_reader(file);
        let headers: Vec<String> = reader
            .headers()
            .map_err(|e| Error::InputFile {
                path: path.to_owned(),
                reason: format!("cannot read the CSV header: {e}"),
            })?
            .iter()
            .map(|h| h.trim().to_owned())
            .collect();
        let find = |name: &str| {
            headers
                .iter()
                .position(|h| h == name)
                .or_else(|| headers.iter().position(|h| h.eq_ignore_ascii_case(name)))
        };
        let require = |name: &str| {
            find(name).ok_or_else(|| Error::ColumnNotFound {
                path: path.to_owned(),
                field: name.to_owned(),
                available: headers.join(", "),
            })
        };
        let first_of = |option: &str, candidates: &[&str]| {
            candidates.iter().find_map(|c| find(c)).ok_or_else(|| {
                Error::argument(
                    option,
                    format!(
                        "{}: none of the columns {} found (columns: {}); name one with {option}",
                        path.display(),
                        candidates.join(", "),
                        headers.join(", ")
                    ),
                )
            })
        };
        let columns = &request.geometry;
        let geometry = match (&columns.wkt, &columns.x, &columns.y) {
            (Some(wkt), None, None) => Geometry::Wkt(require(wkt)?),
            (Some(_), _, _) => {
                return Err(Error::argument(
                    "--wkt-field",
                    "give either --wkt-field or --x-field/--y-field, not both",
                ))
            }
            (None, x, y) => Geometry::Columns {
                x: match x {
                    Some(x) => require(x)?,
                    None => first_of("--x-field", &["lon", "lng", "long", "longitude", "x"])?,
                },
                y: match y {
                    Some(y) => require(y)?,
                    None => first_of("--y-field", &["lat", "latitude", "y"])?,
                },
            },
        };
        let optional = |name: &Option<String>| name.as_deref().map(require).transpose();
        Ok(CsvReader {
            path: path.to_owned(),
            size,
            record: csv::StringRecord::new(),
            geometry,
            stance: require(&fields.stance)?,
            time: optional(&fields.time)?,
            author: optional(&fields.author)?,
            text: optional(&fields.text)?,
            quality: optional(&fields.quality)?,
            keep: fields
                .keep
                .iter()
                .map(|k| require(k))
                .collect::<Result<_>>()?,
            srs: source_srs(request.source_crs.as_deref(), crs::wgs84)?,
            reader,
            row: 0,
        })
    }

    fn next_row(&mut self) -> Result<Option<Row>> {
        let more = self
            .reader
            .read_record(&mut self.record)
            .map_err(|e| Error::InputFile {
                path: self.path.clone(),
                reason: format!("malformed CSV after data row {}: {e}", self.row),
            })?;
        if !more {
            return Ok(None);
        }
        self.row += 1;
        let record = &self.record;
        let get = |i: usize| {
            record
                .get(i)
                .map(str::trim)
                .filter(|v| !v.is_empty())
                .map(str::to_owned)
        };
        let opt = |i: Option<usize>| i.and_then(get);
        let (location, x_raw, y_raw) = match self.geometry {
            Geometry::Columns { x, y } => {
                let (xr, yr) = (get(x), get(y));
                let location = match (
                    xr.as_deref().map(str::parse::<f64>),
                    yr.as_deref().map(str::parse::<f64>),
                ) {
                    (Some(Ok(xv)), Some(Ok(yv))) => Location::Point(xv, yv),
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
        };
        Ok(Some(Row {
            source_row: self.row,
            location,
            x_raw,
            y_raw,
            stance: get(self.stance),
            time: opt(self.time),
            author: opt(self.author),
            text: opt(self.text),
            quality: opt(self.quality),
            keep: self.keep.iter().map(|k| get(*k)).collect(),
        }))
    }
}

fn parse_wkt(text: &str) -> Location {
    match gdal::vector::Geometry::from_wkt(text) {
        Err(_) => Location::Missing(text.chars().take(60).collect()),
        Ok(g) => location_of(&g),
    }
}

fn location_of(geometry: &gdal::vector::Geometry) -> Location {
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

pub struct GdalReader {
    layer: String,
    features: OwnedFeatureIterator,
    srs: SpatialRef,
    stance: usize,
    time: Option<usize>,
    author: Option<usize>,
    text: Option<usize>,
    quality: Option<usize>,
    keep: Vec<usize>,
    count: u64,
    read: u64,
    /// Whether the time field is a typed OGR date or date-time (read as a value, not OGR's text form).
    typed_time: bool,
}

impl GdalReader {
    fn open(path: &Path, layer: Option<&str>, request: &Request) -> Result<Self> {
        let fields = &request.fields;
        let dataset = open_vector(path)?;
        let names: Vec<String> = dataset.layers().map(|l| l.name()).collect();
        let name = choose_layer(path, &names, layer)?;
        let owned = dataset
            .into_layer_by_name(&name)
            .map_err(Error::gdal(format!("opening layer '{name}'")))?;
        let geometry_type = gdal::vector::geometry_type_flatten(owned.defn().geometry_type());
        if ![OGRwkbGeometryType::wkbPoint, OGRwkbGeometryType::wkbUnknown].contains(&geometry_type)
        {
            return Err(Error::BadLayer {
                path: path.to_owned(),
                layer: name.clone(),
                message: format!(
                    "has {} geometries; expected points",
                    gdal::vector::geometry_type_to_name(geometry_type)
                ),
            });
        }
        let available: Vec<String> = owned.defn().fields().map(|f| f.name()).collect();
        let require = |field: &str| {
            available
                .iter()
                .position(|f| f == field)
                .or_else(|| available.iter().position(|f| f.eq_ignore_ascii_case(field)))
                .ok_or_else(|| Error::FieldNotFound {
                    path: path.to_owned(),
                    layer: name.clone(),
                    field: field.to_owned(),
                    available: available.join(", "),
                })
        };
        let optional = |f: &Option<String>| f.as_deref().map(require).transpose();
        let srs = source_srs(request.source_crs.as_deref(), || {
            layer_srs(path, &name, &owned)
        })?;
        let count = owned.feature_count();
        let time = optional(&fields.time)?;
        let typed_time = time.is_some_and(|i| {
            owned.defn().fields().nth(i).is_some_and(|f| {
                matches!(
                    f.field_type(),
                    gdal::vector::OGRFieldType::OFTDateTime | gdal::vector::OGRFieldType::OFTDate
                )
            })
        });
        Ok(GdalReader {
            typed_time,
            stance: require(&fields.stance)?,
            time,
            author: optional(&fields.author)?,
            text: optional(&fields.text)?,
            quality: optional(&fields.quality)?,
            keep: fields
                .keep
                .iter()
                .map(|k| require(k))
                .collect::<Result<_>>()?,
            layer: name,
            features: owned.owned_features(),
            srs,
            count,
            read: 0,
        })
    }

    fn next_row(&mut self) -> Option<Row> {
        let feature = self.features.into_iter().next()?;
        self.read += 1;
        let get = |i: usize| {
            feature
                .field_as_string(i)
                .ok()
                .flatten()
                .map(|s| s.trim().to_owned())
                .filter(|s| !s.is_empty())
        };
        let opt = |i: Option<usize>| i.and_then(get);
        let location = match feature.geometry() {
            None => Location::Missing(String::new()),
            Some(g) => location_of(g),
        };
        let (x_raw, y_raw) = match &location {
            Location::Point(x, y) => (Some(x.to_string()), Some(y.to_string())),
            _ => (None, None),
        };
        Some(Row {
            source_row: feature.fid().unwrap_or(self.read),
            location,
            x_raw,
            y_raw,
            stance: get(self.stance),
            time: match self.time {
                // OGR's text form of a date-time ("2026/03/02 18:36:09+00") is not ISO 8601.
                Some(i) if self.typed_time => feature
                    .field_as_datetime(i)
                    .ok()
                    .flatten()
                    .map(|t| t.to_rfc3339()),
                other => opt(other),
            },
            author: opt(self.author),
            text: opt(self.text),
            quality: opt(self.quality),
            keep: self.keep.iter().map(|k| get(*k)).collect(),
        })
    }
}

/// Opens `path` read-only as a vector source.
fn open_vector(path: &Path) -> Result<gdal::Dataset> {
    if !path.exists() {
        return Err(Error::InputFile {
            path: path.to_owned(),
            reason: "no such file".into(),
        });
    }
    gdal::Dataset::open_ex(
        path,
        gdal::DatasetOptions {
            open_flags: gdal::GdalOpenFlags::GDAL_OF_READONLY | gdal::GdalOpenFlags::GDAL_OF_VECTOR,
            ..Default::default()
        },
    )
    .map_err(|e| Error::InputFile {
        path: path.to_owned(),
        reason: format!("GDAL cannot read it as a vector source ({e})"),
    })
}

/// The layer named by `--layer`, or the only layer of the source.
fn choose_layer(path: &Path, names: &[String], layer: Option<&str>) -> Result<String> {
    match (layer, names) {
        (Some(l), _) => {
            names
                .iter()
                .find(|n| *n == l)
                .cloned()
                .ok_or_else(|| Error::LayerNotFound {
                    path: path.to_owned(),
                    layer: l.to_owned(),
                    available: names.join(", "),
                })
        }
        (None, [one]) => Ok(one.clone()),
        (None, []) => Err(Error::BadLayer {
            path: path.to_owned(),
            layer: String::new(),
            message: "the source has no layers".into(),
        }),
        (None, _) => Err(Error::argument(
            "--layer",
            format!(
                "{} has several layers; name one ({})",
                path.display(),
                names.join(", ")
            ),
        )),
    }
}

/// The layer's own CRS, in x = easting/longitude order.
fn layer_srs(path: &Path, name: &str, layer: &gdal::vector::OwnedLayer) -> Result<SpatialRef> {
    layer
        .spatial_ref()
        .map(|mut s| {
            s.set_axis_mapping_strategy(
                gdal::spatial_ref::AxisMappingStrategy::TraditionalGisOrder,
            );
            s
        })
        .ok_or_else(|| Error::BadLayer {
            path: path.to_owned(),
            layer: name.to_owned(),
            message: "has no CRS; give the coordinates' CRS with --source-crs".into(),
        })
}
