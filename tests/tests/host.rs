//! The contract every tool keeps (DEVELOPERS.md): `--help`, `--describe`, exit codes, one clear
//! error line, atomic outputs, `--overwrite`, untouched inputs, provenance.

use serde_json::Value;
use stance_tests::{out_dir, provenance, run_in, sha256, tables};

use stance_tests::TOOLS;

/// Copies the committed sample into `dir` (tests never write next to the sample).
fn sample_copy(dir: &std::path::Path) -> std::path::PathBuf {
    let path = dir.join("input.gpkg");
    std::fs::copy(stance_tests::sample_gpkg(), &path).expect("copy sample");
    path
}

#[test]
fn every_tool_answers_help() {
    let dir = out_dir("help");
    for tool in TOOLS {
        let ran = run_in(&dir, tool, &["--help"]);
        assert_eq!(ran.code, 0, "{tool} --help: {}", ran.stderr);
        assert!(
            ran.stdout.contains("Usage:") && ran.stdout.contains("--output"),
            "{tool} --help:\n{}",
            ran.stdout
        );
    }
}

/// The essentials of an OGC API – Processes process description (OGC 18-062r2, §7.10):
/// id, title, description, version, jobControlOptions, inputs and outputs with JSON Schemas.
#[test]
fn every_describe_is_a_process_description() {
    let dir = out_dir("describe");
    for tool in TOOLS {
        let description = run_in(&dir, tool, &["--describe"]).ok();
        assert_eq!(description["id"], tool.trim_start_matches("stance-"));
        for key in ["title", "description", "version"] {
            assert!(
                description[key].as_str().is_some_and(|s| !s.is_empty()),
                "{tool}: {key}"
            );
        }
        assert!(description["jobControlOptions"]
            .as_array()
            .is_some_and(|a| a.contains(&Value::from("sync-execute"))));
        let inputs = description["inputs"].as_object().expect("inputs object");
        assert!(
            inputs.contains_key("output")
                && inputs.contains_key("seed")
                && !inputs.contains_key("describe")
        );
        for (name, input) in inputs {
            let schema = input["schema"]
                .as_object()
                .unwrap_or_else(|| panic!("{tool}: input {name} has no schema"));
            assert!(
                schema.contains_key("type")
                    || schema.contains_key("enum")
                    || schema.contains_key("oneOf"),
                "{tool}: {name}: {schema:?}"
            );
            assert!(
                input["minOccurs"].is_u64() && input["maxOccurs"].is_u64(),
                "{tool}: {name}"
            );
            assert!(
                input["description"].as_str().is_some_and(|d| !d.is_empty()),
                "{tool}: {name} undocumented"
            );
        }
        assert_eq!(inputs["output"]["minOccurs"], 1);
        assert_eq!(
            inputs["seed"]["schema"]["default"], 1,
            "defaults come from the CLI definition"
        );
        let outputs = description["outputs"].as_object().expect("outputs object");
        assert!(!outputs.is_empty());
        for (name, output) in outputs {
            assert!(output["schema"].is_object(), "{tool}: output {name}");
        }
    }
    let import = run_in(&dir, "stance-import", &["--describe"]).json();
    assert_eq!(import["inputs"]["input"]["minOccurs"], 1);
    assert_eq!(
        import["inputs"]["stance-field"]["schema"]["default"],
        "stance"
    );
    assert_eq!(import["inputs"]["stance-field"]["schema"]["type"], "string");
    assert_eq!(import["inputs"]["max-per-author"]["minOccurs"], 0);
    assert_eq!(
        import["inputs"]["max-per-author"]["schema"]["type"],
        "integer"
    );
    let synth = run_in(&dir, "stance-synth", &["--describe"]).json();
    assert!(
        synth["inputs"].get("input").is_none(),
        "synth reads no input"
    );
    assert_eq!(synth["inputs"]["points"]["schema"]["default"], 20000);
}

#[test]
fn umbrella_lists_describes_and_runs_every_tool() {
    let dir = out_dir("umbrella");
    let list = run_in(&dir, "stance", &["list"]);
    assert_eq!(list.code, 0);
    let ids: Vec<&str> = list
        .stdout
        .lines()
        .filter_map(|l| l.split('\t').next())
        .collect();
    assert_eq!(ids.len(), TOOLS.len());
    for tool in TOOLS {
        assert!(
            ids.contains(&tool.trim_start_matches("stance-")),
            "{tool} missing from `stance list`"
        );
    }
    let all = run_in(&dir, "stance", &["describe"]).ok();
    assert_eq!(all["processes"].as_array().map(Vec::len), Some(TOOLS.len()));
    let one = run_in(&dir, "stance", &["describe", "import"]).ok();
    assert_eq!(one, run_in(&dir, "stance-import", &["--describe"]).ok());
    run_in(&dir, "stance", &["nosuchtool"]).usage_error(&["nosuchtool", "import"]);
    let summary = run_in(
        &dir,
        "stance",
        &["synth", "--output", "u.gpkg", "--points", "50", "-q"],
    )
    .ok();
    assert_eq!(summary["tool"], "stance-synth");
    assert!(tables(&dir.join("u.gpkg")).contains(&"veldmark_records".to_owned()));
}

#[test]
fn bad_arguments_exit_2_with_one_line() {
    let dir = out_dir("bad_arguments");
    let input = sample_copy(&dir);
    let input = input.to_str().expect("utf-8 path");
    run_in(
        &dir,
        "stance-import",
        &["--input", input, "--output", "o.gpkg", "--no-such-option"],
    )
    .usage_error(&["--no-such-option"]);
    run_in(&dir, "stance-import", &["--output", "o.gpkg"]).usage_error(&["--input"]);
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            input,
            "--layer",
            "veldmark_records",
            "--output",
            "o.gpkg",
            "--max-per-author",
            "0",
        ],
    )
    .usage_error(&["--max-per-author"]);
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            input,
            "--layer",
            "veldmark_records",
            "--output",
            "o.gpkg",
            "--min-quality",
            "town",
        ],
    )
    .usage_error(&["--min-quality", "--quality-field"]);
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "0"],
    )
    .usage_error(&["--points"]);
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--name", "gpkg_contents"],
    )
    .usage_error(&["gpkg_contents", "reserved"]);
    run_in(&dir, "stance-synth", &["--output", "no/such/dir/o.gpkg"]).usage_error(&["no/such/dir"]);
    assert!(
        !dir.join("o.gpkg").exists(),
        "a refused run wrote its output"
    );
}

#[test]
fn missing_layer_or_file_exits_2_and_writes_nothing() {
    let dir = out_dir("missing_layer");
    let input = sample_copy(&dir);
    let before = sha256(&input);
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "input.gpkg",
            "--layer",
            "nope",
            "--output",
            "o.gpkg",
        ],
    );
    ran.usage_error(&["input.gpkg", "'nope'", "veldmark_records"]);
    assert!(!dir.join("o.gpkg").exists());
    run_in(
        &dir,
        "stance-import",
        &["--input", "missing.gpkg", "--output", "o.gpkg"],
    )
    .usage_error(&["missing.gpkg"]);
    // The same run writing into the input file itself leaves it byte-identical.
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "input.gpkg",
            "--layer",
            "nope",
            "--output",
            "input.gpkg",
        ],
    )
    .usage_error(&["'nope'"]);
    assert_eq!(sha256(&input), before);
    let leftovers = stance_tests::staging_leftovers(&dir);
    assert!(
        leftovers.is_empty(),
        "staging files left behind: {leftovers:?}"
    );
}

#[test]
fn a_failing_run_leaves_no_partial_layer() {
    let dir = out_dir("failing_run");
    // Output that already holds a layer, so the failing run would have to merge into it.
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "100", "-q"],
    )
    .ok();
    let before = sha256(&dir.join("o.gpkg"));
    // The records layer is staged in full before the whole-input check finds that no stance
    // label is known (the stance field here holds town names): the run must fail and leave
    // the output untouched.
    std::fs::write(
        dir.join("bad.csv"),
        "lon,lat,stance\n-140.1,35.0,north\n-140.2,35.1,south\n",
    )
    .expect("write csv");
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input", "bad.csv", "--output", "o.gpkg", "--name", "never",
        ],
    );
    ran.usage_error(&["bad.csv", "stance", "'north' ×1"]);
    assert_eq!(
        sha256(&dir.join("o.gpkg")),
        before,
        "output changed by a failed run"
    );
    assert!(!tables(&dir.join("o.gpkg")).contains(&"never".to_owned()));
    let leftovers = stance_tests::staging_leftovers(&dir);
    assert!(
        leftovers.is_empty(),
        "staging files left behind: {leftovers:?}"
    );
}

#[test]
fn overwrite_replaces_an_output_layer_only_when_asked_and_never_an_input_layer() {
    let dir = out_dir("overwrite");
    std::fs::write(
        dir.join("a.csv"),
        "lon,lat,stance\n-140.1,35.0,support\n-140.2,35.1,oppose\n",
    )
    .expect("csv");
    std::fs::write(dir.join("b.csv"), "lon,lat,stance\n-140.1,35.0,neutral\n").expect("csv");
    run_in(
        &dir,
        "stance-import",
        &["--input", "a.csv", "--output", "o.gpkg", "-q"],
    )
    .ok();
    let second = run_in(
        &dir,
        "stance-import",
        &["--input", "b.csv", "--output", "o.gpkg", "-q"],
    );
    second.usage_error(&["'records' already exists", "--overwrite"]);
    assert_eq!(
        stance_tests::rows(&dir.join("o.gpkg"), "SELECT count(*) FROM records"),
        vec![vec!["2".to_owned()]]
    );
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "b.csv",
            "--output",
            "o.gpkg",
            "--overwrite",
            "-q",
        ],
    )
    .ok();
    assert_eq!(
        stance_tests::rows(&dir.join("o.gpkg"), "SELECT stance FROM records"),
        vec![vec!["neutral".to_owned()]]
    );
    assert_eq!(
        provenance(&dir.join("o.gpkg"), "records").len(),
        1,
        "the replaced layer's provenance goes with it"
    );
    // Reading a layer of o.gpkg and writing into o.gpkg under the same name is refused.
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "o.gpkg",
            "--layer",
            "records",
            "--output",
            "o.gpkg",
            "--overwrite",
        ],
    );
    ran.usage_error(&["'records'", "input layer"]);
    assert_eq!(
        stance_tests::rows(&dir.join("o.gpkg"), "SELECT stance FROM records"),
        vec![vec!["neutral".to_owned()]]
    );
}

#[test]
fn inputs_are_never_modified_and_provenance_is_complete() {
    let dir = out_dir("provenance");
    let input = sample_copy(&dir);
    let before = sha256(&input);
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "input.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "o.gpkg",
            "--time-field",
            "time_utc",
            "-q",
        ],
    )
    .ok();
    assert_eq!(sha256(&input), before, "input file changed");
    assert_eq!(summary["layers"][0]["name"], "records");
    let records = provenance(&dir.join("o.gpkg"), "records");
    assert_eq!(records.len(), 1);
    let record = &records[0];
    assert_eq!(record["tool"], "stance-import");
    assert_eq!(record["version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(
        record["parameters"]["quality-order"], "exact,street,town,district",
        "defaults are recorded"
    );
    assert_eq!(record["parameters"]["time-field"], "time_utc");
    assert_eq!(record["parameters"]["seed"], 1);
    assert_eq!(record["inputs"][0]["sha256"], before);
    assert_eq!(record["inputs"][0]["layers"][0], "veldmark_records");
    assert!(record["started_at"]
        .as_str()
        .is_some_and(|t| t.ends_with('Z')));
    assert!(record["run_time_s"].as_f64().is_some_and(|t| t >= 0.0));
    assert_eq!(record["results"], summary["results"]);
    // Same file as input and output: the input layer's rows are unchanged.
    let original = stance_tests::rows(&input, "SELECT * FROM veldmark_records ORDER BY fid");
    run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "input.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "input.gpkg",
            "-q",
        ],
    )
    .ok();
    assert_eq!(
        stance_tests::rows(&input, "SELECT * FROM veldmark_records ORDER BY fid"),
        original
    );
}

#[test]
fn sigterm_rolls_back_and_exits_non_zero() {
    let dir = out_dir("sigterm");
    let child = std::process::Command::new(stance_tests::bin("stance-synth"))
        .args(["--output", "o.gpkg", "--points", "3000000", "-q"])
        .current_dir(&dir)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("spawn");
    std::thread::sleep(std::time::Duration::from_millis(1500));
    let status = std::process::Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status()
        .expect("kill");
    assert!(status.success());
    let output = child.wait_with_output().expect("wait");
    assert_ne!(
        output.status.code(),
        Some(0),
        "an interrupted run must not report success"
    );
    assert!(
        !dir.join("o.gpkg").exists(),
        "an interrupted run wrote its output"
    );
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .expect("list")
        .filter_map(Result::ok)
        .collect();
    assert!(leftovers.is_empty(), "files left behind: {leftovers:?}");
}
