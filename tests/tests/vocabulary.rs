//! Names of our own and one vocabulary: no tool's help, description, summary keys, output
//! field names or provenance carries a word from the list below (names of programs and
//! libraries, or their option and report names, that the toolbox must not imitate); every
//! description validates against the OGC API – Processes – Part 1: Core 1.0 process schema
//! (`process.yaml` and the files it references, repository opengeospatial/ogcapi-processes,
//! folder `core/openapi/schemas`), checked by `stance_core::host::ogc`; progress lines are our
//! JSON format; clap's guidance reaches the user in one line; a closed stdout ends quietly.

use serde_json::Value;
use stance_core::host::ogc::check_process_description;
use stance_tests::{out_dir, rows, run_in, synth, tables};

use stance_tests::TOOLS;

/// Whole words (compared case-insensitively, words split at anything but letters, digits and
/// `_`) that must not appear: program names, reference-library names (evidence belongs in tests
/// and DEVELOPERS.md, not in what a user reads), and the names this wave replaced.
const FORBIDDEN_WORDS: &[&str] = &[
    // Reference libraries and their function or argument names.
    "esda",
    "spdep",
    "pysal",
    "libpysal",
    "spatstat",
    "sparr",
    "kdepy",
    "eblocal",
    "p_sim",
    "z_sim",
    // Names replaced by our own.
    "logrr",
    "focal_id",
    "neighbour_id",
    "neighbour_count",
    "fdr",
    "events_field",
    "base_field",
    "observed_over_expected",
    "kelmuir",
    "drovenby",
];

/// Names of desktop spatial-statistics and scan-statistics programs and of a command-line
/// toolbox, written backwards so that the repository itself never spells them (a search of the
/// repository for them must find nothing).
const PROGRAM_NAMES_REVERSED: &[&str] = &["adoeg", "nacstas", "sigcra", "xobetihw"];

fn program_names() -> Vec<String> {
    PROGRAM_NAMES_REVERSED
        .iter()
        .map(|n| n.chars().rev().collect())
        .collect()
}

/// Phrases (case-insensitive substrings) that must not appear.
const FORBIDDEN_PHRASES: &[&str] = &["coordinates,address,place,region", "progress: "];

fn words(text: &str) -> impl Iterator<Item = String> + '_ {
    text.split(|c: char| !(c.is_alphanumeric() || c == '_'))
        .filter(|w| !w.is_empty())
        .map(str::to_lowercase)
}

fn forbidden_in(text: &str) -> Vec<String> {
    let lower = text.to_lowercase();
    let programs = program_names();
    let mut found: Vec<String> = words(text)
        .filter(|w| FORBIDDEN_WORDS.contains(&w.as_str()) || programs.contains(w))
        .collect();
    found.extend(
        FORBIDDEN_PHRASES
            .iter()
            .filter(|p| lower.contains(*p))
            .map(|p| (*p).to_owned()),
    );
    found.sort();
    found.dedup();
    found
}

/// Every key of a JSON value, recursively, and every string value.
fn json_texts(value: &Value, out: &mut Vec<String>) {
    match value {
        Value::Object(map) => {
            for (k, v) in map {
                out.push(k.clone());
                json_texts(v, out);
            }
        }
        Value::Array(items) => items.iter().for_each(|v| json_texts(v, out)),
        Value::String(s) => out.push(s.clone()),
        _ => {}
    }
}

#[test]
fn the_forbidden_list_catches_what_it_lists() {
    // The checker itself must be able to fail.
    let program: String = "adoeg".chars().rev().collect();
    assert_eq!(
        forbidden_in(&format!("see {program}'s map")),
        vec![program.clone()]
    );
    assert_eq!(forbidden_in("--adjust fdr"), vec!["fdr"]);
    assert_eq!(forbidden_in("progress: 40%"), vec!["progress: "]);
    assert!(forbidden_in("Benjamini–Hochberg false discovery rate").is_empty());
    assert!(forbidden_in("a sparse grid of espresso").is_empty());
}

#[test]
fn help_and_descriptions_carry_no_forbidden_name_and_validate_against_the_ogc_schema() {
    let dir = out_dir("vocabulary_describe");
    for tool in TOOLS {
        let help = run_in(&dir, tool, &["--help"]);
        assert_eq!(help.code, 0, "{tool}: {}", help.stderr);
        assert_eq!(
            forbidden_in(&help.stdout),
            Vec::<String>::new(),
            "{tool} --help"
        );
        let description = run_in(&dir, tool, &["--describe"]).json();
        let mut texts = Vec::new();
        json_texts(&description, &mut texts);
        assert_eq!(
            forbidden_in(&texts.join("\n")),
            Vec::<String>::new(),
            "{tool} --describe"
        );
        let problems = check_process_description(&description);
        assert!(problems.is_empty(), "{tool}: {problems:#?}");
        assert_ne!(description["title"], description["description"], "{tool}");
        for (name, input) in description["inputs"].as_object().expect("inputs") {
            let title = input["title"].as_str().unwrap_or_default();
            let text = input["description"].as_str().unwrap_or_default();
            assert!(
                !title.is_empty() && title.len() < 40 && title != text,
                "{tool} {name}: title '{title}' should be a short label"
            );
        }
        if *tool != "stance-synth" {
            let input = &description["inputs"]["input"]["description"];
            assert!(
                !input.as_str().unwrap_or_default().contains("stance-import")
                    || *tool == "stance-import",
                "{tool}: --input describes another tool's input: {input}"
            );
        }
    }
}

#[test]
fn enumerated_choices_are_enums_with_their_meanings_in_the_description() {
    let dir = out_dir("vocabulary_enums");
    let moran = run_in(&dir, "stance-moran", &["--describe"]).json();
    let adjust = &moran["inputs"]["adjust"];
    let values: Vec<&str> = adjust["schema"]["enum"]
        .as_array()
        .expect("enum")
        .iter()
        .filter_map(Value::as_str)
        .collect();
    assert!(
        values.contains(&"benjamini-hochberg") && values.contains(&"holm"),
        "{values:?}"
    );
    assert_eq!(adjust["schema"]["default"], "benjamini-hochberg");
    assert!(adjust["schema"].get("oneOf").is_none());
    let text = adjust["description"].as_str().unwrap_or_default();
    assert!(text.contains("Benjamini & Hochberg (1995)"), "{text}");
}

/// A small chain on an invented scenario: every summary key and string, every output field name
/// and every provenance record is checked against the forbidden list.
#[test]
fn summaries_fields_and_provenance_carry_no_forbidden_name() {
    let dir = out_dir("vocabulary_chain");
    let _ = std::fs::remove_file(dir.join("v.gpkg"));
    let mut summaries = vec![synth(&dir, "v.gpkg", 3000, 7)];
    let steps: &[&[&str]] = &[
        &[
            "stance-density",
            "--input",
            "v.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "v.gpkg",
            "--compare",
            "support,oppose",
            "--permutations",
            "9",
            "-q",
        ],
        &[
            "stance-scan",
            "--input",
            "v.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "v.gpkg",
            "--replicates",
            "9",
            "--max-share",
            "0.2",
            "-q",
        ],
        &[
            "stance-weights",
            "--input",
            "v.gpkg",
            "--layer",
            "veldmark_districts",
            "--id-field",
            "code",
            "--output",
            "v.gpkg",
            "--name",
            "w",
            "-q",
        ],
        &[
            "stance-rates",
            "--input",
            "v.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "oppose",
            "--weights",
            "w",
            "--output",
            "v.gpkg",
            "--name",
            "r",
            "-q",
        ],
        &[
            "stance-moran",
            "--input",
            "v.gpkg",
            "--layer",
            "r",
            "--field",
            "rate_eb_global",
            "--weights",
            "w",
            "--permutations",
            "9",
            "--output",
            "v.gpkg",
            "--name",
            "m",
            "-q",
        ],
    ];
    for step in steps {
        let ran = run_in(&dir, step[0], &step[1..]);
        assert_eq!(ran.code, 0, "{}: {}", step[0], ran.stderr);
        summaries.push(ran.json());
    }
    let mut texts = Vec::new();
    for summary in &summaries {
        json_texts(summary, &mut texts);
    }
    let path = dir.join("v.gpkg");
    for table in tables(&path) {
        texts.push(table.clone());
        for row in rows(
            &path,
            &format!("SELECT name FROM pragma_table_info('{table}')"),
        ) {
            texts.extend(row);
        }
    }
    for row in rows(&path, "SELECT metadata FROM gpkg_metadata") {
        texts.extend(row);
    }
    let found = forbidden_in(&texts.join("\n"));
    assert!(found.is_empty(), "forbidden names in outputs: {found:?}");
}

#[test]
fn progress_lines_are_json_monotone_and_end_at_one() {
    let dir = out_dir("vocabulary_progress");
    synth(&dir, "p.gpkg", 2000, 3);
    // stderr is a pipe here, not a terminal: the tool prints our JSON lines.
    let ran = run_in(
        &dir,
        "stance-scan",
        &[
            "--input",
            "p.gpkg",
            "--layer",
            "veldmark_records",
            "--output",
            "p.gpkg",
            "--replicates",
            "99",
            "--max-share",
            "0.2",
        ],
    );
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let lines: Vec<Value> = ran
        .stderr
        .lines()
        .filter(|l| l.starts_with('{'))
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON ({e}): {l}")))
        .collect();
    assert!(lines.len() >= 2, "{}", ran.stderr);
    let mut last = -1.0;
    for line in &lines {
        let fraction = line["progress"].as_f64().expect("progress is a number");
        assert!(
            (0.0..=1.0).contains(&fraction) && fraction >= last,
            "{line}"
        );
        assert!(
            line["phase"].as_str().is_some_and(|p| !p.is_empty()),
            "{line}"
        );
        if let Some(done) = line.get("done") {
            assert!(done.as_u64() <= line["total"].as_u64(), "{line}");
        }
        last = fraction;
    }
    assert_eq!(last, 1.0, "the last line says the run is done");
    assert!(
        !ran.stderr.contains("progress: "),
        "old format: {}",
        ran.stderr
    );
}

#[test]
fn clap_guidance_reaches_the_user_in_one_line() {
    let dir = out_dir("vocabulary_clap");
    let missing = run_in(&dir, "stance-density", &["--input", "x.gpkg"]);
    assert_eq!(missing.code, 2);
    assert_eq!(missing.stderr.lines().count(), 1, "{}", missing.stderr);
    assert!(
        missing.stderr.contains("--output"),
        "names the missing: {}",
        missing.stderr
    );
    let misspelt = run_in(
        &dir,
        "stance-density",
        &["--output", "o.gpkg", "--bandwith-m", "5"],
    );
    assert_eq!(misspelt.code, 2);
    assert_eq!(misspelt.stderr.lines().count(), 1, "{}", misspelt.stderr);
    assert!(
        misspelt.stderr.contains("--bandwidth-m"),
        "did you mean: {}",
        misspelt.stderr
    );
    let invalid = run_in(
        &dir,
        "stance-moran",
        &["--output", "o.gpkg", "--adjust", "fdr"],
    );
    assert_eq!(invalid.code, 2);
    assert_eq!(invalid.stderr.lines().count(), 1, "{}", invalid.stderr);
    assert!(
        invalid.stderr.contains("benjamini-hochberg") && invalid.stderr.contains("holm"),
        "lists the possible values: {}",
        invalid.stderr
    );
    assert!(!dir.join("o.gpkg").exists(), "a refused run writes nothing");
}

#[test]
fn a_closed_stdout_ends_quietly() {
    for (program, args) in [
        ("stance", "describe"),
        ("stance-moran", "--describe"),
        ("stance-scan", "--help"),
    ] {
        let bin = stance_tests::bin(program);
        let output = std::process::Command::new("sh")
            .arg("-c")
            .arg(format!(
                "'{}' {args} | head -c 10 >/dev/null",
                bin.display()
            ))
            .output()
            .expect("sh");
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert!(
            !stderr.contains("panicked") && !stderr.contains("Broken pipe"),
            "{program} {args}: {stderr}"
        );
        // The status of the tool itself, without the pipe: run it into a closed pipe directly.
        let mut child = std::process::Command::new(&bin)
            .arg(args)
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .expect("spawn");
        drop(child.stdout.take());
        let status = child.wait_with_output().expect("wait");
        let code = status.status.code();
        assert!(
            code == Some(0) || code.is_none(),
            "{program} {args}: exit {code:?}, {}",
            String::from_utf8_lossy(&status.stderr)
        );
        assert!(String::from_utf8_lossy(&status.stderr).is_empty());
    }
}
