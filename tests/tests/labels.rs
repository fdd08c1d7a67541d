//! stance-labels end to end: on the sample, the confusion matrices estimated from a random
//! hand-coded subset are within sampling error of the ones stance-synth planted; on 20 small
//! synthetic scenarios, the corrected class shares per area are closer to the true shares than
//! the raw label shares. Agreement statistics are checked against scikit-learn, statsmodels and
//! krippendorff in tools/labels/tests/reference.rs.

use std::path::Path;

use serde_json::Value;
use stance_tests::{out_dir, rows, run_in, sample_gpkg, synth};

/// The planted confusion matrices (row: true class oppose, neutral, support; column: label), as
/// in tools/synth/src/scenario/labels.rs (CONFUSION_A, CONFUSION_B).
const PLANTED: [(&str, [[f64; 3]; 3]); 2] = [
    (
        "label_a",
        [[0.86, 0.10, 0.04], [0.08, 0.84, 0.08], [0.03, 0.12, 0.85]],
    ),
    (
        "label_b",
        [[0.72, 0.20, 0.08], [0.15, 0.68, 0.17], [0.07, 0.23, 0.70]],
    ),
];

const CLASSES: [&str; 3] = ["oppose", "neutral", "support"];

/// 2000 of the sample's 20 000 records (the truth column restricted to a random subset) as the
/// hand coding. Each estimated cell is a binomial share of its row's reference records; within
/// 4 standard errors of the planted probability (18 cells: a false alarm has probability
/// < 0.002 under the planted model).
#[test]
fn the_sample_confusion_matrices_are_within_sampling_error_of_the_planted_ones() {
    let dir = out_dir("labels_sample");
    let input = sample_gpkg();
    let input = input.to_str().expect("path");
    let summary = run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            input,
            "--layer",
            "veldmark_records",
            "--label-fields",
            "label_a,label_b",
            "--reference-field",
            "stance",
            "--reference-sample",
            "2000",
            "--areas",
            "veldmark_districts",
            "--correct-field",
            "label_b",
            "--output",
            "out.gpkg",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    assert_eq!(results["reference_records"], 2000);
    for (labeller, (field, planted)) in PLANTED.iter().enumerate() {
        let scores = &results["labellers"][labeller];
        assert_eq!(scores["field"], *field);
        let matrix = &scores["confusion_matrix"];
        for (t, row) in planted.iter().enumerate() {
            let counts: Vec<f64> = (0..3)
                .map(|l| matrix[t][l].as_f64().expect("count"))
                .collect();
            let n: f64 = counts.iter().sum();
            for (l, p) in row.iter().enumerate() {
                let se = (p * (1.0 - p) / n).sqrt();
                let got = counts[l] / n;
                assert!(
                    (got - p).abs() <= 4.0 * se,
                    "{field}: P(label {} | true {}) = {got:.4}, planted {p} (n {n}, se {se:.4})",
                    CLASSES[l],
                    CLASSES[t]
                );
            }
        }
    }
    let path = dir.join("out.gpkg");
    let written = rows(
        &path,
        "SELECT count(*), sum(in_reference) FROM labels_records",
    );
    assert_eq!(written, vec![vec!["20000".to_owned(), "2000".to_owned()]]);
    // The records layer is a copy of the input: every input field, the stored CRS (EPSG:4326
    // in the sample), the consensus beside the text of each record.
    let copy = rows(
        &path,
        "SELECT (SELECT srs_id FROM gpkg_geometry_columns WHERE table_name = 'labels_records'), \
         count(*) FROM labels_records WHERE text IS NOT NULL AND consensus IS NOT NULL \
         AND time_utc IS NOT NULL",
    );
    assert_eq!(copy, vec![vec!["4326".to_owned(), "20000".to_owned()]]);
    let shares = rows(
        &path,
        "SELECT share_oppose_corrected + share_neutral_corrected + share_support_corrected \
         FROM labels_areas WHERE count_total > 0",
    );
    assert!(!shares.is_empty());
    for s in shares {
        let total: f64 = s[0].parse().expect("number");
        assert!(
            (total - 1.0).abs() < 1e-9,
            "corrected shares sum to {total}"
        );
    }
}

/// One area of a run: feature id, records, and (raw, corrected) share per class.
type AreaShares = (i64, f64, [(f64, f64); 3]);

/// Shares per area of one run, by feature id.
fn area_shares(path: &Path, layer: &str) -> Vec<AreaShares> {
    let sql = format!(
        "SELECT fid, count_total, {} FROM {layer} ORDER BY fid",
        CLASSES
            .iter()
            .map(|c| format!("share_{c}_raw, share_{c}_corrected"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    rows(path, &sql)
        .into_iter()
        .map(|r| {
            let v = |i: usize| r[i].parse::<f64>().unwrap_or(f64::NAN);
            (
                r[0].parse().expect("fid"),
                v(1),
                [(v(2), v(3)), (v(4), v(5)), (v(6), v(7))],
            )
        })
        .collect()
}

fn labels_run(
    dir: &Path,
    file: &str,
    seed: &str,
    fields: &str,
    correct: &str,
    name: &str,
) -> Value {
    let mut args = vec![
        "--input",
        file,
        "--layer",
        "veldmark_records",
        "--label-fields",
        fields,
        "--reference-field",
        "stance",
        "--areas",
        "veldmark_districts",
        "--correct-field",
        correct,
        "--name",
        name,
        "--output",
        file,
        "--seed",
        seed,
        "-q",
    ];
    if name == "estimated" {
        args.extend(["--reference-sample", "2000"]);
    }
    run_in(dir, "stance-labels", &args).ok()
}

/// 20 scenarios of 8000 records (seeds 1–20). Hand coding: the truth column on a random subset
/// of 2000 records. The true shares per area come from a second run that "corrects" the truth
/// column itself (its raw shares are the true ones, over the same areas). Distance: over areas
/// with at least 50 records, the record-weighted mean of Σ_class |share − true share|, for the
/// raw shares of classifier B (the noisier) and for its corrected shares. The bar: the
/// corrected shares are closer in at least 18 of 20 seeds.
#[test]
fn corrected_shares_are_closer_to_the_truth_than_raw_shares_in_18_of_20_seeds() {
    let dir = out_dir("labels_seeds");
    let mut closer = 0;
    let mut report = Vec::new();
    for seed in 1..=20u64 {
        let file = format!("s{seed}.gpkg");
        let _ = std::fs::remove_file(dir.join(&file));
        synth(&dir, &file, 8000, seed);
        let s = seed.to_string();
        labels_run(&dir, &file, &s, "label_a,label_b", "label_b", "estimated");
        labels_run(&dir, &file, &s, "stance,label_a", "stance", "truth");
        let path = dir.join(&file);
        let truth = area_shares(&path, "truth_areas");
        let estimated = area_shares(&path, "estimated_areas");
        let (mut raw, mut corrected, mut records) = (0.0, 0.0, 0.0);
        for ((fid, n, est), (tfid, _, tru)) in estimated.iter().zip(&truth) {
            assert_eq!(fid, tfid);
            if *n < 50.0 {
                continue;
            }
            for c in 0..3 {
                raw += n * (est[c].0 - tru[c].0).abs();
                corrected += n * (est[c].1 - tru[c].0).abs();
            }
            records += n;
        }
        assert!(records > 0.0);
        report.push(format!(
            "seed {seed}: raw {:.4}, corrected {:.4}",
            raw / records,
            corrected / records
        ));
        closer += usize::from(corrected < raw);
    }
    assert!(
        closer >= 18,
        "corrected closer in {closer} of 20 seeds:\n{}",
        report.join("\n")
    );
}

#[test]
fn fewer_than_two_label_fields_is_refused_with_one_line() {
    let dir = out_dir("labels_bad");
    let input = sample_gpkg();
    let input = input.to_str().expect("path");
    run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            input,
            "--label-fields",
            "label_a",
            "--output",
            "x.gpkg",
        ],
    )
    .usage_error(&["--label-fields", "two"]);
    run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            input,
            "--label-fields",
            "label_a,label_b",
            "--correct-field",
            "label_c",
            "--output",
            "x.gpkg",
        ],
    )
    .usage_error(&["--correct-field"]);
    run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            input,
            "--layer",
            "veldmark_records",
            "--label-fields",
            "label_a,author_id",
            "--output",
            "x.gpkg",
        ],
    )
    .usage_error(&["author_id", "unknown stance values"]);
    assert!(!dir.join("x.gpkg").exists());
}

/// Around Saltrenne (a town far from every planted zone) a third classifier `label_c`, a copy of
/// classifier A, calls half of A's non-oppose records (by a fixed hash of the fid) "oppose": a
/// zone created only by one labeller's bias. The fids it changed.
fn plant_biased_labeller(path: &Path) -> Vec<i64> {
    let connection = rusqlite::Connection::open(path).expect("open copy");
    // The layer's update triggers call the GeoPackage's ST_ functions.
    stance_core::gpkg::blob::register_functions(&connection).expect("ST_ functions");
    connection
        .execute_batch(
            "ALTER TABLE veldmark_records ADD COLUMN label_c TEXT;
             UPDATE veldmark_records SET label_c = label_a;",
        )
        .expect("add label_c");
    let box_sql = "SELECT id FROM rtree_veldmark_records_geom \
         WHERE minx BETWEEN -139.98 AND -139.82 AND miny BETWEEN 34.64 AND 34.76";
    let changed: Vec<i64> = {
        let sql = format!(
            "SELECT fid FROM veldmark_records WHERE label_a <> 'oppose' \
             AND (fid * 2654435761) % 100 < 50 AND fid IN ({box_sql})"
        );
        let mut statement = connection.prepare(&sql).expect("prepare");
        let fids = statement.query_map([], |r| r.get(0)).expect("query");
        fids.map(|f| f.expect("fid")).collect()
    };
    for fid in &changed {
        connection
            .execute(
                "UPDATE veldmark_records SET label_c = 'oppose' WHERE fid = ?1",
                [fid],
            )
            .expect("bias");
    }
    changed
}

/// Clusters that survive the labeller: the ordinal scan (stance-scan) run with the truth, both
/// classifiers and the biased one; stance-labels --compare-layers on the four cluster layers.
/// A cluster of the truth is found again under every labeller (Jaccard ≥ 0.5 with a cluster
/// leaning the same way), and the biased
/// labeller's zone is a cluster matched in no other layer, made of the records it changed.
#[test]
fn a_planted_zone_survives_every_labeller_and_a_biased_zone_is_labeller_specific() {
    let dir = out_dir("labels_robustness");
    let input = dir.join("in.gpkg");
    let _ = std::fs::remove_file(&input);
    std::fs::copy(sample_gpkg(), &input).expect("copy sample");
    let changed = plant_biased_labeller(&input);
    assert!(changed.len() > 150, "{} records changed", changed.len());
    let fields = ["stance", "label_a", "label_b", "label_c"];
    for field in fields {
        let name = format!("scan_{field}");
        run_in(
            &dir,
            "stance-scan",
            &[
                "--input",
                "in.gpkg",
                "--layer",
                "veldmark_records",
                "--stance-field",
                field,
                "--model",
                "ordinal",
                "--toward",
                "both",
                "--max-radius-m",
                "12000",
                "--centres-cell-m",
                "2000",
                "--replicates",
                "39",
                "--report-p",
                "0.05",
                "--output",
                "clusters.gpkg",
                "--name",
                &name,
                "-q",
            ],
        )
        .ok();
    }
    let layers: Vec<String> = fields
        .iter()
        .map(|f| format!("scan_{f}_clusters"))
        .collect();
    let summary = run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--label-fields",
            "label_a,label_b,label_c",
            "--compare-layers",
            &layers.join(","),
            "--compare-file",
            "clusters.gpkg",
            "--compare-side-field",
            "leans_to",
            "--output",
            "clusters.gpkg",
            "--name",
            "robust",
            "-q",
        ],
    )
    .ok();
    assert!(
        summary["results"]["comparison"]["found_under_all"]
            .as_u64()
            .expect("count")
            >= 1
    );
    let path = dir.join("clusters.gpkg");
    let specific = rows(
        &path,
        "SELECT source_fid FROM robust_clusters \
         WHERE source_layer = 'scan_label_c_clusters' AND labeller_specific = 1",
    );
    let changed: std::collections::HashSet<i64> = changed.into_iter().collect();
    let biased_zone = specific.iter().any(|r| {
        let members = rows(
            &path,
            &format!(
                "SELECT feature_id FROM scan_label_c_members WHERE cluster_no = {}",
                r[0]
            ),
        );
        let hit = members
            .iter()
            .filter(|m| changed.contains(&m[0].parse::<i64>().expect("fid")))
            .count();
        !members.is_empty() && hit * 5 >= members.len()
    });
    assert!(
        biased_zone,
        "no labeller-specific cluster of label_c holds the changed records: {specific:?}"
    );
    let truth_found = rows(
        &path,
        "SELECT count(*) FROM robust_clusters \
         WHERE source_layer = 'scan_stance_clusters' AND found_under_all = 1",
    );
    assert_ne!(truth_found[0][0], "0");

    // A labeller under which the scan found nothing: its cluster layer is empty (made here with
    // GDAL's ogr2ogr, Debian gdal-bin). It is compared, not refused, and then no cluster is
    // found under every labeller.
    let status = std::process::Command::new("ogr2ogr")
        .current_dir(&dir)
        .args(["-update", "-where", "1 = 0", "-nln", "scan_none_clusters"])
        .args(["clusters.gpkg", "clusters.gpkg", "scan_stance_clusters"])
        .status()
        .expect("run ogr2ogr (Debian gdal-bin)");
    assert!(status.success());
    let with_empty = run_in(
        &dir,
        "stance-labels",
        &[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--label-fields",
            "label_a,label_b",
            "--compare-layers",
            "scan_stance_clusters,scan_none_clusters",
            "--compare-file",
            "clusters.gpkg",
            "--compare-side-field",
            "leans_to",
            "--output",
            "clusters.gpkg",
            "--name",
            "with_empty",
            "-q",
        ],
    )
    .ok();
    assert_eq!(with_empty["results"]["comparison"]["found_under_all"], 0);
    let rows_written = rows(&path, "SELECT count(*) FROM with_empty_clusters");
    assert_eq!(rows_written[0][0], truth_found_count(&path));
}

/// Clusters of the truth's scan: each is one row of a comparison that includes it.
fn truth_found_count(path: &Path) -> String {
    rows(path, "SELECT count(*) FROM scan_stance_clusters")[0][0].clone()
}
