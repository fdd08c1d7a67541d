//! stance-scan end to end: planted-zone recovery on stance-synth data, thread-count
//! determinism, the output layers, the Poisson model on areas, and clear errors on bad input.

use std::path::Path;

use stance_core::gpkg::crs;
use stance_tests::{out_dir, rows, run_in, sample_gpkg, synth, tables};

/// Planted stance zones of a stance-synth file: (favours, x, y, radius) in the CRS `srs`.
fn planted_zones(
    synth: &Path,
    srs: &gdal::spatial_ref::SpatialRef,
) -> Vec<(String, f64, f64, f64)> {
    let zones = rows(
        synth,
        "SELECT favours, centre_lon, centre_lat, radius_m FROM veldmark_truth WHERE kind = 'stance_zone'",
    );
    let mut xs: Vec<f64> = zones.iter().map(|z| z[1].parse().expect("lon")).collect();
    let mut ys: Vec<f64> = zones.iter().map(|z| z[2].parse().expect("lat")).collect();
    crs::transform(&crs::wgs84().expect("wgs84"), srs, &mut xs, &mut ys).expect("project");
    zones
        .iter()
        .zip(xs.iter().zip(&ys))
        .map(|(z, (x, y))| (z[0].clone(), *x, *y, z[3].parse().expect("radius")))
        .collect()
}

/// The working CRS the scan wrote its clusters in.
fn clusters_srs(path: &Path, layer: &str) -> gdal::spatial_ref::SpatialRef {
    let definition = rows(
        path,
        &format!(
            "SELECT s.definition FROM gpkg_geometry_columns g JOIN gpkg_spatial_ref_sys s \
             ON s.srs_id = g.srs_id WHERE g.table_name = '{layer}'"
        ),
    );
    crs::parse(&definition[0][0]).expect("cluster CRS")
}

#[test]
fn ordinal_scan_recovers_planted_zones() {
    // stance-synth plants four zones (odds ×3 toward support or toward oppose, radius 6–10 km)
    // over a west–east gradient. A zone counts as found when a cluster with p < 0.05, shifted
    // the zone's way, is centred within the zone's radius. 1,500 records, windows up to 12 km
    // (the planted scale), 99 replicates: the smallest attainable p is 0.01.
    let dir = out_dir("scan_recovery");
    let mut seeds_with_a_zone = 0;
    let mut zones_found = 0;
    for seed in 1..=20u32 {
        let synth = dir.join(format!("s{seed}.gpkg"));
        let out = dir.join(format!("scan{seed}.gpkg"));
        let seed_text = seed.to_string();
        run_in(
            &dir,
            "stance-synth",
            &[
                "--output",
                synth.to_str().expect("path"),
                "--points",
                "1500",
                "--seed",
                &seed_text,
                "-q",
            ],
        )
        .ok();
        run_in(
            &dir,
            "stance-scan",
            &[
                "--input",
                synth.to_str().expect("path"),
                "--layer",
                "veldmark_records",
                "--output",
                out.to_str().expect("path"),
                "--model",
                "ordinal",
                "--toward",
                "both",
                "--max-radius-m",
                "12000",
                "--replicates",
                "99",
                "--report-p",
                "0.05",
                "--seed",
                &seed_text,
                "-q",
            ],
        )
        .ok();
        let srs = clusters_srs(&out, "scan_clusters");
        // A circle's centre is the middle of its bounding box (the R-tree's, rounded outward
        // to f32: well under a metre here).
        let clusters = rows(
            &out,
            "SELECT c.leans_to, (r.minx + r.maxx) / 2, (r.miny + r.maxy) / 2, c.p_monte_carlo \
             FROM scan_clusters c JOIN rtree_scan_clusters_geom r ON r.id = c.fid ORDER BY c.cluster_no",
        );
        let mut found_here = 0;
        for (favours, zx, zy, radius) in planted_zones(&synth, &srs) {
            let wanted = favours;
            let found = clusters.iter().any(|c| {
                let (x, y, p): (f64, f64, f64) = (
                    c[1].parse().expect("x"),
                    c[2].parse().expect("y"),
                    c[3].parse().expect("p"),
                );
                c[0] == wanted && p < 0.05 && (x - zx).hypot(y - zy) <= radius
            });
            found_here += usize::from(found);
        }
        zones_found += found_here;
        seeds_with_a_zone += usize::from(found_here > 0);
        eprintln!("seed {seed}: {found_here} of 4 planted zones found");
    }
    eprintln!("zones found: {zones_found} of 80; seeds with at least one: {seeds_with_a_zone}");
    assert!(seeds_with_a_zone >= 18, "{seeds_with_a_zone} of 20 seeds");
}

#[test]
fn multinomial_scan_finds_the_sample_zones_the_same_on_any_thread_count() {
    // The sample (sample-gpkg/veldmark.gpkg, 20,000 records) has four planted zones, two
    // toward support and two toward oppose (odds ×3, radius 6–10 km; its veldmark_truth layer,
    // from tools/synth/src/scenario/places.rs). The multinomial scan (Jung, Kulldorff & Richard
    // 2010) looks for any unusual mix of the three classes; each zone must be found: a cluster
    // with p < 0.05 leaning to the zone's class (its most over-represented class) and centred
    // within the zone's radius. Centres on a 2 km grid and 39 replicates keep the debug build
    // quick (smallest attainable p 0.025).
    let dir = out_dir("scan_multinomial");
    let sample = sample_gpkg();
    let mut outputs = Vec::new();
    let mut summaries = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.join(format!("t{threads}.gpkg"));
        let _ = std::fs::remove_file(&out);
        let summary = run_in(
            &dir,
            "stance-scan",
            &[
                "--input",
                sample.to_str().expect("path"),
                "--layer",
                "veldmark_records",
                "--output",
                out.to_str().expect("path"),
                "--model",
                "multinomial",
                "--max-radius-m",
                "12000",
                "--centres-cell-m",
                "2000",
                "--replicates",
                "39",
                "--report-p",
                "0.05",
                "--threads",
                threads,
                "-q",
            ],
        )
        .ok();
        outputs.push(out);
        summaries.push(summary);
    }
    let results = &summaries[0]["results"];
    assert_eq!(results["model"], "multinomial");
    assert!(results.get("toward").is_none());
    let all = "SELECT * FROM scan_clusters ORDER BY cluster_no";
    assert_eq!(rows(&outputs[0], all), rows(&outputs[1], all));
    let members = "SELECT feature_id, cluster_no FROM scan_members ORDER BY feature_id";
    assert_eq!(rows(&outputs[0], members), rows(&outputs[1], members));
    // leans_to is the class with the largest share inside over share outside, and risk_ratio
    // that ratio; shares inside and outside each sum to 1.
    for c in results["clusters"].as_array().expect("clusters") {
        let ratio = |k: &str| {
            c[format!("share_in_{k}")].as_f64().expect("in")
                / c[format!("share_out_{k}")].as_f64().expect("out")
        };
        let top = ["oppose", "neutral", "support"]
            .into_iter()
            .max_by(|a, b| ratio(a).total_cmp(&ratio(b)))
            .expect("class");
        assert_eq!(c["leans_to"], top, "{c}");
        assert!((c["risk_ratio"].as_f64().expect("rr") - ratio(top)).abs() < 1e-12);
        for side in ["in", "out"] {
            let sum: f64 = ["oppose", "neutral", "support"]
                .iter()
                .map(|k| c[format!("share_{side}_{k}")].as_f64().expect("share"))
                .sum();
            assert!((sum - 1.0).abs() < 1e-12, "{c}");
        }
    }
    let srs = clusters_srs(&outputs[0], "scan_clusters");
    let clusters = rows(
        &outputs[0],
        "SELECT c.leans_to, (r.minx + r.maxx) / 2, (r.miny + r.maxy) / 2, c.p_monte_carlo \
         FROM scan_clusters c JOIN rtree_scan_clusters_geom r ON r.id = c.fid ORDER BY c.cluster_no",
    );
    let zones = planted_zones(&sample, &srs);
    assert_eq!(zones.len(), 4);
    for (favours, zx, zy, radius) in zones {
        let found = clusters.iter().any(|c| {
            let (x, y, p): (f64, f64, f64) = (
                c[1].parse().expect("x"),
                c[2].parse().expect("y"),
                c[3].parse().expect("p"),
            );
            c[0] == favours && p < 0.05 && (x - zx).hypot(y - zy) <= radius
        });
        assert!(
            found,
            "zone toward {favours} at ({zx:.0}, {zy:.0}) not found: {clusters:?}"
        );
    }
}

#[test]
fn scan_outputs_and_thread_determinism() {
    let dir = out_dir("scan_determinism");
    synth(&dir, "s.gpkg", 800, 7);
    let mut outputs = Vec::new();
    let mut summaries = Vec::new();
    for threads in ["1", "2"] {
        let out = format!("t{threads}.gpkg");
        let summary = run_in(
            &dir,
            "stance-scan",
            &[
                "--input",
                "s.gpkg",
                "--layer",
                "veldmark_records",
                "--output",
                &out,
                "--case-class",
                "support",
                "--toward",
                "both",
                "--max-share",
                "0.2",
                "--replicates",
                "49",
                "--seed",
                "3",
                "--threads",
                threads,
                "-q",
            ],
        )
        .ok();
        assert_eq!(summary["results"]["model"], "bernoulli");
        assert!(!summary["results"]["clusters"]
            .as_array()
            .expect("clusters")
            .is_empty());
        outputs.push(dir.join(out));
        summaries.push(summary);
    }
    let clusters =
        "SELECT cluster_no, leans_to, radius_m, records_in, share_in_oppose, share_out_oppose, \
        share_in_neutral, share_out_neutral, share_in_support, share_out_support, risk_ratio, llr, \
        p_monte_carlo, p_gumbel, replicates FROM scan_clusters ORDER BY cluster_no";
    let members = "SELECT feature_id, cluster_no FROM scan_members ORDER BY feature_id";
    assert_eq!(rows(&outputs[0], clusters), rows(&outputs[1], clusters));
    assert_eq!(rows(&outputs[0], members), rows(&outputs[1], members));
    assert_eq!(tables(&outputs[0]), vec!["scan_clusters", "scan_members"]);
    // The layer's fields, in order, are the summary's keys.
    let summary_keys: Vec<String> = summaries[0]["results"]["clusters"][0]
        .as_object()
        .expect("cluster")
        .keys()
        .cloned()
        .collect();
    let layer_fields: Vec<String> = rows(
        &outputs[0],
        "SELECT name FROM pragma_table_info('scan_clusters')",
    )
    .into_iter()
    .map(|r| r[0].clone())
    .filter(|n| n != "fid" && n != "geom")
    .collect();
    assert_eq!(summary_keys, layer_fields);
    // Both sides: the case class, or the control classes joined by '+'.
    for side in rows(&outputs[0], "SELECT DISTINCT leans_to FROM scan_clusters") {
        assert!(
            side[0] == "support" || side[0] == "oppose+neutral",
            "{side:?}"
        );
    }
    // Every member lies in its cluster's circle, and the shares inside are those of the
    // members' stance labels, counted here from the input records (exact fractions of small
    // integers; tolerance 1e-12 for the division).
    let first = rows(
        &outputs[0],
        "SELECT records_in, share_in_oppose, share_in_neutral, share_in_support, risk_ratio, \
         share_out_support FROM scan_clusters WHERE cluster_no = 1",
    );
    let member_ids: Vec<String> = rows(
        &outputs[0],
        "SELECT feature_id FROM scan_members WHERE cluster_no = 1",
    )
    .into_iter()
    .map(|r| r[0].clone())
    .collect();
    assert_eq!(first[0][0], member_ids.len().to_string());
    let stances = rows(
        &dir.join("s.gpkg"),
        &format!(
            "SELECT stance FROM veldmark_records WHERE fid IN ({})",
            member_ids.join(",")
        ),
    );
    let n = member_ids.len() as f64;
    for (k, class) in ["oppose", "neutral", "support"].iter().enumerate() {
        let count = stances.iter().filter(|s| s[0] == *class).count() as f64;
        let share: f64 = first[0][1 + k].parse().expect("share");
        assert!(
            (share - count / n).abs() < 1e-12,
            "{class}: {share} vs {count}/{n}"
        );
    }
    // Risk ratio = case share inside / case share outside (Kulldorff 1997's relative risk).
    let (share_in, share_out, rr): (f64, f64, f64) = (
        first[0][3].parse().expect("in"),
        first[0][5].parse().expect("out"),
        first[0][4].parse().expect("rr"),
    );
    assert!((rr - share_in / share_out).abs() < 1e-12 * rr.abs());
}

#[test]
fn poisson_scan_on_areas() {
    // Areas: stance-synth's districts with the count of oppose records in each (spatial join
    // by GDAL's SQLite dialect), population from the districts.
    let dir = out_dir("scan_poisson");
    synth(&dir, "s.gpkg", 3000, 5);
    let status = std::process::Command::new("ogr2ogr")
        .current_dir(&dir)
        .args([
            "-f", "GPKG", "areas.gpkg", "s.gpkg", "-dialect", "SQLite", "-nln", "areas", "-sql",
            "SELECT d.geom, d.code, d.population, (SELECT count(*) FROM veldmark_records r \
             WHERE r.stance = 'oppose' AND ST_Within(r.geom, d.geom)) AS oppose_count FROM veldmark_districts d",
        ])
        .status()
        .expect("run ogr2ogr");
    assert!(status.success());
    let summary = run_in(
        &dir,
        "stance-scan",
        &[
            "--input",
            "areas.gpkg",
            "--output",
            "out.gpkg",
            "--model",
            "poisson",
            "--areas",
            "areas",
            "--case-field",
            "oppose_count",
            "--at-risk-field",
            "population",
            "--max-share",
            "0.2",
            "--replicates",
            "99",
            "-q",
        ],
    )
    .ok();
    let results = &summary["results"];
    assert_eq!(results["model"], "poisson");
    let top = &results["clusters"][0];
    assert!(top["llr"].as_f64().expect("llr") > 0.0);
    assert!(top["records_in"].is_null());
    assert!(top["leans_to"] == "high");
    assert_eq!(results["direction"], "high");
    // Cases and expected cases inside, recomputed here from the member areas: observed = the
    // sum of their counts; expected = C · (their population) / (all population)
    // (Kulldorff 1997, §5). Tolerance 1e-9 relative: sums of a few hundred doubles.
    let out = dir.join("out.gpkg");
    let members: Vec<String> = rows(
        &out,
        "SELECT feature_id FROM scan_members WHERE cluster_no = 1",
    )
    .into_iter()
    .map(|r| r[0].clone())
    .collect();
    let inside = rows(
        &dir.join("areas.gpkg"),
        &format!(
            "SELECT sum(oppose_count), sum(population) FROM areas WHERE fid IN ({})",
            members.join(",")
        ),
    );
    let all = rows(
        &dir.join("areas.gpkg"),
        "SELECT sum(oppose_count), sum(population) FROM areas",
    );
    let number = |s: &str| s.parse::<f64>().expect("number");
    let (o, p_in) = (number(&inside[0][0]), number(&inside[0][1]));
    let (c, p_all) = (number(&all[0][0]), number(&all[0][1]));
    assert_eq!(top["cases_in"].as_f64(), Some(o));
    assert_eq!(results["cases_total"].as_f64(), Some(c));
    let e = c * p_in / p_all;
    let expected_in = top["expected_in"].as_f64().expect("expected");
    assert!((expected_in - e).abs() < 1e-9 * e, "{expected_in} vs {e}");
    // Risk ratio (O/E) / ((C − O)/(C − E)).
    let rr = (o / e) / ((c - o) / (c - e));
    let got = top["risk_ratio"].as_f64().expect("rr");
    assert!((got - rr).abs() < 1e-9 * rr, "{got} vs {rr}");
}

#[test]
fn bad_inputs_are_named_and_write_nothing() {
    let dir = out_dir("scan_errors");
    synth(&dir, "s.gpkg", 300, 2);
    let base = [
        "--input",
        "s.gpkg",
        "--layer",
        "veldmark_records",
        "--output",
        "out.gpkg",
    ];
    let with = |extra: &[&str]| {
        let mut args: Vec<&str> = base.to_vec();
        if !extra.contains(&"--replicates") {
            args.extend_from_slice(&["--replicates", "9"]);
        }
        args.extend_from_slice(extra);
        run_in(&dir, "stance-scan", &args)
    };
    with(&["--max-share", "0.7"]).usage_error(&["--max-share", "0.7", "(0, 0.5]"]);
    with(&["--max-share", "0"]).usage_error(&["--max-share"]);
    with(&["--case-class", "maybe"]).usage_error(&["--case-class", "maybe"]);
    with(&["--case-class", "support", "--at-risk-classes", "support"])
        .usage_error(&["--at-risk-classes", "support"]);
    with(&[
        "--case-class",
        "support",
        "--at-risk-classes",
        "oppose,neutral",
    ])
    .usage_error(&["--at-risk-classes", "case class"]);
    with(&["--direction", "high"]).usage_error(&["--direction", "--toward"]);
    with(&["--model", "ordinal", "--toward", "neutral"]).usage_error(&["--toward", "neutral"]);
    with(&["--model", "poisson"]).usage_error(&["--areas"]);
    with(&[
        "--model",
        "poisson",
        "--areas",
        "veldmark_districts",
        "--case-field",
        "population",
        "--at-risk-field",
        "population",
        "--toward",
        "oppose",
    ])
    .usage_error(&["--toward", "--direction"]);
    // A field whose labels are not stances: the synth's quality field.
    with(&["--stance-field", "quality"]).usage_error(&["quality", "unknown stance values"]);
    // A single class: map every label to oppose.
    with(&["--classes", "oppose=oppose,neutral=oppose,support=oppose"])
        .usage_error(&["stance", "controls"]);
    with(&[
        "--model",
        "ordinal",
        "--classes",
        "oppose=support,neutral=support,support=support",
    ])
    .usage_error(&["stance", "at least two classes"]);
    assert!(!dir.join("out.gpkg").exists());
    // No replicates is allowed: clusters come without p-values.
    let summary = with(&["--replicates", "0", "--max-clusters", "2"]).ok();
    assert!(summary["results"]["clusters"][0]["p_monte_carlo"].is_null());
    assert_eq!(summary["results"]["clusters"][0]["replicates"], 0);
}

/// The scan estimates its peak memory before working: the estimate is in the summary
/// (`memory_estimate_mb`, which `stance plan-batch` reads), covers at least the fixed part and the
/// records, and a `--max-memory-mb` below it refuses the run in one line naming the option, before
/// anything is written.
#[test]
fn scan_memory_estimate_is_reported_and_enforced() {
    let dir = out_dir("scan_memory");
    synth(&dir, "in.gpkg", 3000, 3);
    let args = |limit: &'static str| {
        vec![
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--case-class",
            "oppose",
            "--replicates",
            "9",
            "--output",
            "out.gpkg",
            "--overwrite",
            "--max-memory-mb",
            limit,
            "-q",
        ]
    };
    let summary = run_in(&dir, "stance-scan", &args("100000")).ok();
    let estimate = summary["memory_estimate_mb"]
        .as_u64()
        .expect("memory_estimate_mb");
    // 64 MiB fixed + 52 bytes per record for 3,000 records, plus the counts (a few kB).
    assert!((64..80).contains(&estimate), "{estimate} MiB");
    let _ = std::fs::remove_file(dir.join("small.gpkg"));
    let mut small = args("10");
    small[9] = "small.gpkg";
    run_in(&dir, "stance-scan", &small).usage_error(&["--max-memory-mb", "MiB", "locations"]);
    assert!(!dir.join("small.gpkg").exists());
}
