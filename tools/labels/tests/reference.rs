//! stance-labels' agreement statistics against reference implementations: scikit-learn 1.5.2
//! `cohen_kappa_score`, statsmodels 0.14.4 `cohens_kappa` (standard errors) and `fleiss_kappa`,
//! krippendorff 0.8.1 `alpha` (ordinal), scikit-learn `precision_recall_fscore_support` and
//! statsmodels `proportion_confint(method="wilson")`, on fixed label vectors stored by
//! tests/reference/make_labels.py in tests/reference/data/labels_reference.json (versions
//! recorded there too).

use approx::assert_relative_eq;
use serde_json::Value;
use stance_core::normal::quantile as normal_quantile;
use stance_labels::confusion::scores;
use stance_labels::kappa::{kappa, table, Weighting};
use stance_labels::multi::{fleiss_kappa, krippendorff_ordinal};

/// 1e-9 relative: closed-form statistics computed in double precision both sides; observed
/// differences are ~1e-15.
const TOLERANCE: f64 = 1e-9;

fn reference() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/data/labels_reference.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("reference JSON")).expect("JSON")
}

fn vector(v: &Value) -> Vec<usize> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_u64().expect("class") as usize)
        .collect()
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

#[test]
fn kappas_and_their_standard_errors_match_scikit_learn_and_statsmodels() {
    let r = reference();
    let labels: Vec<Vec<usize>> = r["labels"]
        .as_array()
        .expect("labels")
        .iter()
        .map(vector)
        .collect();
    for pair in r["pairs"].as_array().expect("pairs") {
        let (a, b) = (
            pair["a"].as_u64().expect("a") as usize,
            pair["b"].as_u64().expect("b") as usize,
        );
        let t = table(&labels[a], &labels[b], 3);
        for (name, w) in [
            ("none", Weighting::None),
            ("linear", Weighting::Linear),
            ("quadratic", Weighting::Quadratic),
        ] {
            let got = kappa(&t, w);
            assert_relative_eq!(
                got.kappa,
                f(&pair[format!("sklearn_kappa_{name}")]),
                max_relative = TOLERANCE
            );
            assert_relative_eq!(
                got.kappa,
                f(&pair[format!("statsmodels_kappa_{name}")]),
                max_relative = TOLERANCE
            );
            assert_relative_eq!(
                got.se,
                f(&pair[format!("statsmodels_se_{name}")]),
                max_relative = TOLERANCE
            );
        }
    }
}

#[test]
fn fleiss_kappa_matches_statsmodels_on_the_records_and_the_worked_example() {
    let r = reference();
    let labels: Vec<Vec<usize>> = r["labels"]
        .as_array()
        .expect("labels")
        .iter()
        .map(vector)
        .collect();
    let rows: Vec<Vec<u64>> = (0..labels[0].len())
        .map(|i| {
            let mut row = vec![0u64; 3];
            labels.iter().for_each(|l| row[l[i]] += 1);
            row
        })
        .collect();
    assert_relative_eq!(
        fleiss_kappa(&rows),
        f(&r["fleiss_kappa"]),
        max_relative = TOLERANCE
    );
    let example: Vec<Vec<u64>> = r["fleiss_example"]["table"]
        .as_array()
        .expect("table")
        .iter()
        .map(|row| {
            row.as_array()
                .expect("row")
                .iter()
                .map(|v| v.as_u64().expect("count"))
                .collect()
        })
        .collect();
    assert_relative_eq!(
        fleiss_kappa(&example),
        f(&r["fleiss_example"]["kappa"]),
        max_relative = TOLERANCE
    );
}

#[test]
fn ordinal_alpha_matches_the_krippendorff_package_with_and_without_missing_values() {
    let r = reference();
    let labels: Vec<Vec<usize>> = r["labels"]
        .as_array()
        .expect("labels")
        .iter()
        .map(vector)
        .collect();
    let units: Vec<Vec<Option<usize>>> = (0..labels[0].len())
        .map(|i| labels.iter().map(|l| Some(l[i])).collect())
        .collect();
    assert_relative_eq!(
        krippendorff_ordinal(&units, 3),
        f(&r["krippendorff_ordinal"]),
        max_relative = TOLERANCE
    );
    let missing: Vec<Vec<Option<usize>>> = r["missing"]
        .as_array()
        .expect("missing")
        .iter()
        .map(|row| {
            row.as_array()
                .expect("row")
                .iter()
                .map(|v| v.as_u64().map(|c| c as usize))
                .collect()
        })
        .collect();
    let units: Vec<Vec<Option<usize>>> = (0..missing[0].len())
        .map(|i| missing.iter().map(|l| l[i]).collect())
        .collect();
    assert_relative_eq!(
        krippendorff_ordinal(&units, 3),
        f(&r["krippendorff_ordinal_missing"]),
        max_relative = TOLERANCE
    );
}

/// Wilson bounds: 1e-7, the error of the normal quantile approximation carried into them.
#[test]
fn precision_recall_f1_and_wilson_intervals_match_scikit_learn_and_statsmodels() {
    let r = reference();
    let truth = vector(&r["truth"]);
    let labels: Vec<Vec<usize>> = r["labels"]
        .as_array()
        .expect("labels")
        .iter()
        .map(vector)
        .collect();
    let z = normal_quantile(0.975);
    for s in r["scores"].as_array().expect("scores") {
        let j = s["labeller"].as_u64().expect("labeller") as usize;
        let got = scores(&truth, &labels[j], 3, z);
        for (c, want) in s["classes"].as_array().expect("classes").iter().enumerate() {
            let g = &got.classes[c];
            assert_relative_eq!(
                g.precision.estimate,
                f(&want["precision"]),
                max_relative = TOLERANCE
            );
            assert_relative_eq!(
                g.recall.estimate,
                f(&want["recall"]),
                max_relative = TOLERANCE
            );
            assert_relative_eq!(g.f1, f(&want["f1"]), max_relative = TOLERANCE);
            assert_relative_eq!(
                g.precision.lower,
                f(&want["precision_lower"]),
                max_relative = 1e-7
            );
            assert_relative_eq!(
                g.precision.upper,
                f(&want["precision_upper"]),
                max_relative = 1e-7
            );
            assert_relative_eq!(
                g.recall.lower,
                f(&want["recall_lower"]),
                max_relative = 1e-7
            );
            assert_relative_eq!(
                g.recall.upper,
                f(&want["recall_upper"]),
                max_relative = 1e-7
            );
        }
    }
}
