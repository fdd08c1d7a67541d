//! Errors of the core library, each carrying the context a user needs to act on it.

use std::path::PathBuf;

/// What went wrong, with the file, layer, field or value involved.
///
/// [`Error::exit_code`] maps each variant to the toolbox's exit codes:
/// 2 for unusable arguments or input, 1 for a failure while working.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A command-line value is out of its allowed range or malformed.
    #[error("{option}: {message}")]
    BadArgument { option: String, message: String },

    /// The input file does not exist or cannot be read.
    #[error("{}: cannot open: {reason}", path.display())]
    InputFile { path: PathBuf, reason: String },

    /// The file exists but is not a GeoPackage (or is damaged).
    #[error("{}: not a usable GeoPackage: {reason}", path.display())]
    NotGeoPackage { path: PathBuf, reason: String },

    /// A named layer is missing.
    #[error("{}: no layer named '{layer}' (layers present: {available})", path.display())]
    LayerNotFound {
        path: PathBuf,
        layer: String,
        available: String,
    },

    /// A layer exists but cannot serve this purpose (wrong geometry type, empty, no CRS…).
    #[error("{}: layer '{layer}': {message}", path.display())]
    BadLayer {
        path: PathBuf,
        layer: String,
        message: String,
    },

    /// A named field is missing from a layer.
    #[error("{}: layer '{layer}' has no field '{field}' (fields present: {available})", path.display())]
    FieldNotFound {
        path: PathBuf,
        layer: String,
        field: String,
        available: String,
    },

    /// The input as a whole cannot be used (no rows, every row dropped…).
    #[error("{}: {message}", path.display())]
    BadInput { path: PathBuf, message: String },

    /// A named column is missing from a CSV file.
    #[error("{}: no column '{field}' (columns present: {available})", path.display())]
    ColumnNotFound {
        path: PathBuf,
        field: String,
        available: String,
    },

    /// A field's values cannot be used.
    #[error("{}: layer '{layer}', field '{field}': {message}", path.display())]
    BadField {
        path: PathBuf,
        layer: String,
        field: String,
        message: String,
    },

    /// An output cannot be written where the user asked.
    #[error("{}: {message}", path.display())]
    BadOutput { path: PathBuf, message: String },

    /// A coordinate reference system cannot be used.
    #[error("CRS '{definition}': {message}")]
    Crs { definition: String, message: String },

    /// GDAL failed while working.
    #[error("{context}: {source}")]
    Gdal {
        context: String,
        source: gdal::errors::GdalError,
    },

    /// SQLite failed while working.
    #[error("{context}: {source}")]
    Sqlite {
        context: String,
        source: rusqlite::Error,
    },

    /// An operating-system I/O failure while working.
    #[error("{context}: {source}")]
    Io {
        context: String,
        source: std::io::Error,
    },

    /// The run was interrupted by a signal; nothing was written.
    #[error("interrupted by a signal; no output was written")]
    Interrupted,

    /// Any other failure while working.
    #[error("{0}")]
    Failed(String),
}

impl Error {
    /// The process exit code for this error: 2 = unusable arguments or input, 1 = failure while working.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::BadArgument { .. }
            | Error::InputFile { .. }
            | Error::NotGeoPackage { .. }
            | Error::LayerNotFound { .. }
            | Error::BadLayer { .. }
            | Error::FieldNotFound { .. }
            | Error::ColumnNotFound { .. }
            | Error::BadInput { .. }
            | Error::BadField { .. }
            | Error::BadOutput { .. }
            | Error::Crs { .. } => 2,
            Error::Gdal { .. }
            | Error::Sqlite { .. }
            | Error::Io { .. }
            | Error::Interrupted
            | Error::Failed(_) => 1,
        }
    }

    /// Shorthand for [`Error::BadArgument`].
    pub fn argument(option: impl Into<String>, message: impl Into<String>) -> Self {
        Error::BadArgument {
            option: option.into(),
            message: message.into(),
        }
    }

    /// Wraps a GDAL error with what was being done.
    pub fn gdal(context: impl Into<String>) -> impl FnOnce(gdal::errors::GdalError) -> Self {
        let context = context.into();
        move |source| Error::Gdal { context, source }
    }

    /// Wraps a SQLite error with what was being done.
    pub fn sqlite(context: impl Into<String>) -> impl FnOnce(rusqlite::Error) -> Self {
        let context = context.into();
        move |source| Error::Sqlite { context, source }
    }

    /// Wraps an I/O error with what was being done.
    pub fn io(context: impl Into<String>) -> impl FnOnce(std::io::Error) -> Self {
        let context = context.into();
        move |source| Error::Io { context, source }
    }
}

/// Result with the core [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;
