//! stance-moran end to end on the North Carolina SIDS counties (SID74 / BIR74, queen contiguity):
//! global and local Moran's I against R spdep and PySAL esda, the Assunção–Reis EB index against
//! spdep `EBImoran.mc` and esda `Moran_Rate`, permutation inference checked statistically, and
//! the constant-field, island and thread-count cases.
//!
//! References: tests/reference/data/moran_nc_spdep.json (R spdep 1.2-7, script
//! tests/reference/make_moran.R) and moran_nc_pysal.json (esda 2.6.0 / libpysal 4.12.1, script
//! tests/reference/make_moran.py), both printed with 15+ significant digits.
//!
//! Tolerance: analytic values to 1e-9 absolute (and relative for p-values): both sides evaluate
//! the same closed forms in double precision on 100 areas, so they agree to ~1e-14; 1e-9 leaves
//! room for summation order only. Permutation values differ by generator: checked statistically.

use std::path::{Path, PathBuf};

use serde_json::Value;
use stance_core::montecarlo::mix64;
use stance_tests::{out_dir, root, run_in};

const TOLERANCE: f64 = 1e-9;

fn reference(name: &str) -> Value {
    let path = root().join("tests/reference/data").join(name);
    serde_json::from_str(&std::fs::read_to_string(&path).expect("reference JSON")).expect("JSON")
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

fn close(got: f64, expected: f64, what: &str) {
    let scale = expected.abs().max(1.0);
    assert!(
        (got - expected).abs() <= TOLERANCE * scale,
        "{what}: got {got}, expected {expected}"
    );
}

fn close_p(got: f64, expected: f64, what: &str) {
    assert!(
        (got - expected).abs() <= TOLERANCE * expected.abs().max(1e-300) + 1e-15,
        "{what}: got {got}, expected {expected}"
    );
}

/// A copy of nc.gpkg (layer `nc`) with `rate74` = SID74 / BIR74, five fields `random_1..5` of independent
/// uniform values (SplitMix64), and `constant` = 1.
fn fixture(dir: &Path) -> PathBuf {
    let path = dir.join("nc_work.gpkg");
    // A fresh GeoPackage (sf's file predates GDAL 3.6's schema defaults, which the strict
    // validator of `make test` checks), written by ogr2ogr from Debian's gdal-bin.
    let status = std::process::Command::new("ogr2ogr")
        .args(["-f", "GPKG", "-nln", "nc"])
        .arg(&path)
        .arg(root().join("tests/reference/data/nc.gpkg"))
        .status()
        .expect("run ogr2ogr (Debian gdal-bin)");
    assert!(status.success(), "ogr2ogr failed");
    // GDAL's own SQL, so the GeoPackage's R-tree triggers find their ST_* functions.
    let options = gdal::DatasetOptions {
        open_flags: gdal::GdalOpenFlags::GDAL_OF_UPDATE | gdal::GdalOpenFlags::GDAL_OF_VECTOR,
        ..Default::default()
    };
    let dataset = gdal::Dataset::open_ex(&path, options).expect("open with GDAL");
    let mut sql = vec![
        "ALTER TABLE nc ADD COLUMN rate74 REAL".to_owned(),
        "UPDATE nc SET rate74 = CAST(SID74 AS REAL) / BIR74".to_owned(),
        "ALTER TABLE nc ADD COLUMN constant REAL".to_owned(),
        "UPDATE nc SET constant = 1.0".to_owned(),
    ];
    for k in 1..=5u64 {
        sql.push(format!("ALTER TABLE nc ADD COLUMN random_{k} REAL"));
        for fid in 1..=100u64 {
            let u = (mix64(k * 1000 + fid) >> 11) as f64 / (1u64 << 53) as f64;
            sql.push(format!(
                "UPDATE nc SET random_{k} = {u:e} WHERE fid = {fid}"
            ));
        }
    }
    for statement in sql {
        dataset
            .execute_sql(&statement, None, gdal::vector::sql::Dialect::DEFAULT)
            .expect("fixture SQL");
    }
    dataset.close().expect("close");
    path
}

/// Local fields of the output, by feature order.
fn local_fields(path: &Path, layer: &str, fields: &[&str]) -> Vec<Vec<Option<f64>>> {
    let connection =
        rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .expect("open");
    fields
        .iter()
        .map(|f| {
            let mut statement = connection
                .prepare(&format!("SELECT {f} FROM \"{layer}\" ORDER BY fid"))
                .expect("prepare");
            let values = statement
                .query_map([], |r| r.get::<_, Option<f64>>(0))
                .expect("query")
                .map(|v| v.expect("row"))
                .collect();
            values
        })
        .collect()
}

fn moran(dir: &Path, input: &Path, name: &str, extra: &[&str]) -> Value {
    let mut args = vec![
        "--input",
        input.to_str().expect("utf-8"),
        "--output",
        "out.gpkg",
        "--name",
        name,
        "-q",
    ];
    args.extend(extra);
    run_in(dir, "stance-moran", &args).ok()
}

#[test]
fn global_and_local_match_spdep_and_esda() {
    let spdep = reference("moran_nc_spdep.json");
    let esda = reference("moran_nc_pysal.json");
    let dir = out_dir("moran_nc");
    let input = fixture(&dir);
    for (style, key) in [("row", "row"), ("binary", "binary")] {
        for (alternative, spdep_global, spdep_local) in [
            ("greater", "randomisation_greater", None),
            ("two-sided", "randomisation_two_sided", Some("two_sided")),
        ] {
            let name = format!("m_{style}_{alternative}");
            let summary = moran(
                &dir,
                &input,
                &name,
                &[
                    "--field",
                    "rate74",
                    "--standardise",
                    style,
                    "--alternative",
                    alternative,
                    "--permutations",
                    "99",
                ],
            );
            let g = &summary["results"]["global"];
            let get = |k: &str| g[k].as_f64().expect(k);
            // R spdep 1.2-7 moran.test(randomisation = TRUE / FALSE).
            let r = &spdep[format!("global_queen_{key}")][spdep_global];
            close(get("i"), r["i"].as_f64().expect("i"), "I vs spdep");
            close(
                get("expected_i"),
                r["expected"].as_f64().expect("E"),
                "E[I]",
            );
            close(
                get("variance_i_randomisation"),
                r["variance"].as_f64().expect("V"),
                "Var_R",
            );
            close(get("z_randomisation"), r["z"].as_f64().expect("z"), "z_R");
            close_p(
                get("p_randomisation"),
                r["p"].as_f64().expect("p"),
                "p_R vs spdep",
            );
            let normal = &spdep[format!("global_queen_{key}")]["normality_greater"];
            close(
                get("variance_i_normality"),
                normal["variance"].as_f64().expect("V"),
                "Var_N",
            );
            if alternative == "greater" {
                close_p(get("p_normality"), normal["p"].as_f64().expect("p"), "p_N");
            }
            // esda 2.6.0 Moran: both variances, both z, two-sided p.
            let e = &esda[format!("global_queen_{key}")];
            close(get("i"), e["i"].as_f64().expect("i"), "I vs esda");
            close(
                get("variance_i_normality"),
                e["variance_normality"].as_f64().expect("VN"),
                "VN esda",
            );
            close(
                get("z_normality"),
                e["z_normality"].as_f64().expect("zN"),
                "zN esda",
            );
            close(
                get("z_randomisation"),
                e["z_randomisation"].as_f64().expect("zR"),
                "zR esda",
            );
            if alternative == "two-sided" {
                close_p(
                    get("p_normality"),
                    e["p_normality_two_sided"].as_f64().expect("p"),
                    "pN esda",
                );
                close_p(
                    get("p_randomisation"),
                    e["p_randomisation_two_sided"].as_f64().expect("p"),
                    "pR esda",
                );
            }
            let Some(local_key) = spdep_local else {
                continue;
            };
            // R spdep 1.2-7 localmoran(conditional = TRUE, alternative = "two.sided").
            let l = &spdep[format!("local_queen_{key}_{local_key}")];
            let got = local_fields(
                &dir.join("out.gpkg"),
                &name,
                &["local_i", "expected_i", "variance_i", "z", "p_analytic"],
            );
            for (c, field) in ["ii", "expected", "variance", "z"].iter().enumerate() {
                for (i, expected) in numbers(&l[*field]).into_iter().enumerate() {
                    close(
                        got[c][i].expect("value"),
                        expected,
                        &format!("{field}[{i}] vs spdep"),
                    );
                }
            }
            for (i, expected) in numbers(&l["p"]).into_iter().enumerate() {
                close_p(got[4][i].expect("p"), expected, &format!("p[{i}] vs spdep"));
            }
            // esda 2.6.0 Moran_Local: Is = (n − 1)/n · Ii; EIc and VIc on spdep's scale.
            let el = &esda[format!("local_queen_{key}")];
            for (i, is) in numbers(&el["is_esda_scale"]).into_iter().enumerate() {
                close(got[0][i].expect("Ii") * 99.0 / 100.0, is, "Is vs esda");
            }
            for (i, e) in numbers(&el["expected_conditional"]).into_iter().enumerate() {
                close(got[1][i].expect("E"), e, "EIc vs esda");
            }
            for (i, v) in numbers(&el["variance_conditional"]).into_iter().enumerate() {
                close(got[2][i].expect("V"), v, "VIc vs esda");
            }
        }
    }
}

#[test]
fn empirical_bayes_index_matches_spdep_and_esda() {
    let spdep = reference("moran_nc_spdep.json");
    let esda = reference("moran_nc_pysal.json");
    let dir = out_dir("moran_eb");
    let input = fixture(&dir);
    let summary = moran(
        &dir,
        &input,
        "eb",
        &[
            "--case-field",
            "SID74",
            "--at-risk-field",
            "BIR74",
            "--permutations",
            "99",
        ],
    );
    let i = summary["results"]["global"]["i"].as_f64().expect("I");
    // spdep 1.2-7 EBImoran.mc(SID74, BIR74, nb2listw(queen)) statistic; esda Moran_Rate(adjusted=True).
    close(
        i,
        spdep["eb_index_queen_row"]["statistic"]
            .as_f64()
            .expect("EBI"),
        "EBI vs spdep",
    );
    close(
        i,
        esda["eb_index_queen_row"]["i"].as_f64().expect("EBI"),
        "EBI vs esda",
    );
    let values = local_fields(&dir.join("out.gpkg"), "eb", &["value_analysed"]);
    let expected = numbers(&spdep["eb_index_queen_row"]["standardised_rate"]);
    for (k, e) in expected.into_iter().enumerate() {
        close(values[0][k].expect("z"), e, "EB standardised rate vs spdep");
    }
}

/// Spearman rank correlation.
fn spearman(a: &[f64], b: &[f64]) -> f64 {
    let rank = |v: &[f64]| {
        let mut order: Vec<usize> = (0..v.len()).collect();
        order.sort_by(|&i, &j| v[i].total_cmp(&v[j]));
        let mut r = vec![0.0; v.len()];
        let mut k = 0;
        while k < order.len() {
            let mut end = k;
            while end + 1 < order.len() && v[order[end + 1]] == v[order[k]] {
                end += 1;
            }
            for &o in &order[k..=end] {
                r[o] = (k + end) as f64 / 2.0;
            }
            k = end + 1;
        }
        r
    };
    let (ra, rb) = (rank(a), rank(b));
    let n = a.len() as f64;
    let (ma, mb) = (ra.iter().sum::<f64>() / n, rb.iter().sum::<f64>() / n);
    let cov: f64 = ra.iter().zip(&rb).map(|(x, y)| (x - ma) * (y - mb)).sum();
    let va: f64 = ra.iter().map(|x| (x - ma).powi(2)).sum();
    let vb: f64 = rb.iter().map(|y| (y - mb).powi(2)).sum();
    cov / (va * vb).sqrt()
}

#[test]
fn permutation_inference_behaves() {
    let dir = out_dir("moran_permutation");
    let input = fixture(&dir);
    // Seeded pseudo p against the analytic p of the same areas (two-sided, 999 permutations).
    moran(
        &dir,
        &input,
        "rate",
        &["--field", "rate74", "--adjust", "none"],
    );
    let got = local_fields(
        &dir.join("out.gpkg"),
        "rate",
        &["p_permutation", "p_analytic"],
    );
    let pseudo: Vec<f64> = got[0].iter().map(|v| v.expect("p")).collect();
    let analytic: Vec<f64> = got[1].iter().map(|v| v.expect("p")).collect();
    let rho = spearman(&pseudo, &analytic);
    // Both rank the same evidence; on these data rho is ≈ 0.9. 0.7 fails only if they disagree.
    assert!(rho > 0.7, "Spearman rho of pseudo vs analytic p = {rho}");
    // Under random values the share of pseudo p < 0.05 is near 5%: 500 tests, binomial sd ≈ 1%,
    // so 2%–9% is a ±3–4 sd band.
    let mut below = 0;
    let mut total = 0;
    for k in 1..=5 {
        let name = format!("random_{k}");
        moran(&dir, &input, &name, &["--field", &name, "--adjust", "none"]);
        let p = local_fields(&dir.join("out.gpkg"), &name, &["p_permutation"]);
        below += p[0].iter().filter(|v| v.expect("p") < 0.05).count();
        total += p[0].len();
    }
    let share = below as f64 / total as f64;
    assert!(
        (0.02..=0.09).contains(&share),
        "share of p < 0.05 under random values = {share}"
    );
}

#[test]
fn weights_table_threads_constant_field_and_islands() {
    let dir = out_dir("moran_cases");
    let input = fixture(&dir);
    let input_s = input.to_str().expect("utf-8");
    // A weights table keyed by FIPS, in the same file: moran takes the id field from its provenance.
    run_in(
        &dir,
        "stance-weights",
        &[
            "--input",
            input_s,
            "--output",
            input_s,
            "--id-field",
            "FIPS",
            "--name",
            "w_fips",
            "-q",
        ],
    )
    .ok();
    let from_table = moran(
        &dir,
        &input,
        "t",
        &["--field", "rate74", "--weights", "w_fips"],
    );
    assert_eq!(from_table["results"]["weights"]["id_field"], "FIPS");
    let on_the_fly = moran(&dir, &input, "f", &["--field", "rate74"]);
    let fields = ["local_i", "p_permutation", "p_adjusted", "neighbours"];
    assert_eq!(
        local_fields(&dir.join("out.gpkg"), "t", &fields),
        local_fields(&dir.join("out.gpkg"), "f", &fields)
    );
    assert_eq!(
        from_table["results"]["global"]["p_permutation"],
        on_the_fly["results"]["global"]["p_permutation"]
    );
    // The same table in another file, through --weights-file.
    run_in(
        &dir,
        "stance-weights",
        &[
            "--input",
            input_s,
            "--output",
            "w_other.gpkg",
            "--id-field",
            "FIPS",
            "--name",
            "w_fips",
            "-q",
        ],
    )
    .ok();
    let other = dir.join("w_other.gpkg");
    let from_file = moran(
        &dir,
        &input,
        "o",
        &[
            "--field",
            "rate74",
            "--weights",
            "w_fips",
            "--weights-file",
            other.to_str().expect("utf-8"),
        ],
    );
    assert_eq!(from_file["results"]["weights"]["id_field"], "FIPS");
    assert_eq!(
        local_fields(&dir.join("out.gpkg"), "o", &fields),
        local_fields(&dir.join("out.gpkg"), "f", &fields)
    );
    run_in(
        &dir,
        "stance-moran",
        &[
            "--input",
            input_s,
            "--output",
            "c.gpkg",
            "--field",
            "rate74",
            "--weights-file",
            other.to_str().expect("utf-8"),
        ],
    )
    .usage_error(&["--weights-file", "--weights"]);
    // Holm (1979) step-down never exceeds Bonferroni and never goes below the raw p.
    for method in ["bonferroni", "holm"] {
        moran(
            &dir,
            &input,
            method,
            &["--field", "rate74", "--adjust", method, "--seed", "3"],
        );
    }
    let bonferroni = local_fields(&dir.join("out.gpkg"), "bonferroni", &["p_adjusted"]);
    let holm = local_fields(
        &dir.join("out.gpkg"),
        "holm",
        &["p_adjusted", "p_permutation"],
    );
    let mut smaller = 0;
    for ((b, h), raw) in bonferroni[0].iter().zip(&holm[0]).zip(&holm[1]) {
        let (b, h, raw) = (b.expect("p"), h.expect("p"), raw.expect("p"));
        assert!(raw <= h && h <= b, "raw {raw}, Holm {h}, Bonferroni {b}");
        smaller += usize::from(h < b);
    }
    assert!(smaller > 0, "Holm equals Bonferroni everywhere");
    // --threads 1 and 2 give identical outputs.
    let one = moran(
        &dir,
        &input,
        "th1",
        &["--field", "rate74", "--threads", "1", "--seed", "4"],
    );
    let two = moran(
        &dir,
        &input,
        "th2",
        &["--field", "rate74", "--threads", "2", "--seed", "4"],
    );
    assert_eq!(
        one["results"],
        two["results"]
            .clone()
            .as_object()
            .map(|o| {
                let mut o = o.clone();
                o.insert("layer".into(), "th1".into());
                Value::Object(o)
            })
            .expect("object")
    );
    let all = ["local_i", "p_permutation", "p_adjusted", "z"];
    assert_eq!(
        local_fields(&dir.join("out.gpkg"), "th1", &all),
        local_fields(&dir.join("out.gpkg"), "th2", &all)
    );
    // A constant field is a clear error, and nothing is written.
    run_in(
        &dir,
        "stance-moran",
        &[
            "--input", input_s, "--output", "c.gpkg", "--field", "constant", "-q",
        ],
    )
    .usage_error(&["constant", "all values are equal"]);
    assert!(!dir.join("c.gpkg").exists());
    // Islands (a 25 km centroid band): NULL statistics and is_island = 1, never a crash.
    let band = moran(
        &dir,
        &input,
        "band",
        &[
            "--field",
            "rate74",
            "--method",
            "distance",
            "--max-distance-m",
            "25000",
        ],
    );
    let islands = band["results"]["local"]["islands"].as_u64().expect("count");
    assert!(islands > 0);
    let got = local_fields(
        &dir.join("out.gpkg"),
        "band",
        &["is_island", "local_i", "p_permutation", "neighbours"],
    );
    for (((flag, ii), p), count) in got[0].iter().zip(&got[1]).zip(&got[2]).zip(&got[3]) {
        let island = *flag == Some(1.0);
        assert_eq!(island, ii.is_none());
        assert_eq!(island, p.is_none());
        assert_eq!(island, *count == Some(0.0));
    }
    assert_eq!(
        got[0].iter().filter(|v| **v == Some(1.0)).count() as u64,
        islands
    );
}
