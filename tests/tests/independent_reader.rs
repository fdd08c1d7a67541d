//! Independent read-back: the toolbox's GeoPackage outputs read with GDAL builds we do not link
//! (the PyPI wheels pyogrio 0.10.0 with GDAL 3.9.1 and rasterio 1.4.3 with GDAL 3.9.3; script:
//! tests/reference/read_back.py) must give what our own code wrote and reads.
//!
//! Tolerances: everything is compared exactly — the same bytes are read by both sides, so any
//! difference is a bug — except where the path through text loses digits, stated at each check.

use std::collections::HashMap;
use std::path::Path;
use std::process::Command;
use std::sync::atomic::AtomicBool;

use rusqlite::types::ValueRef;
use serde_json::{json, Value};
use stance_core::gpkg::blob::{decode_point, PointBlob};
use stance_core::gpkg::raster::{Surface, NODATA};
use stance_core::gpkg::read::{read_points, read_polygons, Column, FieldWant, PolygonCrs};
use stance_core::gpkg::stage::Staging;
use stance_core::gpkg::{crs, quote_identifier, Provenance};
use stance_core::grid::Grid;

/// Runs tests/reference/read_back.py on `path` and parses its one JSON object.
fn read_back(python: &Path, path: &Path) -> Value {
    let script = stance_tests::root().join("tests/reference/read_back.py");
    let output = Command::new(python)
        .arg(&script)
        .arg(path)
        .output()
        .expect("run read_back.py");
    assert!(
        output.status.success(),
        "read_back.py failed on {}:\n{}",
        path.display(),
        String::from_utf8_lossy(&output.stderr)
    );
    let value: Value = serde_json::from_slice(&output.stdout).expect("read_back.py prints JSON");
    // The versions every check below names; a different wheel would need the checks re-judged.
    assert_eq!(
        value["versions"]["pyogrio"], "0.10.0",
        "{}",
        value["versions"]
    );
    assert_eq!(
        value["versions"]["rasterio"], "1.4.3",
        "{}",
        value["versions"]
    );
    value
}

fn open(path: &Path) -> rusqlite::Connection {
    rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
        .expect("open gpkg")
}

/// Calendar fields of UTC seconds since 1970, computed without chrono so that this check does
/// not share code with the writer: H. Hinnant, "chrono-Compatible Low-Level Date Algorithms",
/// `civil_from_days`.
fn utc_fields(seconds: i64) -> [i64; 6] {
    let days = seconds.div_euclid(86_400);
    let second_of_day = seconds.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let day_of_era = z.rem_euclid(146_097);
    let year_of_era =
        (day_of_era - day_of_era / 1460 + day_of_era / 36_524 - day_of_era / 146_096) / 365;
    let day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    let month_index = (5 * day_of_year + 2) / 153;
    let day = day_of_year - (153 * month_index + 2) / 5 + 1;
    let month = if month_index < 10 {
        month_index + 3
    } else {
        month_index - 9
    };
    let year = year_of_era + era * 400 + i64::from(month <= 2);
    [
        year,
        month,
        day,
        second_of_day / 3600,
        second_of_day % 3600 / 60,
        second_of_day % 60,
    ]
}

/// `YYYY{sep}MM{sep}DD{t}hh:mm:ss`.
fn format_fields(f: [i64; 6], date_separator: char, time_separator: char) -> String {
    format!(
        "{:04}{date_separator}{:02}{date_separator}{:02}{time_separator}{:02}:{:02}:{:02}",
        f[0], f[1], f[2], f[3], f[4], f[5]
    )
}

#[test]
fn calendar_helper_matches_hand_worked_dates() {
    // 2000-02-29 is day 11016 after 1970-01-01 (30 years of 365 days + 7 leap days + 59).
    assert_eq!(utc_fields(0), [1970, 1, 1, 0, 0, 0]);
    assert_eq!(utc_fields(11_016 * 86_400 + 3_723), [2000, 2, 29, 1, 2, 3]);
    assert_eq!(utc_fields(-1), [1969, 12, 31, 23, 59, 59]);
    // 2026-03-04 = 20516 days (the value core's time tests use).
    assert_eq!(utc_fields(1_772_582_400), [2026, 3, 4, 0, 0, 0]);
}

fn layer<'a>(json: &'a Value, name: &str) -> &'a Value {
    json["vector"]
        .as_array()
        .expect("vector")
        .iter()
        .find(|l| l["name"] == name)
        .unwrap_or_else(|| panic!("pyogrio did not list layer {name}"))
}

fn f64_of(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("expected a number, got {v}"))
}

/// serde_json here is built without `float_roundtrip`: its float parsing may be 1 ulp off for
/// long decimals, so a double that travelled as decimal text is compared within 4 ulp
/// (relative 1e-15). Coordinates travel as bit patterns and are compared exactly instead.
fn same_double(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= 1e-15 * a.abs().max(b.abs())
}

/// Byte length of the ISO WKB of a multipolygon: header 9, each polygon 9, each ring
/// 4 + 16 per 2-D vertex (OGC 06-103r4 §8.2).
fn multipolygon_wkb_len(rings_per_polygon: &[Vec<usize>]) -> usize {
    9 + rings_per_polygon
        .iter()
        .map(|rings| 9 + rings.iter().map(|n| 4 + 16 * n).sum::<usize>())
        .sum::<usize>()
}

#[test]
fn synth_layers_read_back_identically_with_pyogrio() {
    let Some(python) = stance_tests::reference_python() else {
        return;
    };
    let dir = stance_tests::out_dir("independent_reader/synth");
    let summary = stance_tests::synth(&dir, "synth.gpkg", 2000, 7);
    let path = dir.join("synth.gpkg");
    let json = read_back(&python, &path);
    let connection = open(&path);

    // Layer names, order, geometry type, CRS and counts: pyogrio 0.10.0 (list_layers,
    // read_info) against our summary and the GeoPackage's own tables. Exact.
    let ours: Vec<(String, u64)> = summary["layers"]
        .as_array()
        .expect("layers")
        .iter()
        .map(|l| {
            (
                l["name"].as_str().expect("name").to_owned(),
                l["count"].as_u64().expect("count"),
            )
        })
        .collect();
    let theirs: Vec<(String, u64)> = json["vector"]
        .as_array()
        .expect("vector")
        .iter()
        .map(|l| {
            (
                l["name"].as_str().expect("name").to_owned(),
                l["count"].as_u64().expect("count"),
            )
        })
        .collect();
    assert_eq!(theirs, ours, "pyogrio 0.10.0 layers vs our summary");
    let names: Vec<&str> = ours.iter().map(|(n, _)| n.as_str()).collect();
    assert_eq!(
        names,
        [
            "veldmark_records",
            "veldmark_districts",
            "veldmark_towns",
            "veldmark_truth"
        ]
    );
    assert_eq!(ours[0].1, 2000);
    assert!(json["raster"].as_array().expect("raster").is_empty());
    for (name, count) in &ours {
        let theirs = layer(&json, name);
        let (geometry_type, organization, code): (String, String, i64) = connection
            .query_row(
                "SELECT g.geometry_type_name, s.organization, s.organization_coordsys_id
                 FROM gpkg_geometry_columns g JOIN gpkg_spatial_ref_sys s ON s.srs_id = g.srs_id
                 WHERE g.table_name = ?1",
                [name],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .expect("geometry column");
        assert!(
            geometry_type.eq_ignore_ascii_case(theirs["geometry_type"].as_str().expect("type")),
            "{name}: ours {geometry_type}, pyogrio 0.10.0 {}",
            theirs["geometry_type"]
        );
        assert_eq!((organization.to_uppercase().as_str(), code), ("EPSG", 4326));
        assert_eq!(
            theirs["crs"], "EPSG:4326",
            "{name}: pyogrio 0.10.0 read_info crs"
        );
        let rows: i64 = connection
            .query_row(
                &format!("SELECT count(*) FROM {}", quote_identifier(name)),
                [],
                |r| r.get(0),
            )
            .expect("count");
        assert_eq!(rows as u64, *count, "{name}: rows in SQLite vs summary");
        assert_eq!(
            theirs["fids"].as_array().expect("fids").len() as u64,
            *count,
            "{name}: features read by pyogrio 0.10.0"
        );
        compare_attributes(&connection, name, theirs);
    }

    compare_points(
        &connection,
        "veldmark_records",
        layer(&json, "veldmark_records"),
    );
    compare_points(
        &connection,
        "veldmark_towns",
        layer(&json, "veldmark_towns"),
    );
    compare_records_with_read_points(&path, layer(&json, "veldmark_records"));
    for name in ["veldmark_districts", "veldmark_truth"] {
        compare_polygons(&path, name, layer(&json, name));
    }
}

/// Every attribute of every feature: pyogrio 0.10.0 (`pyogrio.raw.read`) against the values
/// stored in SQLite, matched by fid.
fn compare_attributes(connection: &rusqlite::Connection, name: &str, theirs: &Value) {
    let fields: Vec<&str> = theirs["fields"]
        .as_array()
        .expect("fields")
        .iter()
        .map(|f| f.as_str().expect("field"))
        .collect();
    let mut sql = "SELECT fid".to_owned();
    for f in &fields {
        sql.push_str(", ");
        sql.push_str(&quote_identifier(f));
    }
    sql.push_str(&format!(" FROM {} ORDER BY fid", quote_identifier(name)));
    let mut statement = connection.prepare(&sql).expect("prepare");
    let mut rows = statement.query([]).expect("query");
    let fids = theirs["fids"].as_array().expect("fids");
    let mut row_index = 0;
    while let Some(row) = rows.next().expect("row") {
        let fid: i64 = row.get(0).expect("fid");
        assert_eq!(fids[row_index].as_i64(), Some(fid), "{name}: fid order");
        for (k, field) in fields.iter().enumerate() {
            let their = &theirs["values"][field][row_index];
            let context = || format!("{name} fid {fid} field {field}: pyogrio 0.10.0 {their}");
            match row.get_ref(k + 1).expect("value") {
                ValueRef::Null => assert!(their.is_null(), "{} vs NULL", context()),
                // pyogrio 0.10.0 gives an integer column that holds NULLs as float64 with NaN
                // (printed 6.0, null): exact for |v| < 2^53.
                ValueRef::Integer(v) => assert!(
                    their.as_i64() == Some(v) || their.as_f64() == Some(v as f64),
                    "{} vs {v}",
                    context()
                ),
                ValueRef::Real(v) => {
                    assert!(same_double(f64_of(their), v), "{} vs {v:?}", context());
                }
                ValueRef::Text(t) => {
                    let ours = std::str::from_utf8(t).expect("UTF-8");
                    let their = their.as_str().unwrap_or_else(|| panic!("{}", context()));
                    if theirs["datetime_as_string"].get(field).is_some() {
                        // The toolbox writes date-times as UTC with the `Z` suffix. pyogrio's
                        // datetime64 text has no zone; the instant must be the same.
                        let naive = ours.strip_suffix('Z').unwrap_or_else(|| {
                            panic!("{name} fid {fid} {field}: stored '{ours}' lacks the Z suffix")
                        });
                        assert_eq!(their, naive, "{}", context());
                    } else {
                        assert_eq!(their, ours, "{}", context());
                    }
                }
                ValueRef::Blob(_) => panic!("{}: unexpected BLOB attribute", context()),
            }
        }
        row_index += 1;
    }
    assert_eq!(row_index, fids.len(), "{name}: row count");
}

/// Point coordinates: pyogrio 0.10.0's WKB decoded in read_back.py (bit patterns) against our
/// `blob::decode_point` on the stored GeoPackage blobs. Exact: both read the same 8 bytes.
fn compare_points(connection: &rusqlite::Connection, name: &str, theirs: &Value) {
    let mut statement = connection
        .prepare(&format!(
            "SELECT fid, geom FROM {} ORDER BY fid",
            quote_identifier(name)
        ))
        .expect("prepare");
    let rows: Vec<(i64, Vec<u8>)> = statement
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .expect("query")
        .map(|r| r.expect("row"))
        .collect();
    let fids = theirs["fids"].as_array().expect("fids");
    assert_eq!(rows.len(), fids.len(), "{name}: points");
    let (mut x_min, mut y_min) = (f64::INFINITY, f64::INFINITY);
    let (mut x_max, mut y_max) = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    for (i, (fid, blob)) in rows.iter().enumerate() {
        assert_eq!(fids[i].as_i64(), Some(*fid), "{name}: fid order");
        let PointBlob::Point(x, y) = decode_point(blob) else {
            panic!("{name} fid {fid}: not a point: {:?}", decode_point(blob));
        };
        let their_x = f64::from_bits(theirs["x_bits"][i].as_u64().expect("x_bits"));
        let their_y = f64::from_bits(theirs["y_bits"][i].as_u64().expect("y_bits"));
        assert_eq!(
            (x.to_bits(), y.to_bits()),
            (their_x.to_bits(), their_y.to_bits()),
            "{name} fid {fid}: ours ({x:?}, {y:?}), pyogrio 0.10.0 ({their_x:?}, {their_y:?})"
        );
        // Geographic CRS in traditional GIS order: x is the longitude (Veldmark lies near 140° W).
        assert!((-180.0..=-100.0).contains(&x) && (0.0..=60.0).contains(&y));
        x_min = x_min.min(x);
        y_min = y_min.min(y);
        x_max = x_max.max(x);
        y_max = y_max.max(y);
    }
    compare_bounds(name, [x_min, y_min, x_max, y_max], theirs);
}

/// pyogrio 0.10.0 `read_info(...)["total_bounds"]` against the extent of the geometries.
/// GDAL takes it from the extent stored in `gpkg_contents`, which it writes as text with 15
/// significant digits: for |values| < 1000 that is within 5e-13; we allow 1e-12 degrees
/// (≈ 0.1 µm on the ground).
fn compare_bounds(name: &str, ours: [f64; 4], theirs: &Value) {
    let bounds = theirs["total_bounds"].as_array().expect("total_bounds");
    for (k, (our, their)) in ours.iter().zip(bounds).enumerate() {
        let their = f64_of(their);
        assert!(
            (our - their).abs() <= 1e-12,
            "{name}: bound {k}: ours {our:?}, pyogrio 0.10.0 {their:?}"
        );
    }
}

/// The records layer as every tool reads it (`read_points`, projected to the working CRS)
/// against pyogrio 0.10.0: same fids, the same stance text and the same UTC instant per row.
fn compare_records_with_read_points(path: &Path, theirs: &Value) {
    let points = read_points(
        path,
        Some("veldmark_records"),
        &[
            ("stance", FieldWant::Text),
            ("time_utc", FieldWant::DateTime),
        ],
        None,
    )
    .expect("read_points");
    let index: HashMap<i64, usize> = theirs["fids"]
        .as_array()
        .expect("fids")
        .iter()
        .enumerate()
        .map(|(i, f)| (f.as_i64().expect("fid"), i))
        .collect();
    assert_eq!(points.fids.len(), index.len());
    let (Column::Text(stance), Column::DateTime(times)) = (&points.columns[0], &points.columns[1])
    else {
        panic!("read_points returned other column kinds");
    };
    for (row, fid) in points.fids.iter().enumerate() {
        let i = index[fid];
        assert_eq!(
            stance.get(row),
            theirs["values"]["stance"][i].as_str(),
            "fid {fid}: stance, ours vs pyogrio 0.10.0"
        );
        let seconds = times[row].unwrap_or_else(|| panic!("fid {fid}: time_utc unreadable"));
        let fields = utc_fields(seconds);
        // pyogrio 0.10.0 datetime64[ms] → str(): `2026-04-15T21:46:12.000`.
        assert_eq!(
            theirs["values"]["time_utc"][i].as_str(),
            Some(format!("{}.000", format_fields(fields, '-', 'T')).as_str()),
            "fid {fid}: time_utc, ours {seconds} s"
        );
        // The same field as GDAL 3.9.1's own text (`datetime_as_string=True`): `+00` is OGR's
        // time-zone flag 100, i.e. the value is marked UTC, not local or unknown.
        assert_eq!(
            theirs["datetime_as_string"]["time_utc"][i].as_str(),
            Some(format!("{}+00", format_fields(fields, '/', ' ')).as_str()),
            "fid {fid}: time_utc zone as GDAL 3.9.1 reports it"
        );
    }
}

/// Polygon layers: counts, the exact WKB byte length of every feature (a structural check of
/// parts, rings and vertices: pyogrio 0.10.0's WKB vs our `read_polygons`) and the bounds.
fn compare_polygons(path: &Path, name: &str, theirs: &Value) {
    let ours = read_polygons(path, Some(name), &[], PolygonCrs::AsStored).expect("read_polygons");
    let fids: Vec<i64> = theirs["fids"]
        .as_array()
        .expect("fids")
        .iter()
        .map(|f| f.as_i64().expect("fid"))
        .collect();
    assert_eq!(ours.fids, fids, "{name}: fids, ours vs pyogrio 0.10.0");
    let lengths = theirs["wkb_lengths"].as_array().expect("wkb_lengths");
    let mut bounds = [
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    ];
    for (i, multi) in ours.polygons.iter().enumerate() {
        // Vertices per ring per polygon: all the WKB length depends on.
        let mut shape: Vec<Vec<usize>> = Vec::new();
        for polygon in &multi.0 {
            let mut rings = vec![polygon.exterior().0.len()];
            rings.extend(polygon.interiors().iter().map(|r| r.0.len()));
            shape.push(rings);
            for c in polygon
                .exterior()
                .0
                .iter()
                .chain(polygon.interiors().iter().flat_map(|r| r.0.iter()))
            {
                bounds[0] = bounds[0].min(c.x);
                bounds[1] = bounds[1].min(c.y);
                bounds[2] = bounds[2].max(c.x);
                bounds[3] = bounds[3].max(c.y);
            }
        }
        assert_eq!(
            lengths[i].as_u64(),
            Some(multipolygon_wkb_len(&shape) as u64),
            "{name} fid {}: WKB bytes, pyogrio 0.10.0 vs our rings {shape:?}",
            fids[i]
        );
    }
    compare_bounds(name, bounds, theirs);
}

/// Cell values row-major, row 0 north: distinct everywhere (so a flip or transpose shows), with
/// fractions f32 must round, negatives, and NaN (no data) in the cells given.
fn surface_values(grid: &Grid, offset: f32, missing: &[(usize, usize)]) -> Vec<f32> {
    let mut values = Vec::with_capacity(grid.len());
    for row in 0..grid.rows {
        for col in 0..grid.cols {
            let v = (row * 1000 + col) as f32 * 0.1 + offset;
            values.push(if missing.contains(&(row, col)) {
                f32::NAN
            } else {
                v
            });
        }
    }
    values
}

fn provenance(tool: &str) -> Provenance {
    Provenance {
        tool: tool.into(),
        version: stance_core::VERSION.into(),
        parameters: json!({}),
        inputs: vec![],
        seed: 0,
        started_at: "2026-01-01T00:00:00Z".into(),
        run_time_s: 0.0,
        results: json!({}),
    }
}

struct Written {
    name: &'static str,
    grid: Grid,
    values: Vec<f32>,
    epsg: i64,
    unit: &'static str,
}

/// One staging run that writes one surface into `path` (created, or merged into it).
fn publish_surface(path: &Path, surface: &Written) {
    let srs = crs::parse(&format!("EPSG:{}", surface.epsg)).expect("srs");
    let mut staging = Staging::new(path, false).expect("staging");
    staging
        .write_surface(
            surface.name,
            &Surface {
                grid: &surface.grid,
                values: &surface.values,
                srs: &srs,
                field_name: "intensity",
                unit: surface.unit,
                quantity: "test",
            },
        )
        .expect("write_surface");
    staging
        .publish(&provenance("independent_reader"), &AtomicBool::new(false))
        .expect("publish");
}

#[test]
fn surfaces_read_back_identically_with_rasterio() {
    let Some(python) = stance_tests::reference_python() else {
        return;
    };
    let dir = stance_tests::out_dir("independent_reader/surfaces");
    let path = dir.join("surfaces.gpkg");
    // First run: a new file (published by hard link). 37 × 23 is not square and smaller than
    // one 256-pixel tile; the corners are distinct, so a flip or a transpose shows.
    let first_grid = Grid {
        x_min: 500_000.0,
        y_min: 4_100_000.0,
        cell_m: 12.5,
        cols: 37,
        rows: 23,
    };
    let first = Written {
        name: "surf",
        grid: first_grid,
        values: surface_values(&first_grid, -50.0, &[(0, 1), (5, 7), (11, 18), (22, 36)]),
        epsg: 32610,
        unit: "points per km2",
    };
    // Second run into the same file (the merge path), another CRS (a second
    // gpkg_spatial_ref_sys row) and 261 × 270 cells: 2 × 2 tiles, the last ones partial.
    let second_grid = Grid {
        x_min: 4_321_000.0,
        y_min: 3_210_000.0,
        cell_m: 100.0,
        cols: 261,
        rows: 270,
    };
    let second = Written {
        name: "surf_second",
        grid: second_grid,
        values: surface_values(
            &second_grid,
            0.3,
            &[(0, 0), (255, 255), (256, 256), (269, 260)],
        ),
        epsg: 3035,
        unit: "points per km2",
    };
    publish_surface(&path, &first);
    publish_surface(&path, &second);

    let json = read_back(&python, &path);
    assert!(json["vector"].as_array().expect("vector").is_empty());
    let rasters = json["raster"].as_array().expect("raster");
    let names: Vec<&str> = rasters
        .iter()
        .map(|r| r["name"].as_str().expect("name"))
        .collect();
    assert_eq!(
        names,
        ["surf", "surf_second"],
        "rasters listed in gpkg_contents"
    );
    for written in [&first, &second] {
        let theirs = rasters
            .iter()
            .find(|r| r["name"] == written.name)
            .expect("raster");
        compare_surface(&path, written, theirs);
    }
}

/// One surface: rasterio 1.4.3 (GDAL 3.9.3 in its wheel) against the values we wrote and
/// against our own reader `raster::read`.
fn compare_surface(path: &Path, written: &Written, theirs: &Value) {
    let name = written.name;
    let grid = &written.grid;
    assert_eq!(
        theirs["width"].as_u64(),
        Some(grid.cols as u64),
        "{name}: width"
    );
    assert_eq!(
        theirs["height"].as_u64(),
        Some(grid.rows as u64),
        "{name}: height"
    );
    assert_eq!(theirs["count"].as_u64(), Some(1), "{name}: bands");
    // The geotransform's numbers are short decimals (integers, 12.5), which every JSON parser
    // reads exactly: compared exactly.
    let transform: Vec<f64> = theirs["transform"]
        .as_array()
        .expect("transform")
        .iter()
        .map(f64_of)
        .collect();
    assert_eq!(
        transform,
        grid.geo_transform(),
        "{name}: geotransform, rasterio 1.4.3 vs Grid::geo_transform"
    );
    assert_eq!(
        theirs["crs_epsg"].as_i64(),
        Some(written.epsg),
        "{name}: CRS, rasterio 1.4.3"
    );
    assert_eq!(
        theirs["dtype"], "float32",
        "{name}: data type, rasterio 1.4.3"
    );
    assert_eq!(
        theirs["nodata"].as_f64(),
        Some(f64::from(NODATA)),
        "{name}: nodata, rasterio 1.4.3"
    );
    // Values: a Float32 widened to double prints as a decimal that names it, and a parse that
    // is at most 1 ulp (of f64) off still rounds back to the same f32: exact as f32.
    let values = theirs["values"].as_array().expect("values");
    assert_eq!(values.len(), grid.len(), "{name}: cells");
    let mut missing = 0;
    for (i, (their, ours)) in values.iter().zip(&written.values).enumerate() {
        let (row, col) = (i / grid.cols, i % grid.cols);
        if ours.is_nan() {
            missing += 1;
            assert!(
                their.is_null(),
                "{name} row {row} col {col}: NaN written, rasterio 1.4.3 read {their}"
            );
        } else {
            let their = f64_of(their) as f32;
            assert_eq!(
                their.to_bits(),
                ours.to_bits(),
                "{name} row {row} col {col}: wrote {ours:?}, rasterio 1.4.3 read {their:?}"
            );
        }
    }
    assert_eq!(missing, 4);
    // Our own reader agrees too (grid exactly, values bit for bit, NaN where no data).
    let own = stance_core::gpkg::raster::read(path, name).expect("raster::read");
    assert_eq!(own.grid, *grid, "{name}: grid, our reader");
    for (i, (own, ours)) in own.values.iter().zip(&written.values).enumerate() {
        assert!(
            own.to_bits() == ours.to_bits() || (own.is_nan() && ours.is_nan()),
            "{name} cell {i}: our reader {own:?}, written {ours:?}"
        );
    }
    // GDAL 3.9.3 reports the `uom` of gpkg_2d_gridded_coverage_ancillary as the band unit.
    assert_eq!(theirs["unit"], written.unit, "{name}: unit, rasterio 1.4.3");
}
