//! stance-render's pictures of change, end to end: small multiples of time-sliced surfaces on
//! one colour scale, the chart of share over periods from a period table, and the map of trend
//! classes. The fixture GeoPackage is made here (surfaces named as stance-density names its
//! slices, a period table with the exact schema stance-trend writes), so these tests do not
//! wait for the other tools; PNGs are decoded back by GDAL's PNG driver.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use serde_json::{json, Value};
use stance_core::gpkg::read::{read_polygons, PolygonCrs};
use stance_core::gpkg::stage::{
    ExtraColumn, FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging,
};
use stance_core::gpkg::{crs, raster, Provenance};
use stance_core::grid::Grid;
use stance_tests::png::{close, pixels, png_size};
use stance_tests::{out_dir, rows, run_in, synth};

/// batlow at t = 0.25 and t = 1 (Crameri, Scientific colour maps 8.0, batlow.txt entries 64
/// and 255, as anchored in stance-render).
const BATLOW_QUARTER: [u8; 3] = [34, 96, 97];
const BATLOW_HIGH: [u8; 3] = [250, 204, 250];
/// vik's centre (vik.txt entry 128).
const VIK_CENTRE: [u8; 3] = [236, 229, 225];
/// stance-render's trend palette: rising, falling, steady, too few records.
const TREND: [[u8; 3]; 4] = [
    [0xb5, 0x39, 0x1b],
    [0x1d, 0x5c, 0x8f],
    [0xf2, 0xe2, 0xb6],
    [0x8c, 0x8c, 0x8c],
];
const TREND_CLASSES: [&str; 4] = ["rising", "falling", "steady", "too few records"];

fn provenance(parameters: Value) -> Provenance {
    Provenance {
        tool: "render-time-test".into(),
        version: "0".into(),
        parameters,
        inputs: vec![],
        seed: 0,
        started_at: "2026-01-01T00:00:00Z".into(),
        run_time_s: 0.0,
        results: json!({}),
    }
}

/// 1 km cells over the synthetic district area (as in render.rs).
fn grid() -> Grid {
    Grid {
        x_min: -60_000.0,
        y_min: -45_000.0,
        cell_m: 1000.0,
        cols: 120,
        rows: 90,
    }
}

/// The probe cell: value 1 in every slice of `density_support_*`.
const PROBE: (usize, usize) = (30, 30);
/// The peak cell: value 4 in the February slice only (the maximum over all slices).
const PEAK: (usize, usize) = (90, 60);

/// Months of the fixture's slices (January to March 2026).
const MONTHS: [&str; 3] = ["2026_01", "2026_02", "2026_03"];

/// One slice's values: a 3 × 3 block at `PROBE` of 1, a block at `PEAK` of `peak`, elsewhere
/// `background`.
fn slice_values(background: f32, peak: f32) -> Vec<f32> {
    let g = grid();
    let mut values = vec![background; g.len()];
    for row in 0..g.rows {
        for col in 0..g.cols {
            let i = row * g.cols + col;
            if col.abs_diff(PROBE.0) <= 1 && row.abs_diff(PROBE.1) <= 1 {
                values[i] = 1.0;
            }
            if col.abs_diff(PEAK.0) <= 1 && row.abs_diff(PEAK.1) <= 1 {
                values[i] = peak;
            }
        }
    }
    values
}

/// Wilson (1927) score interval for k successes of n at z: (p + z²/2n ± z√(p(1−p)/n +
/// z²/4n²)) / (1 + z²/n).
fn wilson(k: i64, n: i64, z: f64) -> (f64, f64) {
    let (k, n) = (k as f64, n as f64);
    let p = k / n;
    let centre = p + z * z / (2.0 * n);
    let half = z * (p * (1.0 - p) / n + z * z / (4.0 * n * n)).sqrt();
    let denom = 1.0 + z * z / n;
    ((centre - half) / denom, (centre + half) / denom)
}

/// One unit's rows: (unit_kind, unit, oppose counts by month, totals by month).
type UnitRows<'a> = (&'a str, &'a str, [i64; 6], [i64; 6]);

/// The period table `trend_periods` (schema of the shared time design) and a copy
/// `trend_bad_periods` lacking `share_low`.
fn write_period_tables(path: &Path) {
    let units: [UnitRows; 4] = [
        (
            "study_area",
            "all",
            [40, 42, 45, 60, 52, 50],
            [120, 118, 121, 130, 125, 119],
        ),
        (
            "cluster",
            "1",
            [10, 12, 15, 22, 18, 17],
            [30, 28, 31, 33, 29, 30],
        ),
        ("cluster", "2", [3, 2, 0, 1, 2, 3], [9, 8, 0, 5, 6, 7]),
        ("area", "D1", [5, 4, 6, 7, 5, 4], [20, 18, 22, 21, 19, 20]),
    ];
    let fields = |with_low: bool| -> Vec<FieldDef> {
        let mut f = vec![
            FieldDef::new("unit_kind", FieldKind::Text),
            FieldDef::new("unit", FieldKind::Text),
            FieldDef::new("period", FieldKind::Text),
            FieldDef::new("period_start", FieldKind::Text),
            FieldDef::new("count_oppose", FieldKind::Integer),
            FieldDef::new("count_neutral", FieldKind::Integer),
            FieldDef::new("count_support", FieldKind::Integer),
            FieldDef::new("count_total", FieldKind::Integer),
            FieldDef::new("share", FieldKind::Real),
            FieldDef::new("share_se", FieldKind::Real),
        ];
        if with_low {
            f.push(FieldDef::new("share_low", FieldKind::Real));
        }
        f.push(FieldDef::new("share_high", FieldKind::Real));
        f
    };
    let mut staging = Staging::new(path, false).expect("staging");
    for (name, with_low) in [("trend_periods", true), ("trend_bad_periods", false)] {
        let mut writer = staging
            .create_vector(name, GeometryKind::None, None, &fields(with_low))
            .expect("period table");
        for (kind, unit, oppose, total) in &units {
            for m in 0..6 {
                let (k, n) = (oppose[m], total[m]);
                let period = format!("2026-{:02}", m + 1);
                let start = format!("{period}-01T00:00:00Z");
                // At-risk = all classes here; NULL share when no one is at risk.
                let (share, se, low, high) = if n == 0 {
                    (f64::NAN, f64::NAN, f64::NAN, f64::NAN)
                } else {
                    let p = k as f64 / n as f64;
                    // z = 1.959964 for 1 − α = 0.95.
                    let (low, high) = wilson(k, n, 1.959_964);
                    (p, (p * (1.0 - p) / n as f64).sqrt(), low, high)
                };
                let mut values = vec![
                    FieldData::Text(kind),
                    FieldData::Text(unit),
                    FieldData::Text(&period),
                    FieldData::Text(&start),
                    FieldData::Integer(k),
                    FieldData::Integer((n - k) / 2),
                    FieldData::Integer(n - k - (n - k) / 2),
                    FieldData::Integer(n),
                    FieldData::Real(share),
                    FieldData::Real(se),
                ];
                if with_low {
                    values.push(FieldData::Real(low));
                }
                values.push(FieldData::Real(high));
                writer.add(Shape::None, &values).expect("row");
            }
        }
        writer.finish().expect("finish");
    }
    staging
        .publish(
            &provenance(json!({"case-class": "oppose", "at-risk-classes": "all"})),
            &AtomicBool::new(false),
        )
        .expect("publish");
}

/// `dir/t.gpkg`: month slices of a sequential and a difference surface, stance-synth data, a
/// copy of the districts with a `trend` field, and the period tables.
fn fixture(test: &str) -> PathBuf {
    let dir = out_dir(test);
    let path = dir.join("t.gpkg");
    let srs = crs::laea_centred(-140.3425, 35.0).expect("laea");
    let g = grid();
    // Surfaces first, into a new file (see render.rs on merging coverages).
    let mut staging = Staging::new(&path, false).expect("staging");
    let support = [
        slice_values(0.5, 0.5),
        slice_values(0.0, 4.0),
        slice_values(0.25, 2.0),
    ];
    let diff = [
        slice_values(0.0, -1.0),
        slice_values(0.0, 2.0),
        slice_values(0.0, 0.5),
    ];
    for (k, month) in MONTHS.iter().enumerate() {
        for (surface, values, field) in [
            ("density_support", &support[k], "intensity_support"),
            ("density_diff", &diff[k], "intensity_difference"),
        ] {
            staging
                .write_surface(
                    &format!("{surface}_{month}"),
                    &raster::Surface {
                        grid: &g,
                        values,
                        srs: &srs,
                        field_name: field,
                        unit: "points per km²",
                        quantity: "test slice",
                    },
                )
                .expect("surface");
        }
    }
    staging
        .publish(&provenance(json!({})), &AtomicBool::new(false))
        .expect("publish");
    synth(&dir, "t.gpkg", 2000, 5);
    let districts = read_polygons(&path, Some("veldmark_districts"), &[], PolygonCrs::AsStored)
        .expect("districts");
    let trend: Vec<Option<String>> = districts
        .fids
        .iter()
        .map(|fid| Some(TREND_CLASSES[(*fid as usize) % 4].to_owned()))
        .collect();
    let mut staging = Staging::new(&path, false).expect("staging");
    staging
        .copy_with_fields(
            &path,
            "veldmark_districts",
            "trend_areas",
            &districts.fids,
            &[(
                FieldDef::new("trend", FieldKind::Text),
                ExtraColumn::Text(trend),
            )],
        )
        .expect("copy");
    staging
        .publish(&provenance(json!({})), &AtomicBool::new(false))
        .expect("publish");
    write_period_tables(&path);
    path
}

/// The pixel (column, row) of world point (x, y) in the panel whose map rectangle is `map_px`.
fn pixel_in(results: &Value, map_px: &Value, (x, y): (f64, f64)) -> (usize, usize) {
    let f = |v: &Value, k: &str| v[k].as_f64().expect("number");
    let m = results["metres_per_px"].as_f64().expect("m/px");
    let extent = &results["extent"];
    (
        (f(map_px, "left") + (x - f(extent, "x_min")) / m).floor() as usize,
        (f(map_px, "top") + (f(extent, "y_max") - y) / m).floor() as usize,
    )
}

fn render(dir: &Path, args: &[&str]) -> Value {
    let mut all = vec!["--input", "t.gpkg", "--output", "t.gpkg", "-q"];
    all.extend_from_slice(args);
    run_in(dir, "stance-render", &all).ok()["results"].clone()
}

#[test]
fn time_slices_share_one_colour_scale_in_reading_order() {
    let path = fixture("render_time_multiples");
    let dir = path.parent().expect("dir").to_owned();
    let results = render(
        &dir,
        &[
            "--surface",
            "density_support",
            "--each-period",
            "--overlay",
            "veldmark_districts",
            "--png",
            "support.png",
        ],
    );
    let png = dir.join("support.png");
    let (w, h) = png_size(&png);
    assert_eq!(w, 1000);
    assert_eq!(u64::from(h), results["height_px"].as_u64().expect("height"));
    // One panel per period, labelled Period::label, in time order and reading order.
    let panels = results["panels"].as_array().expect("panels");
    let labels: Vec<&str> = panels
        .iter()
        .map(|p| p["period"].as_str().expect("label"))
        .collect();
    assert_eq!(labels, ["2026-01", "2026-02", "2026-03"]);
    let layers: Vec<&str> = panels
        .iter()
        .map(|p| p["layer"].as_str().expect("layer"))
        .collect();
    assert_eq!(
        layers,
        [
            "density_support_2026_01",
            "density_support_2026_02",
            "density_support_2026_03"
        ]
    );
    for pair in panels.windows(2) {
        let (a, b) = (&pair[0]["map_px"], &pair[1]["map_px"]);
        let right_of = b["left"].as_i64() > a["left"].as_i64() && b["top"] == a["top"];
        let below = b["top"].as_i64() > a["top"].as_i64();
        assert!(right_of || below, "{a} then {b}");
    }
    // One scale over all slices: 0 (February's background) to 4 (February's peak).
    assert_eq!(results["colour_limits"], json!([0.0, 4.0]));
    assert_eq!(results["palette"], "batlow (sequential)");
    // The same value (1, the probe block) has the same colour in every panel: batlow at
    // (1 − 0)/(4 − 0) = 0.25 (±1 for rounding). Each panel alone would put 1 elsewhere on
    // its own scale (January's range is 0.5–1: its top colour).
    let (width, rgb) = pixels(&png);
    let at = |panel: &Value, cell: (usize, usize)| {
        let (col, row) = pixel_in(&results, &panel["map_px"], grid().centre(cell.0, cell.1));
        rgb[row * width + col]
    };
    let probes: Vec<[u8; 3]> = panels.iter().map(|p| at(p, PROBE)).collect();
    for probe in &probes {
        assert!(close(*probe, BATLOW_QUARTER, 1), "{probes:?}");
    }
    assert!(close(at(&panels[1], PEAK), BATLOW_HIGH, 1));
    // March's peak (2) is halfway: not the top colour.
    assert!(!close(at(&panels[2], PEAK), BATLOW_HIGH, 20));
}

#[test]
fn difference_slices_get_a_symmetric_scale() {
    let path = fixture("render_time_diff");
    let dir = path.parent().expect("dir").to_owned();
    let results = render(
        &dir,
        &[
            "--surface",
            "density_diff",
            "--each-period",
            "--period",
            "month",
            "--width-px",
            "800",
            "--png",
            "diff.png",
        ],
    );
    assert_eq!(png_size(&dir.join("diff.png")).0, 800);
    assert_eq!(results["palette"], "vik (diverging)");
    // Values −1 to 2 over all slices: limits ±2, zero at vik's centre in every panel.
    assert_eq!(results["colour_limits"], json!([-2.0, 2.0]));
    let (width, rgb) = pixels(&dir.join("diff.png"));
    for panel in results["panels"].as_array().expect("panels") {
        let (col, row) = pixel_in(&results, &panel["map_px"], grid().centre(5, 80));
        assert!(
            close(rgb[row * width + col], VIK_CENTRE, 1),
            "{:?}",
            rgb[row * width + col]
        );
    }
}

#[test]
fn the_chart_of_share_covers_every_interval_and_names_its_units() {
    let path = fixture("render_time_chart");
    let dir = path.parent().expect("dir").to_owned();
    let results = render(
        &dir,
        &[
            "--periods",
            "trend_periods",
            "--width-px",
            "900",
            "--png",
            "chart.png",
        ],
    );
    let png = dir.join("chart.png");
    assert_eq!(png_size(&png), (900, 540));
    assert_eq!(results["y_axis"]["label"], "share of oppose (%)");
    assert_eq!(results["x_axis"]["label"], "period (month)");
    let labels: Vec<&str> = results["series"]
        .as_array()
        .expect("series")
        .iter()
        .map(|s| s["label"].as_str().expect("label"))
        .collect();
    assert_eq!(labels, ["whole study area", "cluster 1", "cluster 2"]);
    assert_eq!(results["periods"].as_array().expect("periods").len(), 6);
    // Cluster 2 has no one at risk in March: five periods with a share.
    assert_eq!(results["series"][2]["periods_with_share"], 5);
    // The y axis (per cent) holds every interval of the units drawn, as stored in the table.
    let (low, high) = (
        results["y_axis"]["low"].as_f64().expect("low"),
        results["y_axis"]["high"].as_f64().expect("high"),
    );
    let stored = rows(
        &path,
        "SELECT min(share_low), max(share_high) FROM trend_periods WHERE unit_kind <> 'area'",
    );
    let min_low: f64 = stored[0][0].parse().expect("min");
    let max_high: f64 = stored[0][1].parse().expect("max");
    assert!(
        low <= 100.0 * min_low && high >= 100.0 * max_high,
        "{low}–{high} vs {min_low}–{max_high}"
    );
    assert!((0.0..=100.0).contains(&low) && high <= 100.0 && low < high);
    // Lines in their own colours are on the page: brick (cluster 1), blue (cluster 2).
    let (_, rgb) = pixels(&png);
    for colour in [[0xb8, 0x3a, 0x1e], [0x1f, 0x5f, 0xc0]] {
        let n = rgb.iter().filter(|p| **p == colour).count();
        assert!(n > 100, "{colour:?}: {n} pixels");
    }
    // The band: the study area's interval tinted grey (black at 18 % over white).
    let band = rgb
        .iter()
        .filter(|p| close(**p, [209, 209, 209], 2))
        .count();
    assert!(band > 1000, "{band} band pixels");

    // Chosen units instead of the clusters.
    let results = render(
        &dir,
        &[
            "--periods",
            "trend_periods",
            "--unit",
            "area:D1",
            "--unit",
            "2",
            "--png",
            "chosen.png",
        ],
    );
    let labels: Vec<&str> = results["series"]
        .as_array()
        .expect("series")
        .iter()
        .map(|s| s["label"].as_str().expect("label"))
        .collect();
    assert_eq!(labels, ["whole study area", "area D1", "cluster 2"]);
}

#[test]
fn trend_classes_are_mapped_in_their_own_colours_and_order() {
    let path = fixture("render_time_trend");
    let dir = path.parent().expect("dir").to_owned();
    let results = render(
        &dir,
        &[
            "--areas",
            "trend_areas",
            "--field",
            "trend",
            "--png",
            "trend.png",
        ],
    );
    assert_eq!(results["palette"], "stance trend (own design)");
    let classes = results["classes"].as_array().expect("classes");
    let labels: Vec<&str> = classes
        .iter()
        .map(|c| c["label"].as_str().expect("label"))
        .collect();
    assert_eq!(labels, TREND_CLASSES);
    let png = dir.join("trend.png");
    assert_eq!(
        png_size(&png),
        (1000, results["height_px"].as_u64().expect("height") as u32)
    );
    let (_, rgb) = pixels(&png);
    for (colour, class) in TREND.iter().zip(classes) {
        assert_eq!(
            class["colour"],
            format!("#{:02x}{:02x}{:02x}", colour[0], colour[1], colour[2])
        );
        let n = rgb.iter().filter(|p| *p == colour).count();
        assert!(n > 500, "{colour:?}: {n} pixels");
    }
}

#[test]
fn bad_time_inputs_exit_2_with_one_line_and_write_nothing() {
    let path = fixture("render_time_bad");
    let dir = path.parent().expect("dir").to_owned();
    let cases: [(&[&str], &[&str]); 6] = [
        (
            &["--periods", "nope_periods"],
            &["nope_periods", "trend_periods"],
        ),
        (
            &["--periods", "trend_bad_periods"],
            &["trend_bad_periods", "share_low"],
        ),
        (
            &["--surface", "density_share", "--each-period"],
            &["density_share", "time slices"],
        ),
        (
            &[
                "--surface",
                "density_support",
                "--each-period",
                "--period",
                "week",
            ],
            &["density_support", "week"],
        ),
        (
            &["--periods", "trend_periods", "--unit", "cluster:9"],
            &["trend_periods", "'9'"],
        ),
        (
            &[
                "--periods",
                "trend_periods",
                "--overlay",
                "veldmark_districts",
            ],
            &["--overlay"],
        ),
    ];
    for (args, needles) in cases {
        let mut all = vec![
            "--input", "t.gpkg", "--output", "t.gpkg", "--png", "bad.png",
        ];
        all.extend_from_slice(args);
        run_in(&dir, "stance-render", &all).usage_error(needles);
        let written: Vec<_> = std::fs::read_dir(&dir)
            .expect("dir")
            .filter_map(|e| e.ok())
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| n != "t.gpkg")
            .collect();
        assert!(written.is_empty(), "{args:?} left {written:?}");
    }
}
