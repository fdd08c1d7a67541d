//! The page-level reader against independent readers of the same files: SQLite's own query
//! (the same rows through the library) and GDAL's feature reader (polygons, and their fields
//! as GDAL gives them), on the demo GeoPackage (written by this project through GDAL and
//! SQLite) and `nc.gpkg` (North Carolina SIDS counties, from the R package sf, written by GDAL
//! with 1,024-byte pages, so polygons spill into overflow pages).

use std::path::PathBuf;

use gdal::vector::LayerAccess;

use super::*;

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// Every row's fid, geometry bytes and fields through both paths of [`rows`].
/// A row as compared: fid, geometry bytes, the fields' values as debug text.
type Seen = (i64, Vec<u8>, Vec<String>);

fn both_ways(path: &Path, layer: &str, fields: &[&str]) -> [Vec<Seen>; 2] {
    let connection = crate::gpkg::open_sqlite_read(path).expect("test fixture");
    let query = LayerQuery::new(path, &connection, layer, fields).expect("test fixture");
    let bad = |m: String| Error::argument("test", m);
    let init = |_| Vec::new();
    let row = |out: &mut Vec<Seen>,
               fid: i64,
               geometry: ValueRef<'_>,
               values: &Fields<'_, '_>|
     -> Result<()> {
        let g = match geometry {
            ValueRef::Blob(b) => b.to_vec(),
            other => format!("{other:?}").into_bytes(),
        };
        let v = (0..fields.len())
            .map(|i| format!("{:?}", values.value(i)))
            .collect();
        out.push((fid, g, v));
        Ok(())
    };
    let direct = rows::read_rows_direct(path, &connection, &query, &init, &row)
        .expect("a file this project or GDAL wrote is read from its pages");
    let sql = rows::read_rows_sql(path, &connection, &query, &bad, &init, &row);
    let flat = |parts: Vec<Result<Vec<_>>>| {
        parts
            .into_iter()
            .flat_map(|p| p.expect("test fixture"))
            .collect()
    };
    [flat(direct), flat(sql)]
}

#[test]
fn rows_read_from_pages_are_the_rows_sqlite_returns() {
    let sample = root().join("sample-gpkg/veldmark.gpkg");
    let fields = ["stance", "time_utc", "author_id", "text", "quality", "town"];
    let [direct, sql] = both_ways(&sample, "veldmark_records", &fields);
    assert_eq!(direct.len(), 20_000);
    assert!(direct == sql);
    let [direct, sql] = both_ways(&sample, "veldmark_districts", &["code", "population"]);
    assert!(!direct.is_empty());
    assert!(direct == sql);
    let nc = root().join("tests/reference/data/nc.gpkg");
    let [direct, sql] = both_ways(&nc, "nc.gpkg", &["NAME", "BIR74", "CRESS_ID", "SID79"]);
    assert_eq!(direct.len(), 100);
    assert!(direct == sql);
    // REAL columns hold whole numbers as integers on disk; both paths give reals.
    assert!(direct[0].2[1].starts_with("Real("), "{:?}", direct[0].2);
}

#[test]
fn polygons_and_fields_are_what_gdal_reads() {
    let nc = root().join("tests/reference/data/nc.gpkg");
    let ours = read_polygons(
        &nc,
        None,
        &[
            ("NAME", FieldWant::Text),
            ("BIR74", FieldWant::Real),
            ("CNTY_ID", FieldWant::Text),
        ],
        PolygonCrs::AsStored,
    )
    .expect("test fixture");
    let dataset = gdal::Dataset::open(&nc).expect("test fixture");
    let mut layer = dataset.layer(0).expect("test fixture");
    let index = |name: &str| layer.defn().field_index(name).expect("test fixture");
    let (name, births, id) = (index("NAME"), index("BIR74"), index("CNTY_ID"));
    let mut n = 0;
    for (i, feature) in layer.features().enumerate() {
        assert_eq!(ours.fids[i], feature.fid().expect("test fixture") as i64);
        let theirs: geo_types::Geometry<f64> = feature
            .geometry()
            .expect("test fixture")
            .try_into()
            .expect("test fixture");
        let theirs = match theirs {
            geo_types::Geometry::MultiPolygon(m) => m,
            geo_types::Geometry::Polygon(p) => geo_types::MultiPolygon::new(vec![p]),
            other => panic!("{other:?}"),
        };
        assert_eq!(ours.polygons[i], theirs, "feature {}", ours.fids[i]);
        let Column::Text(names) = &ours.columns[0] else {
            panic!()
        };
        assert_eq!(
            names.get(i),
            feature
                .field_as_string(name)
                .expect("test fixture")
                .as_deref()
        );
        let Column::Real(values) = &ours.columns[1] else {
            panic!()
        };
        assert_eq!(
            values[i],
            feature.field_as_double(births).expect("test fixture")
        );
        let Column::Text(ids) = &ours.columns[2] else {
            panic!()
        };
        assert_eq!(
            ids.get(i),
            feature
                .field_as_string(id)
                .expect("test fixture")
                .as_deref()
        );
        n += 1;
    }
    assert_eq!(n, 100);
    assert_eq!(ours.polygons.len(), 100);
}

#[test]
fn a_file_in_write_ahead_log_mode_is_read_through_sqlite_with_the_same_result() {
    // Pages may then live in the log, so the page reader steps aside (btree::TableScan::open
    // refuses) and SQLite reads the rows: the layer must come out the same.
    let dir = tempfile::tempdir().expect("test fixture");
    let copy = dir.path().join("wal.gpkg");
    std::fs::copy(root().join("sample-gpkg/veldmark.gpkg"), &copy).expect("test fixture");
    let c = rusqlite::Connection::open(&copy).expect("test fixture");
    let mode: String = c
        .query_row("PRAGMA journal_mode = WAL", [], |r| r.get(0))
        .expect("test fixture");
    assert_eq!(mode, "wal");
    // A change that stays in the log until a checkpoint: only SQLite sees it. (The layer's
    // R-tree triggers call the GeoPackage SQL functions.)
    crate::gpkg::blob::register_functions(&c).expect("test fixture");
    c.execute_batch("PRAGMA wal_autocheckpoint = 0; UPDATE veldmark_records SET stance = 'edited in the log' WHERE fid = 1;")
        .expect("test fixture");
    let fields = [("stance", FieldWant::Text), ("town", FieldWant::Text)];
    let wal = read_points(&copy, Some("veldmark_records"), &fields, None).expect("test fixture");
    let pages = read_points(
        &root().join("sample-gpkg/veldmark.gpkg"),
        Some("veldmark_records"),
        &fields,
        None,
    )
    .expect("test fixture");
    assert_eq!(wal.fids, pages.fids);
    assert_eq!(wal.x, pages.x);
    assert_eq!(wal.y, pages.y);
    let texts = |l: &PointLayer, k: usize| l.columns[k].as_texts();
    assert_eq!(texts(&wal, 1), texts(&pages, 1));
    assert_eq!(texts(&wal, 0)[0].as_deref(), Some("edited in the log"));
    assert_eq!(texts(&wal, 0)[1..], texts(&pages, 0)[1..]);
    drop(c);
}
