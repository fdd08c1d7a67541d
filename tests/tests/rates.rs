//! stance-rates end to end: the real executable on the North Carolina SIDS counties against
//! R spdep 1.2-7 and PySAL esda 2.6.0 (tests/reference/make_rates.R and make_rates.py write
//! tests/reference/data/rates_nc_*.json), and on stance-synth data (points → counts → rates).

use std::path::Path;

use serde_json::Value;
use stance_tests::{out_dir, provenance, root, rows, run_in, synth, tables};

/// 1e-9 relative: the bar for analytic values. The output stores f64 and the references
/// hold 15 significant digits, so the observed agreement is ~1e-14.
const TOLERANCE: f64 = 1e-9;

fn reference(name: &str) -> Value {
    let path = root().join("tests/reference/data").join(name);
    serde_json::from_str(&std::fs::read_to_string(path).expect("reference JSON")).expect("JSON")
}

fn numbers(value: &Value, key: &str) -> Vec<f64> {
    value[key]
        .as_array()
        .unwrap_or_else(|| panic!("{key} missing"))
        .iter()
        .map(|v| v.as_f64().expect("number"))
        .collect()
}

/// A real column of the output, in fid order (NULL as NaN).
fn column(path: &Path, layer: &str, field: &str) -> Vec<f64> {
    rows(path, &format!("SELECT {field} FROM {layer} ORDER BY fid"))
        .into_iter()
        .map(|r| r[0].parse().unwrap_or(f64::NAN))
        .collect()
}

fn assert_close(got: &[f64], want: &[f64], what: &str) {
    assert_eq!(got.len(), want.len(), "{what}: lengths");
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        assert!(
            (g - w).abs() <= TOLERANCE * w.abs() || (g == w),
            "{what}, county {i}: got {g}, reference {w}"
        );
    }
}

fn nc() -> String {
    root()
        .join("tests/reference/data/nc.gpkg")
        .to_string_lossy()
        .into_owned()
}

#[test]
fn nc_sids_counts_on_the_areas_match_spdep_and_esda() {
    let dir = out_dir("rates_nc");
    let nc = nc();
    let common = [
        "--input",
        &nc,
        "--areas",
        "nc.gpkg",
        "--case-field",
        "SID74",
        "--at-risk-field",
        "BIR74",
        "--output",
        "o.gpkg",
        "-q",
    ];
    let summary = run_in(
        &dir,
        "stance-rates",
        &[&common[..], &["--name", "poisson"]].concat(),
    )
    .ok();
    let spdep = reference("rates_nc_spdep.json");
    let esda = reference("rates_nc_esda.json");
    let out = dir.join("o.gpkg");
    // Queen contiguity built on the fly: spdep poly2nb and libpysal Queen give 490 links.
    assert_eq!(summary["results"]["local_eb"]["links"], 490);
    assert_eq!(summary["results"]["model"], "poisson");
    let global = column(&out, "poisson", "rate_eb_global");
    assert_close(&global, &numbers(&spdep, "global_poisson"), "spdep EBest");
    assert_close(&global, &numbers(&esda, "global"), "esda Empirical_Bayes");
    let local = column(&out, "poisson", "rate_eb_local");
    assert_close(
        &local,
        &numbers(&spdep, "local_marshall"),
        "spdep EBlocal, spread around the local mean (make_rates.R)",
    );
    assert_close(
        &local,
        &numbers(&esda, "local"),
        "esda Spatial_Empirical_Bayes",
    );
    assert_close(
        &column(&out, "poisson", "rate_raw"),
        &numbers(&spdep, "raw"),
        "raw rate",
    );
    let prior = &summary["results"]["global_eb"];
    assert!(
        ((prior["prior_mean"].as_f64().expect("mean")
            - spdep["global_poisson_prior_mean"].as_f64().expect("b"))
            / 0.002)
            .abs()
            < TOLERANCE
    );
    // The input's own fields are kept.
    let fips: Vec<String> = rows(&out, "SELECT FIPS FROM poisson ORDER BY fid")
        .into_iter()
        .map(|r| r[0].clone())
        .collect();
    let want: Vec<String> = spdep["fips"]
        .as_array()
        .expect("fips")
        .iter()
        .map(|v| v.as_str().expect("text").to_owned())
        .collect();
    assert_eq!(fips, want);

    run_in(
        &dir,
        "stance-rates",
        &[
            &common[..],
            &["--name", "binomial", "--model", "binomial", "--no-local"],
        ]
        .concat(),
    )
    .ok();
    assert_close(
        &column(&out, "binomial", "rate_eb_global"),
        &numbers(&spdep, "global_binomial"),
        "spdep EBest(family = \"binomial\")",
    );
    let record = &provenance(&out, "binomial")[0];
    assert_eq!(record["parameters"]["model"], "binomial");
}

#[test]
fn synth_points_are_counted_once_and_rated_by_district() {
    let dir = out_dir("rates_synth");
    synth(&dir, "s.gpkg", 5000, 3);
    let summary = run_in(
        &dir,
        "stance-rates",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "oppose",
            "--output",
            "o.gpkg",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    let out = dir.join("o.gpkg");
    let counted: f64 = column(&out, "rates", "count_total").iter().sum();
    let outside = results["points"]["points_outside"]
        .as_f64()
        .expect("outside");
    assert_eq!(
        counted + outside,
        5000.0,
        "every point counted once or reported outside"
    );
    assert_eq!(results["model"], "binomial");
    // Shares: every record is at risk, so count_total = at_risk and cases ≤ at_risk.
    assert_eq!(
        column(&out, "rates", "count_total"),
        column(&out, "rates", "at_risk")
    );
    assert_eq!(
        column(&out, "rates", "cases"),
        column(&out, "rates", "count_oppose")
    );
    // Districts without records have no raw rate, are flagged, and take the prior mean.
    let raw = column(&out, "rates", "rate_raw");
    let flags = column(&out, "rates", "no_one_at_risk");
    let global = column(&out, "rates", "rate_eb_global");
    let mean = results["global_eb"]["prior_mean"].as_f64().expect("mean");
    for i in 0..raw.len() {
        assert_eq!(raw[i].is_nan(), flags[i] == 1.0, "district {i}");
        if flags[i] == 1.0 {
            assert_eq!(global[i], mean);
        } else {
            let (lo, hi) = if raw[i] < mean {
                (raw[i], mean)
            } else {
                (mean, raw[i])
            };
            assert!(
                global[i] >= lo - 1e-15 && global[i] <= hi + 1e-15,
                "district {i}"
            );
        }
    }
    // The island district has no neighbours and is listed.
    assert_eq!(
        results["local_eb"]["islands"]
            .as_array()
            .expect("islands")
            .len(),
        1
    );

    // Per head: the unpopulated district (population 0) is the one area with no one at risk.
    let summary = run_in(
        &dir,
        "stance-rates",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "support",
            "--at-risk-field",
            "population",
            "--output",
            "o.gpkg",
            "--name",
            "per_head",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    assert_eq!(results["model"], "poisson");
    let zero: Vec<i64> = rows(&out, "SELECT fid FROM per_head WHERE population = 0")
        .into_iter()
        .map(|r| r[0].parse().expect("fid"))
        .collect();
    assert_eq!(zero.len(), 1);
    assert_eq!(
        results["areas_with_no_one_at_risk"],
        serde_json::json!(zero)
    );
    let flagged = rows(
        &out,
        "SELECT fid, rate_raw, rate_eb_global FROM per_head WHERE no_one_at_risk = 1",
    );
    assert_eq!(flagged.len(), 1);
    assert_eq!(flagged[0][1], "NULL");
    assert_eq!(
        flagged[0][2].parse::<f64>().expect("smoothed"),
        results["global_eb"]["prior_mean"].as_f64().expect("mean")
    );
}

#[test]
fn bad_arguments_name_the_problem_and_write_nothing() {
    let dir = out_dir("rates_errors");
    synth(&dir, "s.gpkg", 300, 3);
    let base = [
        "--input",
        "s.gpkg",
        "--layer",
        "veldmark_records",
        "--areas",
        "veldmark_districts",
        "--output",
        "o.gpkg",
    ];
    run_in(
        &dir,
        "stance-rates",
        &[&base[..], &["--case-class", "maybe"]].concat(),
    )
    .usage_error(&["--case-class", "maybe"]);
    run_in(
        &dir,
        "stance-rates",
        &[
            &base[..],
            &["--case-class", "oppose", "--at-risk-classes", "support"],
        ]
        .concat(),
    )
    .usage_error(&["--at-risk-classes", "oppose"]);
    run_in(
        &dir,
        "stance-rates",
        &[
            &base[..],
            &["--case-class", "oppose", "--at-risk-field", "nope"],
        ]
        .concat(),
    )
    .usage_error(&["nope"]);
    run_in(
        &dir,
        "stance-rates",
        &[&base[..], &["--case-field", "population"]].concat(),
    )
    .usage_error(&["--at-risk-field"]);
    run_in(
        &dir,
        "stance-rates",
        &[
            &base[..],
            &["--case-class", "oppose", "--weights-file", "s.gpkg"],
        ]
        .concat(),
    )
    .usage_error(&["--weights-file", "--weights"]);
    assert!(
        !dir.join("o.gpkg").exists() || !tables(&dir.join("o.gpkg")).contains(&"rates".to_owned())
    );
}

/// A stance-density surface joined to the districts, by cell centres and by exact cell fractions:
/// every district gets min ≤ mean ≤ max, and the weighted cell counts differ from the centre
/// counts only at the edges.
#[test]
fn a_surface_is_joined_to_the_districts() {
    let dir = out_dir("rates_surface");
    synth(&dir, "s.gpkg", 2000, 3);
    run_in(
        &dir,
        "stance-density",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "s.gpkg",
            "--cell-m",
            "2000",
            "-q",
        ],
    )
    .ok();
    let out = dir.join("o.gpkg");
    for (name, extra) in [("centres", None), ("weighted", Some("--area-weighted"))] {
        let mut args = vec![
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "oppose",
            "--surface",
            "density_diff",
            "--output",
            "o.gpkg",
            "--name",
            name,
            "-q",
        ];
        args.extend(extra);
        let summary = run_in(&dir, "stance-rates", &args).ok();
        assert_eq!(
            summary["results"]["surface"]["areas_without_cells"],
            serde_json::json!([])
        );
        let mean = column(&out, name, "surface_mean");
        let min = column(&out, name, "surface_min");
        let max = column(&out, name, "surface_max");
        for i in 0..mean.len() {
            assert!(
                min[i] <= mean[i] + 1e-12 && mean[i] <= max[i] + 1e-12,
                "{name} district {i}"
            );
        }
    }
    let centres: f64 = column(&out, "centres", "surface_cells").iter().sum();
    let weighted: f64 = column(&out, "weighted", "surface_cells").iter().sum();
    // Districts tile the region: both count the region's cells, up to the cells cut by its outline.
    assert!(
        (centres - weighted).abs() / centres < 0.05,
        "{centres} vs {weighted}"
    );
}

/// An area whose ring crosses itself (a "bow tie") is not a valid polygon under the OGC
/// simple-features rules (the `geo` crate's validation implements them): the run still rates
/// every area but warns in one line naming the feature, and counts it in the summary. A valid
/// square beside it is not reported.
#[test]
fn invalid_areas_are_reported_by_feature() {
    use stance_core::gpkg::crs;
    use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging};
    let dir = out_dir("rates_invalid");
    let areas = dir.join("areas.gpkg");
    let _ = std::fs::remove_file(&areas);
    let srs = crs::parse("EPSG:32610").expect("UTM");
    let mut staging = Staging::new(&areas, false).expect("staging");
    let fields = [
        FieldDef::new("e", FieldKind::Integer),
        FieldDef::new("b", FieldKind::Integer),
    ];
    let mut writer = staging
        .create_vector("areas", GeometryKind::MultiPolygon, Some(&srs), &fields)
        .expect("layer");
    let ring = |points: &[(f64, f64)]| geo_types::Polygon::new(points.to_vec().into(), vec![]);
    let shapes = [
        ring(&[
            (0.0, 0.0),
            (10.0, 0.0),
            (10.0, 10.0),
            (0.0, 10.0),
            (0.0, 0.0),
        ]),
        // Bow tie: 10,0 → 20,10 → 20,0 → 10,10 → 10,0; its first and third edges cross at (15, 5).
        ring(&[
            (10.0, 0.0),
            (20.0, 10.0),
            (20.0, 0.0),
            (10.0, 10.0),
            (10.0, 0.0),
        ]),
        ring(&[
            (20.0, 0.0),
            (30.0, 0.0),
            (30.0, 10.0),
            (20.0, 10.0),
            (20.0, 0.0),
        ]),
    ];
    for (k, shape) in shapes.iter().enumerate() {
        writer
            .add(
                Shape::Polygon(shape),
                &[FieldData::Integer(k as i64 + 1), FieldData::Integer(10)],
            )
            .expect("add");
    }
    writer.finish().expect("finish");
    staging
        .publish(
            &stance_core::gpkg::Provenance {
                tool: "test".into(),
                version: "0".into(),
                parameters: serde_json::json!({}),
                inputs: vec![],
                seed: 0,
                started_at: "2026-01-01T00:00:00Z".into(),
                run_time_s: 0.0,
                results: serde_json::json!({}),
            },
            &std::sync::atomic::AtomicBool::new(false),
        )
        .expect("publish");
    let ran = run_in(
        &dir,
        "stance-rates",
        &[
            "--input",
            "areas.gpkg",
            "--areas",
            "areas",
            "--case-field",
            "e",
            "--at-risk-field",
            "b",
            "--output",
            "o.gpkg",
        ],
    );
    let summary = ran.ok();
    assert_eq!(summary["results"]["invalid_areas"], 1);
    let warnings: Vec<&str> = ran
        .stderr
        .lines()
        .filter(|l| l.contains("not valid polygons"))
        .collect();
    assert_eq!(warnings.len(), 1, "{}", ran.stderr);
    assert!(
        warnings[0].contains("1 of the 3 areas") && warnings[0].contains("feature 2"),
        "{}",
        warnings[0]
    );
    assert_eq!(
        rows(&dir.join("o.gpkg"), "SELECT count(*) FROM rates")[0][0],
        "3"
    );
}
