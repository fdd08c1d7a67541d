//! stance-trend end to end, through the built executable.
//!
//! - On records built so that one area's monthly shares are reference series of
//!   tests/reference/data/trend_reference.json (script tests/reference/make_trend.py): the
//!   area's Mann–Kendall S, variance, Z, p (pymannkendall 1.4.3 `original_test` and
//!   `hamed_rao_modification_test`) and Sen's slope with its 95 % interval (SciPy 1.14.1
//!   `theilslopes`) come out of the GeoPackage to 1e-9 relative (closed forms in double
//!   precision on both sides), and the period table's shares and Wilson intervals are the ones
//!   of the counts (statsmodels-checked formula, tools/trend/tests/reference.rs).
//! - On the sample (sample-gpkg/veldmark.gpkg): the study-area rows of the period table count
//!   every record with a time (counted independently with SQL on the sample); the district
//!   holding the planted burst (veldmark_truth, kind = time_burst: centre, radius, month) peaks
//!   in the planted month, as does a cluster row for the burst's circle.
//! - Bad arguments: one error line, exit 2.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use stance_core::gpkg::crs;
use stance_core::gpkg::read::{read_polygons, PolygonCrs};
use stance_tests::{out_dir, root, rows, run_in, sample_gpkg};

fn reference() -> Value {
    let path = root().join("tests/reference/data/trend_reference.json");
    serde_json::from_str(&std::fs::read_to_string(path).expect("reference JSON")).expect("JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("number expected, got {v}"))
}

fn close(got: f64, expected: f64, what: &str) {
    let scale = expected.abs().max(1e-300);
    assert!(
        (got - expected).abs() <= 1e-9 * scale.max(1e-6),
        "{what}: got {got}, expected {expected}"
    );
}

fn ogr2ogr(args: &[&str]) {
    let status = Command::new("ogr2ogr")
        .args(args)
        .status()
        .expect("run ogr2ogr (Debian gdal-bin)");
    assert!(status.success(), "ogr2ogr {args:?}");
}

/// A GeoPackage with one square area (`areas`, id field `code` = "A") and point records
/// (`records`) inside it: for period k (months from 2025-01), `n` records of which
/// round(x_k · n) oppose and the rest support; plus one record with no time and one outside.
fn fixture(dir: &Path, x: &[f64], n: usize) -> PathBuf {
    let mut csv = String::from("lon,lat,stance,time_utc\n");
    for (k, share) in x.iter().enumerate() {
        let oppose = (share * n as f64).round() as usize;
        let (year, month) = (2025 + k / 12, k % 12 + 1);
        for i in 0..n {
            let stance = if i < oppose { "oppose" } else { "support" };
            let lon = 10.0 + 0.001 * (i % 50) as f64;
            csv.push_str(&format!(
                "{lon},50.01,{stance},{year}-{month:02}-15T12:00:00Z\n"
            ));
        }
    }
    csv.push_str("10.01,50.01,oppose,\n10.5,50.5,oppose,2025-01-01T00:00:00Z\n");
    std::fs::write(dir.join("records.csv"), csv).expect("write csv");
    std::fs::write(
        dir.join("areas.csv"),
        "WKT,code\n\"POLYGON ((9.9 49.9,10.2 49.9,10.2 50.2,9.9 50.2,9.9 49.9))\",A\n",
    )
    .expect("write csv");
    let gpkg = dir.join("fixture.gpkg");
    let gpkg_s = gpkg.to_str().expect("path");
    let records = dir.join("records.csv");
    ogr2ogr(&[
        "-f",
        "GPKG",
        gpkg_s,
        records.to_str().expect("path"),
        "-nln",
        "records",
        "-a_srs",
        "EPSG:4326",
        "-oo",
        "X_POSSIBLE_NAMES=lon",
        "-oo",
        "Y_POSSIBLE_NAMES=lat",
    ]);
    let areas = dir.join("areas.csv");
    ogr2ogr(&[
        "-update",
        gpkg_s,
        areas.to_str().expect("path"),
        "-nln",
        "areas",
        "-a_srs",
        "EPSG:4326",
        "-nlt",
        "POLYGON",
    ]);
    gpkg
}

fn run_fixture(dir: &Path, gpkg: &Path, extra: &[&str]) -> Value {
    let mut args = vec![
        "--input",
        gpkg.to_str().expect("path"),
        "--layer",
        "records",
        "--time-field",
        "time_utc",
        "--areas",
        "areas",
        "--id-field",
        "code",
        "--case-class",
        "oppose",
        "--at-risk-classes",
        "oppose,support",
        "--adjust",
        "none",
        "--output",
        "out.gpkg",
        "-q",
    ];
    args.extend_from_slice(extra);
    run_in(dir, "stance-trend", &args).ok()
}

fn area_row(out: &Path) -> Vec<f64> {
    let row = &rows(
        out,
        "SELECT periods_used, mk_s, mk_variance, mk_z, mk_p, sen_slope, sen_slope_low, \
         sen_slope_high FROM trend_areas",
    )[0];
    row.iter().map(|v| v.parse().expect("number")).collect()
}

fn find<'a>(r: &'a Value, name: &str) -> &'a Value {
    r["series"]
        .as_array()
        .expect("series")
        .iter()
        .find(|s| s["name"] == name)
        .expect("series in reference")
}

#[test]
fn an_areas_trend_matches_pymannkendall_and_theilslopes_through_the_executable() {
    let r = reference();
    let s = find(&r, "rising");
    let x: Vec<f64> = s["x"].as_array().expect("x").iter().map(f).collect();
    let dir = out_dir("trend_reference_series");
    let gpkg = fixture(&dir, &x, 60);
    let summary = run_fixture(&dir, &gpkg, &[]);
    let results = &summary["results"];
    assert_eq!(results["records_without_time"], 1);
    assert_eq!(results["records_outside_areas"], 1);
    assert_eq!(results["trend_classes"]["rising"], 1, "{results}");
    let got = area_row(&dir.join("out.gpkg"));
    let (o, t) = (&s["original_test"], &s["theilslopes_95"]);
    assert_eq!(got[0], x.len() as f64);
    assert_eq!(got[1], f(&o["s"]));
    for (k, (e, what)) in [
        (f(&o["var_s"]), "variance"),
        (f(&o["z"]), "z"),
        (f(&o["p"]), "p"),
        (f(&t["slope"]), "slope"),
        (f(&t["low_slope"]), "slope low"),
        (f(&t["high_slope"]), "slope high"),
    ]
    .into_iter()
    .enumerate()
    {
        close(got[k + 2], e, what);
    }
    // Shares and Wilson bounds of the period rows: k/n of the counts, within [low, high].
    let periods = rows(
        &dir.join("out.gpkg"),
        "SELECT count_oppose, count_support, share, share_low, share_high FROM trend_periods \
         WHERE unit_kind = 'area' ORDER BY period",
    );
    assert_eq!(periods.len(), x.len());
    for (row, share) in periods.iter().zip(&x) {
        let v: Vec<f64> = row.iter().map(|c| c.parse().expect("number")).collect();
        assert_eq!(v[2], v[0] / (v[0] + v[1]));
        close(v[2], *share, "share");
        assert!(v[3] < v[2] && v[2] < v[4]);
    }
}

#[test]
fn the_autocorrelation_correction_matches_pymannkendall_through_the_executable() {
    let r = reference();
    let s = find(&r, "autocorrelated_trend");
    let x: Vec<f64> = s["x"].as_array().expect("x").iter().map(f).collect();
    let dir = out_dir("trend_reference_autocorrelation");
    let gpkg = fixture(&dir, &x, 100);
    run_fixture(&dir, &gpkg, &["--autocorrelation"]);
    let got = area_row(&dir.join("out.gpkg"));
    let h = &s["hamed_rao_modification_test"];
    assert_eq!(got[1], f(&h["s"]));
    close(got[2], f(&h["var_s"]), "variance (Hamed & Rao)");
    close(got[3], f(&h["z"]), "z (Hamed & Rao)");
    close(got[4], f(&h["p"]), "p (Hamed & Rao)");
    // The corrected variance differs from the plain one (the check exercises the correction).
    assert!((got[2] - f(&s["original_test"]["var_s"])).abs() > 1.0);
}

/// The fixture's area with the counts as fields n_{class}_{period} (GeoPackage `name`.gpkg,
/// layer `areas`); `extra` is added to the oppose count of 2025-03.
fn counted_areas(dir: &Path, x: &[f64], name: &str, extra: f64) -> PathBuf {
    let mut header = String::from("WKT,code");
    let mut row = String::from("\"POLYGON ((9.9 49.9,10.2 49.9,10.2 50.2,9.9 50.2,9.9 49.9))\",A");
    for (k, share) in x.iter().enumerate() {
        let oppose = (share * 60.0).round();
        let period = format!("{}_{:02}", 2025 + k / 12, k % 12 + 1);
        let oppose_here = if k == 2 { oppose + extra } else { oppose };
        for (class, n) in [
            ("oppose", oppose_here),
            ("neutral", 0.0),
            ("support", 60.0 - oppose),
        ] {
            header.push_str(&format!(",n_{class}_{period}"));
            row.push_str(&format!(",{n}"));
        }
    }
    let csv = dir.join(format!("{name}.csv"));
    std::fs::write(&csv, format!("{header}\n{row}\n")).expect("write csv");
    let gpkg = dir.join(format!("{name}.gpkg"));
    ogr2ogr(&[
        "-f",
        "GPKG",
        gpkg.to_str().expect("path"),
        csv.to_str().expect("path"),
        "-nln",
        "areas",
        "-a_srs",
        "EPSG:4326",
        "-nlt",
        "POLYGON",
        "-oo",
        "AUTODETECT_TYPE=YES",
    ]);
    gpkg
}

/// The same counts given as fields of the areas (`--count-fields n_{class}_{period}`) give the
/// same area row and the same area rows of the period table as the records.
#[test]
fn counts_on_the_areas_give_the_same_trend_as_the_records() {
    let r = reference();
    let s = find(&r, "rising");
    let x: Vec<f64> = s["x"].as_array().expect("x").iter().map(f).collect();
    let dir = out_dir("trend_count_fields");
    let gpkg = fixture(&dir, &x, 60);
    run_fixture(&dir, &gpkg, &[]);
    let from_records = dir.join("records_run.gpkg");
    std::fs::rename(dir.join("out.gpkg"), &from_records).expect("move output");
    let counted = counted_areas(&dir, &x, "counted", 0.0);
    let last = format!(
        "{}-{:02}-01",
        2025 + (x.len() - 1) / 12,
        (x.len() - 1) % 12 + 1
    );
    let periods = format!("2025-01-01..{last}");
    let summary = run_in(
        &dir,
        "stance-trend",
        &[
            "--input",
            counted.to_str().expect("path"),
            "--areas",
            "areas",
            "--id-field",
            "code",
            "--count-fields",
            "n_{class}_{period}",
            "--periods",
            &periods,
            "--case-class",
            "oppose",
            "--at-risk-classes",
            "oppose,support",
            "--adjust",
            "none",
            "--output",
            "out.gpkg",
            "-q",
        ],
    )
    .ok();
    assert_eq!(summary["results"]["counts_from"], "count fields");
    let out = dir.join("out.gpkg");
    assert_eq!(area_row(&out), area_row(&from_records));
    let table = "SELECT * FROM trend_periods WHERE unit_kind = 'area' ORDER BY period";
    assert_eq!(rows(&out, table), rows(&from_records, table));
    // A count that is not a whole number is refused, naming the field.
    let bad = counted_areas(&dir, &x, "bad", 0.5);
    run_in(
        &dir,
        "stance-trend",
        &[
            "--input",
            bad.to_str().expect("path"),
            "--areas",
            "areas",
            "--count-fields",
            "n_{class}_{period}",
            "--periods",
            &periods,
            "--case-class",
            "oppose",
            "--output",
            "bad_out.gpkg",
        ],
    )
    .usage_error(&["n_oppose_2025_03", "whole"]);
}

/// The index of the district holding (lon, lat).
fn district_at(lon: f64, lat: f64) -> usize {
    let wgs84 = crs::wgs84().expect("WGS 84");
    let layer = read_polygons(
        &sample_gpkg(),
        Some("veldmark_districts"),
        &[],
        PolygonCrs::Into(&wgs84),
    )
    .expect("districts");
    let found = stance_core::assign::assign(&layer.polygons, &[lon], &[lat]);
    let index = found.area[0].expect("the burst centre lies in a district") as usize;
    layer.fids[index] as usize
}

/// count_total per period of one unit, in period order.
fn totals(out: &Path, kind: &str, unit: &str) -> Vec<(String, f64)> {
    rows(
        out,
        &format!(
            "SELECT period, count_total FROM trend_periods WHERE unit_kind = '{kind}' AND unit = \
             '{unit}' ORDER BY period"
        ),
    )
    .into_iter()
    .map(|r| (r[0].clone(), r[1].parse().expect("count")))
    .collect()
}

/// The period holding the most records, and its count over the mean of the others.
fn peak(series: &[(String, f64)]) -> (String, f64) {
    let (i, top) = series
        .iter()
        .enumerate()
        .max_by(|a, b| a.1 .1.total_cmp(&b.1 .1))
        .expect("periods");
    let rest: f64 = series.iter().map(|s| s.1).sum::<f64>() - top.1;
    (
        series[i].0.clone(),
        top.1 / (rest / (series.len() - 1) as f64),
    )
}

#[test]
fn the_sample_period_table_counts_every_record_and_shows_the_planted_burst() {
    let dir = out_dir("trend_sample");
    let sample = sample_gpkg();
    let truth = rows(
        &sample,
        "SELECT centre_lon, centre_lat, month FROM veldmark_truth WHERE kind = 'time_burst'",
    );
    let (lon, lat): (f64, f64) = (
        truth[0][0].parse().expect("lon"),
        truth[0][1].parse().expect("lat"),
    );
    let month: u32 = truth[0][2].parse().expect("month");
    let clusters = dir.join("burst.gpkg");
    ogr2ogr(&[
        "-f",
        "GPKG",
        clusters.to_str().expect("path"),
        sample.to_str().expect("path"),
        "-sql",
        "SELECT geom, 1 AS cluster_no FROM veldmark_truth WHERE kind = 'time_burst'",
        "-nln",
        "burst",
    ]);
    let summary = run_in(
        &dir,
        "stance-trend",
        &[
            "--input",
            sample.to_str().expect("path"),
            "--layer",
            "veldmark_records",
            "--time-field",
            "time_utc",
            "--period",
            "month",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "oppose",
            "--clusters",
            "burst",
            "--clusters-file",
            clusters.to_str().expect("path"),
            "--output",
            "out.gpkg",
            "-q",
        ],
    )
    .ok();
    let out = dir.join("out.gpkg");
    let results = &summary["results"];
    // Every record with a time, counted independently on the sample with SQL.
    let timed: f64 = rows(
        &sample,
        "SELECT count(*) FROM veldmark_records WHERE time_utc IS NOT NULL",
    )[0][0]
        .parse()
        .expect("count");
    let study: f64 = totals(&out, "study_area", "all").iter().map(|t| t.1).sum();
    assert_eq!(study, timed);
    let by_area: f64 = rows(
        &out,
        "SELECT sum(count_total) FROM trend_periods WHERE unit_kind = 'area'",
    )[0][0]
        .parse()
        .expect("sum");
    assert_eq!(by_area + f(&results["records_outside_areas"]), timed);
    // The burst district and the burst circle peak in the planted month, at least twice the
    // mean of the other months (the planted burst roughly quadruples the district's records).
    let district = district_at(lon, lat);
    for (kind, unit) in [("area", district.to_string()), ("cluster", "1".to_owned())] {
        let (period, ratio) = peak(&totals(&out, kind, &unit));
        assert!(
            period.ends_with(&format!("-{month:02}")),
            "{kind} {unit}: peak in {period}"
        );
        assert!(
            ratio > 2.0,
            "{kind} {unit}: peak only {ratio:.2} × the other months"
        );
    }
    // The trend classes: the summary counts the layer's values, and `too few records` is
    // exactly the areas with fewer usable periods than --min-periods (default 4).
    let classes = rows(
        &out,
        "SELECT trend, count(*) FROM trend_areas GROUP BY trend",
    );
    let mut total = 0.0;
    for row in &classes {
        assert!(["rising", "falling", "steady", "too few records"].contains(&row[0].as_str()));
        assert_eq!(
            results["trend_classes"][&row[0]],
            row[1].parse::<u64>().expect("count")
        );
        total += row[1].parse::<f64>().expect("count");
    }
    assert_eq!(total, f(&results["areas"]));
    let mismatched = rows(
        &out,
        "SELECT count(*) FROM trend_areas WHERE (trend = 'too few records') <> (periods_used < 4)",
    );
    assert_eq!(mismatched[0][0], "0");
}

#[test]
fn bad_arguments_give_one_error_line() {
    let dir = out_dir("trend_bad_arguments");
    let sample = sample_gpkg();
    let input = sample.to_str().expect("path");
    let base = [
        "--input",
        input,
        "--layer",
        "veldmark_records",
        "--areas",
        "veldmark_districts",
        "--output",
        "out.gpkg",
    ];
    let case = |extra: &[&str], needles: &[&str]| {
        let mut args = base.to_vec();
        args.extend_from_slice(extra);
        run_in(&dir, "stance-trend", &args).usage_error(needles);
        assert!(!dir.join("out.gpkg").exists());
    };
    case(
        &[
            "--time-field",
            "time_utc",
            "--case-class",
            "oppose",
            "--min-periods",
            "2",
        ],
        &["--min-periods"],
    );
    case(
        &[
            "--time-field",
            "time_utc",
            "--case-class",
            "oppose",
            "--at-risk-classes",
            "support",
        ],
        &["--at-risk-classes", "oppose"],
    );
    case(
        &[
            "--time-field",
            "time_utc",
            "--case-class",
            "oppose",
            "--alpha",
            "1.5",
        ],
        &["--alpha"],
    );
    case(
        &["--time-field", "text", "--case-class", "oppose"],
        &["text", "date-time"],
    );
    case(
        &["--time-field", "no_such_field", "--case-class", "oppose"],
        &["no_such_field"],
    );
}
