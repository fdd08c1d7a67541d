//! Sharded Monte Carlo runs: `--shard K/N` runs write partial results, `--merge-shards` merges
//! them, and the merged outputs are bit-identical to the run on one machine with the same seed
//! (every permutation has its own seed). Missing, duplicated and mismatched shards are refused,
//! naming the shard.
//!
//! Data: the North Carolina SIDS counties (tests/reference/data/nc.gpkg, from R spdep's
//! `nc.shp`), Gi* of SID79 and the local join count of SID79 > 5, queen contiguity built in
//! the run.

use std::path::Path;

use stance_tests::{out_dir, root, rows, run_in};

/// Gi* fields and the join-count fields, each printed with 17 significant digits (enough to
/// tell any two doubles apart), in feature order.
const GI_FIELDS: &str = "printf('%!.17g|%!.17g|%!.17g|%!.17g', g, z, p_permutation, p_adjusted) \
     || '|' || coalesce(hot_cold, '')";
const JOIN_FIELDS: &str = "printf('%!.17g|%!.17g|%!.17g', join_count, p_permutation, p_adjusted) \
     || '|' || coalesce(cluster, '')";

fn args<'a>(statistic: &'a str, input: &'a str, output: &'a str, name: &'a str) -> Vec<&'a str> {
    let mut a = vec![
        "--input",
        input,
        "--statistic",
        statistic,
        "--field",
        "SID79",
        "--permutations",
        "999",
        "--seed",
        "17",
        "--output",
        output,
        "--name",
        name,
        "-q",
    ];
    if statistic == "join-count" {
        a.extend(["--rule", "> 5"]);
    }
    a
}

fn values(path: &Path, layer: &str, fields: &str) -> Vec<String> {
    rows(path, &format!("SELECT {fields} FROM {layer} ORDER BY fid"))
        .into_iter()
        .map(|r| r.join(""))
        .collect()
}

/// A copy of the counties made by GDAL's ogr2ogr (Debian gdal-bin): a GeoPackage of today's
/// GDAL, which the strict validator run over every test output accepts.
fn nc_copy(dir: &Path) -> String {
    let input = dir.join("nc.gpkg");
    let _ = std::fs::remove_file(&input);
    let status = std::process::Command::new("ogr2ogr")
        .args(["-f", "GPKG", "-nln", "nc"])
        .arg(&input)
        .arg(root().join("tests/reference/data/nc.gpkg"))
        .status()
        .expect("run ogr2ogr");
    assert!(status.success(), "ogr2ogr copy of nc.gpkg");
    "nc.gpkg".to_owned()
}

#[test]
fn merged_shards_equal_the_one_machine_run_bit_for_bit() {
    let dir = out_dir("shards_merge");
    let input = nc_copy(&dir);
    for (statistic, fields) in [("gi-star", GI_FIELDS), ("join-count", JOIN_FIELDS)] {
        let whole_file = format!("whole_{statistic}.gpkg");
        run_in(
            &dir,
            "stance-local",
            &args(statistic, &input, &whole_file, "hot"),
        )
        .ok();
        let whole = values(&dir.join(&whole_file), "hot", fields);
        assert_eq!(whole.len(), 100);
        for n in [1usize, 2, 3, 7] {
            let shard_dir = dir.join(format!("{statistic}_{n}"));
            let _ = std::fs::remove_dir_all(&shard_dir);
            std::fs::create_dir_all(&shard_dir).expect("shard dir");
            for k in 1..=n {
                let spec = format!("{k}/{n}");
                let file = format!("{statistic}_{n}/shard_{k}.gpkg");
                let mut a = args(statistic, &input, &file, "hot");
                a.extend(["--shard", &spec]);
                let summary = run_in(&dir, "stance-local", &a).ok();
                assert_eq!(summary["results"]["shard"]["shard"], spec.as_str());
            }
            let merged_file = format!("merged_{statistic}_{n}.gpkg");
            let _ = std::fs::remove_file(dir.join(&merged_file));
            let shards = format!("{statistic}_{n}");
            let mut a = args(statistic, &input, &merged_file, "hot");
            a.extend(["--merge-shards", &shards]);
            run_in(&dir, "stance-local", &a).ok();
            let merged = values(&dir.join(&merged_file), "hot", fields);
            assert_eq!(merged, whole, "{statistic}, {n} shards");
        }
    }
}

#[test]
fn missing_duplicated_and_mismatched_shards_are_refused_by_name() {
    let dir = out_dir("shards_refused");
    let input = nc_copy(&dir);
    let _ = std::fs::remove_dir_all(dir.join("s"));
    std::fs::create_dir_all(dir.join("s")).expect("dir");
    for k in [1, 3] {
        let spec = format!("{k}/3");
        let file = format!("s/shard_{k}.gpkg");
        let mut a = args("gi-star", &input, &file, "hot");
        a.extend(["--shard", &spec]);
        run_in(&dir, "stance-local", &a).ok();
    }
    let merge = |shards: &str, extra: &[&str]| {
        let mut a = args("gi-star", &input, "merged.gpkg", "hot");
        a.extend(["--merge-shards", shards]);
        a.extend_from_slice(extra);
        run_in(&dir, "stance-local", &a)
    };
    merge("s", &[]).usage_error(&["shard 2 of 3 is missing", "hot_shard_2_of_3", "--shard 2/3"]);
    assert!(
        !dir.join("merged.gpkg").exists(),
        "a refused merge wrote its output"
    );

    // Shard 2 written twice (in two files).
    for file in ["s/shard_2.gpkg", "s/shard_2_again.gpkg"] {
        let mut a = args("gi-star", &input, file, "hot");
        a.extend(["--shard", "2/3"]);
        run_in(&dir, "stance-local", &a).ok();
    }
    merge("s", &[]).usage_error(&["shard 2 of 3 is there twice", "shard_2_again.gpkg"]);
    std::fs::remove_file(dir.join("s/shard_2_again.gpkg")).expect("remove");

    // The merge asks for another seed than the shards were drawn with.
    let changed = |from: &str, to: &'static str| {
        let mut a = args("gi-star", &input, "merged.gpkg", "hot");
        a.extend(["--merge-shards", "s"]);
        let at = a.iter().position(|x| *x == from).expect("option value");
        a[at] = to;
        run_in(&dir, "stance-local", &a)
    };
    changed("17", "18").usage_error(&["shard 1 of 3", "seed is 17 in the shard, 18"]);
    // Another number of permutations: the blocks do not match.
    changed("999", "99").usage_error(&["shard 1 of 3", "999", "99"]);
    // Another field: parameters differ.
    changed("SID79", "SID74").usage_error(&["shard 1 of 3", "field is \"SID79\""]);
    // Complete and matching: the merge runs.
    merge("s", &[]).ok();
}

/// Every table of a GeoPackage's contents, every row (reals exactly, blobs by checksum).
fn dump(path: &Path) -> Vec<(String, Vec<Vec<String>>)> {
    stance_tests::tables(path)
        .into_iter()
        .map(|t| {
            let sql = format!("SELECT * FROM \"{t}\" ORDER BY 1");
            (t.clone(), rows(path, &sql))
        })
        .collect()
}

/// Runs `tool` whole, then in N = 1, 2, 3 and 7 shards merged, with the options `base(output)`
/// (whose run name is `name`), and checks that each merged GeoPackage holds exactly the whole
/// run's tables and rows, and that each shard wrote its partial result and nothing else.
fn assert_shards_merge_to_whole(
    dir: &Path,
    tool: &str,
    name: &str,
    base: &dyn Fn(&str) -> Vec<String>,
) {
    let call = |a: &[String]| {
        let a: Vec<&str> = a.iter().map(String::as_str).collect();
        run_in(dir, tool, &a)
    };
    let _ = std::fs::remove_file(dir.join("whole.gpkg"));
    call(&base("whole.gpkg")).ok();
    let whole = dump(&dir.join("whole.gpkg"));
    assert!(!whole.is_empty(), "{tool} wrote no table");
    for n in [1usize, 2, 3, 7] {
        let shard_dir = format!("n{n}");
        let _ = std::fs::remove_dir_all(dir.join(&shard_dir));
        std::fs::create_dir_all(dir.join(&shard_dir)).expect("dir");
        for k in 1..=n {
            let mut a = base(&format!("{shard_dir}/{k}.gpkg"));
            a.extend(["--shard".to_owned(), format!("{k}/{n}")]);
            let summary = call(&a).ok();
            assert_eq!(summary["results"]["shard"]["shard"], format!("{k}/{n}"));
            let tables = stance_tests::tables(&dir.join(format!("{shard_dir}/{k}.gpkg")));
            assert_eq!(tables, vec![format!("{name}_shard_{k}_of_{n}")]);
        }
        let merged = format!("merged{n}.gpkg");
        let _ = std::fs::remove_file(dir.join(&merged));
        let mut a = base(&merged);
        a.extend(["--merge-shards".to_owned(), shard_dir]);
        call(&a).ok();
        assert!(
            dump(&dir.join(&merged)) == whole,
            "{tool}: {n} shards differ from the whole run"
        );
    }
}

fn owned(args: &[&str]) -> Vec<String> {
    args.iter().map(|s| (*s).to_owned()).collect()
}

/// stance-density with tolerance (support against oppose) and type probabilities on an
/// invented scenario of 3,000 records (stance-synth): the surfaces, p-values and contours of the
/// merged shards are those of the one-machine run, bit for bit.
#[test]
fn density_shards_merge_to_the_one_machine_run() {
    let dir = out_dir("shards_density");
    stance_tests::synth(&dir, "in.gpkg", 3000, 5);
    let base = |output: &str| {
        owned(&[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--cell-m",
            "1500",
            "--type-probabilities",
            "--permutations",
            "19",
            "--seed",
            "3",
            "--output",
            output,
            "--name",
            "d",
            "-q",
        ])
    };
    assert_shards_merge_to_whole(&dir, "stance-density", "d", &base);
}

/// stance-scan, ordinal model, 99 replicates, on an invented scenario of 3,000 records
/// (stance-synth): the clusters (LLR, Monte Carlo and Gumbel p-values), members and summary
/// of the merged shards are those of the one-machine run, bit for bit.
#[test]
fn scan_shards_merge_to_the_one_machine_run() {
    let dir = out_dir("shards_scan");
    stance_tests::synth(&dir, "in.gpkg", 3000, 8);
    let base = |output: &str| {
        owned(&[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--model",
            "ordinal",
            "--toward",
            "both",
            "--max-radius-m",
            "12000",
            "--replicates",
            "99",
            "--seed",
            "4",
            "--output",
            output,
            "--name",
            "s",
            "-q",
        ])
    };
    assert_shards_merge_to_whole(&dir, "stance-scan", "s", &base);
    // The merged summary states the replicates the p-values rest on, as the whole run does.
    let clusters = rows(
        &dir.join("merged7.gpkg"),
        "SELECT count(*), min(replicates), max(replicates) FROM s_clusters",
    );
    assert_ne!(clusters[0][0], "0", "no cluster to compare");
    assert_eq!(clusters[0][1..], ["99", "99"]);
}

/// The space-time permutation scan (cylinders of up to 3 months), 49 replicates, on an
/// invented scenario of 2,000 records (stance-synth): merged shards = the whole run.
#[test]
fn space_time_scan_shards_merge_to_the_one_machine_run() {
    let dir = out_dir("shards_scan_time");
    stance_tests::synth(&dir, "in.gpkg", 2000, 9);
    let base = |output: &str| {
        owned(&[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--model",
            "space-time-permutation",
            "--time-field",
            "time_utc",
            "--period",
            "month",
            "--max-duration",
            "3",
            "--max-share",
            "0.1",
            "--replicates",
            "49",
            "--seed",
            "5",
            "--output",
            output,
            "--name",
            "st",
            "-q",
        ])
    };
    assert_shards_merge_to_whole(&dir, "stance-scan", "st", &base);
}

/// stance-moran on the NC counties (SID79, queen contiguity built in the run, 999
/// permutations): global I's permutation p and mean, the local p-values, adjusted p-values and
/// cluster types of the merged shards are those of the one-machine run, bit for bit.
#[test]
fn moran_shards_merge_to_the_one_machine_run() {
    let dir = out_dir("shards_moran");
    let input = nc_copy(&dir);
    let base = |output: &str| {
        owned(&[
            "--input",
            &input,
            "--field",
            "SID79",
            "--permutations",
            "999",
            "--seed",
            "21",
            "--output",
            output,
            "--name",
            "m",
            "-q",
        ])
    };
    assert_shards_merge_to_whole(&dir, "stance-moran", "m", &base);
}

/// `stance plan-batch` writes the array and merge scripts for a shardable tool and refuses a
/// tool without --shard or a run without --output, in one line.
#[test]
fn plan_batch_writes_the_slurm_scripts_or_says_why_not() {
    let dir = out_dir("shards_plan");
    let input = nc_copy(&dir);
    let planned = run_in(
        &dir,
        "stance",
        &[
            "plan-batch",
            "--shards",
            "5",
            "--dir",
            "batch",
            "--minutes",
            "30",
            "--memory-mb",
            "900",
            "--",
            "local",
            "--input",
            &input,
            "--statistic",
            "gi",
            "--field",
            "SID79",
            "--output",
            "final.gpkg",
            "--overwrite",
        ],
    )
    .ok();
    assert_eq!(planned["shards"], 5);
    let shards = std::fs::read_to_string(dir.join("batch/shards.sbatch")).expect("shards");
    assert!(shards.contains("#SBATCH --array=1-5") && shards.contains("#SBATCH --mem=900M"));
    assert!(shards.contains("--shard \"${SLURM_ARRAY_TASK_ID}/5\""));
    let merge = std::fs::read_to_string(dir.join("batch/merge.sbatch")).expect("merge");
    assert!(merge.contains("--merge-shards") && merge.contains("--output final.gpkg --overwrite"));
    let submit = std::fs::read_to_string(dir.join("batch/submit.sh")).expect("submit");
    assert!(submit.contains("--dependency=afterok:"));

    let refused = run_in(
        &dir,
        "stance",
        &[
            "plan-batch",
            "--shards",
            "2",
            "--dir",
            "b2",
            "--",
            "weights",
            "--input",
            &input,
            "--output",
            "w.gpkg",
        ],
    );
    refused.usage_error(&["stance weights cannot split its work into shards"]);
    let no_output = run_in(
        &dir,
        "stance",
        &[
            "plan-batch",
            "--shards",
            "2",
            "--dir",
            "b3",
            "--",
            "local",
            "--input",
            &input,
        ],
    );
    no_output.usage_error(&["--output"]);
    let help = run_in(&dir, "stance", &["plan-batch", "--help"]);
    assert_eq!(help.code, 0, "{}", help.stderr);
    assert!(help.stdout.contains("Usage: stance plan-batch") && help.stderr.is_empty());
}
