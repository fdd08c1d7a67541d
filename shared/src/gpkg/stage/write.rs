//! Writing rows into the staging GeoPackage: GDAL creates each table and its system rows,
//! rows go in through SQLite with a bulk-loaded R-tree.

use super::batch::Batch;
use super::*;
use rusqlite::types::Value;

impl Staging {
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
        let batch =
            Batch::new(connection, name, &columns).map_err(Error::sqlite(context.clone()))?;
        let load =
            BulkLoad::start(connection, name, spatial).map_err(Error::sqlite(context.clone()))?;
        Ok(VectorWriter {
            batch,
            srs_id: srs_id.unwrap_or(0),
            spatial,
            load,
            kinds: fields.iter().map(|f| f.kind).collect(),
            name: name.to_owned(),
            count: 0,
            staged: layers,
            data_type: if spatial { "features" } else { "attributes" },
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
        let (source_fields, srs, geometry_type) = source_layout(source, layer)?;
        check_extra(layer, &source_fields, fids, extra)?;
        let index: std::collections::HashMap<i64, usize> =
            fids.iter().enumerate().map(|(i, f)| (*f, i)).collect();
        let mut schema = source_fields.clone();
        schema.extend(
            extra
                .iter()
                .map(|(f, _)| (f.name.clone(), ogr_type(f.kind))),
        );
        let srs_id = self.create_table(name, geometry_type, srs.as_ref(), &schema)?;

        let reader = crate::gpkg::open_sqlite_read(source)?;
        let read_ctx = format!("reading layer '{layer}' of {}", source.display());
        let select = source_select(&reader, layer, &source_fields, &read_ctx, &bad)?;
        let mut statement = reader
            .prepare(&select)
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
        let copy = RowCopy {
            srs_id,
            source_fields: source_fields.len(),
            extra,
            read_ctx: &read_ctx,
            write_ctx: &context,
        };
        let mut count = 0u64;
        while let Some(row) = rows.next().map_err(Error::sqlite(read_ctx.clone()))? {
            let fid: i64 = row.get(0).map_err(Error::sqlite(read_ctx.clone()))?;
            let at = *index
                .get(&fid)
                .ok_or_else(|| bad(format!("feature {fid} was not read before copying")))?;
            copy.bind(&mut insert, row, fid, at, &mut load, &bad)?;
            count += 1;
        }
        drop(insert);
        finish_table(connection, name, &load, count).map_err(Error::sqlite(context))?;
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
        surface: &crate::gpkg::raster::Surface<'_>,
    ) -> Result<()> {
        self.check_name(name)?;
        self.close_dataset()?;
        self.sql = None;
        crate::gpkg::raster::write(&self.path, self.created, name, surface)?;
        self.created = true;
        self.layers.push(StagedLayer {
            name: name.to_owned(),
            data_type: "2d-gridded-coverage",
            count: (surface.grid.cols * surface.grid.rows) as u64,
        });
        Ok(())
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
    entries: Vec<(i64, crate::gpkg::blob::Envelope)>,
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
            crate::gpkg::rtree::bulk_load(connection, rtree, &self.entries)?;
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
    batch: Batch<'a>,
    srs_id: i32,
    spatial: bool,
    load: BulkLoad,
    kinds: Vec<FieldKind>,
    name: String,
    count: u64,
    staged: &'a mut Vec<StagedLayer>,
    data_type: &'static str,
    finished: bool,
}

impl VectorWriter<'_> {
    /// Adds one feature (buffered: rows go in by multi-row INSERTs, see [`Batch`]).
    ///
    /// # Errors
    /// SQLite failures, or a shape on a layer without geometry.
    pub fn add(&mut self, shape: Shape<'_>, values: &[FieldData<'_>]) -> Result<()> {
        let mut row = Vec::with_capacity(self.kinds.len() + 1);
        let mut bounds = None;
        if self.spatial {
            let mut blob = Vec::new();
            bounds = match shape {
                Shape::None => None,
                Shape::Point(x, y) => crate::gpkg::blob::encode_point(&mut blob, self.srs_id, x, y),
                Shape::Polygon(polygon) => {
                    let multi = geo_types::MultiPolygon::new(vec![polygon.clone()]);
                    crate::gpkg::blob::encode_multipolygon(&mut blob, self.srs_id, &multi)
                }
                Shape::MultiPolygon(multi) => {
                    crate::gpkg::blob::encode_multipolygon(&mut blob, self.srs_id, multi)
                }
            };
            row.push(match shape {
                Shape::None => Value::Null,
                _ => Value::Blob(blob),
            });
        } else if !matches!(shape, Shape::None) {
            return Err(Error::Failed(format!(
                "layer '{}' has no geometry column",
                self.name
            )));
        }
        for (index, kind) in self.kinds.iter().enumerate() {
            let value = values.get(index).copied().unwrap_or(FieldData::Null);
            row.push(match (value, kind) {
                (FieldData::Null, _) => Value::Null,
                (FieldData::Real(v), _) if v.is_nan() => Value::Null,
                (FieldData::Integer(v), FieldKind::Real) => Value::Real(v as f64),
                (FieldData::Integer(v), _) => Value::Integer(v),
                (FieldData::Real(v), _) => Value::Real(v),
                (FieldData::Text(v), _) => Value::Text(v.to_owned()),
                // The form GDAL writes for DateTime fields, read back as UTC.
                (FieldData::DateTime(seconds), _) => chrono::DateTime::from_timestamp(seconds, 0)
                    .map_or(Value::Null, |t| {
                        Value::Text(t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string())
                    }),
            });
        }
        self.batch
            .push(row, bounds, &mut self.load.entries)
            .map_err(|e| Error::Sqlite {
                context: format!("writing layer '{}'", self.name),
                source: e,
            })?;
        self.count += 1;
        Ok(())
    }

    /// Commits the layer.
    ///
    /// # Errors
    /// SQLite failures.
    pub fn finish(mut self) -> Result<u64> {
        self.finished = true;
        let connection = self.batch.connection();
        self.batch
            .flush(&mut self.load.entries)
            .and_then(|()| finish_table(connection, &self.name, &self.load, self.count))
            .map_err(|e| Error::Sqlite {
                context: format!("committing layer '{}'", self.name),
                source: e,
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
            let _ = self.batch.connection().execute_batch("ROLLBACK");
        }
    }
}

type SourceLayout = (
    Vec<(String, OGRFieldType::Type)>,
    Option<gdal::spatial_ref::SpatialRef>,
    OGRwkbGeometryType::Type,
);

/// The fields, CRS and geometry type of `layer` of `source`, as GDAL reports them.
fn source_layout(source: &Path, layer: &str) -> Result<SourceLayout> {
    let dataset = crate::gpkg::open_geopackage(source)?;
    let input = dataset.layer_by_name(layer).map_err(|e| Error::BadLayer {
        path: source.to_owned(),
        layer: layer.to_owned(),
        message: e.to_string(),
    })?;
    let fields: Vec<(String, OGRFieldType::Type)> = input
        .defn()
        .fields()
        .map(|f| (f.name(), f.field_type()))
        .collect();
    Ok((fields, input.spatial_ref(), input.defn().geometry_type()))
}

/// Extra columns must not clash with the source's fields and must hold one value per feature.
fn check_extra(
    layer: &str,
    source_fields: &[(String, OGRFieldType::Type)],
    fids: &[i64],
    extra: &[(FieldDef, ExtraColumn)],
) -> Result<()> {
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
    Ok(())
}

/// The SELECT of the source's fid, geometry (or NULL) and fields, read with SQLite.
fn source_select(
    reader: &Connection,
    layer: &str,
    source_fields: &[(String, OGRFieldType::Type)],
    read_ctx: &str,
    bad: &dyn Fn(String) -> Error,
) -> Result<String> {
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
        .map_err(Error::sqlite(read_ctx))?
        .ok_or_else(|| bad("has no integer primary key (feature id)".into()))?;
    let geometry_column: Option<String> = reader
        .query_row(
            "SELECT column_name FROM gpkg_geometry_columns WHERE lower(table_name) = lower(?1)",
            [layer],
            |r| r.get(0),
        )
        .optional()
        .map_err(Error::sqlite(read_ctx))?;
    let mut selected = vec![q(&fid_column)];
    selected.push(geometry_column.as_deref().map_or("NULL".to_owned(), q));
    selected.extend(source_fields.iter().map(|(n, _)| q(n)));
    Ok(format!("SELECT {} FROM {}", selected.join(", "), q(layer)))
}

/// Binds one copied row: fid, geometry (srs_id renumbered, envelope kept for the R-tree), the
/// source's values as stored, then the extra values of feature `at`.
struct RowCopy<'a> {
    srs_id: Option<i32>,
    source_fields: usize,
    extra: &'a [(FieldDef, ExtraColumn)],
    read_ctx: &'a str,
    write_ctx: &'a str,
}

impl RowCopy<'_> {
    fn bind(
        &self,
        insert: &mut rusqlite::Statement<'_>,
        row: &rusqlite::Row<'_>,
        fid: i64,
        at: usize,
        load: &mut BulkLoad,
        bad: &dyn Fn(String) -> Error,
    ) -> Result<()> {
        let read = Error::sqlite(self.read_ctx);
        let write = |e| Error::Sqlite {
            context: self.write_ctx.to_owned(),
            source: e,
        };
        let mut p = 1;
        insert.raw_bind_parameter(p, fid).map_err(write)?;
        p += 1;
        if let Some(id) = self.srs_id {
            let mut geometry: Option<Vec<u8>> = row.get(1).map_err(read)?;
            if let Some(blob) = geometry.as_mut() {
                crate::gpkg::blob::set_srs_id(blob, id);
                let bounds = crate::gpkg::blob::envelope(blob)
                    .map_err(|m| bad(format!("feature {fid}: unreadable geometry ({m})")))?;
                if let Some(e) = bounds {
                    load.entries.push((fid, e));
                }
            }
            insert.raw_bind_parameter(p, geometry).map_err(write)?;
            p += 1;
        }
        for k in 0..self.source_fields {
            let value: rusqlite::types::Value =
                row.get(2 + k).map_err(Error::sqlite(self.read_ctx))?;
            insert.raw_bind_parameter(p, value).map_err(write)?;
            p += 1;
        }
        for (_, column) in self.extra {
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
        Ok(())
    }
}
