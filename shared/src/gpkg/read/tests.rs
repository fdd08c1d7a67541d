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
fn both_ways(path: &Path, layer: &str, fields: &[&str]) -> [Vec<(i64, Vec<u8>, Vec<String>)>; 2] {
    let connection = crate::gpkg::open_sqlite_read(path).unwrap();
    let query = LayerQuery::new(path, &connection, layer, fields).unwrap();
    let bad = |m: String| Error::argument("test", m);
    let init = |_| Vec::new();
    let row = |out: &mut Vec<(i64, Vec<u8>, Vec<String>)>,
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
    let flat = |parts: Vec<Result<Vec<_>>>| parts.into_iter().flat_map(|p| p.unwrap()).collect();
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
    .unwrap();
    let dataset = gdal::Dataset::open(&nc).unwrap();
    let mut layer = dataset.layer(0).unwrap();
    let index = |name: &str| layer.defn().field_index(name).unwrap();
    let (name, births, id) = (index("NAME"), index("BIR74"), index("CNTY_ID"));
    let mut n = 0;
    for (i, feature) in layer.features().enumerate() {
        assert_eq!(ours.fids[i], feature.fid().unwrap() as i64);
        let theirs: geo_types::Geometry<f64> = feature.geometry().unwrap().try_into().unwrap();
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
            feature.field_as_string(name).unwrap().as_deref()
        );
        let Column::Real(values) = &ours.columns[1] else {
            panic!()
        };
        assert_eq!(values[i], feature.field_as_double(births).unwrap());
        let Column::Text(ids) = &ours.columns[2] else {
            panic!()
        };
        assert_eq!(ids.get(i), feature.field_as_string(id).unwrap().as_deref());
        n += 1;
    }
    assert_eq!(n, 100);
    assert_eq!(ours.polygons.len(), 100);
}
