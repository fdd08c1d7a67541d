//! Tiled density runs: `--tile K/N` runs compute bands of grid rows, `--merge-tiles` assembles
//! them, and the merged GeoPackage holds the surfaces of the run on one machine — bit for bit
//! with `--method direct`, within the stated bound with the FFT. Missing, duplicated and
//! mismatched tiles are refused naming the tile; options a tile cannot take are refused naming
//! the option; `stance plan-batch --tiles` writes the tile scripts.
//!
//! Data: the invented scenario of `stance-synth` (3,000 records, seed 5), its districts as
//! the mask.

use std::path::{Path, PathBuf};

use stance_core::gpkg::raster;
use stance_tests::{out_dir, rows, run_in};

fn owned(args: &[&str]) -> Vec<String> {
    args.iter().map(|s| (*s).to_owned()).collect()
}

/// Every table of a GeoPackage's contents, every row (reals exactly, blobs as stored).
fn dump(path: &Path) -> Vec<(String, Vec<Vec<String>>)> {
    stance_tests::tables(path)
        .into_iter()
        .map(|t| {
            let sql = format!("SELECT * FROM \"{t}\" ORDER BY 1");
            (t.clone(), rows(path, &sql))
        })
        .collect()
}

fn call(dir: &Path, args: &[String]) -> stance_tests::Ran {
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    run_in(dir, "stance-density", &a)
}

/// Runs the N tiles of `base` into `<sub>/`, checking that each writes only its tile layer,
/// then merges them; returns the merged file.
fn tiles_then_merge(
    dir: &Path,
    base: &dyn Fn(&str) -> Vec<String>,
    sub: &str,
    n: usize,
) -> PathBuf {
    let _ = std::fs::remove_dir_all(dir.join(sub));
    std::fs::create_dir_all(dir.join(sub)).expect("dir");
    for k in 1..=n {
        let mut a = base(&format!("{sub}/{k}.gpkg"));
        a.extend(["--tile".to_owned(), format!("{k}/{n}")]);
        let summary = call(dir, &a).ok();
        assert_eq!(summary["results"]["tile"]["tile"], format!("{k}/{n}"));
        let tables = stance_tests::tables(&dir.join(format!("{sub}/{k}.gpkg")));
        assert_eq!(tables, vec![format!("d_tile_{k}_of_{n}")]);
    }
    let merged = format!("{sub}_merged.gpkg");
    let _ = std::fs::remove_file(dir.join(&merged));
    let mut a = base(&merged);
    a.extend(["--merge-tiles".to_owned(), sub.to_owned()]);
    call(dir, &a).ok();
    dir.join(merged)
}

/// Direct sums, a mask and quarterly time slices: the merged surfaces of N = 1, 2, 3 and 7
/// tiles are the whole run's, every table and row bit for bit.
#[test]
fn merged_direct_tiles_equal_the_one_machine_run_bit_for_bit() {
    let dir = out_dir("tiles_direct");
    stance_tests::synth(&dir, "in.gpkg", 3000, 5);
    for (label, extra) in [
        ("plain", vec![]),
        (
            "masked",
            vec![
                "--mask-layer",
                "veldmark_districts",
                "--time-field",
                "time_utc",
                "--slice",
                "quarter",
                "--scale",
                "density",
            ],
        ),
    ] {
        let base = |output: &str| {
            let mut a = owned(&[
                "--input",
                "in.gpkg",
                "--layer",
                "veldmark_records",
                "--cell-m",
                "1000",
                "--method",
                "direct",
                "--permutations",
                "0",
                "--output",
                output,
                "--name",
                "d",
                "-q",
            ]);
            a.extend(owned(&extra));
            a
        };
        let whole_file = format!("whole_{label}.gpkg");
        let _ = std::fs::remove_file(dir.join(&whole_file));
        call(&dir, &base(&whole_file)).ok();
        let whole = dump(&dir.join(&whole_file));
        assert!(whole.len() >= 7, "{label}: {} tables", whole.len());
        for n in [1usize, 2, 3, 7] {
            let merged = tiles_then_merge(&dir, &base, &format!("{label}{n}"), n);
            assert!(
                dump(&merged) == whole,
                "{label}: {n} tiles differ from the whole run"
            );
        }
    }
}

/// The FFT: every tile transforms its own window, whose round-off differs from the whole
/// grid's. The bound stated in the help and README: each merged surface within 1e-6 of its
/// largest absolute value at every cell, the same cells without data. (Measured on this data:
/// see the largest ratio printed with --nocapture.)
#[test]
fn merged_fft_tiles_equal_the_one_machine_run_within_the_stated_bound() {
    let dir = out_dir("tiles_fft");
    stance_tests::synth(&dir, "in.gpkg", 3000, 5);
    let base = |output: &str| {
        owned(&[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--cell-m",
            "400",
            "--method",
            "fft",
            "--bandwidth",
            "cv",
            "--permutations",
            "0",
            "--output",
            output,
            "--name",
            "d",
            "-q",
        ])
    };
    let _ = std::fs::remove_file(dir.join("whole.gpkg"));
    let summary = call(&dir, &base("whole.gpkg")).ok();
    assert_eq!(summary["results"]["method"], "linear binning + FFT");
    let surfaces = [
        "d_oppose",
        "d_neutral",
        "d_support",
        "d_diff",
        "d_sqrtdiff",
        "d_share",
        "d_log_ratio",
    ];
    let mut worst = 0.0f64;
    for n in [1usize, 2, 3, 7] {
        let merged = tiles_then_merge(&dir, &base, &format!("fft{n}"), n);
        for name in surfaces {
            let want = raster::read(&dir.join("whole.gpkg"), name).expect("whole surface");
            let got = raster::read(&merged, name).expect("merged surface");
            assert_eq!(got.grid, want.grid, "{name}");
            let max = want
                .values
                .iter()
                .filter(|v| v.is_finite())
                .fold(0.0f64, |m, v| m.max(f64::from(v.abs())));
            assert!(max > 0.0, "{name} is empty");
            for (cell, (g, w)) in got.values.iter().zip(&want.values).enumerate() {
                assert_eq!(g.is_nan(), w.is_nan(), "{name}, {n} tiles, cell {cell}");
                if w.is_nan() {
                    continue;
                }
                let ratio = f64::from((g - w).abs()) / max;
                worst = worst.max(ratio);
                assert!(
                    ratio <= 1e-6,
                    "{name}, {n} tiles, cell {cell}: {g} vs {w} (max {max})"
                );
            }
        }
    }
    println!("largest |merged − whole| / max over the FFT surfaces: {worst:e}");
}

#[test]
fn missing_duplicated_and_mismatched_tiles_are_refused_by_name() {
    let dir = out_dir("tiles_refused");
    stance_tests::synth(&dir, "in.gpkg", 1500, 8);
    let base = |output: &str| {
        owned(&[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--cell-m",
            "1500",
            "--bandwidth-m",
            "6000",
            "--permutations",
            "0",
            "--output",
            output,
            "--name",
            "d",
            "-q",
        ])
    };
    let _ = std::fs::remove_dir_all(dir.join("t"));
    std::fs::create_dir_all(dir.join("t")).expect("dir");
    let tile = |k: usize, file: &str, extra: &[&str]| {
        let mut a = base(file);
        a.extend(["--tile".to_owned(), format!("{k}/3")]);
        a.extend(owned(extra));
        call(&dir, &a)
    };
    let merge = |extra: &[&str]| {
        let _ = std::fs::remove_file(dir.join("merged.gpkg"));
        let mut a = base("merged.gpkg");
        a.extend(owned(&["--merge-tiles", "t"]));
        a.extend(owned(extra));
        call(&dir, &a)
    };
    for k in [1, 3] {
        tile(k, &format!("t/{k}.gpkg"), &[]).ok();
    }
    merge(&[]).usage_error(&[
        "--merge-tiles",
        "tile 2 of 3 is missing",
        "d_tile_2_of_3",
        "--tile 2/3",
    ]);
    assert!(
        !dir.join("merged.gpkg").exists(),
        "a refused merge wrote its output"
    );

    // Tile 2 twice, in two files.
    tile(2, "t/2.gpkg", &[]).ok();
    tile(2, "t/2_again.gpkg", &[]).ok();
    merge(&[]).usage_error(&["tile 2 of 3 is there twice", "2_again.gpkg"]);
    assert!(!dir.join("merged.gpkg").exists());
    std::fs::remove_file(dir.join("t/2_again.gpkg")).expect("remove");

    // The merge asks for another bandwidth than the tiles were computed with.
    let changed = |from: &str, to: &str| {
        let _ = std::fs::remove_file(dir.join("merged.gpkg"));
        let mut a = base("merged.gpkg");
        a.extend(owned(&["--merge-tiles", "t"]));
        let at = a.iter().position(|x| x == from).expect("option value");
        a[at] = to.to_owned();
        call(&dir, &a)
    };
    changed("6000", "6500").usage_error(&["tile 1 of 3", "bandwidth-m is 6000", "6500"]);
    // Another cell: another grid, other rows per tile.
    changed("1500", "2000").usage_error(&["tile 1 of 3", "--merge-tiles"]);
    assert!(!dir.join("merged.gpkg").exists());
    // A tile of a run of 4 among tiles of 3.
    let mut a = base("t/odd.gpkg");
    a.extend(owned(&["--tile", "1/4"]));
    call(&dir, &a).ok();
    merge(&[]).usage_error(&["d_tile_1_of_4", "run of 4 tiles"]);
    std::fs::remove_file(dir.join("t/odd.gpkg")).expect("remove");
    // Shards are not tiles.
    let mut a = base("t/shard.gpkg");
    let at = a
        .iter()
        .position(|x| x == "--permutations")
        .expect("option")
        + 1;
    a[at] = "9".to_owned();
    a.extend(owned(&["--shard", "1/3"]));
    call(&dir, &a).ok();
    merge(&[]).ok();
    assert!(dir.join("merged.gpkg").exists());
}

#[test]
fn options_a_tile_cannot_take_are_refused_naming_the_option() {
    let dir = out_dir("tiles_options");
    stance_tests::synth(&dir, "in.gpkg", 600, 9);
    let base = owned(&[
        "--input",
        "in.gpkg",
        "--layer",
        "veldmark_records",
        "--cell-m",
        "2000",
        "--output",
        "out.gpkg",
        "--tile",
        "1/2",
        "-q",
    ]);
    for (extra, option) in [
        (vec![], "--permutations"),
        (vec!["--permutations", "0", "--adaptive"], "--adaptive"),
        (
            vec!["--permutations", "0", "--type-probabilities"],
            "--type-probabilities",
        ),
        (
            vec![
                "--permutations",
                "0",
                "--mask-layer",
                "veldmark_districts",
                "--edge-correct",
            ],
            "--edge-correct",
        ),
        (vec!["--permutations", "0", "--shard", "1/2"], "--shard"),
    ] {
        let mut a = base.clone();
        a.extend(owned(&extra));
        let ran = call(&dir, &a);
        ran.usage_error(&[option, "not with --tile"]);
        assert_eq!(ran.error_lines().len(), 1, "{:?}", ran.stderr);
        assert!(!dir.join("out.gpkg").exists(), "{option}: wrote its output");
    }
}

/// `stance plan-batch --tiles 3`: the array runs `--tile K/3`, the merge `--merge-tiles`; with
/// calibration, the two calibration tiles run and their measures go into the scripts.
#[test]
fn plan_batch_writes_the_tile_scripts() {
    let dir = out_dir("tiles_plan");
    stance_tests::synth(&dir, "in.gpkg", 600, 9);
    for (sub, fixed) in [("fixed", true), ("calibrated", false)] {
        let _ = std::fs::remove_dir_all(dir.join(sub));
        let mut a = vec!["plan-batch", "--tiles", "3", "--dir", sub];
        if fixed {
            a.extend(["--minutes", "30", "--memory-mb", "900"]);
        }
        a.extend([
            "--",
            "density",
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--cell-m",
            "1000",
            "--permutations",
            "0",
            "--output",
            "result.gpkg",
        ]);
        let summary = run_in(&dir, "stance", &a).ok();
        assert_eq!(summary["tiles"], 3, "{summary}");
        assert_eq!(summary["calibrated"], !fixed);
        let array = std::fs::read_to_string(dir.join(sub).join("tiles.sbatch")).expect("array");
        assert!(array.contains("#SBATCH --array=1-3"), "{array}");
        assert!(
            array.contains("--tile \"${SLURM_ARRAY_TASK_ID}/3\""),
            "{array}"
        );
        let merge = std::fs::read_to_string(dir.join(sub).join("merge.sbatch")).expect("merge");
        assert!(merge.contains("--merge-tiles"), "{merge}");
        assert!(merge.contains("--output result.gpkg"), "{merge}");
        let submit = std::fs::read_to_string(dir.join(sub).join("submit.sh")).expect("submit");
        assert!(submit.contains("tiles.sbatch"), "{submit}");
        if fixed {
            assert!(array.contains("#SBATCH --mem=900M"), "{array}");
        } else {
            assert!(summary["memory_mb_per_tile"].as_u64().unwrap_or(0) >= 256);
            assert!(summary["memory_mb_merge"].as_u64().unwrap_or(0) >= 256);
        }
    }
    // A tool without tiles is refused by name.
    let ran = run_in(
        &dir,
        "stance",
        &[
            "plan-batch",
            "--tiles",
            "2",
            "--dir",
            "x",
            "--",
            "local",
            "--input",
            "in.gpkg",
            "--output",
            "r.gpkg",
        ],
    );
    assert_ne!(ran.code, 0);
    assert!(ran.stderr.contains("--tile"), "{}", ran.stderr);
}
