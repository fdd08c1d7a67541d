//! Publishing into an existing output: staged tables, their R-trees, indexes, triggers and
//! system-table rows copied in one transaction.

use super::*;

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
pub(super) fn merge_into(
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
    crate::gpkg::blob::register_functions(&connection).map_err(sql)?;
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
    let copy = SrsCopy::new(tx)?;
    // The gridded coverage extension (OGC 17-066r1, req. 103) needs srs_id 4979 in every file
    // that holds a coverage, whether or not a coverage uses it.
    if layers.iter().any(|l| l.data_type == "2d-gridded-coverage") {
        tx.execute(
            &format!(
                "INSERT INTO main.gpkg_spatial_ref_sys ({}) SELECT {} FROM staged.gpkg_spatial_ref_sys s
                 WHERE s.srs_id = 4979 AND NOT EXISTS (SELECT 1 FROM main.gpkg_spatial_ref_sys m WHERE m.srs_id = 4979)",
                copy.insert_list,
                copy.select(false)
            ),
            [],
        )?;
    }
    for layer in layers {
        for id in staged_srs_ids(tx, &layer.name)? {
            if let std::collections::btree_map::Entry::Vacant(slot) = map.entry(id) {
                slot.insert(output_srs_id(tx, id, &copy)?);
            }
        }
    }
    Ok(map)
}

/// How a staged CRS row is copied into the output's `gpkg_spatial_ref_sys`.
struct SrsCopy {
    /// Columns both files have.
    common: Vec<String>,
    /// Columns the output has and the staging file has not, with the value they get: the CRS
    /// WKT extension's `definition_12_063` (NOT NULL; 'undefined' when no WKT 2 is known,
    /// OGC 12-128r18 F.10) appears in an output that holds a coverage; any other is NULL.
    missing: Vec<(String, &'static str)>,
    /// The column list of the INSERT.
    insert_list: String,
}

impl SrsCopy {
    fn new(tx: &Connection) -> rusqlite::Result<Self> {
        let staged_columns = columns_of(tx, "staged", "gpkg_spatial_ref_sys")?;
        let main_columns = columns_of(tx, "main", "gpkg_spatial_ref_sys")?;
        let common: Vec<String> = staged_columns
            .iter()
            .filter(|c| main_columns.contains(c))
            .cloned()
            .collect();
        let missing: Vec<(String, &'static str)> = main_columns
            .iter()
            .filter(|c| !staged_columns.contains(c))
            .map(|c| {
                let value = if c == "definition_12_063" {
                    "'undefined'"
                } else {
                    "NULL"
                };
                (c.clone(), value)
            })
            .collect();
        let insert_list = common
            .iter()
            .chain(missing.iter().map(|(c, _)| c))
            .map(|c| q(c))
            .collect::<Vec<_>>()
            .join(", ");
        Ok(SrsCopy {
            common,
            missing,
            insert_list,
        })
    }

    /// The SELECT list matching `insert_list`; `?1` in place of srs_id when `renumber`.
    fn select(&self, renumber: bool) -> String {
        let mut parts: Vec<String> = self
            .common
            .iter()
            .map(|c| {
                if renumber && c == "srs_id" {
                    "?1".to_owned()
                } else {
                    q(c)
                }
            })
            .collect();
        parts.extend(self.missing.iter().map(|(_, v)| (*v).to_owned()));
        parts.join(", ")
    }
}

/// The srs_ids a staged layer uses (contents, geometry columns, tile matrix set).
fn staged_srs_ids(tx: &Connection, layer: &str) -> rusqlite::Result<Vec<i64>> {
    let mut s = tx
        .prepare(
            "SELECT srs_id FROM staged.gpkg_contents WHERE table_name = ?1 AND srs_id IS NOT NULL
             UNION SELECT srs_id FROM staged.gpkg_geometry_columns WHERE table_name = ?1
             UNION SELECT srs_id FROM staged.gpkg_tile_matrix_set WHERE table_name = ?1",
        )
        .or_else(|_| {
            tx.prepare(
                "SELECT srs_id FROM staged.gpkg_contents WHERE table_name = ?1 AND srs_id IS NOT NULL",
            )
        })?;
    let ids = s
        .query_map([layer], |r| r.get::<_, i64>(0))?
        .collect::<rusqlite::Result<Vec<_>>>()?;
    Ok(ids)
}

/// The output's srs_id for staged CRS `id`: the same EPSG code or definition if the output has
/// it, else a copy of the row (under `id`, or a fresh id ≥ 100000 when `id` is taken).
fn output_srs_id(tx: &Connection, id: i64, copy: &SrsCopy) -> rusqlite::Result<i64> {
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
    if let Some(found) = found {
        return Ok(found);
    }
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
    tx.execute(
        &format!(
            "INSERT INTO main.gpkg_spatial_ref_sys ({}) SELECT {} FROM staged.gpkg_spatial_ref_sys WHERE srs_id = ?2",
            copy.insert_list,
            copy.select(true)
        ),
        [new_id, id],
    )?;
    Ok(new_id)
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
    copy_rows(tx, name, srs_map)?;
    copy_rtrees(tx, name)?;
    copy_indexes_and_triggers(tx, name)?;
    copy_system_rows(tx, name, system_tables, srs_map)
}

/// The table itself, its rows (geometry blobs renumbered to the output's srs_id) and its
/// AUTOINCREMENT sequence.
fn copy_rows(tx: &Connection, name: &str, srs_map: &BTreeMap<i64, i64>) -> rusqlite::Result<()> {
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
    Ok(())
}

/// The layer's R-trees.
fn copy_rtrees(tx: &Connection, name: &str) -> rusqlite::Result<()> {
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
    Ok(())
}

/// Indexes, then triggers (created after the rows so they do not fire on the copy).
fn copy_indexes_and_triggers(tx: &Connection, name: &str) -> rusqlite::Result<()> {
    for kind in ["index", "trigger"] {
        let mut s = tx.prepare("SELECT sql FROM staged.sqlite_master WHERE type = ?1 AND tbl_name = ?2 AND sql IS NOT NULL ORDER BY rowid")?;
        let statements = s
            .query_map([kind, name], |r| r.get::<_, String>(0))?
            .collect::<rusqlite::Result<Vec<_>>>()?;
        for statement in statements {
            tx.execute_batch(&statement)?;
        }
    }
    Ok(())
}

/// The layer's rows of the GeoPackage system tables, srs_ids renumbered.
fn copy_system_rows(
    tx: &Connection,
    name: &str,
    system_tables: &[(String, String)],
    srs_map: &BTreeMap<i64, i64>,
) -> rusqlite::Result<()> {
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
            copy_metadata_records(tx, name)?;
            continue;
        }
        let Some(owner) = owner_column(&staged_columns) else {
            continue;
        };
        if table == "gpkg_extensions" {
            copy_extension_rows(tx, name, &list)?;
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

/// The layer's provenance records; each gets a fresh id in the output.
fn copy_metadata_records(tx: &Connection, name: &str) -> rusqlite::Result<()> {
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
    Ok(())
}

/// Extension rows of the layer, plus extension rows of system tables the output may lack.
fn copy_extension_rows(tx: &Connection, name: &str, list: &str) -> rusqlite::Result<()> {
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
    Ok(())
}
