//! Provenance records in the GeoPackage metadata extension (gpkg_metadata and
//! gpkg_metadata_reference, scope table).

use super::*;

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
pub(super) fn write_provenance(
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
