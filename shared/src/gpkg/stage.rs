//! Atomic outputs: layers are built in a private staging GeoPackage next to the output and
//! appear in `--output` in one step — a no-clobber hard link when the output is new, one SQLite
//! transaction that copies the staged tables when it exists.

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

/// Kind of geometry of a vector layer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GeometryKind {
    /// No geometry: an attribute table.
    None,
    /// Points.
    Point,
    /// Polygons (written as multipolygons so mixed inputs fit).
    MultiPolygon,
}

/// Type of an attribute field.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldKind {
    /// 64-bit integer.
    Integer,
    /// Double.
    Real,
    /// Text.
    Text,
    /// UTC date-time, given as seconds since 1970 and written with the `Z` suffix.
    DateTime,
}

/// A field of an output layer.
#[derive(Debug, Clone)]
pub struct FieldDef {
    /// Field name (snake_case, unit suffix).
    pub name: String,
    /// Field type.
    pub kind: FieldKind,
}

impl FieldDef {
    /// A field definition.
    pub fn new(name: &str, kind: FieldKind) -> Self {
        FieldDef {
            name: name.to_owned(),
            kind,
        }
    }
}

/// One attribute value to write.
#[derive(Debug, Clone, Copy)]
pub enum FieldData<'a> {
    /// NULL.
    Null,
    /// Integer.
    Integer(i64),
    /// Real (NaN is written as NULL).
    Real(f64),
    /// Text.
    Text(&'a str),
    /// UTC seconds since 1970.
    DateTime(i64),
}

/// A geometry to write, in the layer's CRS.
#[derive(Debug, Clone, Copy)]
pub enum Shape<'a> {
    /// No geometry.
    None,
    /// A point.
    Point(f64, f64),
    /// A polygon.
    Polygon(&'a geo_types::Polygon<f64>),
    /// A multipolygon.
    MultiPolygon(&'a geo_types::MultiPolygon<f64>),
}

/// Values of one extra field for [`Staging::copy_with_fields`], one per feature.
#[derive(Debug, Clone)]
pub enum ExtraColumn {
    /// Integers (None = NULL).
    Integer(Vec<Option<i64>>),
    /// Reals (None or non-finite = NULL).
    Real(Vec<Option<f64>>),
    /// Text (None = NULL).
    Text(Vec<Option<String>>),
}

impl ExtraColumn {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            ExtraColumn::Integer(v) => v.len(),
            ExtraColumn::Real(v) => v.len(),
            ExtraColumn::Text(v) => v.len(),
        }
    }

    /// True when it holds no values.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// A layer staged in this run.
#[derive(Debug, Clone)]
pub struct StagedLayer {
    /// Table name.
    pub name: String,
    /// `features`, `attributes` or `2d-gridded-coverage`.
    pub data_type: &'static str,
    /// Features, rows or cells.
    pub count: u64,
}

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
                Dataset::open_ex(&self.path, options)
                    .map_err(Error::gdal("reopening the staging GeoPackage"))?
            } else {
                let driver = DriverManager::get_driver_by_name("GPKG")
                    .map_err(Error::gdal("finding GDAL's GPKG driver"))?;
                let dataset = driver
                    .create_vector_only(&self.path)
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
            super::blob::register_functions(&connection).map_err(Error::sqlite(ctx))?;
            self.sql = Some(connection);
        }
        self.sql
            .as_ref()
            .ok_or_else(|| Error::Failed("staging connection missing".into()))
    }

    /// Creates the empty table `name` through GDAL (system rows, R-tree and its triggers,
    /// feature-count triggers), then closes GDAL's handle; rows go in through SQLite. Returns
    /// the layer's srs_id (None without geometry).
    fn create_table(
        &mut self,
        name: &str,
        ty: OGRwkbGeometryType::Type,
        srs: Option<&gdal::spatial_ref::SpatialRef>,
        fields: &[(String, OGRFieldType::Type)],
    ) -> Result<Option<i32>> {
        self.open_dataset()?;
        let dataset = self
            .dataset
            .as_mut()
            .ok_or_else(|| Error::Failed("staging dataset missing".into()))?;
        let context = format!("creating layer '{name}'");
        {
            let spatial = ty != OGRwkbGeometryType::wkbNone;
            let layer = dataset
                .create_layer(LayerOptions {
                    name,
                    srs: if spatial { srs } else { None },
                    ty,
                    options: Some(&["FID=fid", "GEOMETRY_NAME=geom", "SPATIAL_INDEX=YES"]),
                })
                .map_err(Error::gdal(context.clone()))?;
            for (field, kind) in fields {
                gdal::vector::FieldDefn::new(field, *kind)
                    .and_then(|d| d.add_to_layer(&layer))
                    .map_err(Error::gdal(context.clone()))?;
            }
        }
        let connection = self.open_sql()?;
        connection
            .query_row(
                "SELECT srs_id FROM gpkg_geometry_columns WHERE lower(table_name) = lower(?1)",
                [name],
                |r| r.get::<_, i32>(0),
            )
            .optional()
            .map_err(Error::sqlite(context))
    }

    /// Starts a vector layer `name` with `fields`, in `srs` (required unless `kind` is None).
    ///
    /// # Errors
    /// Name problems (see [`Staging::check_name`]), GDAL or SQLite failures.
    pub fn create_vector(
        &mut self,
        name: &str,
        kind: GeometryKind,
        srs: Option<&gdal::spatial_ref::SpatialRef>,
        fields: &[FieldDef],
    ) -> Result<VectorWriter<'_>> {
        self.check_name(name)?;
        let ty = match kind {
            GeometryKind::None => OGRwkbGeometryType::wkbNone,
            GeometryKind::Point => OGRwkbGeometryType::wkbPoint,
            GeometryKind::MultiPolygon => OGRwkbGeometryType::wkbMultiPolygon,
        };
        let schema: Vec<(String, OGRFieldType::Type)> = fields
            .iter()
            .map(|f| (f.name.clone(), ogr_type(f.kind)))
            .collect();
        let srs_id = self.create_table(name, ty, srs, &schema)?;
        let spatial = kind != GeometryKind::None;
        let mut columns: Vec<String> = Vec::new();
        if spatial {
            columns.push(q("geom"));
        }
        columns.extend(fields.iter().map(|f| q(&f.name)));
        let sql = insert_statement(name, &columns);
        self.open_sql()?;
        let Staging {
            sql: connection,
            layers,
            ..
        } = self;
        let connection = connection
            .as_ref()
            .ok_or_else(|| Error::Failed("staging connection missing".into()))?;
        let context = format!("writing layer '{name}'");
        connection
            .execute_batch("BEGIN")
            .map_err(Error::sqlite(context.clone()))?;
        let insert = connection
            .prepare(&sql)
            .map_err(Error::sqlite(context.clone()))?;
        let load =
            BulkLoad::start(connection, name, spatial).map_err(Error::sqlite(context.clone()))?;
        Ok(VectorWriter {
            connection,
            insert,
            srs_id: srs_id.unwrap_or(0),
            spatial,
            load,
            kinds: fields.iter().map(|f| f.kind).collect(),
            name: name.to_owned(),
            count: 0,
            staged: layers,
            data_type: if spatial { "features" } else { "attributes" },
            blob: Vec::new(),
            finished: false,
        })
    }

    /// Copies layer `layer` of the GeoPackage `source` into the staged layer `name` — geometry,
    /// CRS, feature ids and every field kept — and appends the `extra` columns. Each extra
    /// column holds one value per feature, aligned with `fids` (the order
    /// [`super::read::read_polygons`] returns). Rows are copied as stored (SQLite values and
    /// geometry blobs, the blob's srs_id renumbered if the staging file numbers the CRS
    /// differently).
    ///
    /// # Errors
    /// Name problems, an extra field that clashes with a field of the source, a feature whose
    /// fid is not in `fids`, GDAL or SQLite failures.
    pub fn copy_with_fields(
        &mut self,
        source: &Path,
        layer: &str,
        name: &str,
        fids: &[i64],
        extra: &[(FieldDef, ExtraColumn)],
    ) -> Result<u64> {
        self.check_name(name)?;
        let bad = |message: String| Error::BadLayer {
            path: source.to_owned(),
            layer: layer.to_owned(),
            message,
        };
        let (source_fields, srs, geometry_type) = {
            let dataset = super::open_geopackage(source)?;
            let input = dataset
                .layer_by_name(layer)
                .map_err(|e| bad(e.to_string()))?;
            let fields: Vec<(String, OGRFieldType::Type)> = input
                .defn()
                .fields()
                .map(|f| (f.name(), f.field_type()))
                .collect();
            (fields, input.spatial_ref(), input.defn().geometry_type())
        };
        for (field, column) in extra {
            if source_fields
                .iter()
                .any(|(n, _)| n.eq_ignore_ascii_case(&field.name))
            {
                return Err(Error::argument(
                    "--name",
                    format!(
                        "layer '{layer}' already has a field '{}'; the copy cannot add it again",
                        field.name
                    ),
                ));
            }
            if column.len() != fids.len() {
                return Err(Error::Failed(format!(
                    "extra field '{}': {} values for {} features",
                    field.name,
                    column.len(),
                    fids.len()
                )));
            }
        }
        let index: std::collections::HashMap<i64, usize> =
            fids.iter().enumerate().map(|(i, f)| (*f, i)).collect();
        let mut schema = source_fields.clone();
        schema.extend(
            extra
                .iter()
                .map(|(f, _)| (f.name.clone(), ogr_type(f.kind))),
        );
        let srs_id = self.create_table(name, geometry_type, srs.as_ref(), &schema)?;

        // The source's fid and geometry columns, read with SQLite.
        let reader = super::open_sqlite_read(source)?;
        let read_ctx = format!("reading layer '{layer}' of {}", source.display());
        let fid_column: String = reader
            .query_row(
                &format!(
                    "SELECT name FROM pragma_table_info({}) WHERE pk = 1",
                    sql_text(layer)
                ),
                [],
                |r| r.get(0),
            )
            .optional()
            .map_err(Error::sqlite(read_ctx.clone()))?
            .ok_or_else(|| bad("has no integer primary key (feature id)".into()))?;
        let geometry_column: Option<String> = reader
            .query_row(
                "SELECT column_name FROM gpkg_geometry_columns WHERE lower(table_name) = lower(?1)",
                [layer],
                |r| r.get(0),
            )
            .optional()
            .map_err(Error::sqlite(read_ctx.clone()))?;
        let mut selected = vec![q(&fid_column)];
        selected.push(geometry_column.as_deref().map_or("NULL".to_owned(), q));
        selected.extend(source_fields.iter().map(|(n, _)| q(n)));
        let mut statement = reader
            .prepare(&format!("SELECT {} FROM {}", selected.join(", "), q(layer)))
            .map_err(Error::sqlite(read_ctx.clone()))?;

        let mut columns = vec![q("fid")];
        if srs_id.is_some() {
            columns.push(q("geom"));
        }
        columns.extend(schema.iter().map(|(n, _)| q(n)));
        let insert_sql = insert_statement(name, &columns);
        let context = format!("copying layer '{layer}' to '{name}'");
        let connection = self.open_sql()?;
        connection
            .execute_batch("BEGIN")
            .map_err(Error::sqlite(context.clone()))?;
        let mut insert = connection
            .prepare(&insert_sql)
            .map_err(Error::sqlite(context.clone()))?;
        let mut load = BulkLoad::start(connection, name, srs_id.is_some())
            .map_err(Error::sqlite(context.clone()))?;
        let mut rows = statement
            .query([])
            .map_err(Error::sqlite(read_ctx.clone()))?;
        let mut count = 0u64;
        let write = |e| Error::Sqlite {
            context: context.clone(),
            source: e,
        };
        while let Some(row) = rows.next().map_err(Error::sqlite(read_ctx.clone()))? {
            let fid: i64 = row.get(0).map_err(Error::sqlite(read_ctx.clone()))?;
            let at = *index
                .get(&fid)
                .ok_or_else(|| bad(format!("feature {fid} was not read before copying")))?;
            let mut p = 1;
            insert.raw_bind_parameter(p, fid).map_err(write)?;
            p += 1;
            if let Some(id) = srs_id {
                let mut geometry: Option<Vec<u8>> =
                    row.get(1).map_err(Error::sqlite(read_ctx.clone()))?;
                if let Some(blob) = geometry.as_mut() {
                    super::blob::set_srs_id(blob, id);
                    let bounds = super::blob::envelope(blob)
                        .map_err(|m| bad(format!("feature {fid}: unreadable geometry ({m})")))?;
                    if let Some(e) = bounds {
                        load.entries.push((fid, e));
                    }
                }
                insert.raw_bind_parameter(p, geometry).map_err(write)?;
                p += 1;
            }
            for k in 0..source_fields.len() {
                let value: rusqlite::types::Value =
                    row.get(2 + k).map_err(Error::sqlite(read_ctx.clone()))?;
                insert.raw_bind_parameter(p, value).map_err(write)?;
                p += 1;
            }
            for (_, column) in extra {
                match column {
                    ExtraColumn::Integer(v) => insert.raw_bind_parameter(p, v[at]),
                    ExtraColumn::Real(v) => {
                        insert.raw_bind_parameter(p, v[at].filter(|x| x.is_finite()))
                    }
                    ExtraColumn::Text(v) => insert.raw_bind_parameter(p, v[at].as_deref()),
                }
                .map_err(write)?;
                p += 1;
            }
            insert.raw_execute().map_err(write)?;
            count += 1;
        }
        drop(insert);
        finish_table(connection, name, &load, count).map_err(write)?;
        self.layers.push(StagedLayer {
            name: name.to_owned(),
            data_type: "features",
            count,
        });
        Ok(count)
    }

    /// Writes a Float32 surface `name` (gridded coverage, TIFF tiles, nodata −9999).
    ///
    /// # Errors
    /// Name problems or GDAL failures.
    pub fn write_surface(
        &mut self,
        name: &str,
        surface: &super::raster::Surface<'_>,
    ) -> Result<()> {
        self.check_name(name)?;
        self.close_dataset()?;
        self.sql = None;
        super::raster::write(&self.path, self.created, name, surface)?;
        self.created = true;
        self.layers.push(StagedLayer {
            name: name.to_owned(),
            data_type: "2d-gridded-coverage",
            count: (surface.grid.cols * surface.grid.rows) as u64,
        });
        Ok(())
    }

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
            write_provenance(&connection, &self.layers, provenance)?;
        }
        if interrupted.load(Ordering::Relaxed) {
            return Err(Error::Interrupted);
        }
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
            merge(
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

/// The OGR type of a field kind.
fn ogr_type(kind: FieldKind) -> OGRFieldType::Type {
    match kind {
        FieldKind::Integer => OGRFieldType::OFTInteger64,
        FieldKind::Real => OGRFieldType::OFTReal,
        FieldKind::Text => OGRFieldType::OFTString,
        FieldKind::DateTime => OGRFieldType::OFTDateTime,
    }
}

/// `INSERT INTO table (columns…) VALUES (?1, ?2, …)` for already quoted column names.
fn insert_statement(table: &str, columns: &[String]) -> String {
    let slots: Vec<String> = (1..=columns.len()).map(|i| format!("?{i}")).collect();
    format!(
        "INSERT INTO {} ({}) VALUES ({})",
        q(table),
        columns.join(", "),
        slots.join(", ")
    )
}

/// A string as an SQL literal.
fn sql_text(text: &str) -> String {
    format!("'{}'", text.replace('\'', "''"))
}

/// A table being filled through SQLite. Its per-row insert triggers — the R-tree's and GDAL's
/// feature count — are dropped for the load (each costs microseconds per row) and restored at
/// the end, when the R-tree is bulk-loaded ([`super::rtree`]) and the count set once.
struct BulkLoad {
    rtree: Option<String>,
    triggers: Vec<String>,
    entries: Vec<(i64, super::blob::Envelope)>,
}

impl BulkLoad {
    /// Starts the load of `table` (inside the open transaction).
    fn start(connection: &Connection, table: &str, spatial: bool) -> rusqlite::Result<Self> {
        let rtree = format!("rtree_{table}_geom");
        let names = [
            format!("{rtree}_insert"),
            format!("trigger_insert_feature_count_{table}"),
        ];
        let mut triggers = Vec::new();
        for name in &names {
            let found: Option<(String, String)> = connection
                .query_row(
                    "SELECT name, sql FROM sqlite_master WHERE type = 'trigger' AND lower(name) = lower(?1)",
                    [name],
                    |r| Ok((r.get(0)?, r.get(1)?)),
                )
                .optional()?;
            if let Some((name, sql)) = found {
                connection.execute_batch(&format!("DROP TRIGGER {}", q(&name)))?;
                triggers.push(sql);
            }
        }
        let has_rtree: bool = connection.query_row(
            "SELECT count(*) > 0 FROM sqlite_master WHERE type = 'table' AND lower(name) = lower(?1)",
            [&rtree],
            |r| r.get(0),
        )?;
        Ok(BulkLoad {
            rtree: (spatial && has_rtree).then_some(rtree),
            triggers,
            entries: Vec::new(),
        })
    }

    /// Loads the index and restores the triggers.
    fn finish(&self, connection: &Connection) -> rusqlite::Result<()> {
        if let Some(rtree) = &self.rtree {
            super::rtree::bulk_load(connection, rtree, &self.entries)?;
        }
        for sql in &self.triggers {
            connection.execute_batch(sql)?;
        }
        Ok(())
    }
}

/// Finishes a table written through SQLite: loads its spatial index, commits, and brings its
/// system rows up to date — the feature count GDAL keeps in `gpkg_ogr_contents`, and the extent
/// (exact, from the geometries; the R-tree holds 32-bit bounds) and change time in
/// `gpkg_contents`.
fn finish_table(
    connection: &Connection,
    name: &str,
    load: &BulkLoad,
    count: u64,
) -> rusqlite::Result<()> {
    let mut extent: [Option<f64>; 4] = [None; 4];
    load.finish(connection)?;
    if load.rtree.is_some() {
        for (_, e) in &load.entries {
            extent = [
                Some(extent[0].map_or(e[0], |v| v.min(e[0]))),
                Some(extent[1].map_or(e[1], |v| v.max(e[1]))),
                Some(extent[2].map_or(e[2], |v| v.min(e[2]))),
                Some(extent[3].map_or(e[3], |v| v.max(e[3]))),
            ];
        }
    }
    connection.execute_batch("COMMIT")?;
    connection.execute(
        "UPDATE gpkg_ogr_contents SET feature_count = ?1 WHERE lower(table_name) = lower(?2)",
        rusqlite::params![count as i64, name],
    )?;
    connection.execute(
        "UPDATE gpkg_contents SET last_change = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
         WHERE lower(table_name) = lower(?1)",
        [name],
    )?;
    if load.rtree.is_some() {
        connection.execute(
            "UPDATE gpkg_contents SET min_x = ?1, max_x = ?2, min_y = ?3, max_y = ?4
             WHERE lower(table_name) = lower(?5)",
            rusqlite::params![extent[0], extent[1], extent[2], extent[3], name],
        )?;
    }
    Ok(())
}

/// Writes the rows of one staged layer through SQLite in one transaction;
/// [`VectorWriter::finish`] commits it.
pub struct VectorWriter<'a> {
    connection: &'a Connection,
    insert: rusqlite::Statement<'a>,
    srs_id: i32,
    spatial: bool,
    load: BulkLoad,
    kinds: Vec<FieldKind>,
    name: String,
    count: u64,
    staged: &'a mut Vec<StagedLayer>,
    data_type: &'static str,
    blob: Vec<u8>,
    finished: bool,
}

impl VectorWriter<'_> {
    /// Adds one feature.
    ///
    /// # Errors
    /// SQLite failures, or a shape on a layer without geometry.
    pub fn add(&mut self, shape: Shape<'_>, values: &[FieldData<'_>]) -> Result<()> {
        let fail = |e| Error::Sqlite {
            context: format!("writing layer '{}'", self.name),
            source: e,
        };
        let mut p = 1;
        let mut bounds = None;
        if self.spatial {
            self.blob.clear();
            let blob = &mut self.blob;
            bounds = match shape {
                Shape::None => None,
                Shape::Point(x, y) => super::blob::encode_point(blob, self.srs_id, x, y),
                Shape::Polygon(polygon) => {
                    let multi = geo_types::MultiPolygon::new(vec![polygon.clone()]);
                    super::blob::encode_multipolygon(blob, self.srs_id, &multi)
                }
                Shape::MultiPolygon(multi) => {
                    super::blob::encode_multipolygon(blob, self.srs_id, multi)
                }
            };
            let geometry = (!matches!(shape, Shape::None)).then_some(self.blob.as_slice());
            self.insert.raw_bind_parameter(p, geometry).map_err(fail)?;
            p += 1;
        } else if !matches!(shape, Shape::None) {
            return Err(Error::Failed(format!(
                "layer '{}' has no geometry column",
                self.name
            )));
        }
        for (index, kind) in self.kinds.iter().enumerate() {
            let value = values.get(index).copied().unwrap_or(FieldData::Null);
            match (value, kind) {
                (FieldData::Null, _) => self.insert.raw_bind_parameter(p, rusqlite::types::Null),
                (FieldData::Real(v), _) if v.is_nan() => {
                    self.insert.raw_bind_parameter(p, rusqlite::types::Null)
                }
                (FieldData::Integer(v), FieldKind::Real) => {
                    self.insert.raw_bind_parameter(p, v as f64)
                }
                (FieldData::Integer(v), _) => self.insert.raw_bind_parameter(p, v),
                (FieldData::Real(v), _) => self.insert.raw_bind_parameter(p, v),
                (FieldData::Text(v), _) => self.insert.raw_bind_parameter(p, v),
                (FieldData::DateTime(seconds), _) => {
                    // The form GDAL writes for DateTime fields, read back as UTC.
                    let text = chrono::DateTime::from_timestamp(seconds, 0)
                        .map(|t| t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string());
                    self.insert.raw_bind_parameter(p, text)
                }
            }
            .map_err(fail)?;
            p += 1;
        }
        self.insert.raw_execute().map_err(fail)?;
        if let Some(e) = bounds {
            self.load
                .entries
                .push((self.connection.last_insert_rowid(), e));
        }
        self.count += 1;
        Ok(())
    }

    /// Commits the layer.
    ///
    /// # Errors
    /// SQLite failures.
    pub fn finish(mut self) -> Result<u64> {
        self.finished = true;
        finish_table(self.connection, &self.name, &self.load, self.count).map_err(|e| {
            Error::Sqlite {
                context: format!("committing layer '{}'", self.name),
                source: e,
            }
        })?;
        self.staged.push(StagedLayer {
            name: self.name.clone(),
            data_type: self.data_type,
            count: self.count,
        });
        Ok(self.count)
    }
}

impl Drop for VectorWriter<'_> {
    fn drop(&mut self) {
        if !self.finished {
            // An abandoned layer: its rows are dropped; the run fails and the file is removed.
            let _ = self.connection.execute_batch("ROLLBACK");
        }
    }
}

const METADATA_DDL: &str = "
CREATE TABLE IF NOT EXISTS gpkg_metadata (
  id INTEGER CONSTRAINT m_pk PRIMARY KEY ASC NOT NULL,
  md_scope TEXT NOT NULL DEFAULT 'dataset',
  md_standard_uri TEXT NOT NULL,
  mime_type TEXT NOT NULL DEFAULT 'text/xml',
  metadata TEXT NOT NULL DEFAULT '');
CREATE TABLE IF NOT EXISTS gpkg_metadata_reference (
  reference_scope TEXT NOT NULL,
  table_name TEXT,
  column_name TEXT,
  row_id_value INTEGER,
  timestamp DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
  md_file_id INTEGER NOT NULL,
  md_parent_id INTEGER,
  CONSTRAINT crmr_mfi_fk FOREIGN KEY (md_file_id) REFERENCES gpkg_metadata(id),
  CONSTRAINT crmr_mpi_fk FOREIGN KEY (md_parent_id) REFERENCES gpkg_metadata(id));
CREATE TABLE IF NOT EXISTS gpkg_extensions (
  table_name TEXT,
  column_name TEXT,
  extension_name TEXT NOT NULL,
  definition TEXT NOT NULL,
  scope TEXT NOT NULL,
  CONSTRAINT ge_tce UNIQUE (table_name, column_name, extension_name));
";

/// Adds one provenance record per staged layer (GeoPackage metadata extension, scope `table`).
fn write_provenance(
    connection: &Connection,
    layers: &[StagedLayer],
    provenance: &Provenance,
) -> Result<()> {
    let ctx = "writing provenance metadata";
    connection
        .execute_batch(METADATA_DDL)
        .map_err(Error::sqlite(ctx))?;
    for table in ["gpkg_metadata", "gpkg_metadata_reference"] {
        connection
            .execute(
                "INSERT INTO gpkg_extensions (table_name, column_name, extension_name, definition, scope)
                 SELECT ?1, NULL, 'gpkg_metadata', 'http://www.geopackage.org/spec120/#extension_metadata', 'read-write'
                 WHERE NOT EXISTS (SELECT 1 FROM gpkg_extensions WHERE table_name = ?1 AND column_name IS NULL AND extension_name = 'gpkg_metadata')",
                [table],
            )
            .map_err(Error::sqlite(ctx))?;
    }
    let now = chrono::Utc::now()
        .format("%Y-%m-%dT%H:%M:%S%.3fZ")
        .to_string();
    for layer in layers {
        let record = provenance.to_json(&layer.name).to_string();
        connection
            .execute(
                "INSERT INTO gpkg_metadata (md_scope, md_standard_uri, mime_type, metadata) VALUES ('dataset', ?1, 'application/json', ?2)",
                rusqlite::params![PROVENANCE_URI, record],
            )
            .map_err(Error::sqlite(ctx))?;
        let id = connection.last_insert_rowid();
        connection
            .execute(
                "INSERT INTO gpkg_metadata_reference (reference_scope, table_name, column_name, row_id_value, timestamp, md_file_id, md_parent_id)
                 VALUES ('table', ?1, NULL, NULL, ?2, ?3, NULL)",
                rusqlite::params![layer.name, now, id],
            )
            .map_err(Error::sqlite(ctx))?;
    }
    Ok(())
}

/// Column that ties a row of a GeoPackage system table to a user table.
fn owner_column(columns: &[String]) -> Option<&'static str> {
    ["table_name", "tpudt_name", "tile_matrix_set_name"]
        .into_iter()
        .find(|c| columns.iter().any(|x| x == c))
}

/// Column names of `schema.table`.
fn columns_of(connection: &Connection, schema: &str, table: &str) -> rusqlite::Result<Vec<String>> {
    let mut statement = connection.prepare(&format!("PRAGMA {schema}.table_info({})", q(table)))?;
    let columns = statement
        .query_map([], |r| r.get::<_, String>(1))?
        .collect();
    columns
}

/// Copies the staged layers into `target` in one transaction (replacing same-named layers when
/// `overwrite` is set). Triggers are created after the rows are copied, so GeoPackage's R-tree
/// triggers (which call GDAL's `ST_*` SQL functions) never fire in this plain connection.
fn merge(
    target: &Path,
    staged: &Path,
    layers: &[StagedLayer],
    overwrite: bool,
    protected: &HashSet<String>,
) -> Result<()> {
    let ctx = format!("adding layers to {}", target.display());
    let sql = |e| Error::Sqlite {
        context: ctx.clone(),
        source: e,
    };
    let mut connection = Connection::open(target).map_err(sql)?;
    connection.busy_timeout(BUSY_TIMEOUT).map_err(sql)?;
    super::blob::register_functions(&connection).map_err(sql)?;
    connection
        .execute("ATTACH DATABASE ?1 AS staged", [staged.to_string_lossy()])
        .map_err(sql)?;
    let transaction = connection
        .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)
        .map_err(sql)?;
    let system_tables: Vec<(String, String)> = {
        let mut statement = transaction
            .prepare("SELECT name, sql FROM staged.sqlite_master WHERE type = 'table' AND name LIKE 'gpkg%' ORDER BY rowid")
            .map_err(sql)?;
        let rows = statement
            .query_map([], |r| Ok((r.get::<_, String>(0)?, r.get::<_, String>(1)?)))
            .and_then(|rows| rows.collect::<std::result::Result<Vec<_>, _>>())
            .map_err(sql)?;
        rows
    };
    // System tables the output lacks are created with the staged definitions and triggers.
    for (name, create) in &system_tables {
        let present: Option<String> = transaction
            .query_row(
                "SELECT name FROM main.sqlite_master WHERE type = 'table' AND name = ?1",
                [name],
                |r| r.get(0),
            )
            .optional()
            .map_err(sql)?;
        if present.is_none() {
            transaction.execute_batch(create).map_err(sql)?;
            let triggers = statements_on(&transaction, name, "trigger")?;
            for trigger in triggers {
                transaction.execute_batch(&trigger).map_err(sql)?;
            }
        }
    }
    let srs_map = map_spatial_ref_systems(&transaction, layers).map_err(sql)?;
    for layer in layers {
        let lower = layer.name.to_lowercase();
        if protected.contains(&lower) {
            return Err(Error::BadOutput {
                path: target.to_owned(),
                message: format!("output layer '{}' is an input layer of this run; input layers are never replaced", layer.name),
            });
        }
        let exists: i64 = transaction
            .query_row(
                "SELECT count(*) FROM main.gpkg_contents WHERE lower(table_name) = ?1",
                [&lower],
                |r| r.get(0),
            )
            .map_err(sql)?;
        let table_exists: i64 = transaction
            .query_row(
                "SELECT count(*) FROM main.sqlite_master WHERE lower(name) = ?1",
                [&lower],
                |r| r.get(0),
            )
            .map_err(sql)?;
        if exists > 0 || table_exists > 0 {
            if !overwrite {
                return Err(Error::BadOutput {
                    path: target.to_owned(),
                    message: format!("layer '{}' already exists; use --overwrite to replace it or choose another --name", layer.name),
                });
            }
            drop_layer(&transaction, &layer.name, &system_tables).map_err(sql)?;
        }
        copy_layer(&transaction, &layer.name, &system_tables, &srs_map).map_err(sql)?;
    }
    transaction.commit().map_err(sql)?;
    connection
        .execute("DETACH DATABASE staged", [])
        .map_err(sql)?;
    Ok(())
}

/// SQL of the indexes or triggers of `table` in the staged file.
fn statements_on(connection: &Connection, table: &str, kind: &str) -> Result<Vec<String>> {
    let mut statement = connection
        .prepare("SELECT sql FROM staged.sqlite_master WHERE type = ?1 AND tbl_name = ?2 AND sql IS NOT NULL ORDER BY rowid")
        .map_err(Error::sqlite("reading staged definitions"))?;
    let rows = statement
        .query_map([kind, table], |r| r.get::<_, String>(0))
        .and_then(|rows| rows.collect::<std::result::Result<Vec<_>, _>>())
        .map_err(Error::sqlite("reading staged definitions"))?;
    Ok(rows)
}

/// Maps each staged `srs_id` used by the layers to an id in the output, adding missing systems.
fn map_spatial_ref_systems(
    tx: &Connection,
    layers: &[StagedLayer],
) -> rusqlite::Result<BTreeMap<i64, i64>> {
    let mut map = BTreeMap::new();
    let staged_columns = columns_of(tx, "staged", "gpkg_spatial_ref_sys")?;
    let main_columns = columns_of(tx, "main", "gpkg_spatial_ref_sys")?;
    let common: Vec<String> = staged_columns
        .iter()
        .filter(|c| main_columns.contains(c))
        .cloned()
        .collect();
    // The gridded coverage extension (OGC 17-066r1, req. 103) needs srs_id 4979 in every file
    // that holds a coverage, whether or not a coverage uses it.
    if layers.iter().any(|l| l.data_type == "2d-gridded-coverage") {
        let columns = common.iter().map(|c| q(c)).collect::<Vec<_>>().join(", ");
        tx.execute(
            &format!(
                "INSERT INTO main.gpkg_spatial_ref_sys ({columns}) SELECT {columns} FROM staged.gpkg_spatial_ref_sys s
                 WHERE s.srs_id = 4979 AND NOT EXISTS (SELECT 1 FROM main.gpkg_spatial_ref_sys m WHERE m.srs_id = 4979)"
            ),
            [],
        )?;
    }
    for layer in layers {
        let ids: Vec<i64> = {
            let mut s = tx.prepare(
                "SELECT srs_id FROM staged.gpkg_contents WHERE table_name = ?1 AND srs_id IS NOT NULL
                 UNION SELECT srs_id FROM staged.gpkg_geometry_columns WHERE table_name = ?1
                 UNION SELECT srs_id FROM staged.gpkg_tile_matrix_set WHERE table_name = ?1",
            ).or_else(|_| tx.prepare(
                "SELECT srs_id FROM staged.gpkg_contents WHERE table_name = ?1 AND srs_id IS NOT NULL",
            ))?;
            let v = s
                .query_map([&layer.name], |r| r.get::<_, i64>(0))?
                .collect::<rusqlite::Result<Vec<_>>>()?;
            v
        };
        for id in ids {
            if map.contains_key(&id) {
                continue;
            }
            let (organization, code, definition): (String, i64, String) = tx.query_row(
                "SELECT organization, organization_coordsys_id, definition FROM staged.gpkg_spatial_ref_sys WHERE srs_id = ?1",
                [id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )?;
            let found: Option<i64> = if organization.eq_ignore_ascii_case("epsg") {
                tx.query_row(
                    "SELECT srs_id FROM main.gpkg_spatial_ref_sys WHERE lower(organization) = 'epsg' AND organization_coordsys_id = ?1",
                    [code],
                    |r| r.get(0),
                )
                .optional()?
            } else if id <= 0 {
                Some(id)
            } else {
                tx.query_row(
                    "SELECT srs_id FROM main.gpkg_spatial_ref_sys WHERE definition = ?1",
                    [&definition],
                    |r| r.get(0),
                )
                .optional()?
            };
            let new_id = match found {
                Some(f) => f,
                None => {
                    let taken: i64 = tx.query_row(
                        "SELECT count(*) FROM main.gpkg_spatial_ref_sys WHERE srs_id = ?1",
                        [id],
                        |r| r.get(0),
                    )?;
                    let new_id = if taken == 0 {
                        id
                    } else {
                        tx.query_row(
                            "SELECT max(max(srs_id) + 1, 100000) FROM main.gpkg_spatial_ref_sys",
                            [],
                            |r| r.get(0),
                        )?
                    };
                    let list = common.iter().map(|c| q(c)).collect::<Vec<_>>().join(", ");
                    let select = common
                        .iter()
                        .map(|c| if c == "srs_id" { "?1".to_owned() } else { q(c) })
                        .collect::<Vec<_>>()
                        .join(", ");
                    tx.execute(
                        &format!("INSERT INTO main.gpkg_spatial_ref_sys ({list}) SELECT {select} FROM staged.gpkg_spatial_ref_sys WHERE srs_id = ?2"),
                        [new_id, id],
                    )?;
                    new_id
                }
            };
            map.insert(id, new_id);
        }
    }
    Ok(map)
}

/// Removes layer `name` and every system-table row that refers to it.
fn drop_layer(
    tx: &Connection,
    name: &str,
    system_tables: &[(String, String)],
) -> rusqlite::Result<()> {
    // Provenance records referenced only by this layer go with it.
    let has_metadata: i64 = tx.query_row(
        "SELECT count(*) FROM main.sqlite_master WHERE name = 'gpkg_metadata_reference'",
        [],
        |r| r.get(0),
    )?;
    if has_metadata > 0 {
        tx.execute(
            "DELETE FROM main.gpkg_metadata WHERE id IN (SELECT md_file_id FROM main.gpkg_metadata_reference WHERE lower(table_name) = lower(?1))
             AND id NOT IN (SELECT md_file_id FROM main.gpkg_metadata_reference WHERE lower(table_name) IS NOT lower(?1))",
            [name],
        )?;
    }
    let mut main_system: Vec<String> = {
        let mut s = tx.prepare(
            "SELECT name FROM main.sqlite_master WHERE type = 'table' AND name LIKE 'gpkg%'",
        )?;
        let v = s
            .query_map([], |r| r.get::<_, String>(0))?
            .collect::<rusqlite::Result<Vec<_>>>()?;
        v
    };
    main_system.extend(system_tables.iter().map(|(n, _)| n.clone()));
    main_system.sort();
    main_system.dedup();
    for table in main_system {
        let present: i64 = tx.query_row(
            "SELECT count(*) FROM main.sqlite_master WHERE name = ?1",
            [&table],
            |r| r.get(0),
        )?;
        if present == 0 || table == "gpkg_spatial_ref_sys" {
            continue;
        }
        let columns = columns_of(tx, "main", &table)?;
        if let Some(owner) = owner_column(&columns) {
            tx.execute(
                &format!(
                    "DELETE FROM main.{} WHERE lower({owner}) = lower(?1)",
                    q(&table)
                ),
                [name],
            )?;
        }
    }
    let rtrees: Vec<String> = {
        let mut s = tx.prepare(
            "SELECT name FROM main.sqlite_master WHERE type = 'table' AND sql LIKE 'CREATE VIRTUAL TABLE%' AND lower(name) LIKE 'rtree\\_' || lower(?1) || '\\_%' ESCAPE '\\'",
        )?;
        let v = s
            .query_map([name], |r| r.get::<_, String>(0))?
            .collect::<rusqlite::Result<Vec<_>>>()?;
        v
    };
    for rtree in rtrees {
        tx.execute_batch(&format!("DROP TABLE main.{}", q(&rtree)))?;
    }
    tx.execute_batch(&format!("DROP TABLE IF EXISTS main.{}", q(name)))?;
    let has_sequence: i64 = tx.query_row(
        "SELECT count(*) FROM main.sqlite_master WHERE name = 'sqlite_sequence'",
        [],
        |r| r.get(0),
    )?;
    if has_sequence > 0 {
        tx.execute(
            "DELETE FROM main.sqlite_sequence WHERE lower(name) = lower(?1)",
            [name],
        )?;
    }
    Ok(())
}

/// Copies layer `name` (table, R-tree, indexes, triggers, system-table rows) from `staged`.
fn copy_layer(
    tx: &Connection,
    name: &str,
    system_tables: &[(String, String)],
    srs_map: &BTreeMap<i64, i64>,
) -> rusqlite::Result<()> {
    let create: String = tx.query_row(
        "SELECT sql FROM staged.sqlite_master WHERE type = 'table' AND name = ?1",
        [name],
        |r| r.get(0),
    )?;
    tx.execute_batch(&create)?;
    tx.execute(
        &format!("INSERT INTO main.{0} SELECT * FROM staged.{0}", q(name)),
        [],
    )?;
    // Geometry blobs carry the srs_id too (OGC 12-128r18 req. 20); renumber them with the layer.
    let geometry: Option<(String, i64)> = tx
        .query_row(
            "SELECT column_name, srs_id FROM staged.gpkg_geometry_columns WHERE table_name = ?1",
            [name],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .optional()?;
    if let Some((column, old)) = geometry {
        if let Some(new) = srs_map.get(&old).filter(|new| **new != old) {
            tx.execute(
                &format!(
                    "UPDATE main.{0} SET {1} = stance_set_srs({1}, ?1)",
                    q(name),
                    q(&column)
                ),
                [new],
            )?;
        }
    }
    let sequence: Option<i64> = tx
        .query_row(
            "SELECT seq FROM staged.sqlite_sequence WHERE name = ?1",
            [name],
            |r| r.get(0),
        )
        .optional()
        .unwrap_or(None);
    if let Some(seq) = sequence {
        tx.execute("DELETE FROM main.sqlite_sequence WHERE name = ?1", [name])?;
        tx.execute(
            "INSERT INTO main.sqlite_sequence (name, seq) VALUES (?1, ?2)",
            rusqlite::params![name, seq],
        )?;
    }
    let rtrees: Vec<(String, String)> = {
        let mut s = tx.prepare(
            "SELECT name, sql FROM staged.sqlite_master WHERE type = 'table' AND sql LIKE 'CREATE VIRTUAL TABLE%' AND name LIKE 'rtree\\_' || ?1 || '\\_%' ESCAPE '\\'",
        )?;
        let v = s
            .query_map([name], |r| Ok((r.get(0)?, r.get(1)?)))?
            .collect::<rusqlite::Result<Vec<_>>>()?;
        v
    };
    for (rtree, create) in &rtrees {
        tx.execute_batch(create)?;
        // The R-tree's shadow tables are copied as they are when both files use the same node
        // size (SQLite derives it from the page size): inserting through the virtual table
        // would rebuild the tree one row at a time, about 9 µs a row.
        let node_size = |schema: &str| -> rusqlite::Result<Option<i64>> {
            tx.query_row(
                &format!(
                    "SELECT length(data) FROM {schema}.{} WHERE nodeno = 1",
                    q(&format!("{rtree}_node"))
                ),
                [],
                |r| r.get(0),
            )
            .optional()
        };
        let same_nodes = node_size("main")?.is_some() && node_size("main")? == node_size("staged")?;
        if same_nodes {
            for suffix in ["_node", "_parent", "_rowid"] {
                let shadow = q(&format!("{rtree}{suffix}"));
                tx.execute_batch(&format!(
                    "DELETE FROM main.{shadow}; INSERT INTO main.{shadow} SELECT * FROM staged.{shadow};"
                ))?;
            }
        } else {
            tx.execute(
                &format!("INSERT INTO main.{0} SELECT * FROM staged.{0}", q(rtree)),
                [],
            )?;
        }
    }
    for kind in ["index", "trigger"] {
        let mut s = tx.prepare("SELECT sql FROM staged.sqlite_master WHERE type = ?1 AND tbl_name = ?2 AND sql IS NOT NULL ORDER BY rowid")?;
        let statements = s
            .query_map([kind, name], |r| r.get::<_, String>(0))?
            .collect::<rusqlite::Result<Vec<_>>>()?;
        for statement in statements {
            tx.execute_batch(&statement)?;
        }
    }
    for (table, _) in system_tables {
        if table == "gpkg_spatial_ref_sys" || table == "gpkg_metadata" {
            continue;
        }
        let staged_columns = columns_of(tx, "staged", table)?;
        let main_columns = columns_of(tx, "main", table)?;
        let has_autoincrement_id = table == "gpkg_2d_gridded_coverage_ancillary"
            || table == "gpkg_2d_gridded_tile_ancillary";
        let columns: Vec<&String> = staged_columns
            .iter()
            .filter(|c| main_columns.contains(c))
            .filter(|c| !(has_autoincrement_id && c.as_str() == "id"))
            .collect();
        let list = columns.iter().map(|c| q(c)).collect::<Vec<_>>().join(", ");
        if table == "gpkg_metadata_reference" {
            // Each record gets a fresh id in the output.
            let mut s = tx.prepare(
                "SELECT r.md_file_id, m.md_scope, m.md_standard_uri, m.mime_type, m.metadata FROM staged.gpkg_metadata_reference r
                 JOIN staged.gpkg_metadata m ON m.id = r.md_file_id WHERE r.table_name = ?1",
            )?;
            let records = s
                .query_map([name], |r| {
                    Ok((
                        r.get::<_, i64>(0)?,
                        r.get::<_, String>(1)?,
                        r.get::<_, String>(2)?,
                        r.get::<_, String>(3)?,
                        r.get::<_, String>(4)?,
                    ))
                })?
                .collect::<rusqlite::Result<Vec<_>>>()?;
            for (old_id, scope, uri, mime, metadata) in records {
                tx.execute(
                    "INSERT INTO main.gpkg_metadata (md_scope, md_standard_uri, mime_type, metadata) VALUES (?1, ?2, ?3, ?4)",
                    rusqlite::params![scope, uri, mime, metadata],
                )?;
                let new_id = tx.last_insert_rowid();
                tx.execute(
                    "INSERT INTO main.gpkg_metadata_reference (reference_scope, table_name, column_name, row_id_value, timestamp, md_file_id, md_parent_id)
                     SELECT reference_scope, table_name, column_name, row_id_value, timestamp, ?1, NULL FROM staged.gpkg_metadata_reference
                     WHERE table_name = ?2 AND md_file_id = ?3",
                    rusqlite::params![new_id, name, old_id],
                )?;
            }
            continue;
        }
        let Some(owner) = owner_column(&staged_columns) else {
            continue;
        };
        if table == "gpkg_extensions" {
            // Rows of this layer, plus extension rows of system tables the output may lack.
            tx.execute(
                &format!("INSERT INTO main.gpkg_extensions ({list}) SELECT {list} FROM staged.gpkg_extensions WHERE table_name = ?1"),
                [name],
            )?;
            // A system-table extension that names a column (e.g. gpkg_crs_wkt on
            // gpkg_spatial_ref_sys.definition_12_063) applies only if the output has that column.
            let candidates: Vec<(String, Option<String>)> = {
                let mut statement = tx.prepare(
                    "SELECT s.table_name, s.column_name FROM staged.gpkg_extensions s
                     WHERE s.table_name IS NULL OR s.table_name LIKE 'gpkg%'",
                )?;
                let rows = statement
                    .query_map([], |r| {
                        Ok((
                            r.get::<_, Option<String>>(0)?.unwrap_or_default(),
                            r.get(1)?,
                        ))
                    })?
                    .collect::<rusqlite::Result<Vec<_>>>()?;
                rows
            };
            for (table_name, column_name) in candidates {
                if let Some(column) = &column_name {
                    if !columns_of(tx, "main", &table_name)?
                        .iter()
                        .any(|c| c == column)
                    {
                        continue;
                    }
                }
                tx.execute(
                    &format!(
                        "INSERT INTO main.gpkg_extensions ({list}) SELECT {list} FROM staged.gpkg_extensions s
                         WHERE coalesce(s.table_name, '') = ?1 AND s.column_name IS ?2 AND NOT EXISTS (
                           SELECT 1 FROM main.gpkg_extensions m WHERE m.table_name IS s.table_name
                           AND m.column_name IS s.column_name AND m.extension_name = s.extension_name)"
                    ),
                    rusqlite::params![table_name, column_name],
                )?;
            }
            continue;
        }
        tx.execute(
            &format!(
                "INSERT INTO main.{0} ({list}) SELECT {list} FROM staged.{0} WHERE {owner} = ?1",
                q(table)
            ),
            [name],
        )?;
        if columns.iter().any(|c| c.as_str() == "srs_id") {
            for (old, new) in srs_map {
                if old != new {
                    tx.execute(
                        &format!(
                            "UPDATE main.{} SET srs_id = ?1 WHERE {owner} = ?2 AND srs_id = ?3",
                            q(table)
                        ),
                        rusqlite::params![new, name, old],
                    )?;
                }
            }
        }
    }
    Ok(())
}
