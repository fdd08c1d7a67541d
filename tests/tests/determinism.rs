//! Same seed, same outputs, whatever `--threads`: every Monte Carlo tool is run with one and two
//! threads and the layers' contents compared (the contract every tool keeps).

use std::path::Path;

use stance_core::gpkg::raster;
use stance_tests::{out_dir, rows, run_in, synth, tables};

/// Every layer's rows (vector) or cell values (surfaces), provenance excluded.
fn contents(path: &Path) -> Vec<(String, Vec<Vec<String>>)> {
    let kinds = rows(
        path,
        "SELECT table_name, data_type FROM gpkg_contents ORDER BY table_name",
    );
    kinds
        .into_iter()
        .map(|k| {
            let (name, kind) = (k[0].clone(), k[1].clone());
            let body = if kind.contains("gridded") {
                let surface = raster::read(path, &name).expect("surface");
                vec![surface
                    .values
                    .iter()
                    .map(|v| format!("{:08x}", v.to_bits()))
                    .collect()]
            } else {
                rows(
                    path,
                    &format!("SELECT * FROM \"{}\" ORDER BY 1", name.replace('"', "\"\"")),
                )
            };
            (name, body)
        })
        .collect()
}

#[test]
fn density_permutations_do_not_depend_on_threads() {
    let dir = out_dir("determinism_density");
    synth(&dir, "s.gpkg", 4000, 9);
    for (file, threads) in [("t1.gpkg", "1"), ("t2.gpkg", "2")] {
        run_in(
            &dir,
            "stance-density",
            &[
                "--input",
                "s.gpkg",
                "--layer",
                "veldmark_records",
                "--output",
                file,
                "--bandwidth-m",
                "6000",
                "--cell-m",
                "1500",
                "--permutations",
                "39",
                "--seed",
                "5",
                "--threads",
                threads,
                "-q",
            ],
        )
        .ok();
    }
    let one = contents(&dir.join("t1.gpkg"));
    assert!(
        one.iter().any(|(n, _)| n.ends_with("_log_ratio_p_upper")),
        "{:?}",
        tables(&dir.join("t1.gpkg"))
    );
    assert_eq!(one, contents(&dir.join("t2.gpkg")));
}

#[test]
fn moran_permutations_do_not_depend_on_threads() {
    let dir = out_dir("determinism_moran");
    synth(&dir, "s.gpkg", 4000, 9);
    for (file, threads) in [("t1.gpkg", "1"), ("t2.gpkg", "2")] {
        run_in(
            &dir,
            "stance-moran",
            &[
                "--input",
                "s.gpkg",
                "--layer",
                "veldmark_districts",
                "--field",
                "population",
                "--output",
                file,
                "--permutations",
                "99",
                "--seed",
                "5",
                "--threads",
                threads,
                "-q",
            ],
        )
        .ok();
    }
    let one = contents(&dir.join("t1.gpkg"));
    assert!(!one.is_empty());
    assert_eq!(one, contents(&dir.join("t2.gpkg")));
}
