//! stance-render end to end: surfaces and area layers of a stance-synth GeoPackage drawn to
//! PNG, the PNG decoded back (GDAL's PNG driver) and its pixels checked against the palette.

use std::path::PathBuf;
use std::sync::atomic::AtomicBool;

use serde_json::{json, Value};
use stance_core::gpkg::read::{read_polygons, PolygonCrs};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind, Staging};
use stance_core::gpkg::{crs, raster, Provenance};
use stance_core::grid::Grid;
use stance_tests::png::{close, pixels, png_size};
use stance_tests::{out_dir, rows, run_in, sha256, synth};

/// batlow's top colour (Crameri, Scientific colour maps 8.0, last entry of batlow.txt).
const BATLOW_HIGH: [u8; 3] = [250, 204, 250];
/// vik's bottom colour (first entry of vik.txt).
const VIK_LOW: [u8; 3] = [0, 18, 97];
/// The LISA palette of stance-render, in its order high-high, low-low, high-low, low-high, ns.
const LISA: [[u8; 3]; 5] = [
    [0x99, 0x3d, 0x0b],
    [0x0a, 0x33, 0x40],
    [0xf0, 0xb0, 0x4a],
    [0x2e, 0x8f, 0x8c],
    [0xe8, 0xe0, 0xcc],
];

fn provenance() -> Provenance {
    Provenance {
        tool: "render-test".into(),
        version: "0".into(),
        parameters: json!({}),
        inputs: vec![],
        seed: 0,
        started_at: "2026-01-01T00:00:00Z".into(),
        run_time_s: 0.0,
        results: json!({}),
    }
}

/// The grid of the test surfaces: 1 km cells over the synthetic district area, in a Lambert
/// azimuthal equal-area CRS centred on it.
fn grid() -> Grid {
    Grid {
        x_min: -60_000.0,
        y_min: -45_000.0,
        cell_m: 1000.0,
        cols: 120,
        rows: 90,
    }
}

/// Cells of the high plateau (col, row) of the sequential surface.
const PLATEAU: (usize, usize) = (80, 30);

/// Two surfaces, stance-synth data and a layer with LISA cluster types, in `dir/s.gpkg`.
///
/// The surfaces go first, into a new file: merging a gridded coverage into an existing
/// GeoPackage does not yet copy the srs_id 4979 row its extension requires (see the report
/// on shared/src/gpkg/stage.rs), and `make test` validates every file written here.
fn fixture(test: &str) -> PathBuf {
    let dir = out_dir(test);
    let path = dir.join("s.gpkg");
    let srs = crs::laea_centred(-140.3425, 35.0).expect("laea");
    let grid = grid();
    // A smooth bump below a 3 × 3 plateau at 12 (the maximum), and a nodata corner.
    let mut bump = vec![0.0_f32; grid.len()];
    let mut diff = vec![0.0_f32; grid.len()];
    for row in 0..grid.rows {
        for col in 0..grid.cols {
            let (x, y) = grid.centre(col, row);
            let i = row * grid.cols + col;
            bump[i] = (10.0 * (-(x * x + y * y) / 2.0e9).exp()) as f32;
            diff[i] = (x / 60_000.0) as f32 * 3.0;
            if col.abs_diff(PLATEAU.0) <= 1 && row.abs_diff(PLATEAU.1) <= 1 {
                bump[i] = 12.0;
            }
            if col < 5 && row < 5 {
                bump[i] = f32::NAN;
            }
        }
    }
    let mut staging = Staging::new(&path, false).expect("staging");
    for (name, values, field) in [
        ("density_support", &bump, "intensity_support"),
        ("density_diff", &diff, "intensity_difference"),
    ] {
        staging
            .write_surface(
                name,
                &raster::Surface {
                    grid: &grid,
                    values,
                    srs: &srs,
                    field_name: field,
                    unit: "points per km²",
                    quantity: "test surface",
                },
            )
            .expect("surface");
    }
    staging
        .publish(&provenance(), &AtomicBool::new(false))
        .expect("publish");
    synth(&dir, "s.gpkg", 3000, 3);
    let districts = read_polygons(&path, Some("veldmark_districts"), &[], PolygonCrs::AsStored)
        .expect("districts");
    let clusters: Vec<Option<String>> = districts
        .fids
        .iter()
        .map(|fid| {
            Some(
                [
                    "high-high",
                    "low-low",
                    "high-low",
                    "low-high",
                    "not significant",
                ][(*fid as usize) % 5]
                    .to_owned(),
            )
        })
        .collect();
    let mut staging = Staging::new(&path, false).expect("staging");
    staging
        .copy_with_fields(
            &path,
            "veldmark_districts",
            "districts_lisa",
            &districts.fids,
            &[(
                FieldDef::new("cluster", FieldKind::Text),
                ExtraColumn::Text(clusters),
            )],
        )
        .expect("copy");
    staging
        .publish(&provenance(), &AtomicBool::new(false))
        .expect("publish");
    path
}

/// The pixel (column, row) of world point (x, y) by the frame in the summary.
fn pixel_of(results: &Value, x: f64, y: f64) -> (usize, usize) {
    let f = |k: &str, v: &str| results[k][v].as_f64().expect("number");
    let m = results["metres_per_px"].as_f64().expect("m/px");
    (
        (f("map_px", "left") + (x - f("extent", "x_min")) / m).floor() as usize,
        (f("map_px", "top") + (f("extent", "y_max") - y) / m).floor() as usize,
    )
}

#[test]
fn a_sequential_surface_with_overlays_is_drawn_with_its_palette() {
    let path = fixture("render_surface");
    let dir = path.parent().expect("dir").to_owned();
    let before = sha256(&path);
    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "s.gpkg",
            "--output",
            "s.gpkg",
            "--surface",
            "density_support",
            "--overlay",
            "veldmark_districts",
            "--overlay",
            "veldmark_towns",
            "--png",
            "support.png",
            "-q",
        ],
    );
    let summary = ran.ok();
    let results = &summary["results"];
    assert_eq!(results["palette"], "batlow (sequential)");
    assert_eq!(results["unit"], "points per km²");
    assert_eq!(results["value_range"][1], 12.0);
    assert_eq!(summary["layers"], json!([]));
    // --output may be the input: nothing is written into it, and no staging files remain.
    assert_eq!(sha256(&path), before);
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .expect("dir")
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with('.'))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");

    let png = dir.join("support.png");
    let (w, h) = png_size(&png);
    assert_eq!(w, 1000);
    assert_eq!(u64::from(h), results["height_px"].as_u64().expect("height"));
    let (width, rgb) = pixels(&png);
    // The centre of the plateau's middle cell has batlow's top colour (±1 for rounding).
    let (x, y) = grid().centre(PLATEAU.0, PLATEAU.1);
    let (col, row) = pixel_of(results, x, y);
    assert!(
        close(rgb[row * width + col], BATLOW_HIGH, 1),
        "{:?}",
        rgb[row * width + col]
    );
    // A nodata cell (the north-west corner) stays white.
    let (x, y) = grid().centre(2, 2);
    let (col, row) = pixel_of(results, x, y);
    assert_eq!(rgb[row * width + col], [255, 255, 255]);
}

#[test]
fn a_difference_surface_is_diverging_centred_on_zero_at_the_requested_width() {
    let path = fixture("render_diff");
    let dir = path.parent().expect("dir").to_owned();
    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "s.gpkg",
            "--output",
            "out.gpkg",
            "--surface",
            "density_diff",
            "--png",
            "diff.png",
            "--width-px",
            "640",
            "--title",
            "Support minus opposition",
            "-q",
        ],
    );
    let results = ran.ok()["results"].clone();
    assert_eq!(results["palette"], "vik (diverging)");
    let limits = results["colour_limits"].as_array().expect("limits");
    assert_eq!(limits[0].as_f64(), limits[1].as_f64().map(|v| -v));
    assert!(
        !dir.join("out.gpkg").exists(),
        "no layer, so no output file"
    );
    let png = dir.join("diff.png");
    assert_eq!(png_size(&png).0, 640);
    // The westmost column is the most negative value: vik's low end.
    let (width, rgb) = pixels(&png);
    let (x, y) = grid().centre(0, 45);
    let (col, row) = pixel_of(&results, x, y);
    assert!(
        close(rgb[row * width + col], VIK_LOW, 8),
        "{:?}",
        rgb[row * width + col]
    );
}

#[test]
fn districts_are_classed_by_a_numeric_field_and_by_lisa_cluster_type() {
    let path = fixture("render_areas");
    let dir = path.parent().expect("dir").to_owned();
    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "s.gpkg",
            "--output",
            "s.gpkg",
            "--areas",
            "veldmark_districts",
            "--field",
            "population",
            "--classes",
            "4",
            "--classing",
            "equal-interval",
            "--png",
            "population.png",
            "-q",
        ],
    );
    let results = ran.ok()["results"].clone();
    assert_eq!(results["kind"], "numeric");
    let classes = results["classes"].as_array().expect("classes");
    assert_eq!(classes.len(), 4);
    let total: u64 = classes
        .iter()
        .map(|c| c["areas"].as_u64().expect("n"))
        .sum();
    assert_eq!(total, 209);
    assert!(dir.join("population.png").exists());

    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "s.gpkg",
            "--output",
            "s.gpkg",
            "--areas",
            "districts_lisa",
            "--field",
            "cluster",
            "--png",
            "lisa.png",
            "-q",
        ],
    );
    let results = ran.ok()["results"].clone();
    assert_eq!(results["kind"], "categorical");
    assert_eq!(results["palette"], "stance LISA (own design)");
    // Every cluster colour is on the map, exactly (flat fills, no anti-aliasing inside areas).
    let (_, rgb) = pixels(&dir.join("lisa.png"));
    for colour in LISA {
        let n = rgb.iter().filter(|p| **p == colour).count();
        assert!(n > 500, "{colour:?}: {n} pixels");
    }

    // A text field with few values takes the Okabe–Ito palette.
    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "s.gpkg",
            "--output",
            "s.gpkg",
            "--areas",
            "veldmark_truth",
            "--field",
            "favours",
            "--png",
            "truth.png",
            "-q",
        ],
    );
    assert_eq!(ran.ok()["results"]["palette"], "Okabe–Ito");
}

#[test]
fn scan_clusters_are_drawn_by_the_side_they_lean_to() {
    let path = fixture("render_scan");
    let dir = path.parent().expect("dir").to_owned();
    // Bernoulli clusters of oppose on both sides, in a file of their own (adding them to the
    // fixture, whose CRS table carries the coverage extension's column, fails in shared/ today).
    run_in(
        &dir,
        "stance-scan",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "scan.gpkg",
            "--toward",
            "both",
            "--max-share",
            "0.1",
            "--max-clusters",
            "8",
            "--replicates",
            "19",
            "-q",
        ],
    )
    .ok();
    let scan = dir.join("scan.gpkg");
    let sides: Vec<String> = rows(
        &scan,
        "SELECT DISTINCT leans_to FROM scan_clusters ORDER BY 1",
    )
    .into_iter()
    .map(|r| r[0].clone())
    .collect();
    assert!(!sides.is_empty());
    for side in &sides {
        assert!(side == "oppose" || side == "neutral+support", "{side}");
    }
    let ran = run_in(
        &dir,
        "stance-render",
        &[
            "--input",
            "scan.gpkg",
            "--output",
            "scan.gpkg",
            "--areas",
            "scan_clusters",
            "--field",
            "llr",
            "--overlay",
            "scan_clusters",
            "--png",
            "scan.png",
            "-q",
        ],
    );
    let results = ran.ok()["results"].clone();
    // One legend entry per side present, each in its own colour and line.
    let lines = results["overlay_lines"].as_array().expect("overlay lines");
    let mut labels: Vec<&str> = lines
        .iter()
        .map(|l| l["label"].as_str().expect("label"))
        .collect();
    labels.sort_unstable();
    assert_eq!(labels, sides.iter().map(String::as_str).collect::<Vec<_>>());
    // The side colours of stance-render (plum toward support, green toward oppose, yellow for
    // any other side such as joined control classes), each drawn on the page.
    let (_, rgb) = pixels(&dir.join("scan.png"));
    for line in lines {
        let (label, colour) = (
            line["label"].as_str().expect("label"),
            line["colour"].as_str().expect("colour"),
        );
        let wanted = match label {
            "oppose" => ([0x1a, 0x96, 0x41], "dashed"),
            _ => ([0xff, 0xe0, 0x00], "dash-dot"),
        };
        let hex = format!("#{:02x}{:02x}{:02x}", wanted.0[0], wanted.0[1], wanted.0[2]);
        assert_eq!(colour, hex);
        assert_eq!(line["line"], wanted.1);
        let n = rgb.iter().filter(|p| **p == wanted.0).count();
        assert!(n > 50, "{label}: {n} pixels of {colour}");
    }
}

#[test]
fn bad_inputs_exit_2_with_one_line_and_write_no_png() {
    let path = fixture("render_bad");
    let dir = path.parent().expect("dir").to_owned();
    let cases: [(&[&str], &[&str]); 5] = [
        (
            &["--surface", "nope", "--png", "a.png"],
            &["nope", "density_support"],
        ),
        (
            &[
                "--areas",
                "veldmark_districts",
                "--field",
                "nofield",
                "--png",
                "a.png",
            ],
            &["nofield", "population"],
        ),
        (
            &["--surface", "density_support", "--png", "no_such_dir/a.png"],
            &["no_such_dir", "directory"],
        ),
        (
            &["--surface", "density_support", "--png", "a.jpg"],
            &["--png", ".png"],
        ),
        (
            &[
                "--areas",
                "veldmark_districts",
                "--field",
                "name",
                "--png",
                "a.png",
            ],
            &["name", "distinct values"],
        ),
    ];
    for (args, needles) in cases {
        let mut all = vec!["--input", "s.gpkg", "--output", "s.gpkg"];
        all.extend_from_slice(args);
        run_in(&dir, "stance-render", &all).usage_error(needles);
        let written: Vec<_> = std::fs::read_dir(&dir)
            .expect("dir")
            .filter_map(|e| e.ok())
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| n != "s.gpkg")
            .collect();
        assert!(written.is_empty(), "{args:?} left {written:?}");
    }
}
