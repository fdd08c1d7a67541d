//! The processes the host offers: the built-in tools, and plugins found as executables named
//! `stance-<id>` in the directories of `STANCE_PLUGIN_PATH` and then of `PATH`.
//!
//! A plugin is any executable that keeps the tools' contract; the host learns about it from its
//! `--describe` output, which must be a valid OGC API – Processes process description whose `id`
//! is the `<id>` of the file name. A plugin whose description is missing, invalid or slow is
//! listed as broken with the reason and never offered to run. A built-in id cannot be taken by a
//! plugin.

use std::ffi::OsString;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::Value;
use stance_core::host::ogc::check_process_description;

/// How long a plugin's `--describe` may take before it is listed as broken.
pub const DESCRIBE_TIMEOUT: Duration = Duration::from_secs(10);

/// The `--describe` timeout: [`DESCRIBE_TIMEOUT`], or `STANCE_DESCRIBE_TIMEOUT_MS` when set.
pub fn describe_timeout() -> Duration {
    std::env::var("STANCE_DESCRIBE_TIMEOUT_MS")
        .ok()
        .and_then(|v| v.parse::<u64>().ok())
        .map_or(DESCRIBE_TIMEOUT, Duration::from_millis)
}

/// Where a process comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Origin {
    /// Compiled into the host.
    BuiltIn,
    /// An executable found in a directory of `STANCE_PLUGIN_PATH` or `PATH` (named by `via`).
    Plugin {
        /// The executable.
        path: PathBuf,
        /// `STANCE_PLUGIN_PATH` or `PATH`.
        via: &'static str,
    },
}

/// A process the host knows about.
#[derive(Debug, Clone)]
pub struct Process {
    /// Its id (`stance <id>`).
    pub id: String,
    /// Where it comes from.
    pub origin: Origin,
    /// Its description, or why it cannot be offered.
    pub state: State,
}

/// Whether a process can be offered.
#[derive(Debug, Clone)]
pub enum State {
    /// A valid process description.
    Ready(Value),
    /// Why it is not offered.
    Broken(String),
}

impl Process {
    /// The description, when the process is ready.
    pub fn description(&self) -> Option<&Value> {
        match &self.state {
            State::Ready(d) => Some(d),
            State::Broken(_) => None,
        }
    }

    /// Its one-line title (or the reason it is broken).
    pub fn title(&self) -> String {
        match &self.state {
            State::Ready(d) => d["title"].as_str().unwrap_or_default().to_owned(),
            State::Broken(reason) => format!("BROKEN: {reason}"),
        }
    }

    /// Where it comes from, for `stance list`.
    pub fn origin_label(&self) -> String {
        match &self.origin {
            Origin::BuiltIn => "built-in".into(),
            Origin::Plugin { path, via } => format!("plugin {} (via {via})", path.display()),
        }
    }

    /// The program and leading arguments that run it, started without a shell: built-in tools
    /// through the umbrella executable `umbrella` (`stance <id> …`), plugins directly.
    pub fn command(&self, umbrella: &Path) -> (PathBuf, Vec<OsString>) {
        match &self.origin {
            Origin::BuiltIn => (umbrella.to_owned(), vec![OsString::from(&self.id)]),
            Origin::Plugin { path, .. } => (path.clone(), Vec::new()),
        }
    }
}

/// A plugin id: lower-case letters, digits and dashes, starting with a letter.
pub fn valid_id(id: &str) -> bool {
    let mut chars = id.chars();
    chars.next().is_some_and(|c| c.is_ascii_lowercase())
        && chars.all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
        && !id.ends_with('-')
}

/// The built-in processes plus the plugins found in `plugin_path` (the value of
/// `STANCE_PLUGIN_PATH`) and then `path` (the value of `PATH`), in that order; the first
/// executable of an id wins. `builtin_dir` is the directory of the host's own executables:
/// `stance-<built-in id>` files there are the built-ins themselves and are not listed again.
pub fn discover(
    builtins: Vec<(String, Value)>,
    plugin_path: Option<OsString>,
    path: Option<OsString>,
    builtin_dir: Option<&Path>,
) -> Vec<Process> {
    let mut processes: Vec<Process> = builtins
        .into_iter()
        .map(|(id, description)| Process {
            id,
            origin: Origin::BuiltIn,
            state: State::Ready(description),
        })
        .collect();
    let builtin_ids: Vec<String> = processes.iter().map(|p| p.id.clone()).collect();
    let mut found: Vec<(String, PathBuf, &'static str)> = Vec::new();
    for (value, via) in [(plugin_path, "STANCE_PLUGIN_PATH"), (path, "PATH")] {
        let Some(value) = value else { continue };
        for dir in std::env::split_paths(&value) {
            if dir.as_os_str().is_empty() {
                continue;
            }
            for (id, file) in executables_in(&dir) {
                let own =
                    builtin_ids.contains(&id) && builtin_dir.is_some_and(|b| same_dir(b, &dir));
                if own || found.iter().any(|(seen, _, _)| *seen == id) {
                    continue;
                }
                found.push((id, file, via));
            }
        }
    }
    let described: Vec<Process> = std::thread::scope(|scope| {
        let jobs: Vec<_> = found
            .into_iter()
            .map(|(id, file, via)| {
                let shadows = builtin_ids.contains(&id);
                scope.spawn(move || {
                    let state = if shadows {
                        State::Broken(format!(
                            "'{id}' is a built-in tool; a plugin cannot replace it (rename the \
                             executable)"
                        ))
                    } else {
                        describe_plugin(&file, &id, describe_timeout())
                    };
                    Process {
                        id,
                        origin: Origin::Plugin { path: file, via },
                        state,
                    }
                })
            })
            .collect();
        jobs.into_iter().filter_map(|j| j.join().ok()).collect()
    });
    processes.extend(described);
    processes
}

fn same_dir(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => a == b,
    }
}

/// `(id, path)` of every executable file `stance-<id>` in `dir`, sorted by id.
fn executables_in(dir: &Path) -> Vec<(String, PathBuf)> {
    use std::os::unix::fs::PermissionsExt;
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    let mut out: Vec<(String, PathBuf)> = entries
        .flatten()
        .filter_map(|entry| {
            let name = entry.file_name().to_string_lossy().into_owned();
            let id = name.strip_prefix("stance-")?.to_owned();
            let path = entry.path();
            let meta = std::fs::metadata(&path).ok()?;
            let executable = meta.is_file() && meta.permissions().mode() & 0o111 != 0;
            (executable && valid_id(&id)).then_some((id, path))
        })
        .collect();
    out.sort();
    out
}

/// Runs `file --describe` (without a shell, stdin closed) and checks what it prints.
pub fn describe_plugin(file: &Path, id: &str, timeout: Duration) -> State {
    match run_with_timeout(file, &["--describe"], timeout) {
        Err(reason) => State::Broken(reason),
        Ok((code, stdout)) => {
            if code != Some(0) {
                return State::Broken(format!("--describe exited with {code:?}"));
            }
            match check_description(&stdout, id) {
                Ok(description) => State::Ready(description),
                Err(reason) => State::Broken(reason),
            }
        }
    }
}

/// Parses and checks a description printed by `--describe` for the plugin `id`.
///
/// # Errors
/// The first reason it cannot be offered: not JSON, schema problems, or an id that differs.
pub fn check_description(stdout: &str, id: &str) -> Result<Value, String> {
    let description: Value = serde_json::from_str(stdout)
        .map_err(|e| format!("--describe did not print one JSON object ({e})"))?;
    let problems = check_process_description(&description);
    if let Some(first) = problems.first() {
        return Err(format!(
            "invalid process description: {first}{}",
            if problems.len() > 1 {
                format!(" (and {} more)", problems.len() - 1)
            } else {
                String::new()
            }
        ));
    }
    if description["id"] != id {
        return Err(format!(
            "its description has id {}, expected \"{id}\" (from the file name)",
            description["id"]
        ));
    }
    Ok(description)
}

/// Runs `file args…` with stdin closed and stderr discarded; kills it after `timeout`.
/// Returns its exit code and stdout.
///
/// # Errors
/// A message when it cannot start or does not finish in time.
pub fn run_with_timeout(
    file: &Path,
    args: &[&str],
    timeout: Duration,
) -> Result<(Option<i32>, String), String> {
    let mut child = Command::new(file)
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .map_err(|e| format!("cannot run {} ({e})", file.display()))?;
    let mut stdout = child.stdout.take();
    let reader = std::thread::spawn(move || {
        let mut text = String::new();
        if let Some(out) = stdout.as_mut() {
            let _ = out.take(16 << 20).read_to_string(&mut text);
        }
        text
    });
    let started = Instant::now();
    loop {
        match child.try_wait() {
            Ok(Some(status)) => {
                let text = reader.join().unwrap_or_default();
                return Ok((status.code(), text));
            }
            Ok(None) if started.elapsed() < timeout => {
                std::thread::sleep(Duration::from_millis(20));
            }
            _ => {
                let _ = child.kill();
                let _ = child.wait();
                return Err(format!(
                    "{} {} did not answer within {} s",
                    file.display(),
                    args.join(" "),
                    timeout.as_secs()
                ));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plugin_ids_are_lower_case_words() {
        for ok in ["counts", "area-shares", "k2"] {
            assert!(valid_id(ok), "{ok}");
        }
        for bad in ["", "Counts", "-x", "x-", "a b", "a.py", "2x"] {
            assert!(!valid_id(bad), "{bad}");
        }
    }

    #[test]
    fn a_description_must_be_valid_and_carry_the_file_id() {
        let good = r#"{"id": "counts", "version": "1", "title": "Counts",
            "inputs": {"x": {"schema": {"type": "string"}}}, "outputs": {}}"#;
        assert!(check_description(good, "counts").is_ok());
        let e = check_description(good, "other").expect_err("id differs");
        assert!(e.contains("expected \"other\""), "{e}");
        let e = check_description("not json", "counts").expect_err("json");
        assert!(e.contains("JSON"), "{e}");
        let bad = r#"{"id": "counts", "version": "1",
            "inputs": {"x": {"schema": {"const": "a"}}}}"#;
        let e = check_description(bad, "counts").expect_err("schema");
        assert!(e.contains("'const'"), "{e}");
    }
}
