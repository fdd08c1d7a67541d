//! Helpers for the end-to-end tests: run the real executables, make fixtures, read outputs back.

pub mod png;

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use sha2::{Digest, Sha256};

/// The workspace root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// Path of a built executable (`cargo build --workspace` first; `make test` does).
pub fn bin(name: &str) -> PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| root().join("target"));
    let path = target.join("debug").join(name);
    assert!(
        path.exists(),
        "{} is not built; run `cargo build --workspace` (make test does) first",
        path.display()
    );
    path
}

/// A fresh output folder for one test, under `$STANCE_TEST_OUT` (validated by `make test`)
/// or `target/test-output`.
pub fn out_dir(test: &str) -> PathBuf {
    let base = std::env::var_os("STANCE_TEST_OUT")
        .map(PathBuf::from)
        .unwrap_or_else(|| root().join("target/test-output"));
    let dir = base.join(test);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("create test output folder");
    dir
}

/// Result of running an executable.
#[derive(Debug)]
pub struct Ran {
    /// Exit code (-1 when killed by a signal).
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

impl Ran {
    /// Standard output parsed as JSON (panics with the output when it is not).
    pub fn json(&self) -> Value {
        serde_json::from_str(&self.stdout).unwrap_or_else(|e| {
            panic!(
                "stdout is not JSON ({e}):\n{}\nstderr:\n{}",
                self.stdout, self.stderr
            )
        })
    }

    /// The `error:` lines on stderr.
    pub fn error_lines(&self) -> Vec<&str> {
        self.stderr
            .lines()
            .filter(|l| l.contains("error:"))
            .collect()
    }

    /// Asserts success and returns the summary.
    pub fn ok(&self) -> Value {
        assert_eq!(self.code, 0, "expected success; stderr:\n{}", self.stderr);
        self.json()
    }

    /// Asserts exit 2 with exactly one error line containing every `needle`.
    pub fn usage_error(&self, needles: &[&str]) {
        assert_eq!(
            self.code, 2,
            "expected exit 2; stdout:\n{}\nstderr:\n{}",
            self.stdout, self.stderr
        );
        let lines = self.error_lines();
        assert_eq!(
            lines.len(),
            1,
            "expected one error line, got:\n{}",
            self.stderr
        );
        for needle in needles {
            assert!(
                lines[0].contains(needle),
                "error line lacks '{needle}': {}",
                lines[0]
            );
        }
        assert!(
            self.stdout.trim().is_empty(),
            "a failed run printed a summary: {}",
            self.stdout
        );
    }
}

/// Every built-in tool's executable (the contract and vocabulary tests run them all).
pub const TOOLS: &[&str] = &[
    "stance-import",
    "stance-synth",
    "stance-density",
    "stance-scan",
    "stance-weights",
    "stance-rates",
    "stance-moran",
    "stance-labels",
    "stance-local",
    "stance-trend",
    "stance-render",
];

/// Runs executable `name` with `args` in `dir`.
pub fn run_in(dir: &Path, name: &str, args: &[&str]) -> Ran {
    let output = Command::new(bin(name))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run executable");
    Ran {
        code: output.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

/// Writes the invented scenario with `points` records and `seed` to `dir/file` through the real
/// `stance-synth` executable (the fixture most end-to-end tests start from) and returns its
/// summary; panics if it fails.
pub fn synth(dir: &Path, file: &str, points: u32, seed: u64) -> Value {
    let (points, seed) = (points.to_string(), seed.to_string());
    run_in(
        dir,
        "stance-synth",
        &["--output", file, "--points", &points, "--seed", &seed, "-q"],
    )
    .ok()
}

/// SHA-256 of a file, hex.
pub fn sha256(path: &Path) -> String {
    let bytes = std::fs::read(path).expect("read file");
    format!("{:x}", Sha256::digest(bytes))
}

/// Tables listed in `gpkg_contents`, sorted.
pub fn tables(path: &Path) -> Vec<String> {
    let connection =
        rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .expect("open gpkg");
    let mut statement = connection
        .prepare("SELECT table_name FROM gpkg_contents ORDER BY table_name")
        .expect("query");
    let rows = statement
        .query_map([], |r| r.get::<_, String>(0))
        .expect("rows");
    rows.map(|r| r.expect("row")).collect()
}

/// Every row of `SELECT …` as text, for comparing layer contents.
pub fn rows(path: &Path, sql: &str) -> Vec<Vec<String>> {
    let connection =
        rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .expect("open gpkg");
    let mut statement = connection.prepare(sql).expect("prepare");
    let columns = statement.column_count();
    let mut out = Vec::new();
    let mut query = statement.query([]).expect("query");
    while let Some(row) = query.next().expect("row") {
        let mut values = Vec::with_capacity(columns);
        for i in 0..columns {
            let value = match row.get_ref(i).expect("value") {
                rusqlite::types::ValueRef::Null => "NULL".to_owned(),
                rusqlite::types::ValueRef::Integer(v) => v.to_string(),
                rusqlite::types::ValueRef::Real(v) => format!("{v:?}"),
                rusqlite::types::ValueRef::Text(t) => String::from_utf8_lossy(t).into_owned(),
                rusqlite::types::ValueRef::Blob(b) => format!("{:x}", Sha256::digest(b)),
            };
            values.push(value);
        }
        out.push(values);
    }
    out
}

/// The provenance records stored for `layer`.
pub fn provenance(path: &Path, layer: &str) -> Vec<Value> {
    rows(
        path,
        &format!(
            "SELECT m.metadata FROM gpkg_metadata m JOIN gpkg_metadata_reference r ON r.md_file_id = m.id \
             WHERE r.reference_scope = 'table' AND r.table_name = '{}' AND m.mime_type = 'application/json'",
            layer.replace('\'', "''")
        ),
    )
    .into_iter()
    .map(|r| serde_json::from_str(&r[0]).expect("provenance is JSON"))
    .collect()
}

/// The reference-check Python (`.venv/bin/python`), or None when the venv is absent. Under
/// `make test` (`STANCE_REQUIRE_REFERENCE=1`) a missing venv is a failure.
pub fn reference_python() -> Option<PathBuf> {
    let python = root().join(".venv/bin/python");
    if python.exists() {
        return Some(python);
    }
    if std::env::var_os("STANCE_REQUIRE_REFERENCE").is_some() {
        panic!("{} is missing; `make venv` creates it", python.display());
    }
    eprintln!(
        "skipping a reference check: {} is missing (make venv)",
        python.display()
    );
    None
}

/// The committed sample GeoPackage.
pub fn sample_gpkg() -> PathBuf {
    root().join("sample-gpkg/veldmark.gpkg")
}

/// Names of staging files (of a run's private GeoPackage or side files) left in `dir`.
pub fn staging_leftovers(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .expect("list folder")
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("stance-staging"))
        .collect()
}
