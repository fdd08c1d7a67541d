//! Atomic outputs: layers are built in a private staging GeoPackage next to the output and
//! appear in `--output` in one step — a no-clobber hard link when the output is new, one SQLite
//! transaction that copies the staged tables when it exists.
//!
//! The module holds one idea per file: the staging lifecycle and publishing (here), the kinds
//! of layers and fields (`fields`), writing rows into the staging file (`write`), provenance
//! records (`provenance`), and copying staged tables into an existing output (`merge`).

mod batch;
mod fields;
mod merge;
mod provenance;
mod write;

pub use fields::*;
pub use write::VectorWriter;

use std::collections::{BTreeMap, HashSet};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration;

use gdal::vector::{LayerAccess, LayerOptions};
use gdal::vector::{OGRFieldType, OGRwkbGeometryType};
use gdal::{Dataset, DriverManager};
use rusqlite::{Connection, OptionalExtension};
use serde_json::{json, Value};

use super::{quote_identifier as q, Provenance};
use crate::error::{Error, Result};

/// How long a publish waits for another writer's lock on the output before giving up.
const BUSY_TIMEOUT: Duration = Duration::from_secs(60);

/// The `md_standard_uri` of the toolbox's provenance records.
pub const PROVENANCE_URI: &str = "urn:stance-toolbox:provenance:1";

/// The staging GeoPackage of one run.
pub struct Staging {
    target: PathBuf,
    path: PathBuf,
    overwrite: bool,
    existing: HashSet<String>,
    protected: HashSet<String>,
    layers: Vec<StagedLayer>,
    dataset: Option<Dataset>,
    sql: Option<Connection>,
    created: bool,
    side_files: Vec<(PathBuf, PathBuf)>,
}

impl Staging {
    /// Prepares staging for `target`; checks up front that the output can be written.
    ///
    /// # Errors
    /// [`Error::BadOutput`] if the output exists and is not a GeoPackage, or its directory is
    /// not writable.
    pub fn new(target: &Path, overwrite: bool) -> Result<Self> {
        let bad = |message: String| Error::BadOutput {
            path: target.to_owned(),
            message,
        };
        if target.as_os_str().is_empty() {
            return Err(bad("empty output path; expected --output FILE.gpkg".into()));
        }
        if target.is_dir() {
            return Err(bad("is a directory; expected a GeoPackage file path".into()));
        }
        let existing = if target.exists() {
            let tables = super::list_tables(target).map_err(|_| {
                bad("exists and is not a GeoPackage; refusing to write into it (choose another --output)".into())
            })?;
            let metadata = std::fs::metadata(target).map_err(|e| bad(e.to_string()))?;
            if metadata.permissions().readonly() {
                return Err(bad("is read-only; cannot add layers to it".into()));
            }
            tables
                .into_iter()
                .map(|(name, _)| name.to_lowercase())
                .collect()
        } else {
            HashSet::new()
        };
        let directory = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_owned(),
            _ => PathBuf::from("."),
        };
        if !directory.is_dir() {
            return Err(bad(format!(
                "directory '{}' does not exist",
                directory.display()
            )));
        }
        let file_name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.subsec_nanos())
            .unwrap_or(0);
        remove_stale_staging(&directory, &file_name);
        let path = directory.join(format!(
            ".{file_name}.stance-staging-{}-{nanos}.gpkg",
            std::process::id()
        ));
        // Probe that the directory takes new files, so an unwritable output fails before the work.
        std::fs::File::create(&path)
            .and_then(|_| std::fs::remove_file(&path))
            .map_err(|e| {
                bad(format!(
                    "cannot create files in '{}': {e}",
                    directory.display()
                ))
            })?;
        Ok(Staging {
            target: target.to_owned(),
            path,
            overwrite,
            existing,
            protected: HashSet::new(),
            layers: Vec::new(),
            dataset: None,
            sql: None,
            created: false,
            side_files: Vec::new(),
        })
    }

    /// Marks `layer` as an input layer: it can never be replaced.
    pub fn protect(&mut self, layer: &str) {
        self.protected.insert(layer.to_lowercase());
    }

    /// The layers staged so far.
    pub fn layers(&self) -> &[StagedLayer] {
        &self.layers
    }

    /// Checks that `name` may be written: a valid name, not staged twice, not an input layer,
    /// and either new in the output or replaceable with `--overwrite`.
    ///
    /// # Errors
    /// [`Error::BadOutput`] or [`Error::BadArgument`] saying which.
    pub fn check_name(&self, name: &str) -> Result<()> {
        super::check_layer_name(name, "--name")?;
        let lower = name.to_lowercase();
        let bad = |message: String| Error::BadOutput {
            path: self.target.clone(),
            message,
        };
        if self.protected.contains(&lower) {
            return Err(bad(format!("output layer '{name}' is an input layer of this run; input layers are never replaced (choose another --name)")));
        }
        if self.layers.iter().any(|l| l.name.to_lowercase() == lower) {
            return Err(bad(format!(
                "output layer '{name}' would be written twice in one run"
            )));
        }
        if self.existing.contains(&lower) && !self.overwrite {
            return Err(bad(format!("layer '{name}' already exists; use --overwrite to replace it or choose another --name")));
        }
        Ok(())
    }

    fn open_dataset(&mut self) -> Result<()> {
        self.sql = None;
        if self.dataset.is_none() {
            let dataset = if self.created {
                let options = gdal::DatasetOptions {
                    open_flags: gdal::GdalOpenFlags::GDAL_OF_UPDATE
                        | gdal::GdalOpenFlags::GDAL_OF_VECTOR
                        | gdal::GdalOpenFlags::GDAL_OF_RASTER,
                    allowed_drivers: Some(&["GPKG"]),
                    ..Default::default()
                };
                unsynced(|| Dataset::open_ex(&self.path, options))
                    .map_err(Error::gdal("reopening the staging GeoPackage"))?
            } else {
                let driver = DriverManager::get_driver_by_name("GPKG")
                    .map_err(Error::gdal("finding GDAL's GPKG driver"))?;
                let dataset = unsynced(|| driver.create_vector_only(&self.path))
                    .map_err(Error::gdal("creating the staging GeoPackage"))?;
                self.created = true;
                dataset
            };
            self.dataset = Some(dataset);
        }
        Ok(())
    }

    /// Closes GDAL's handle (before rasters are appended or SQLite takes over).
    fn close_dataset(&mut self) -> Result<()> {
        if let Some(dataset) = self.dataset.take() {
            dataset
                .close()
                .map_err(Error::gdal("closing the staging GeoPackage"))?;
        }
        Ok(())
    }

    /// The staging file through plain SQLite (GDAL's handle closed first), with the R-tree
    /// functions registered. The staging file is private and discarded on failure, so it needs
    /// neither a rollback journal on disk nor synchronous writes.
    fn open_sql(&mut self) -> Result<&Connection> {
        self.close_dataset()?;
        if self.sql.is_none() {
            let ctx = "opening the staging GeoPackage";
            let connection = Connection::open(&self.path).map_err(Error::sqlite(ctx))?;
            connection
                .execute_batch("PRAGMA synchronous = OFF; PRAGMA journal_mode = MEMORY;")
                .map_err(Error::sqlite(ctx))?;
            crate::gpkg::blob::register_functions(&connection).map_err(Error::sqlite(ctx))?;
            self.sql = Some(connection);
        }
        self.sql
            .as_ref()
            .ok_or_else(|| Error::Failed("staging connection missing".into()))
    }
}

/// Runs `open` (GDAL opening or creating the staging file) with GDAL's SQLite connection set not
/// to wait for the disk at each commit and to keep its rollback journal in memory: the staging
/// file is private and discarded on failure, and [`Staging::publish`] syncs it once before it
/// becomes the output. A density run made some 280 synchronous flushes before.
pub(crate) fn unsynced<T>(open: impl FnOnce() -> T) -> T {
    let set = |key: &str, value: &str| gdal::config::set_thread_local_config_option(key, value);
    let _ = set("OGR_SQLITE_SYNCHRONOUS", "OFF");
    let _ = set("OGR_SQLITE_JOURNAL", "MEMORY");
    let result = open();
    let _ = gdal::config::clear_thread_local_config_option("OGR_SQLITE_SYNCHRONOUS");
    let _ = gdal::config::clear_thread_local_config_option("OGR_SQLITE_JOURNAL");
    result
}

impl Staging {
    /// A temporary path for a file output beside the GeoPackage (a CSV export…); it is renamed
    /// to `path` only when the run publishes, and removed otherwise.
    ///
    /// # Errors
    /// [`Error::BadOutput`] when `path` is a directory, its directory is missing, or it is the
    /// output GeoPackage itself.
    pub fn side_file(&mut self, path: &Path) -> Result<PathBuf> {
        let bad = |message: &str| Error::BadOutput {
            path: path.to_owned(),
            message: message.to_owned(),
        };
        if path.is_dir() {
            return Err(bad("is a directory; expected a file path"));
        }
        if path == self.target || super::same_file(path, &self.target) {
            return Err(bad("is the output GeoPackage; choose another file"));
        }
        let directory = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_owned(),
            _ => PathBuf::from("."),
        };
        if !directory.is_dir() {
            return Err(bad("its directory does not exist"));
        }
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let temporary = directory.join(format!(".{name}.stance-staging-{}", std::process::id()));
        self.side_files.push((temporary.clone(), path.to_owned()));
        Ok(temporary)
    }

    /// Stamps provenance on every staged layer and makes them appear in the output at once.
    /// Returns one JSON object per layer written.
    ///
    /// # Errors
    /// [`Error::Interrupted`] if a signal arrived (nothing is written), [`Error::BadOutput`] if
    /// a layer appeared in the output meanwhile, SQLite or I/O failures (the output is unchanged).
    pub fn publish(
        mut self,
        provenance: &Provenance,
        interrupted: &AtomicBool,
    ) -> Result<Vec<Value>> {
        self.close_dataset()?;
        self.sql = None;
        if self.layers.is_empty() {
            self.publish_side_files()?;
            return Ok(Vec::new());
        }
        {
            let connection = Connection::open(&self.path)
                .map_err(Error::sqlite("opening the staging GeoPackage"))?;
            connection
                .execute_batch("PRAGMA synchronous = OFF; PRAGMA journal_mode = MEMORY;")
                .map_err(Error::sqlite("opening the staging GeoPackage"))?;
            provenance::write_provenance(&connection, &self.layers, provenance)?;
        }
        if interrupted.load(Ordering::Relaxed) {
            return Err(Error::Interrupted);
        }
        // The staging file was written without waiting for the disk (see `unsynced`): it is
        // made durable once, before it becomes the output.
        std::fs::File::open(&self.path)
            .and_then(|f| f.sync_all())
            .map_err(Error::io("syncing the staging GeoPackage to disk"))?;
        let linked = match std::fs::hard_link(&self.path, &self.target) {
            Ok(()) => true,
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => false,
            // Some file systems have no hard links: fall back to copying tables into a new file.
            Err(_) => false,
        };
        if !linked {
            if !self.target.exists() {
                let driver = DriverManager::get_driver_by_name("GPKG")
                    .map_err(Error::gdal("finding GDAL's GPKG driver"))?;
                let created = driver
                    .create_vector_only(&self.target)
                    .map_err(Error::gdal(format!("creating {}", self.target.display())))?;
                created
                    .close()
                    .map_err(Error::gdal("closing the new output"))?;
            }
            merge::merge_into(
                &self.target,
                &self.path,
                &self.layers,
                self.overwrite,
                &self.protected,
            )?;
        }
        self.publish_side_files()?;
        Ok(self
            .layers
            .iter()
            .map(|l| json!({ "name": l.name, "data_type": l.data_type, "count": l.count }))
            .collect())
    }
}

impl Staging {
    fn publish_side_files(&mut self) -> Result<()> {
        for (temporary, path) in std::mem::take(&mut self.side_files) {
            if temporary.exists() {
                std::fs::rename(&temporary, &path).map_err(Error::io(format!(
                    "moving the new file into {}",
                    path.display()
                )))?;
            }
        }
        Ok(())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        self.dataset = None;
        self.sql = None;
        for (temporary, _) in &self.side_files {
            let _ = std::fs::remove_file(temporary);
        }
        for suffix in ["", "-journal", "-wal", "-shm"] {
            let mut path = self.path.clone().into_os_string();
            path.push(suffix);
            let _ = std::fs::remove_file(PathBuf::from(path));
        }
    }
}

/// Removes staging files of `file_name` left by runs that were killed (SIGKILL leaves no chance
/// to clean up): those whose process id no longer exists. Linux only (needs `/proc`).
fn remove_stale_staging(directory: &Path, file_name: &str) {
    if !Path::new("/proc/self").exists() {
        return;
    }
    let prefix = format!(".{file_name}.stance-staging-");
    let Ok(entries) = std::fs::read_dir(directory) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = name.strip_prefix(&prefix) else {
            continue;
        };
        let Some(pid) = rest.split('-').next().and_then(|p| p.parse::<u32>().ok()) else {
            continue;
        };
        if pid != std::process::id() && !Path::new(&format!("/proc/{pid}")).exists() {
            let _ = std::fs::remove_file(entry.path());
        }
    }
}
