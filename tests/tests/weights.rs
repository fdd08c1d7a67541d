//! stance-weights end to end on the North Carolina SIDS counties (tests/reference/data/nc.gpkg,
//! a copy of R sf's `gpkg/nc.gpkg`): neighbour lists against R spdep `poly2nb` and link counts
//! against libpysal; ids, islands and bad arguments.
//!
//! References: tests/reference/data/moran_nc_spdep.json (R spdep 1.2-7, script
//! tests/reference/make_moran.R) and moran_nc_pysal.json (libpysal 4.12.1 / esda 2.6.0, script
//! tests/reference/make_moran.py). Neighbour lists are integers: compared exactly.

use std::path::{Path, PathBuf};

use serde_json::Value;
use stance_tests::{out_dir, root, rows, run_in};

fn nc() -> PathBuf {
    root().join("tests/reference/data/nc.gpkg")
}

fn reference(name: &str) -> Value {
    let path = root().join("tests/reference/data").join(name);
    serde_json::from_str(&std::fs::read_to_string(&path).expect("reference JSON")).expect("JSON")
}

/// Neighbour lists (0-based, in feature order) from a weights table built on feature ids 1..=n.
fn lists_from_table(path: &Path, table: &str, n: usize) -> Vec<Vec<u64>> {
    let mut lists = vec![Vec::new(); n];
    for row in rows(
        path,
        &format!("SELECT area_id, linked_id, weight FROM \"{table}\""),
    ) {
        let focal: usize = row[0].parse().expect("integer id");
        let neighbour: u64 = row[1].parse().expect("integer id");
        assert_eq!(row[2].parse::<f64>().expect("weight"), 1.0);
        lists[focal - 1].push(neighbour - 1);
    }
    for l in &mut lists {
        l.sort_unstable();
    }
    lists
}

#[test]
fn queen_and_rook_match_spdep_and_libpysal_on_nc() {
    let spdep = reference("moran_nc_spdep.json");
    let pysal = reference("moran_nc_pysal.json");
    let dir = out_dir("weights_nc");
    for (method, links) in [("queen", 490), ("rook", 462)] {
        let summary = run_in(
            &dir,
            "stance-weights",
            &[
                "--input",
                nc().to_str().expect("utf-8"),
                "--output",
                "w.gpkg",
                "--name",
                method,
                "--method",
                method,
                "-q",
            ],
        )
        .ok();
        let results = &summary["results"];
        // spdep poly2nb / libpysal Queen, Rook: 490 and 462 directed links.
        assert_eq!(results["links"], links);
        assert_eq!(spdep[format!("{method}_links")], links);
        assert_eq!(pysal[format!("{method}_links")], links);
        assert_eq!(results["areas"], 100);
        // spdep card(): 4.90 and 4.62 neighbours per county on average.
        assert_eq!(results["mean_neighbours"], f64::from(links) / 100.0);
        assert_eq!(results["connected_components"], 1);
        assert_eq!(results["symmetric"], true);
        let expected: Vec<Vec<u64>> =
            serde_json::from_value(spdep[format!("{method}_lists")].clone()).expect("lists");
        assert_eq!(lists_from_table(&dir.join("w.gpkg"), method, 100), expected);
    }
}

#[test]
fn id_field_islands_and_bad_arguments() {
    let dir = out_dir("weights_ids");
    let input = nc();
    let input = input.to_str().expect("utf-8");
    // FIPS is unique: ids are written as integers.
    run_in(
        &dir,
        "stance-weights",
        &[
            "--input",
            input,
            "--output",
            "w.gpkg",
            "--id-field",
            "FIPS",
            "--name",
            "by_fips",
            "-q",
        ],
    )
    .ok();
    let first = rows(
        &dir.join("w.gpkg"),
        "SELECT area_id, linked_id FROM by_fips ORDER BY fid LIMIT 1",
    );
    assert_eq!(first[0][0], "37009"); // Ashe county, the first feature.
                                      // SID74 repeats values: not usable as ids.
    run_in(
        &dir,
        "stance-weights",
        &[
            "--input",
            input,
            "--output",
            "x.gpkg",
            "--id-field",
            "SID74",
            "-q",
        ],
    )
    .usage_error(&["SID74", "more than once"]);
    assert!(!dir.join("x.gpkg").exists());
    // A 25 km centroid band leaves some counties without neighbours.
    let band = [
        "--input",
        input,
        "--output",
        "band.gpkg",
        "--method",
        "distance",
        "--max-distance-m",
        "25000",
        "-q",
    ];
    let kept = run_in(&dir, "stance-weights", &band).ok();
    let islands = kept["results"]["islands"].as_array().expect("array").len();
    assert!(islands > 0, "expected islands at 25 km: {kept}");
    let mut error = band.to_vec();
    error.extend(["--islands", "error", "--name", "e"]);
    run_in(&dir, "stance-weights", &error).usage_error(&["no neighbour", "ids"]);
    let mut nearest = band.to_vec();
    nearest.extend(["--islands", "nearest", "--name", "n"]);
    let linked = run_in(&dir, "stance-weights", &nearest).ok();
    assert_eq!(
        linked["results"]["islands"]
            .as_array()
            .expect("array")
            .len(),
        0
    );
    assert_eq!(
        linked["results"]["islands_linked_to"]
            .as_array()
            .expect("array")
            .len(),
        islands
    );
    // Options that do not fit the method.
    run_in(
        &dir,
        "stance-weights",
        &["--input", input, "--output", "y.gpkg", "--method", "knn"],
    )
    .usage_error(&["--k"]);
    run_in(
        &dir,
        "stance-weights",
        &["--input", input, "--output", "y.gpkg", "--snap-m=-1"],
    )
    .usage_error(&["--snap-m"]);
    let knn = run_in(
        &dir,
        "stance-weights",
        &[
            "--input", input, "--output", "k.gpkg", "--method", "knn", "--k", "4", "-q",
        ],
    )
    .ok();
    assert_eq!(knn["results"]["links"], 400);
    assert_eq!(knn["results"]["min_neighbours"], 4);
}
