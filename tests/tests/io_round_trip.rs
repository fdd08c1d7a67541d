//! GeoPackage and CRS I/O round trips through the core library: points, polygons, surfaces,
//! date-times, several layers per file, and projections checked against GDAL's `gdaltransform`.

use std::path::Path;
use std::process::Command;
use std::sync::atomic::AtomicBool;

use approx::assert_abs_diff_eq;
use serde_json::json;
use stance_core::gpkg::read::{read_points, read_polygons, Column, FieldWant, PolygonCrs};
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging};
use stance_core::gpkg::{crs, raster, Provenance};
use stance_core::grid::Grid;
use stance_tests::{out_dir, rows, tables};

fn provenance() -> Provenance {
    Provenance {
        tool: "io-test".into(),
        version: "0".into(),
        parameters: json!({}),
        inputs: vec![],
        seed: 0,
        started_at: "2026-01-01T00:00:00Z".into(),
        run_time_s: 0.0,
        results: json!({}),
    }
}

fn publish(staging: Staging) {
    staging
        .publish(&provenance(), &AtomicBool::new(false))
        .expect("publish");
}

/// Runs GDAL's own `gdaltransform` (Debian gdal-bin 3.6) on one point.
fn gdaltransform(source: &str, target: &str, x: f64, y: f64) -> (f64, f64) {
    let output = Command::new("gdaltransform")
        .args(["-s_srs", source, "-t_srs", target, "-output_xy"])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .and_then(|mut child| {
            use std::io::Write;
            child
                .stdin
                .take()
                .expect("stdin")
                .write_all(format!("{x} {y}\n").as_bytes())?;
            child.wait_with_output()
        })
        .expect("gdaltransform runs (Debian package gdal-bin)");
    let text = String::from_utf8_lossy(&output.stdout);
    let values: Vec<f64> = text
        .split_whitespace()
        .map(|v| v.parse().expect("number"))
        .collect();
    (values[0], values[1])
}

#[test]
fn points_with_fields_and_utc_times_round_trip_exactly() {
    let dir = out_dir("io_points");
    let path = dir.join("points.gpkg");
    let srs = crs::parse("EPSG:32610").expect("UTM 10N");
    let points = [
        (500_000.0, 3_870_000.0),
        (512_345.678, 3_880_001.25),
        (-1.5e-3, 1e7),
    ];
    let times = [0_i64, 1_772_582_767, 1_790_812_799];
    let mut staging = Staging::new(&path, false).expect("staging");
    let fields = [
        FieldDef::new("stance", FieldKind::Text),
        FieldDef::new("weight", FieldKind::Real),
        FieldDef::new("time_utc", FieldKind::DateTime),
    ];
    let mut writer = staging
        .create_vector("pts", GeometryKind::Point, Some(&srs), &fields)
        .expect("layer");
    for (i, (x, y)) in points.iter().enumerate() {
        writer
            .add(
                Shape::Point(*x, *y),
                &[
                    FieldData::Text(["oppose", "neutral", "support"][i]),
                    FieldData::Real(i as f64 * 0.5),
                    FieldData::DateTime(times[i]),
                ],
            )
            .expect("add");
    }
    writer.finish().expect("finish");
    publish(staging);

    // Projected metres: the working CRS is the layer's own, so coordinates come back unchanged.
    let layer = read_points(
        &path,
        None,
        &[
            ("stance", FieldWant::Text),
            ("weight", FieldWant::Real),
            ("time_utc", FieldWant::DateTime),
        ],
        None,
    )
    .expect("read");
    assert_eq!(layer.layer, "pts");
    assert_eq!(layer.x, points.iter().map(|p| p.0).collect::<Vec<_>>());
    assert_eq!(layer.y, points.iter().map(|p| p.1).collect::<Vec<_>>());
    let Column::Text(stance) = &layer.columns[0] else {
        panic!("text column")
    };
    assert_eq!(
        (0..3)
            .map(|i| stance.get(i).expect("value"))
            .collect::<Vec<_>>(),
        ["oppose", "neutral", "support"]
    );
    let Column::Real(weight) = &layer.columns[1] else {
        panic!("real column")
    };
    assert_eq!(weight, &vec![Some(0.0), Some(0.5), Some(1.0)]);
    let Column::DateTime(read_times) = &layer.columns[2] else {
        panic!("date-time column")
    };
    assert_eq!(
        read_times,
        &times.iter().map(|t| Some(*t)).collect::<Vec<_>>()
    );
    // Stored as text with the `Z` suffix (UTC), as the toolbox writes every date-time.
    let stored = rows(&path, "SELECT time_utc FROM pts ORDER BY fid");
    // 1_772_582_767 s = 2026-03-04 (20516 days × 86400 s) + 367 s; GeoPackage DATETIME form.
    assert_eq!(stored[1][0], "2026-03-04T00:06:07.000Z");
    assert!(stored.iter().all(|r| r[0].ends_with('Z')), "{stored:?}");
    // A missing field is named with the fields that exist.
    let error =
        read_points(&path, None, &[("nope", FieldWant::Text)], None).expect_err("missing field");
    let message = error.to_string();
    assert!(
        message.contains("'nope'") && message.contains("stance") && message.contains("pts"),
        "{message}"
    );
    assert_eq!(error.exit_code(), 2);
}

#[test]
fn polygons_round_trip_exactly_and_several_layers_share_a_file() {
    let dir = out_dir("io_polygons");
    let path = dir.join("mixed.gpkg");
    let srs = crs::parse("EPSG:32610").expect("UTM 10N");
    let square = geo_polygon(&[(0.0, 0.0), (100.0, 0.0), (100.0, 100.0), (0.0, 100.0)]);
    let with_hole = geo_types::Polygon::new(
        geo_types::LineString::from(vec![
            (200.0, 0.0),
            (300.0, 0.0),
            (300.0, 100.0),
            (200.0, 100.0),
            (200.0, 0.0),
        ]),
        vec![geo_types::LineString::from(vec![
            (220.0, 20.0),
            (220.0, 40.0),
            (240.0, 40.0),
            (240.0, 20.0),
            (220.0, 20.0),
        ])],
    );
    let mut staging = Staging::new(&path, false).expect("staging");
    let mut writer = staging
        .create_vector(
            "areas",
            GeometryKind::MultiPolygon,
            Some(&srs),
            &[FieldDef::new("code", FieldKind::Text)],
        )
        .expect("layer");
    writer
        .add(Shape::Polygon(&square), &[FieldData::Text("A")])
        .expect("add");
    writer
        .add(Shape::Polygon(&with_hole), &[FieldData::Text("B")])
        .expect("add");
    writer.finish().expect("finish");
    let mut writer = staging
        .create_vector(
            "table_only",
            GeometryKind::None,
            None,
            &[FieldDef::new("n", FieldKind::Integer)],
        )
        .expect("table");
    writer
        .add(Shape::None, &[FieldData::Integer(42)])
        .expect("add");
    writer.finish().expect("finish");
    let grid = Grid {
        x_min: 0.0,
        y_min: 0.0,
        cell_m: 50.0,
        cols: 6,
        rows: 2,
    };
    let values: Vec<f32> = (0..12).map(|v| v as f32 * 0.25).collect();
    staging
        .write_surface(
            "surface_a",
            &raster::Surface {
                grid: &grid,
                values: &values,
                srs: &srs,
                field_name: "v",
                unit: "unitless",
                quantity: "test",
            },
        )
        .expect("surface");
    publish(staging);

    let layer = read_polygons(
        &path,
        Some("areas"),
        &[("code", FieldWant::Text)],
        PolygonCrs::AsStored,
    )
    .expect("read");
    assert_eq!(layer.polygons.len(), 2);
    assert_eq!(layer.polygons[0].0[0], square);
    assert_eq!(layer.polygons[1].0[0], with_hole);
    assert_eq!(
        layer.columns[0].as_texts(),
        vec![Some("A".to_owned()), Some("B".to_owned())]
    );
    assert_eq!(crs::label(&layer.srs), "EPSG:32610");
    assert_eq!(
        rows(&path, "SELECT n FROM table_only"),
        vec![vec!["42".to_owned()]]
    );
    assert_eq!(tables(&path), ["areas", "surface_a", "table_only"]);

    // A second run adds to the existing file (the merge path) without touching what is there.
    let before = rows(&path, "SELECT * FROM areas");
    let mut staging = Staging::new(&path, false).expect("staging");
    staging
        .write_surface(
            "surface_b",
            &raster::Surface {
                grid: &grid,
                values: &values,
                srs: &srs,
                field_name: "v",
                unit: "unitless",
                quantity: "test",
            },
        )
        .expect("surface");
    let mut writer = staging
        .create_vector("areas_copy", GeometryKind::MultiPolygon, Some(&srs), &[])
        .expect("layer");
    writer.add(Shape::Polygon(&square), &[]).expect("add");
    writer.finish().expect("finish");
    publish(staging);
    assert_eq!(
        tables(&path),
        [
            "areas",
            "areas_copy",
            "surface_a",
            "surface_b",
            "table_only"
        ]
    );
    assert_eq!(rows(&path, "SELECT * FROM areas"), before);
    assert_eq!(
        raster::read(&path, "surface_b").expect("read").values,
        values
    );
    assert_eq!(
        read_polygons(&path, Some("areas_copy"), &[], PolygonCrs::AsStored)
            .expect("read")
            .polygons[0]
            .0[0],
        square
    );
    // GDAL itself opens the merged layers (its R-tree and feature count included).
    let dataset = gdal::Dataset::open(&path).expect("GDAL opens the merged file");
    use gdal::vector::LayerAccess;
    assert_eq!(
        dataset
            .layer_by_name("areas_copy")
            .expect("layer")
            .feature_count(),
        1
    );
}

fn geo_polygon(ring: &[(f64, f64)]) -> geo_types::Polygon<f64> {
    let mut ring: Vec<(f64, f64)> = ring.to_vec();
    ring.push(ring[0]);
    geo_types::Polygon::new(geo_types::LineString::from(ring), vec![])
}

#[test]
fn surfaces_round_trip_exactly_with_nodata_unit_and_quantity() {
    let dir = out_dir("io_surfaces");
    let path = dir.join("surface.gpkg");
    let srs = crs::parse("EPSG:32610").expect("srs");
    // 300 × 7 spans two 256-pixel tiles across and one down.
    let grid = Grid {
        x_min: 499_000.0,
        y_min: 3_870_000.0,
        cell_m: 125.0,
        cols: 300,
        rows: 7,
    };
    let mut values: Vec<f32> = (0..grid.len()).map(|i| (i as f32).sqrt() - 10.0).collect();
    values[5] = f32::NAN;
    values[2099] = f32::NAN;
    let mut staging = Staging::new(&path, false).expect("staging");
    staging
        .write_surface(
            "intensity",
            &raster::Surface {
                grid: &grid,
                values: &values,
                srs: &srs,
                field_name: "intensity_support",
                unit: "points per km2",
                quantity: "support records per km2",
            },
        )
        .expect("write");
    publish(staging);
    let back = raster::read(&path, "intensity").expect("read");
    assert_eq!(back.grid, grid);
    for (i, (a, b)) in values.iter().zip(&back.values).enumerate() {
        assert!(
            a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
            "cell {i}: wrote {a}, read {b}"
        );
    }
    let ancillary = rows(&path, "SELECT data_null, uom, field_name, quantity_definition, datatype FROM gpkg_2d_gridded_coverage_ancillary WHERE tile_matrix_set_name = 'intensity'");
    assert_eq!(
        ancillary,
        vec![vec![
            "-9999.0".to_owned(),
            "points per km2".into(),
            "intensity_support".into(),
            "support records per km2".into(),
            "float".into()
        ]]
    );
    let error = raster::read(&path, "nope").expect_err("missing surface");
    assert!(error.to_string().contains("intensity"), "{error}");
}

#[test]
fn laea_centred_projection_matches_gdaltransform() {
    let definition = crs::laea_centred(-140.4, 35.0).expect("laea");
    let proj = definition.to_proj4().expect("proj string");
    let wgs84 = crs::wgs84().expect("wgs84");
    for (lon, lat) in [(-140.4, 35.0), (-139.85, 35.31), (-141.0, 34.6)] {
        let (mut x, mut y) = ([lon], [lat]);
        crs::transform(&wgs84, &definition, &mut x, &mut y).expect("transform");
        let (ex, ey) = gdaltransform("EPSG:4326", &proj, lon, lat);
        // gdaltransform prints about 9 significant digits; 1e-3 m covers its rounding.
        assert_abs_diff_eq!(x[0], ex, epsilon = 1e-3);
        assert_abs_diff_eq!(y[0], ey, epsilon = 1e-3);
    }
    // The centre maps to the origin, whatever the tool (definition of the projection).
    let (mut x, mut y) = ([-140.4], [35.0]);
    crs::transform(&wgs84, &definition, &mut x, &mut y).expect("transform");
    assert_abs_diff_eq!(x[0], 0.0, epsilon = 1e-6);
    assert_abs_diff_eq!(y[0], 0.0, epsilon = 1e-6);
}

#[test]
fn geographic_and_foot_based_layers_are_projected_to_metres() {
    let dir = out_dir("io_crs");
    // Geographic input → LAEA centred on the data; compare with gdaltransform.
    let geographic = dir.join("geo.gpkg");
    write_points(&geographic, "EPSG:4326", &[(-140.0, 35.0), (-140.8, 35.2)]);
    let layer = read_points(&geographic, None, &[], None).expect("read");
    assert!(crs::is_projected_metres(&layer.srs));
    let proj = layer.srs.to_proj4().expect("proj");
    assert!(
        proj.contains("+proj=laea")
            && proj.contains("+lat_0=35.1")
            && proj.contains("+lon_0=-140.4"),
        "{proj}"
    );
    let (ex, ey) = gdaltransform("EPSG:4326", &proj, -140.0, 35.0);
    assert_abs_diff_eq!(layer.x[0], ex, epsilon = 1e-3);
    assert_abs_diff_eq!(layer.y[0], ey, epsilon = 1e-3);

    // US survey feet (EPSG:2227, California zone 3): converted, never taken as metres.
    let feet = dir.join("feet.gpkg");
    write_points(
        &feet,
        "EPSG:2227",
        &[(6_000_000.0, 2_100_000.0), (6_003_280.8, 2_100_000.0)],
    );
    let layer = read_points(&feet, None, &[], None).expect("read");
    assert!(crs::is_projected_metres(&layer.srs));
    // 3280.8 US survey feet = 1000.0 m (1 ftUS = 1200/3937 m); on a small LAEA the distance
    // is preserved to well within 1 m (scale error < 1e-4 over this extent).
    let distance = ((layer.x[1] - layer.x[0]).powi(2) + (layer.y[1] - layer.y[0]).powi(2)).sqrt();
    assert_abs_diff_eq!(distance, 3280.8 * 1200.0 / 3937.0, epsilon = 0.2);
    // --crs in feet is refused with the unit named.
    let error = read_points(&feet, None, &[], Some("EPSG:2227")).expect_err("feet working CRS");
    assert!(error.to_string().contains("metres"), "{error}");
    // --crs in metres is used as given and agrees with gdaltransform.
    let layer = read_points(&geographic, None, &[], Some("EPSG:32608")).expect("read");
    let (ex, ey) = gdaltransform("EPSG:4326", "EPSG:32608", -140.0, 35.0);
    assert_abs_diff_eq!(layer.x[0], ex, epsilon = 1e-3);
    assert_abs_diff_eq!(layer.y[0], ey, epsilon = 1e-3);
}

fn write_points(path: &Path, srs: &str, points: &[(f64, f64)]) {
    let srs = crs::parse(srs).expect("srs");
    let mut staging = Staging::new(path, false).expect("staging");
    let mut writer = staging
        .create_vector("pts", GeometryKind::Point, Some(&srs), &[])
        .expect("layer");
    for (x, y) in points {
        writer.add(Shape::Point(*x, *y), &[]).expect("add");
    }
    writer.finish().expect("finish");
    publish(staging);
}

#[test]
fn a_layer_copy_keeps_geometry_crs_and_fields_and_adds_columns() {
    use stance_core::gpkg::stage::ExtraColumn;
    let dir = out_dir("io_copy");
    let path = dir.join("areas.gpkg");
    let srs = crs::parse("EPSG:32610").expect("srs");
    let mut staging = Staging::new(&path, false).expect("staging");
    let fields = [
        FieldDef::new("code", FieldKind::Text),
        FieldDef::new("population", FieldKind::Integer),
    ];
    let mut writer = staging
        .create_vector("areas", GeometryKind::MultiPolygon, Some(&srs), &fields)
        .expect("layer");
    let squares: Vec<_> = (0..3)
        .map(|i| {
            geo_polygon(&[
                (i as f64 * 10.0, 0.0),
                (i as f64 * 10.0 + 10.0, 0.0),
                (i as f64 * 10.0 + 10.0, 10.0),
                (i as f64 * 10.0, 10.0),
            ])
        })
        .collect();
    for (i, square) in squares.iter().enumerate() {
        writer
            .add(
                Shape::Polygon(square),
                &[
                    FieldData::Text(["a", "b", "c"][i]),
                    FieldData::Integer(i as i64 * 100),
                ],
            )
            .expect("add");
    }
    writer.finish().expect("finish");
    publish(staging);
    let areas = read_polygons(
        &path,
        Some("areas"),
        &[("code", FieldWant::Text)],
        PolygonCrs::AsStored,
    )
    .expect("read");
    let mut staging = Staging::new(&path, false).expect("staging");
    let extra = [
        (
            FieldDef::new("rate", FieldKind::Real),
            ExtraColumn::Real(vec![Some(0.5), None, Some(f64::NAN)]),
        ),
        (
            FieldDef::new("flag", FieldKind::Text),
            ExtraColumn::Text(vec![None, Some("island".into()), None]),
        ),
    ];
    staging
        .copy_with_fields(&path, "areas", "areas_rated", &areas.fids, &extra)
        .expect("copy");
    let clash = [(
        FieldDef::new("Code", FieldKind::Real),
        ExtraColumn::Real(vec![None; 3]),
    )];
    assert!(
        staging
            .copy_with_fields(&path, "areas", "other", &areas.fids, &clash)
            .is_err(),
        "a clashing field is refused"
    );
    publish(staging);
    assert_eq!(
        rows(
            &path,
            "SELECT code, population, rate, flag FROM areas_rated ORDER BY fid"
        ),
        vec![
            vec!["a".to_owned(), "0".into(), "0.5".into(), "NULL".into()],
            vec!["b".into(), "100".into(), "NULL".into(), "island".into()],
            vec!["c".into(), "200".into(), "NULL".into(), "NULL".into()],
        ]
    );
    let copy =
        read_polygons(&path, Some("areas_rated"), &[], PolygonCrs::AsStored).expect("read copy");
    assert_eq!(copy.polygons, areas.polygons);
    assert_eq!(crs::label(&copy.srs), "EPSG:32610");
}

#[test]
fn a_surface_merged_into_a_vector_only_file_brings_what_coverages_need() {
    let dir = out_dir("io_merge_surface");
    let path = dir.join("vector_first.gpkg");
    write_points(&path, "EPSG:32610", &[(500_000.0, 3_870_000.0)]);
    assert!(rows(
        &path,
        "SELECT srs_id FROM gpkg_spatial_ref_sys WHERE srs_id = 4979"
    )
    .is_empty());
    let srs = crs::parse("EPSG:32610").expect("srs");
    let grid = Grid {
        x_min: 0.0,
        y_min: 0.0,
        cell_m: 10.0,
        cols: 3,
        rows: 2,
    };
    let values = [1.0f32, 2.0, 3.0, 4.0, 5.0, f32::NAN];
    let mut staging = Staging::new(&path, false).expect("staging");
    staging
        .write_surface(
            "surface",
            &raster::Surface {
                grid: &grid,
                values: &values,
                srs: &srs,
                field_name: "v",
                unit: "unitless",
                quantity: "test",
            },
        )
        .expect("surface");
    publish(staging);
    // OGC 17-066r1 requires srs_id 4979 once a coverage is present; the validator (make test)
    // checks the rest of the file.
    assert_eq!(
        rows(
            &path,
            "SELECT srs_id FROM gpkg_spatial_ref_sys WHERE srs_id = 4979"
        ),
        vec![vec!["4979".to_owned()]]
    );
    assert_eq!(
        raster::read(&path, "surface").expect("read").values[..5],
        values[..5]
    );
}

/// A layer large enough to be read in parallel fid ranges (more than 200,000 fids apart) reads
/// back exactly as written: the same rows in fid order across the range boundaries, text codes
/// merged in order of first appearance (values first seen in a later range included), NULLs
/// kept, and gaps in the fids (deleted features) skipped. The truth is what the test wrote.
#[test]
fn large_point_layers_read_in_parallel_ranges_exactly() {
    let dir = out_dir("io_parallel_read");
    let path = dir.join("many.gpkg");
    let srs = crs::parse("EPSG:32610").expect("UTM 10N");
    let n = 250_000usize;
    let label = |i: usize| -> Option<String> {
        match i % 7 {
            0 => None,
            // A value that appears only in the last range.
            _ if i > 240_000 && i.is_multiple_of(5) => Some("late".into()),
            k => Some(["oppose", "neutral", "support"][k % 3].to_owned()),
        }
    };
    let mut staging = Staging::new(&path, false).expect("staging");
    let fields = [FieldDef::new("stance", FieldKind::Text)];
    let mut writer = staging
        .create_vector("pts", GeometryKind::Point, Some(&srs), &fields)
        .expect("layer");
    for i in 0..n {
        let text = label(i);
        let value = match &text {
            Some(t) => FieldData::Text(t),
            None => FieldData::Null,
        };
        writer
            .add(Shape::Point(i as f64, -(i as f64) * 0.5), &[value])
            .expect("add");
    }
    writer.finish().expect("finish");
    publish(staging);
    let connection = rusqlite::Connection::open(&path).expect("open");
    connection
        .execute("DELETE FROM pts WHERE fid % 1000 = 3", [])
        .expect("gaps");
    drop(connection);
    let layer = read_points(&path, None, &[("stance", FieldWant::Text)], None).expect("read");
    let kept: Vec<usize> = (0..n).filter(|i| (i + 1) % 1000 != 3).collect();
    assert_eq!(layer.fids.len(), kept.len());
    let Column::Text(stance) = &layer.columns[0] else {
        panic!("text column")
    };
    for (row, &i) in kept.iter().enumerate() {
        assert_eq!(layer.fids[row], i as i64 + 1);
        assert_eq!((layer.x[row], layer.y[row]), (i as f64, -(i as f64) * 0.5));
        assert_eq!(stance.get(row), label(i).as_deref(), "fid {}", i + 1);
    }
    assert_eq!(stance.values.last().map(String::as_str), Some("late"));
    assert_eq!(stance.values.len(), 4);
}

/// Two runs write layers in two different custom (non-EPSG) CRSs into one file: the second
/// CRS gets a new srs_id in the output, and its geometry blobs must carry that id as well
/// (OGC 12-128r18 requirement 20: a blob's srs_id is its column's). `.ci/validate-all` runs
/// GDAL's validator on this file in `make test`.
#[test]
fn merged_layers_in_a_renumbered_crs_carry_the_new_srs_id_in_their_blobs() {
    let dir = out_dir("io_srs_merge");
    let path = dir.join("two_crs.gpkg");
    let _ = std::fs::remove_file(&path);
    for (layer, lon) in [("first", -140.0), ("second", -120.0)] {
        let srs = crs::parse(&format!(
            "+proj=laea +lat_0=35 +lon_0={lon} +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs"
        ))
        .expect("custom LAEA");
        let mut staging = Staging::new(&path, false).expect("staging");
        let mut writer = staging
            .create_vector(layer, GeometryKind::Point, Some(&srs), &[])
            .expect("layer");
        writer.add(Shape::Point(1.0, 2.0), &[]).expect("add");
        writer.finish().expect("finish");
        publish(staging);
    }
    let ids = rows(
        &path,
        "SELECT table_name, srs_id FROM gpkg_geometry_columns ORDER BY table_name",
    );
    assert_ne!(ids[0][1], ids[1][1], "two CRSs, two ids: {ids:?}");
    for row in &ids {
        let blob_srs = rows(
            &path,
            &format!("SELECT hex(substr(geom, 5, 4)) FROM \"{}\"", row[0]),
        );
        let id: i32 = row[1].parse().expect("srs_id");
        let expected: String = id
            .to_le_bytes()
            .iter()
            .map(|b| format!("{b:02X}"))
            .collect();
        assert_eq!(blob_srs[0][0], expected, "layer {}", row[0]);
        // The merged layer's R-tree (its shadow tables copied as they are) passes SQLite's own
        // consistency check and finds the point.
        let rtree = format!("rtree_{}_geom", row[0]);
        let check = rows(&path, &format!("SELECT rtreecheck('{rtree}')"));
        assert_eq!(check[0][0], "ok", "{rtree}");
        let found = rows(
            &path,
            &format!("SELECT id FROM \"{rtree}\" WHERE minx <= 1.5 AND maxx >= 0.5 AND miny <= 2.5 AND maxy >= 1.5"),
        );
        assert_eq!(found, vec![vec!["1".to_owned()]], "{rtree}");
    }
}

/// A vector layer in a CRS the output does not have yet, published into a GeoPackage that holds
/// a gridded coverage: GDAL gave that output the CRS WKT extension (its column
/// `definition_12_063` is NOT NULL, OGC 12-128r18 annex F.10), which the staged file lacks; the
/// new CRS row must get 'undefined' there, and the file must stay valid.
#[test]
fn a_new_crs_joins_an_output_that_holds_a_coverage() {
    let dir = stance_tests::out_dir("new_crs_after_coverage");
    let _ = std::fs::remove_file(dir.join("c.gpkg"));
    stance_tests::synth(&dir, "c.gpkg", 2000, 4);
    let common = [
        "--input",
        "c.gpkg",
        "--layer",
        "veldmark_records",
        "--output",
        "c.gpkg",
    ];
    let density = stance_tests::run_in(&dir, "stance-density", &[&common[..], &["-q"]].concat());
    assert_eq!(density.code, 0, "{}", density.stderr);
    let scan = stance_tests::run_in(
        &dir,
        "stance-scan",
        &[
            &common[..],
            &[
                "--crs",
                "EPSG:32608",
                "--replicates",
                "9",
                "--max-share",
                "0.2",
                "-q",
            ],
        ]
        .concat(),
    );
    assert_eq!(scan.code, 0, "{}", scan.stderr);
    let path = dir.join("c.gpkg");
    let rows = stance_tests::rows(
        &path,
        "SELECT s.organization_coordsys_id, s.definition_12_063 FROM gpkg_spatial_ref_sys s \
         JOIN gpkg_geometry_columns g ON g.srs_id = s.srs_id WHERE g.table_name = 'scan_clusters'",
    );
    assert_eq!(
        rows,
        vec![vec!["32608".to_string(), "undefined".to_string()]]
    );
}
