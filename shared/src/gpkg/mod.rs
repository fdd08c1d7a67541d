//! GeoPackage and CRS I/O (OGC 12-128r18) through GDAL and the system SQLite: the only module
//! tree of the core that touches files.

pub mod areas;
pub mod blob;
pub mod crs;
pub mod raster;
pub mod read;
pub mod rtree;
pub mod stage;
pub mod weights_table;

use std::path::Path;

use serde_json::{json, Value};
use sha2::{Digest, Sha256};

use crate::error::{Error, Result};

/// Provenance of one run, written as JSON into the metadata extension for every output layer.
#[derive(Debug, Clone)]
pub struct Provenance {
    /// Executable name, e.g. `stance-import`.
    pub tool: String,
    /// Toolbox version.
    pub version: String,
    /// Every parameter, defaults included, keyed by option name.
    pub parameters: Value,
    /// Input files with the layers read and their SHA-256.
    pub inputs: Vec<Value>,
    /// Seed of the run.
    pub seed: u64,
    /// UTC start time, RFC 3339 with `Z`.
    pub started_at: String,
    /// Wall-clock seconds from start to the end of the computation.
    pub run_time_s: f64,
    /// The key results (the same object as in the summary).
    pub results: Value,
}

impl Provenance {
    /// The record as stored: one JSON object naming the layer it describes.
    pub fn to_json(&self, layer: &str) -> Value {
        json!({
            "provenance": "stance-toolbox/1",
            "layer": layer,
            "tool": self.tool,
            "version": self.version,
            "parameters": self.parameters,
            "inputs": self.inputs,
            "seed": self.seed,
            "started_at": self.started_at,
            "run_time_s": self.run_time_s,
            "results": self.results,
        })
    }
}

/// SHA-256 of a file, lowercase hex.
///
/// # Errors
/// [`Error::InputFile`] when the file cannot be read.
pub fn sha256_file(path: &Path) -> Result<String> {
    let open_error = |e: std::io::Error| Error::InputFile {
        path: path.to_owned(),
        reason: e.to_string(),
    };
    if path.is_dir() {
        return Err(Error::InputFile {
            path: path.to_owned(),
            reason: "is a directory, expected a file".into(),
        });
    }
    let mut file = std::fs::File::open(path).map_err(open_error)?;
    let mut hasher = Sha256::new();
    std::io::copy(&mut file, &mut hasher).map_err(open_error)?;
    Ok(format!("{:x}", hasher.finalize()))
}

/// Whether two paths name the same file (false when either does not exist).
pub fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    }
}

/// Checks an output layer name: non-empty, at most 200 characters, no control characters, not
/// a GeoPackage or SQLite system name.
///
/// # Errors
/// [`Error::BadArgument`] naming `option` and the value.
pub fn check_layer_name(name: &str, option: &str) -> Result<()> {
    let lower = name.to_ascii_lowercase();
    let problem = if name.trim().is_empty() {
        Some("is empty; expected a layer name")
    } else if name.chars().count() > 200 {
        Some("is longer than 200 characters")
    } else if name.chars().any(char::is_control) {
        Some("contains control characters")
    } else if ["gpkg_", "rtree_", "sqlite_", "gpkgext_"]
        .iter()
        .any(|p| lower.starts_with(p))
    {
        Some("is reserved for GeoPackage/SQLite system tables (gpkg_*, gpkgext_*, rtree_*, sqlite_*)")
    } else {
        None
    };
    match problem {
        Some(p) => Err(Error::argument(option, format!("layer name '{name}' {p}"))),
        None => Ok(()),
    }
}

/// Quotes an SQL identifier (doubling inner quotes), so any layer or field name is safe.
pub fn quote_identifier(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// Opens a GeoPackage read-only with GDAL.
///
/// # Errors
/// [`Error::InputFile`] if missing, [`Error::NotGeoPackage`] if GDAL cannot open it as one.
pub fn open_geopackage(path: &Path) -> Result<gdal::Dataset> {
    if !path.exists() {
        return Err(Error::InputFile {
            path: path.to_owned(),
            reason: "no such file".into(),
        });
    }
    let options = gdal::DatasetOptions {
        open_flags: gdal::GdalOpenFlags::GDAL_OF_READONLY
            | gdal::GdalOpenFlags::GDAL_OF_VECTOR
            | gdal::GdalOpenFlags::GDAL_OF_RASTER,
        allowed_drivers: Some(&["GPKG"]),
        ..Default::default()
    };
    gdal::Dataset::open_ex(path, options).map_err(|e| Error::NotGeoPackage {
        path: path.to_owned(),
        reason: format!("{e}; expected an OGC GeoPackage (.gpkg)"),
    })
}

/// Names of the user tables (features, attributes, tiles) listed in `gpkg_contents`.
///
/// # Errors
/// [`Error::NotGeoPackage`] when the file has no readable `gpkg_contents`.
pub fn list_tables(path: &Path) -> Result<Vec<(String, String)>> {
    let connection = open_sqlite_read(path)?;
    let mut statement = connection
        .prepare("SELECT table_name, data_type FROM gpkg_contents ORDER BY table_name")
        .map_err(|e| Error::NotGeoPackage {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
    let rows = statement
        .query_map([], |r| Ok((r.get::<_, String>(0)?, r.get::<_, String>(1)?)))
        .and_then(|rows| rows.collect::<std::result::Result<Vec<_>, _>>())
        .map_err(|e| Error::NotGeoPackage {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
    Ok(rows)
}

/// Opens a GeoPackage read-only with the system SQLite, checking the GeoPackage header.
///
/// # Errors
/// [`Error::InputFile`] if missing, [`Error::NotGeoPackage`] if it is not a GeoPackage.
pub fn open_sqlite_read(path: &Path) -> Result<rusqlite::Connection> {
    if !path.exists() {
        return Err(Error::InputFile {
            path: path.to_owned(),
            reason: "no such file".into(),
        });
    }
    let not_gpkg = |reason: String| Error::NotGeoPackage {
        path: path.to_owned(),
        reason,
    };
    let connection = rusqlite::Connection::open_with_flags(
        path,
        rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY | rusqlite::OpenFlags::SQLITE_OPEN_NO_MUTEX,
    )
    .map_err(|e| not_gpkg(e.to_string()))?;
    let has_contents: std::result::Result<i64, _> = connection.query_row(
        "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'gpkg_contents'",
        [],
        |r| r.get(0),
    );
    match has_contents {
        Ok(1) => Ok(connection),
        Ok(_) => Err(not_gpkg(
            "it has no gpkg_contents table; expected an OGC GeoPackage".into(),
        )),
        Err(e) => Err(not_gpkg(format!("{e}; expected an OGC GeoPackage"))),
    }
}

/// The newest stance-toolbox provenance record of `table` in `path` (tool, version, parameters,
/// inputs, results), or None when the table has none or the file cannot be read.
pub fn provenance_of(path: &Path, table: &str) -> Option<Value> {
    let connection = open_sqlite_read(path).ok()?;
    let record: String = connection
        .query_row(
            "SELECT m.metadata FROM gpkg_metadata m JOIN gpkg_metadata_reference r \
             ON r.md_file_id = m.id WHERE r.reference_scope = 'table' \
             AND lower(r.table_name) = lower(?1) AND m.md_standard_uri = ?2 \
             ORDER BY m.id DESC LIMIT 1",
            rusqlite::params![table, stage::PROVENANCE_URI],
            |r| r.get(0),
        )
        .ok()?;
    serde_json::from_str(&record).ok()
}
