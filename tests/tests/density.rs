//! stance-density end to end: the planted zones of stance-synth show up with the right sign in
//! `_diff` and as significant in the tolerance p-values; bad inputs exit 2 with one line.

use stance_core::gpkg::{crs, raster};
use stance_tests::{out_dir, rows, run_in, sample_gpkg, synth, tables};

#[test]
fn planted_zones_show_in_diff_and_tolerance() {
    let dir = out_dir("density_zones");
    synth(&dir, "s.gpkg", 20000, 3);
    let summary = run_in(
        &dir,
        "stance-density",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--stance-field",
            "stance",
            "--output",
            "d.gpkg",
            "--cell-m",
            "500",
            "--bandwidth-m",
            "8000",
            "--permutations",
            "99",
            "-q",
        ],
    )
    .ok();
    let path = dir.join("d.gpkg");
    let names = tables(&path);
    for t in [
        "density_support",
        "density_oppose",
        "density_diff",
        "density_log_ratio",
        "density_log_ratio_p_upper",
        "density_log_ratio_p_lower",
        "density_tolerance",
    ] {
        assert!(names.iter().any(|n| n == t), "missing {t}: {names:?}");
    }
    assert!(!names.iter().any(|n| n.contains("logrr")), "{names:?}");
    assert_eq!(summary["results"]["bandwidth_m"].as_f64(), Some(8000.0));
    let floor = summary["results"]["slices"][0]["log_ratio_floor_per_km2"].as_f64();
    assert!(floor.is_some_and(|f| f > 0.0), "{summary}");
    let diff = raster::read(&path, "density_diff").expect("diff");
    let p_upper = raster::read(&path, "density_log_ratio_p_upper").expect("p");
    let p_lower = raster::read(&path, "density_log_ratio_p_lower").expect("p lower");
    let working = crs::parse(&diff.crs_wkt).expect("crs");
    let wgs84 = crs::wgs84().expect("wgs84");
    let truth = rows(
        &s_path(&dir),
        "SELECT favours, centre_lon, centre_lat FROM veldmark_truth WHERE kind = 'stance_zone'",
    );
    assert_eq!(truth.len(), 4);
    for zone in truth {
        let mut x = [zone[1].parse::<f64>().expect("lon")];
        let mut y = [zone[2].parse::<f64>().expect("lat")];
        crs::transform(&wgs84, &working, &mut x, &mut y).expect("project");
        let g = diff.grid;
        let col = ((x[0] - g.x_min) / g.cell_m).floor() as usize;
        let row = ((g.y_max() - y[0]) / g.cell_m).floor() as usize;
        let k = row * g.cols + col;
        let (d, pu, pl) = (diff.values[k], p_upper.values[k], p_lower.values[k]);
        // The planted odds multiplier is 3 within 6–10 km: at the centre the favoured class
        // dominates and, with ~20,000 records, is significant at 0.05 in its own tail.
        if zone[0] == "support" {
            assert!(
                d > 0.0 && pu <= 0.05,
                "support zone at {zone:?}: diff {d}, p {pu}"
            );
        } else {
            assert!(
                d < 0.0 && pl <= 0.05,
                "oppose zone at {zone:?}: diff {d}, p lower {pl}"
            );
        }
    }
    let elevated = rows(
        &path,
        "SELECT DISTINCT elevated FROM density_tolerance ORDER BY elevated",
    );
    assert_eq!(
        elevated,
        vec![vec!["oppose".to_owned()], vec!["support".to_owned()]]
    );
}

#[test]
fn type_probabilities_find_the_sample_zones_and_reject_constant_probabilities() {
    // The sample (sample-gpkg/veldmark.gpkg: 20,000 records, four planted zones with odds ×3
    // toward support or oppose over 6–10 km; tools/synth/src/scenario/places.rs). Type
    // probabilities with the bandwidth by likelihood cross-validation of the type labels and
    // the Monte Carlo test of constant type probabilities (Diggle, Zheng & Durr 2005), 39
    // relabellings (smallest p 0.025): the test rejects at 0.05, and at each zone's centre the
    // favoured class is more likely than its share of all records, with pointwise p ≤ 0.05.
    let dir = out_dir("density_types");
    let sample = sample_gpkg();
    let out = dir.join("types.gpkg");
    let _ = std::fs::remove_file(&out);
    let summary = run_in(
        &dir,
        "stance-density",
        &[
            "--input",
            sample.to_str().expect("path"),
            "--layer",
            "veldmark_records",
            "--output",
            out.to_str().expect("path"),
            "--cell-m",
            "1000",
            "--type-probabilities",
            "--permutations",
            "39",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    let chosen = results["type_probabilities"]["bandwidth_chosen_by"]
        .as_str()
        .expect("how");
    assert!(chosen.contains("cross-validation"), "{chosen}");
    let segregation = &results["slices"][0]["segregation"];
    assert!(
        segregation["p_value"].as_f64().expect("p") <= 0.05,
        "{segregation}"
    );
    assert!(segregation["statistic_t"].as_f64().expect("t") > 0.0);
    let names = tables(&out);
    for class in ["oppose", "neutral", "support"] {
        for t in [
            format!("density_prob_{class}"),
            format!("density_prob_{class}_p"),
        ] {
            assert!(names.contains(&t), "missing {t}: {names:?}");
        }
    }
    assert!(names.iter().any(|n| n == "density_prob_tolerance"));
    let read = |class: &str, suffix: &str| {
        raster::read(&out, &format!("density_prob_{class}{suffix}")).expect("surface")
    };
    let probs: Vec<_> = ["oppose", "neutral", "support"]
        .iter()
        .map(|c| read(c, ""))
        .collect();
    // p_oppose + p_neutral + p_support = 1 wherever defined (Float32: tolerance 1e-6).
    for k in 0..probs[0].values.len() {
        let v: Vec<f32> = probs.iter().map(|p| p.values[k]).collect();
        if v.iter().all(|x| x.is_finite()) {
            let sum: f32 = v.iter().sum();
            assert!((sum - 1.0).abs() < 1e-6, "cell {k}: {v:?}");
        }
    }
    let working = crs::parse(&probs[0].crs_wkt).expect("crs");
    let truth = rows(
        &sample,
        "SELECT favours, centre_lon, centre_lat FROM veldmark_truth WHERE kind = 'stance_zone'",
    );
    assert_eq!(truth.len(), 4);
    for zone in truth {
        let mut x = [zone[1].parse::<f64>().expect("lon")];
        let mut y = [zone[2].parse::<f64>().expect("lat")];
        crs::transform(&crs::wgs84().expect("wgs84"), &working, &mut x, &mut y).expect("xy");
        let class = zone[0].as_str();
        let (p, p_value) = (read(class, ""), read(class, "_p"));
        let g = p.grid;
        let col = ((x[0] - g.x_min) / g.cell_m).floor() as usize;
        let row = ((g.y_max() - y[0]) / g.cell_m).floor() as usize;
        let k = row * g.cols + col;
        let share = segregation["class_shares"][class].as_f64().expect("share");
        assert!(
            f64::from(p.values[k]) > share && p_value.values[k] <= 0.05,
            "{class} zone: p {} vs share {share}, pointwise p {}",
            p.values[k],
            p_value.values[k]
        );
    }
}

fn s_path(dir: &std::path::Path) -> std::path::PathBuf {
    dir.join("s.gpkg")
}

#[test]
fn bad_inputs_exit_2_with_one_line() {
    let dir = out_dir("density_bad");
    synth(&dir, "s.gpkg", 500, 4);
    let base = [
        "--input",
        "s.gpkg",
        "--layer",
        "veldmark_records",
        "--output",
        "d.gpkg",
        "--permutations",
        "0",
        "-q",
    ];
    let with = |extra: &[&str]| {
        let mut args: Vec<&str> = base.to_vec();
        args.extend_from_slice(extra);
        run_in(&dir, "stance-density", &args)
    };
    with(&["--bandwidth-m", "0"]).usage_error(&["--bandwidth-m", "positive"]);
    with(&["--bandwidth-m=-5"]).usage_error(&["--bandwidth-m", "-5"]);
    with(&["--cell-m", "1", "--max-cells", "1000"]).usage_error(&["--max-cells", "use --cell-m"]);
    with(&["--compare", "support,maybe"]).usage_error(&["--compare", "maybe"]);
    // A negative weight: a CSV imported with its reach column kept.
    std::fs::write(
        dir.join("w.csv"),
        "lon,lat,stance,reach\n-140.1,35.0,support,2\n-140.2,35.1,oppose,-3\n-140.3,35.05,support,1\n",
    )
    .expect("csv");
    run_in(
        &dir,
        "stance-import",
        &[
            "--input", "w.csv", "--output", "w.gpkg", "--name", "w", "--keep", "reach", "-q",
        ],
    )
    .ok();
    run_in(
        &dir,
        "stance-density",
        &[
            "--input",
            "w.gpkg",
            "--output",
            "d.gpkg",
            "--weight-field",
            "reach",
            "--bandwidth-m",
            "5000",
            "-q",
        ],
    )
    .usage_error(&["reach", "-3", "non-negative"]);
    assert!(
        !dir.join("d.gpkg").exists(),
        "a failed run wrote its output"
    );
}
