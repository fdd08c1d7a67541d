//! stance-local end to end on the North Carolina SIDS counties (queen contiguity built here):
//! local join counts, global join counts and Getis–Ord Gi / Gi* against PySAL esda and R spdep;
//! permutation p-values checked statistically against the exact conditional distribution
//! (hypergeometric for join counts) and against esda; point records; thread-count determinism;
//! bad arguments.
//!
//! References: tests/reference/data/local_nc.json (esda 2.6.0 `Join_Counts`,
//! `Join_Counts_Local`, `Join_Counts_Local_BV`, `Join_Counts_Local_MV`, `G_Local`; libpysal
//! 4.12.1 Queen; numpy 2.1.3; script tests/reference/make_local.py) and local_nc_spdep.json
//! (R spdep 1.2-7 `joincount.test`, `joincount.multi`, `local_joincount_uni`,
//! `local_joincount_bv`, `localG` with and without `include.self`; script
//! tests/reference/make_local.R). Binary variables, stated in the scripts: high = SID79 / BIR79
//! above its median; low = at most its first quartile; nonwhite = NWBIR79 / BIR79 above its
//! median.
//!
//! Tolerances: join counts are integers and must be equal; G statistics 1e-12 relative (the
//! same few sums in double precision); analytic moments and z to 1e-9 (the bar; both
//! sides evaluate closed forms, agreement is ~1e-14). Permutation p-values: within 4.5 Monte
//! Carlo standard errors plus 0.002 (a correct generator fails such a check about once in
//! 100 000 areas).

use std::path::{Path, PathBuf};

use serde_json::Value;
use stance_tests::{out_dir, root, run_in};

fn reference(name: &str) -> Value {
    let path = root().join("tests/reference/data").join(name);
    serde_json::from_str(&std::fs::read_to_string(&path).expect("reference JSON")).expect("JSON")
}

fn numbers(v: &Value) -> Vec<Option<f64>> {
    v.as_array()
        .expect("array")
        .iter()
        .map(Value::as_f64)
        .collect()
}

fn num(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} missing"))
}

fn close(got: f64, expected: f64, tolerance: f64, what: &str) {
    let scale = expected.abs().max(1.0);
    assert!(
        (got - expected).abs() <= tolerance * scale,
        "{what}: got {got}, expected {expected}"
    );
}

/// A copy of nc.gpkg (layer `nc`) with `rate79` = SID79 / BIR79, `share_nw` = NWBIR79 / BIR79
/// and `label` = 'oppose' where rate79 > `median`, else 'support'.
fn fixture(dir: &Path, median: f64) -> PathBuf {
    let path = dir.join("nc_local.gpkg");
    let status = std::process::Command::new("ogr2ogr")
        .args(["-f", "GPKG", "-nln", "nc"])
        .arg(&path)
        .arg(root().join("tests/reference/data/nc.gpkg"))
        .status()
        .expect("run ogr2ogr (Debian gdal-bin)");
    assert!(status.success(), "ogr2ogr failed");
    let options = gdal::DatasetOptions {
        open_flags: gdal::GdalOpenFlags::GDAL_OF_UPDATE | gdal::GdalOpenFlags::GDAL_OF_VECTOR,
        ..Default::default()
    };
    let dataset = gdal::Dataset::open_ex(&path, options).expect("open with GDAL");
    for statement in [
        "ALTER TABLE nc ADD COLUMN rate79 REAL".to_owned(),
        "UPDATE nc SET rate79 = CAST(SID79 AS REAL) / BIR79".to_owned(),
        "ALTER TABLE nc ADD COLUMN share_nw REAL".to_owned(),
        "UPDATE nc SET share_nw = CAST(NWBIR79 AS REAL) / BIR79".to_owned(),
        "ALTER TABLE nc ADD COLUMN label TEXT".to_owned(),
        format!(
            "UPDATE nc SET label = CASE WHEN rate79 > {median:e} THEN 'Oppose' ELSE 'support' END"
        ),
    ] {
        dataset
            .execute_sql(&statement, None, gdal::vector::sql::Dialect::DEFAULT)
            .expect("fixture SQL");
    }
    dataset.close().expect("close");
    path
}

/// Fields of the output by feature order.
fn columns(path: &Path, layer: &str, fields: &[&str]) -> Vec<Vec<Option<f64>>> {
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

fn local(dir: &Path, input: &Path, name: &str, extra: &[&str]) -> Value {
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
    run_in(dir, "stance-local", &args).ok()
}

/// P(X ≥ c) for X hypergeometric: `k` draws from `total` places of which `good` have the value.
fn hypergeometric_upper(total: u64, good: u64, k: u64, c: u64) -> f64 {
    let ln_choose = |n: u64, r: u64| -> f64 {
        if r > n {
            return f64::NEG_INFINITY;
        }
        (1..=r).map(|j| ((n - r + j) as f64 / j as f64).ln()).sum()
    };
    (c..=k.min(good))
        .map(|m| (ln_choose(good, m) + ln_choose(total - good, k - m) - ln_choose(total, k)).exp())
        .sum()
}

fn monte_carlo_close(got: f64, expected: f64, what: &str) {
    let se = (expected * (1.0 - expected) / 1000.0).sqrt();
    assert!(
        (got - expected).abs() <= 4.5 * se + 0.002,
        "{what}: permutation p {got}, reference {expected}"
    );
}

#[test]
fn join_counts_match_esda_and_spdep() {
    let esda = reference("local_nc.json");
    let spdep = reference("local_nc_spdep.json");
    let median = num(&esda, "rate_median");
    let q25 = num(&esda, "rate_q25");
    let share_median = num(&esda, "share_nonwhite_median");
    let dir = out_dir("local_nc_joins");
    let input = fixture(&dir, median);
    let above = format!("> {median:e}");
    let summary = local(
        &dir,
        &input,
        "uni",
        &[
            "--statistic",
            "join-count",
            "--field",
            "rate79",
            "--rule",
            &above,
        ],
    );
    let out = dir.join("out.gpkg");
    let got = columns(
        &out,
        "uni",
        &["join_count", "p_permutation", "tested", "neighbours"],
    );
    // esda Join_Counts_Local and spdep local_joincount_uni: the counts, exactly.
    let want = numbers(&esda["local_univariate_high"]["join_count"]);
    let want_r = numbers(&spdep["local_uni_join_count"]);
    let high = numbers(&esda["high"]);
    for i in 0..100 {
        assert_eq!(got[0][i], want[i], "LJC area {i} vs esda");
        assert_eq!(got[0][i], want_r[i], "LJC area {i} vs spdep");
        // Only areas with the attribute are tested (Anselin & Li 2019).
        assert_eq!(got[2][i], high[i], "tested area {i}");
    }
    // Pseudo p against the exact conditional distribution: area i keeps x_i = 1, its k
    // neighbours are drawn from the other 99 areas, of which n1 − 1 have the attribute.
    let n1 = high.iter().filter(|h| **h == Some(1.0)).count() as u64;
    for i in 0..100 {
        if high[i] == Some(1.0) {
            let c = got[0][i].expect("count") as u64;
            let k = got[3][i].expect("neighbours") as u64;
            let exact = hypergeometric_upper(99, n1 - 1, k, c);
            monte_carlo_close(got[1][i].expect("p"), exact, &format!("area {i}"));
        } else {
            assert_eq!(got[1][i], None, "area {i} without the attribute has no p");
        }
    }
    // Global join counts: counts from esda Join_Counts, moments from spdep joincount.multi.
    let g = &summary["results"]["local"]["global_join_counts"][0];
    let e = &esda["global_high"];
    for (ours, theirs, multi) in [
        ("bb", "bb", "multi_bb"),
        ("ww", "ww", "multi_ww"),
        ("bw", "bw", "multi_bw"),
    ] {
        assert_eq!(num(&g[ours], "count"), num(e, theirs), "{ours} vs esda");
        let r = &spdep[multi];
        assert_eq!(
            num(&g[ours], "count"),
            num(r, "statistic"),
            "{ours} vs spdep"
        );
        close(
            num(&g[ours], "expected"),
            num(r, "expected"),
            1e-9,
            &format!("E {ours}"),
        );
        close(
            num(&g[ours], "variance"),
            num(r, "variance"),
            1e-9,
            &format!("Var {ours}"),
        );
        close(num(&g[ours], "z"), num(r, "z"), 1e-9, &format!("z {ours}"));
    }
    // spdep joincount.test (non-free sampling, greater): the BB p-value.
    let bb = &spdep["joincount_test_black"];
    close(num(&g["bb"], "p_analytic"), num(bb, "p"), 1e-9, "p BB");
    // The same attribute from a class field ('Oppose' mapped by the shared class rules).
    local(
        &dir,
        &input,
        "uni_class",
        &[
            "--statistic",
            "join-count",
            "--class-field",
            "label",
            "--class",
            "oppose",
        ],
    );
    let by_class = columns(&out, "uni_class", &["join_count", "p_permutation"]);
    assert_eq!(
        by_class,
        got[..2].to_vec(),
        "class rule = threshold rule, same seed"
    );

    // Bivariate without co-location: high next to low (esda BJC) and high next to not-high
    // (spdep's BJC case needs z = 1 − x).
    let low = format!("<= {q25:e}");
    local(
        &dir,
        &input,
        "bv",
        &[
            "--statistic",
            "join-count-bivariate",
            "--field",
            "rate79",
            "--rule",
            &above,
            "--rule-b",
            &low,
        ],
    );
    let bv = columns(&out, "bv", &["join_count"]);
    assert_eq!(
        bv[0],
        numbers(&esda["local_bivariate_high_low"]["join_count"]),
        "BJC vs esda"
    );
    let not_high = format!("<= {median:e}");
    local(
        &dir,
        &input,
        "bv2",
        &[
            "--statistic",
            "join-count-bivariate",
            "--field",
            "rate79",
            "--rule",
            &above,
            "--rule-b",
            &not_high,
        ],
    );
    let bv2 = columns(&out, "bv2", &["join_count"]);
    assert_eq!(
        bv2[0],
        numbers(&spdep["local_bv_high_nothigh_join_count"]),
        "BJC vs spdep"
    );
    // Co-location of high rates and a high non-white birth share.
    let share = format!("> {share_median:e}");
    local(
        &dir,
        &input,
        "clc",
        &[
            "--statistic",
            "co-location",
            "--field",
            "rate79",
            "--rule",
            &above,
            "--field-b",
            "share_nw",
            "--rule-b",
            &share,
        ],
    );
    let clc = columns(&out, "clc", &["join_count"]);
    let c = &esda["local_colocation_high_nonwhite"];
    assert_eq!(clc[0], numbers(&c["join_count"]), "CLC vs esda BV");
    assert_eq!(clc[0], numbers(&c["join_count_mv"]), "CLC vs esda MV");
    assert_eq!(
        clc[0],
        numbers(&spdep["local_clc_high_nonwhite_join_count"]),
        "CLC vs spdep"
    );
}

#[test]
fn getis_ord_matches_esda_and_spdep() {
    let esda = reference("local_nc.json");
    let spdep = reference("local_nc_spdep.json");
    let dir = out_dir("local_nc_getis");
    let input = fixture(&dir, num(&esda, "rate_median"));
    let out = dir.join("out.gpkg");
    for (statistic, style, key, r_key) in [
        ("gi", "binary", "g_plain_binary", "localg_binary"),
        ("gi", "row", "g_plain_row", "localg_row"),
        ("gi-star", "binary", "g_star_binary", "localg_star_binary"),
        ("gi-star", "row", "g_star_row", "localg_star_row"),
    ] {
        let name = format!("{statistic}_{style}");
        local(
            &dir,
            &input,
            &name,
            &[
                "--statistic",
                statistic,
                "--field",
                "rate79",
                "--standardise",
                style,
            ],
        );
        let got = columns(
            &out,
            &name,
            &["g", "expected_g", "variance_g", "z", "p_permutation"],
        );
        let e = &esda[key];
        let (g, z_r) = (numbers(&e["g"]), numbers(&spdep[r_key]));
        for i in 0..100 {
            let what = format!("{name} area {i}");
            // esda G_Local: the statistic (both styles).
            close(
                got[0][i].expect("g"),
                g[i].expect("g"),
                1e-12,
                &format!("{what}: G vs esda"),
            );
            // spdep localG (Ord & Getis 1995 moments, any weights): z.
            close(
                got[3][i].expect("z"),
                z_r[i].expect("z"),
                1e-9,
                &format!("{what}: z vs spdep"),
            );
            if style == "binary" {
                // esda's moments are the papers' for binary weights (with row-standardised
                // weights esda uses W_i (n' − W_i) in place of n' S1_i − W_i², so only the
                // statistic is compared there).
                close(
                    got[1][i].expect("E"),
                    num_at(&e["expected"], i),
                    1e-9,
                    &format!("{what}: E"),
                );
                close(
                    got[2][i].expect("V"),
                    num_at(&e["variance"], i),
                    1e-9,
                    &format!("{what}: Var"),
                );
                close(
                    got[3][i].expect("z"),
                    num_at(&e["z"], i),
                    1e-9,
                    &format!("{what}: z vs esda"),
                );
            }
            // esda's pseudo p is one-sided (the smaller tail); ours is two-sided (twice it).
            // Where every neighbour's value is 0 (G = 0), esda's lower tail counts only draws
            // strictly below the observation, so ties (other zero sums) are left out and its p
            // is too small (area 44: esda 0.001; the exact conditional p(lag ≤ 0) is 0.0064 by
            // 100 000 draws); those areas are skipped here.
            let theirs = num_at(&e["p_folded_999"], i);
            if theirs < 0.2 && g[i] != Some(0.0) {
                let ours = got[4][i].expect("p") / 2.0;
                let se = (theirs * (1.0 - theirs) / 1000.0).sqrt();
                assert!(
                    (ours - theirs).abs() <= 4.5 * se * std::f64::consts::SQRT_2 + 0.002,
                    "{what}: p/2 {ours} vs esda {theirs}"
                );
            }
        }
    }
}

fn num_at(v: &Value, i: usize) -> f64 {
    v[i].as_f64().expect("number")
}

#[test]
fn point_records_and_threads() {
    let dir = out_dir("local_points");
    stance_tests::synth(&dir, "s.gpkg", 600, 3);
    let input = dir.join("s.gpkg");
    let mut outputs = vec![];
    for threads in ["1", "2"] {
        let name = format!("pts_{threads}");
        let summary = local(
            &dir,
            &input,
            &name,
            &[
                "--layer",
                "veldmark_records",
                "--statistic",
                "join-count",
                "--class",
                "oppose",
                "--method",
                "knn",
                "--k",
                "6",
                "--permutations",
                "199",
                "--threads",
                threads,
            ],
        );
        assert_eq!(summary["results"]["places"], "points");
        outputs.push(columns(
            &dir.join("out.gpkg"),
            &name,
            &["attribute", "join_count", "p_permutation", "tested"],
        ));
    }
    assert_eq!(outputs[0], outputs[1], "results depend on --threads");
    let got = &outputs[0];
    assert!(got[0].contains(&Some(1.0)));
    for (i, attribute) in got[0].iter().enumerate() {
        // With k = 6 every record has 6 neighbours; only oppose records are tested.
        assert_eq!(got[3][i], *attribute);
        assert_eq!(got[2][i].is_some(), *attribute == Some(1.0));
        assert!(got[1][i].expect("count") <= 6.0);
    }
}

#[test]
fn bad_arguments_give_one_line() {
    let dir = out_dir("local_bad");
    let input = fixture(&dir, 0.002);
    let path = input.to_str().expect("utf-8");
    let base = ["--input", path, "--output", "o.gpkg", "-q"];
    let run = |extra: &[&str]| {
        let mut args = base.to_vec();
        args.extend(extra);
        run_in(&dir, "stance-local", &args)
    };
    run(&["--statistic", "join-count", "--field", "rate79"]).usage_error(&["--rule"]);
    run(&[
        "--statistic",
        "join-count",
        "--field",
        "rate79",
        "--rule",
        "about 3",
    ])
    .usage_error(&["--rule", "operator"]);
    run(&["--statistic", "gi", "--field", "nope"]).usage_error(&["nope"]);
    run(&[
        "--statistic",
        "join-count",
        "--class-field",
        "label",
        "--class",
        "maybe",
    ])
    .usage_error(&["maybe"]);
    run(&[
        "--statistic",
        "join-count",
        "--class-field",
        "NAME",
        "--class",
        "oppose",
    ])
    .usage_error(&["NAME", "unknown stance values"]);
    run(&[
        "--statistic",
        "join-count",
        "--class",
        "oppose",
        "--method",
        "knn",
        "--k",
        "4",
    ])
    .usage_error(&["point"]);
    assert!(!dir.join("o.gpkg").exists());
}
