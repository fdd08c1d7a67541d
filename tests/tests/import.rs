//! stance-import end to end: every kind of bad row counted under its reason, rejects written,
//! whole-input problems refused with exit 2, and the CSV, WKT and GDAL-source paths.

use serde_json::Value;
use stance_tests::{out_dir, rows, run_in, tables};

const HEADER: &str = "id,lon,lat,stance,time,author,text,quality";

/// One row per reason, plus good rows; the expected reason is the comment column.
const ROWS: &[(&str, Option<&str>)] = &[
    (
        "1,-140.20,35.00,support,2026-03-04T05:06:07Z,a1,first,exact",
        None,
    ),
    ("2,-140.30,35.10,Oppose,2026-03-05,a2,second,street", None),
    (
        "3,,35.10,oppose,2026-03-05,a3,t3,street",
        Some("missing_coordinates"),
    ),
    (
        "4,abc,35.10,oppose,2026-03-05,a4,t4,street",
        Some("missing_coordinates"),
    ),
    (
        "5,-140.30,95.0,oppose,2026-03-05,a5,t5,street",
        Some("coordinates_out_of_range"),
    ),
    (
        "6,-190.0,35.0,oppose,2026-03-05,a6,t6,street",
        Some("coordinates_out_of_range"),
    ),
    (
        "7,-140.30,35.20,maybe,2026-03-05,a7,t7,street",
        Some("unknown_stance"),
    ),
    (
        "8,-140.30,35.20,,2026-03-05,a8,t8,street",
        Some("unknown_stance"),
    ),
    (
        "9,-140.30,35.20,neutral,,a9,t9,street",
        Some("missing_time"),
    ),
    (
        "10,-140.30,35.20,neutral,03/05/2026,a10,t10,street",
        Some("ambiguous_day_month"),
    ),
    (
        "11,-140.30,35.20,neutral,last tuesday,a11,t11,street",
        Some("unparseable_time"),
    ),
    (
        "12,-140.30,35.20,neutral,2026-03-05,a12,t12,rooftop",
        Some("unknown_quality"),
    ),
    (
        "13,-140.30,35.20,neutral,2026-03-05,a13,t13,district",
        Some("quality_below_minimum"),
    ),
    (
        "14,-140.20,35.00,support,2026-03-04T05:06:07Z,a1,first,exact",
        Some("duplicate"),
    ),
    (
        "15,-140.25,35.05,-1,2026-03-06T10:00:00+02:00,a1,another,town",
        None,
    ),
    (
        "16,-140.25,35.05,1,2026-03-06,a1,third,town",
        Some("over_author_cap"),
    ),
];

fn write_matrix(dir: &std::path::Path) {
    let mut text = String::from(HEADER);
    for (row, _) in ROWS {
        text.push('\n');
        text.push_str(row);
    }
    std::fs::write(dir.join("rows.csv"), text).expect("write csv");
}

#[test]
fn every_bad_row_is_counted_under_its_reason_and_written_to_rejects() {
    let dir = out_dir("import_matrix");
    write_matrix(&dir);
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "rows.csv",
            "--output",
            "o.gpkg",
            "--time-field",
            "time",
            "--author-field",
            "author",
            "--text-field",
            "text",
            "--quality-field",
            "quality",
            "--min-quality",
            "town",
            "--max-per-author",
            "2",
            "--rejects",
            "rejected",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    assert_eq!(results["rows_read"], ROWS.len());
    let kept = ROWS.iter().filter(|(_, r)| r.is_none()).count();
    assert_eq!(results["records_written"], kept);
    let dropped = results["dropped_by_reason"].as_object().expect("reasons");
    let total: u64 = dropped.values().filter_map(Value::as_u64).sum();
    assert_eq!(
        total as usize,
        ROWS.len() - kept,
        "every dropped record is counted once"
    );
    for (row, reason) in ROWS {
        if let Some(reason) = reason {
            let expected = ROWS.iter().filter(|(_, r)| r == &Some(*reason)).count();
            assert_eq!(dropped[*reason], expected, "reason {reason} (row {row})");
        }
    }
    assert_eq!(results["unknown_stance_labels"]["maybe"], 1);
    assert_eq!(results["unknown_stance_labels"]["(null)"], 1);
    assert_eq!(
        results["unparsed_time_examples"]["99/99/9999"],
        "03/05/2026"
    );
    assert_eq!(
        results["unparsed_time_examples"]["aaaa aaaaaaa"],
        "last tuesday"
    );
    assert_eq!(results["unknown_quality_levels"]["rooftop"], 1);

    let path = dir.join("o.gpkg");
    assert_eq!(tables(&path), ["records", "rejected"]);
    let records = rows(
        &path,
        "SELECT stance, stance_value, time_utc, quality FROM records ORDER BY fid",
    );
    assert_eq!(
        records,
        vec![
            vec![
                "support".to_owned(),
                "1".into(),
                "2026-03-04T05:06:07.000Z".into(),
                "exact".into()
            ],
            vec![
                "oppose".into(),
                "-1".into(),
                "2026-03-05T00:00:00.000Z".into(),
                "street".into()
            ],
            // +02:00 converted to UTC.
            vec![
                "oppose".into(),
                "-1".into(),
                "2026-03-06T08:00:00.000Z".into(),
                "town".into()
            ],
        ]
    );
    let rejected = rows(
        &path,
        "SELECT source_row, reason FROM rejected ORDER BY source_row",
    );
    let expected: Vec<Vec<String>> = ROWS
        .iter()
        .enumerate()
        .filter_map(|(i, (_, r))| r.map(|r| vec![(i + 1).to_string(), r.to_owned()]))
        .collect();
    assert_eq!(rejected, expected);
    // Author and text are never copied unless asked.
    let columns = rows(&path, "SELECT name FROM pragma_table_info('records')");
    assert!(
        !columns.iter().any(|c| c[0] == "author" || c[0] == "text"),
        "{columns:?}"
    );
}

#[test]
fn whole_input_problems_exit_2_and_write_nothing() {
    let dir = out_dir("import_whole_input");
    write_matrix(&dir);
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "rows.csv",
            "--output",
            "o.gpkg",
            "--stance-field",
            "opinion",
        ],
    );
    ran.usage_error(&["rows.csv", "no column 'opinion'", "stance"]);
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "rows.csv",
            "--output",
            "o.gpkg",
            "--time-field",
            "author",
        ],
    );
    ran.usage_error(&["rows.csv", "'author'", "no value is an RFC 3339"]);
    std::fs::write(
        dir.join("coords.csv"),
        "easting,northing,stance\n1,2,support\n",
    )
    .expect("csv");
    run_in(
        &dir,
        "stance-import",
        &["--input", "coords.csv", "--output", "o.gpkg"],
    )
    .usage_error(&["--x-field", "easting"]);
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "rows.csv",
            "--output",
            "o.gpkg",
            "--classes",
            "pro",
        ],
    )
    .usage_error(&["--classes", "label=class"]);
    assert!(!dir.join("o.gpkg").exists());
}

#[test]
fn wkt_columns_custom_classes_and_gdal_sources_import() {
    let dir = out_dir("import_sources");
    std::fs::write(
        dir.join("wkt.csv"),
        "geometry;view\n\"POINT (-140.1 35.0)\";pro\n\"POINT EMPTY\";pro\n\"LINESTRING (0 0,1 1)\";con\n\"POINT (-140.2 35.1)\";con\n"
            .replace(';', ","),
    )
    .expect("csv");
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "wkt.csv",
            "--wkt-field",
            "geometry",
            "--stance-field",
            "view",
            "--classes",
            "pro=support,con=oppose",
            "--output",
            "o.gpkg",
            "-q",
        ],
    )
    .ok();
    assert_eq!(summary["results"]["records_written"], 2);
    assert_eq!(summary["results"]["dropped_by_reason"]["empty_geometry"], 1);
    assert_eq!(summary["results"]["dropped_by_reason"]["not_a_point"], 1);
    assert_eq!(
        rows(
            &dir.join("o.gpkg"),
            "SELECT stance FROM records ORDER BY fid"
        ),
        vec![vec!["support".to_owned()], vec!["oppose".to_owned()]]
    );

    // Any vector source GDAL reads: here the GeoPackage just written, re-imported.
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input", "o.gpkg", "--layer", "records", "--output", "p.gpkg", "-q",
        ],
    )
    .ok();
    assert_eq!(summary["results"]["records_written"], 2);
    assert_eq!(summary["results"]["crs"], "EPSG:4326");
}
