//! Issue 17, item 5: every tool that estimates its peak memory (`memory_estimate_mb` in its
//! summary, the figure `--max-memory-mb` is checked against) estimates within 1.0–1.5 × of the
//! peak measured here — the child's maximum resident set size from `wait4` — on a moderately
//! sized input (300,000 invented records), and refuses a limit below the estimate with one
//! error naming `--max-memory-mb`, writing nothing. A memory check, not a timing check.

use std::fs::File;
use std::path::Path;
use std::process::{Command, Stdio};
use std::sync::OnceLock;

use serde_json::Value;
use stance_tests::{bin, out_dir, run_in};

/// Records of the shared fixture.
const POINTS: &str = "300000";

/// The fixture every test here reads: stance-synth's invented scenario with its CSV export,
/// made once.
fn fixture() -> &'static Path {
    static DIR: OnceLock<std::path::PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let dir = out_dir("memory_fixture");
        run_in(
            &dir,
            "stance-synth",
            &[
                "--output", "in.gpkg", "--points", POINTS, "--seed", "7", "--csv", "in.csv", "-q",
            ],
        )
        .ok();
        dir
    })
}

/// Runs tool `name` with `args` in `dir`; returns its summary and its peak resident set size
/// in MiB, as the kernel reports it for that child alone (`wait4`'s `ru_maxrss`, KiB on
/// Linux).
fn run_measured(dir: &Path, name: &str, args: &[&str]) -> (Value, f64) {
    let out = dir.join(format!("{name}.stdout"));
    let err = dir.join(format!("{name}.stderr"));
    let child = Command::new(bin(name))
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::from(File::create(&out).expect("stdout file")))
        .stderr(Stdio::from(File::create(&err).expect("stderr file")))
        .spawn()
        .expect("run executable");
    let pid = child.id() as libc::pid_t;
    let mut status: libc::c_int = 0;
    // SAFETY: `rusage` is plain data the call fills; `pid` is our own child, reaped here once
    // (the `Child` handle is not waited on afterwards).
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let reaped = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    assert_eq!(reaped, pid, "wait4 failed");
    drop(child);
    let stderr = std::fs::read_to_string(&err).unwrap_or_default();
    assert!(
        libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0,
        "{name} failed:\n{stderr}"
    );
    let stdout = std::fs::read_to_string(&out).expect("stdout");
    let summary: Value = serde_json::from_str(&stdout)
        .unwrap_or_else(|e| panic!("{name} printed no summary ({e}):\n{stdout}\n{stderr}"));
    (summary, usage.ru_maxrss as f64 / 1024.0)
}

/// Runs the tool measured, checks estimate / peak within [1.0, 1.5], then runs it again with
/// `--max-memory-mb` one MiB below the estimate into `refused.gpkg` and checks the refusal.
fn check_tool(test: &str, name: &str, args: &[&str]) {
    let dir = out_dir(test);
    // The fixture's files by their full paths (not copied).
    let paths: Vec<String> = args
        .iter()
        .map(|a| match *a {
            "in.gpkg" | "in.csv" => fixture().join(a).display().to_string(),
            _ => (*a).to_owned(),
        })
        .collect();
    let args: Vec<&str> = paths.iter().map(String::as_str).collect();
    let mut measured: Vec<&str> = args.clone();
    measured.extend(["--output", "out.gpkg", "-q"]);
    let (summary, peak_mib) = run_measured(&dir, name, &measured);
    let estimate = summary["memory_estimate_mb"]
        .as_u64()
        .unwrap_or_else(|| panic!("{name}: no memory_estimate_mb in {summary}"));
    let ratio = estimate as f64 / peak_mib;
    assert!(
        (1.0..=1.5).contains(&ratio),
        "{name}: estimate {estimate} MiB against a peak of {peak_mib:.1} MiB = {ratio:.2} ×, outside 1.0–1.5"
    );
    let limit = (estimate - 1).to_string();
    let mut refused: Vec<&str> = args.clone();
    refused.extend(["--output", "refused.gpkg", "--max-memory-mb", &limit, "-q"]);
    run_in(&dir, name, &refused).usage_error(&["--max-memory-mb", "MiB"]);
    assert!(!dir.join("refused.gpkg").exists(), "{name} wrote output");
}

#[test]
fn density_estimate_covers_its_peak() {
    // The options of the scale benchmark (tests/bench/scale.sh): h = 5 km, 112 m cells, FFT.
    check_tool(
        "memory_density",
        "stance-density",
        &[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--bandwidth-m",
            "5000",
            "--cell-m",
            "112",
            "--permutations",
            "0",
            "--method",
            "fft",
        ],
    );
}

#[test]
fn rates_estimate_covers_its_peak() {
    check_tool(
        "memory_rates",
        "stance-rates",
        &[
            "--input",
            "in.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "oppose",
            "--at-risk-classes",
            "all",
            "--id-field",
            "code",
        ],
    );
}

#[test]
fn import_estimate_covers_its_peak() {
    // Every check of the scale benchmark, duplicates (author and text) included.
    check_tool(
        "memory_import",
        "stance-import",
        &[
            "--input",
            "in.csv",
            "--time-field",
            "time",
            "--author-field",
            "author",
            "--text-field",
            "text",
            "--quality-field",
            "quality",
        ],
    );
}
