//! The tool host: from one parameter definition, every tool gets its CLI, `--describe`,
//! JSON summary, provenance, progress, exit codes and atomic output.

mod common;
pub mod describe;
pub mod neighbours;
pub mod ogc;
mod progress;
pub mod shard;

use std::ffi::OsString;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

use clap::{Args, FromArgMatches};
use serde_json::{json, Value};

pub use common::CommonArgs;
pub use progress::Progress;

use crate::error::{Error, Result};
use crate::gpkg::stage::Staging;
use crate::gpkg::{self, Provenance};

/// Whether a tool reads `--input`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InputUse {
    /// `--input` must be given.
    Required,
    /// The tool generates its data (`--input` and `--layer` are not offered in its description).
    None,
}

/// One declared output, for `--describe`.
#[derive(Debug, Clone)]
pub struct OutputDecl {
    /// Output id, e.g. `points`.
    pub id: &'static str,
    /// Short title.
    pub title: &'static str,
    /// What the output layer holds, including its name pattern.
    pub description: &'static str,
    /// Media type of the container.
    pub media_type: &'static str,
}

/// Media type of a GeoPackage (OGC 12-128r18, Annex: media type registration).
pub const GEOPACKAGE_MEDIA_TYPE: &str = "application/geopackage+sqlite3";

/// What every tool implements: its parameters, its description and its `run`.
pub trait Tool {
    /// The tool's own parameters (clap derive for the CLI, schemars for `--describe`,
    /// serde for provenance). Use `#[serde(rename_all = "kebab-case")]` so names match the CLI.
    type Params: Args + FromArgMatches + schemars::JsonSchema + serde::Serialize;
    /// Short id: the executable is `stance-<ID>`.
    const ID: &'static str;
    /// One-line title.
    const TITLE: &'static str;
    /// A paragraph on what the tool does.
    const DESCRIPTION: &'static str;
    /// Default base name of the output layers.
    const DEFAULT_NAME: &'static str;
    /// Whether the tool reads `--input`.
    const INPUT: InputUse;
    /// What the tool's `--input` is (its `--help` and its description in `--describe`).
    const INPUT_DESCRIPTION: &'static str = "Input GeoPackage.";
    /// The outputs, for `--describe`.
    fn outputs() -> Vec<OutputDecl>;
    /// Reads, checks, computes and stages its outputs through `run`; returns the key results.
    ///
    /// # Errors
    /// Any [`Error`]; its variant decides the exit code.
    fn run(params: &Self::Params, run: &mut Run) -> Result<Value>;
}

/// The clap command of tool `T`: common options plus the tool's parameters.
pub fn command<T: Tool>() -> clap::Command {
    let command = clap::Command::new(format!("stance-{}", T::ID));
    // The derive sets `about` from the parameter structs' doc comments: set the tool's own after.
    T::Params::augment_args(CommonArgs::augment_args(command))
        // `--bandwidth-m -500` must reach the tool's own check rather than read as an option.
        .mut_args(|arg| {
            if arg.get_action().takes_values() {
                arg.allow_negative_numbers(true)
            } else {
                arg
            }
        })
        .mut_arg("input", |arg| arg.help(T::INPUT_DESCRIPTION))
        .about(T::TITLE)
        .long_about(format!("{}\n\n{}", T::TITLE, T::DESCRIPTION))
        .version(crate::VERSION)
        .after_help(
            "Exit codes: 0 done, 2 bad arguments or unusable input, 1 failure while working.",
        )
}

/// Entry point of a tool executable: `fn main() -> ExitCode { host::main::<MyTool>() }`.
pub fn main<T: Tool>() -> ExitCode {
    main_with_args::<T>(std::env::args_os().collect())
}

/// Runs tool `T` with explicit arguments (`args[0]` is the program name).
pub fn main_with_args<T: Tool>(args: Vec<OsString>) -> ExitCode {
    // --describe must work without the tool's required arguments.
    if args.iter().skip(1).any(|a| a == "--describe") {
        return print_json(&describe::describe::<T>());
    }
    let matches = match command::<T>().try_get_matches_from(args) {
        Ok(m) => m,
        Err(e) => return clap_exit(T::ID, e),
    };
    let parsed = CommonArgs::from_arg_matches(&matches)
        .and_then(|c| T::Params::from_arg_matches(&matches).map(|p| (c, p)));
    let (common, params) = match parsed {
        Ok(p) => p,
        Err(e) => return clap_exit(T::ID, e),
    };
    match execute::<T>(common, &params) {
        Ok(summary) => print_json(&summary),
        Err(error) => {
            print_stderr(&format!("stance-{}: error: {error}", T::ID));
            ExitCode::from(error.exit_code())
        }
    }
}

fn print_json(value: &Value) -> ExitCode {
    let text = serde_json::to_string_pretty(value).unwrap_or_else(|_| "{}".into());
    print_stdout(&format!("{text}\n"))
}

/// Writes `text` to stdout. A reader that stopped reading (`stance describe | head -1`) is not
/// an error: the executable ends quietly with exit 0, as other command-line tools do.
pub fn print_stdout(text: &str) -> ExitCode {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => ExitCode::SUCCESS,
        Err(_) => ExitCode::from(1),
    }
}

/// Writes one line to stderr, ignoring a closed stderr (a log line is never worth a panic).
pub fn print_stderr(line: &str) {
    let _ = writeln!(std::io::stderr().lock(), "{line}");
}

/// Help and version go to stdout with exit 0; usage errors become one line with exit 2 that
/// keeps clap's content: the missing arguments, a "did you mean" tip, the possible values.
fn clap_exit(id: &str, error: clap::Error) -> ExitCode {
    use clap::error::ErrorKind;
    match error.kind() {
        ErrorKind::DisplayHelp
        | ErrorKind::DisplayVersion
        | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => {
            print_stdout(&error.render().to_string())
        }
        _ => {
            print_stderr(&format!(
                "stance-{id}: error: {} (see --help)",
                one_line(&error.render().to_string())
            ));
            ExitCode::from(2)
        }
    }
}

/// clap's rendered error folded into one line: everything before the usage, joined.
pub fn one_line(rendered: &str) -> String {
    let mut line = String::new();
    for part in rendered
        .lines()
        .map(str::trim)
        .take_while(|l| !l.starts_with("Usage:") && !l.starts_with("For more information"))
        .filter(|l| !l.is_empty())
    {
        let part = part.strip_prefix("error: ").unwrap_or(part);
        if !line.is_empty() {
            line.push_str(if line.ends_with(':') { " " } else { "; " });
        }
        line.push_str(part);
    }
    if line.is_empty() {
        "bad arguments".into()
    } else {
        line
    }
}

/// What a run sets up for the whole process: GDAL's messages (shown only with -v; the toolbox
/// reports every failure in one line of its own), SIGINT/SIGTERM (the first lets the run roll
/// back, a second ends the process at once), and the worker threads. Returns the interrupt flag.
fn prepare_process(common: &CommonArgs) -> Arc<AtomicBool> {
    let show_gdal = common.verbose && !common.quiet;
    gdal::config::set_error_handler(move |class, number, message| {
        if show_gdal {
            print_stderr(&format!("gdal: {class:?} {number}: {message}"));
        }
    });
    let interrupted = Arc::new(AtomicBool::new(false));
    for signal in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        let _ =
            signal_hook::flag::register_conditional_shutdown(signal, 130, Arc::clone(&interrupted));
        let _ = signal_hook::flag::register(signal, Arc::clone(&interrupted));
    }
    if common.threads > 0 {
        // Fails only if a pool already exists (the umbrella runs one tool per process).
        let _ = rayon::ThreadPoolBuilder::new()
            .num_threads(common.threads)
            .build_global();
    }
    interrupted
}

/// Validates the common options, runs the tool, stamps provenance and publishes its outputs.
fn execute<T: Tool>(common: CommonArgs, params: &T::Params) -> Result<Value> {
    let started = chrono::Utc::now();
    let clock = Instant::now();
    let interrupted = prepare_process(&common);
    let name = common
        .name
        .clone()
        .unwrap_or_else(|| T::DEFAULT_NAME.to_owned());
    gpkg::check_layer_name(&name, "--name")?;
    let input = match (T::INPUT, &common.input) {
        (InputUse::Required, None) => {
            return Err(Error::argument(
                "--input",
                "missing; give the input file with --input FILE",
            ));
        }
        (InputUse::Required, Some(path)) => Some(InputFile::open(path)?),
        (InputUse::None, _) => None,
    };
    let staging = Staging::new(&common.output, common.overwrite)?;
    let mut run = Run {
        name,
        progress: Progress::new(common.quiet),
        common,
        input,
        staging,
        interrupted: Interrupt(interrupted),
        extra_inputs: Vec::new(),
        clock,
        memory_estimate: std::sync::atomic::AtomicU64::new(0),
    };
    run.progress.phase("reading");
    let results = T::run(params, &mut run)?;
    run.progress.phase("publishing");
    run.debug("tool finished; writing provenance and publishing");
    run.check_interrupted()?;

    let parameters = {
        let mut all = serde_json::to_value(&run.common).unwrap_or(Value::Null);
        if let (Some(all), Ok(Value::Object(own))) =
            (all.as_object_mut(), serde_json::to_value(params))
        {
            all.remove("describe");
            all.extend(own);
        }
        all
    };
    let mut inputs = Vec::new();
    for input in run.input.iter_mut().chain(run.extra_inputs.iter_mut()) {
        inputs.push(input.provenance_json()?);
    }
    let provenance = Provenance {
        tool: format!("stance-{}", T::ID),
        version: crate::VERSION.to_owned(),
        parameters,
        inputs,
        seed: run.common.seed,
        started_at: started.to_rfc3339_opts(chrono::SecondsFormat::Millis, true),
        run_time_s: clock.elapsed().as_secs_f64(),
        results: results.clone(),
    };
    let verbose = run.common.verbose && !run.common.quiet;
    let memory_estimate_mb = match run.memory_estimate.load(Ordering::Relaxed) {
        0 => None,
        bytes => Some(bytes.div_ceil(1 << 20)),
    };
    let Run {
        staging,
        interrupted,
        progress,
        ..
    } = run;
    let written = staging.publish(&provenance, interrupted.flag())?;
    progress.finish();
    if verbose {
        print_stderr(&format!(
            "[{:7.3} s] published",
            clock.elapsed().as_secs_f64()
        ));
    }
    let mut summary = json!({
        "tool": provenance.tool,
        "version": provenance.version,
        "output": provenance.parameters.get("output"),
        "layers": written,
        "results": results,
        "run_time_s": (clock.elapsed().as_secs_f64() * 1000.0).round() / 1000.0,
    });
    if let Some(mb) = memory_estimate_mb {
        summary["memory_estimate_mb"] = mb.into();
    }
    Ok(summary)
}

/// An input file with its checksum. The SHA-256 is computed on a second thread while the tool
/// works (hashing a 200 MB GeoPackage takes about as long as reading it), and joined when the
/// provenance is written.
#[derive(Debug)]
pub struct InputFile {
    /// Path as given.
    pub path: PathBuf,
    /// Layers read from it (filled as the tool reads them).
    pub layers: Vec<String>,
    hash: HashState,
}

#[derive(Debug)]
enum HashState {
    Running(std::thread::JoinHandle<Result<String>>),
    Done(String),
}

impl InputFile {
    /// Checks that `path` is a readable file and starts hashing it.
    ///
    /// # Errors
    /// [`Error::InputFile`] when it is missing, a directory or unreadable.
    pub fn open(path: &Path) -> Result<Self> {
        if path.is_dir() {
            return Err(Error::InputFile {
                path: path.to_owned(),
                reason: "is a directory, expected a file".into(),
            });
        }
        std::fs::File::open(path).map_err(|e| Error::InputFile {
            path: path.to_owned(),
            reason: e.to_string(),
        })?;
        let owned = path.to_owned();
        let job = std::thread::spawn(move || gpkg::sha256_file(&owned));
        Ok(InputFile {
            path: path.to_owned(),
            layers: Vec::new(),
            hash: HashState::Running(job),
        })
    }

    /// The file's SHA-256 (lowercase hex), waiting for the hashing thread if needed.
    ///
    /// # Errors
    /// [`Error::InputFile`] when the file could not be read to the end.
    pub fn sha256(&mut self) -> Result<String> {
        let state = std::mem::replace(&mut self.hash, HashState::Done(String::new()));
        let digest = match state {
            HashState::Done(digest) => digest,
            HashState::Running(job) => job
                .join()
                .map_err(|_| Error::Failed(format!("hashing {} failed", self.path.display())))??,
        };
        self.hash = HashState::Done(digest.clone());
        Ok(digest)
    }

    fn provenance_json(&mut self) -> Result<Value> {
        let sha256 = self.sha256()?;
        Ok(json!({ "path": self.path, "layers": self.layers, "sha256": sha256 }))
    }
}

/// What a running tool sees: its options, its input, its output staging, progress and logs.
pub struct Run {
    /// The common options.
    pub common: CommonArgs,
    /// Base name of the output layers.
    pub name: String,
    /// Progress reporter.
    pub progress: Progress,
    input: Option<InputFile>,
    extra_inputs: Vec<InputFile>,
    staging: Staging,
    interrupted: Interrupt,
    clock: Instant,
    memory_estimate: std::sync::atomic::AtomicU64,
}

/// Set once SIGINT or SIGTERM arrives; long loops check it and roll back.
#[derive(Debug, Clone)]
pub struct Interrupt(Arc<AtomicBool>);

impl Interrupt {
    /// Fails with [`Error::Interrupted`] once a signal has arrived.
    ///
    /// # Errors
    /// [`Error::Interrupted`].
    pub fn check(&self) -> Result<()> {
        if self.0.load(Ordering::Relaxed) {
            Err(Error::Interrupted)
        } else {
            Ok(())
        }
    }

    /// The raw flag, for maths modules that poll an `AtomicBool`.
    pub fn flag(&self) -> &AtomicBool {
        &self.0
    }
}

impl Run {
    /// The input file (tools with [`InputUse::Required`] always have one).
    ///
    /// # Errors
    /// [`Error::BadArgument`] if the tool was run without `--input`.
    pub fn input(&self) -> Result<&Path> {
        self.input
            .as_ref()
            .map(|i| i.path.as_path())
            .ok_or_else(|| {
                Error::argument("--input", "missing; give the input file with --input FILE")
            })
    }

    /// Records that `layer` of the input was read (for provenance, and so that it is never
    /// replaced when the output is the same file).
    pub fn note_input_layer(&mut self, layer: &str) {
        if let Some(input) = &mut self.input {
            if !input.layers.iter().any(|l| l == layer) {
                input.layers.push(layer.to_owned());
            }
            if gpkg::same_file(&input.path, &self.common.output) {
                self.staging.protect(layer);
            }
        }
    }

    /// Notes a layer read from `path`: the input file, or another file (hashed for provenance).
    ///
    /// # Errors
    /// As [`Run::note_extra_input`].
    pub fn note_layer(&mut self, path: &Path, layer: &str) -> Result<()> {
        if path == self.input()? {
            self.note_input_layer(layer);
            Ok(())
        } else {
            self.note_extra_input(path, layer)
        }
    }

    /// Reads the weights table `name` from `file` (default `default_file`) and notes it as an
    /// input of the run.
    ///
    /// # Errors
    /// A missing or malformed table.
    pub fn weights_table(
        &mut self,
        name: &str,
        file: Option<&Path>,
        default_file: &Path,
    ) -> Result<(PathBuf, gpkg::weights_table::WeightsTable)> {
        let path = file.map_or_else(|| default_file.to_owned(), Path::to_owned);
        let table = gpkg::weights_table::read(&path, name)?;
        self.note_layer(&path, &table.table)?;
        Ok((path, table))
    }

    /// Records another input file (a mask, a weights table in another file…) for provenance.
    ///
    /// # Errors
    /// [`Error::InputFile`] when it cannot be read.
    pub fn note_extra_input(&mut self, path: &Path, layer: &str) -> Result<()> {
        let mut file = InputFile::open(path)?;
        file.layers.push(layer.to_owned());
        if gpkg::same_file(path, &self.common.output) {
            self.staging.protect(layer);
        }
        self.extra_inputs.push(file);
        Ok(())
    }

    /// The output staging area: layers written here appear in `--output` only when the run
    /// completes.
    pub fn output(&mut self) -> &mut Staging {
        &mut self.staging
    }

    /// SHA-256 of the input file and of every extra input read so far, in reading order.
    ///
    /// # Errors
    /// A file that cannot be hashed.
    pub fn input_checksums(&mut self) -> Result<Vec<String>> {
        let mut sums = Vec::new();
        for input in self.input.iter_mut().chain(self.extra_inputs.iter_mut()) {
            sums.push(input.sha256()?);
        }
        Ok(sums)
    }

    /// The output layer name for `suffix` (`<name>_<suffix>`, or `<name>` for an empty suffix).
    pub fn layer_name(&self, suffix: &str) -> String {
        if suffix.is_empty() {
            self.name.clone()
        } else {
            format!("{}_{}", self.name, suffix)
        }
    }

    /// The memory a run may use: `--max-memory-mb`, else three quarters of the machine's memory
    /// (`MemTotal` of `/proc/meminfo`), else 8 GiB where that cannot be read.
    pub fn memory_limit_bytes(&self) -> u64 {
        if let Some(mib) = self.common.max_memory_mb {
            return mib.saturating_mul(1 << 20);
        }
        let total_kib = std::fs::read_to_string("/proc/meminfo")
            .ok()
            .and_then(|text| {
                text.lines()
                    .find(|l| l.starts_with("MemTotal:"))
                    .and_then(|l| l.split_whitespace().nth(1))
                    .and_then(|v| v.parse::<u64>().ok())
            });
        match total_kib {
            Some(kib) => kib.saturating_mul(1024) / 4 * 3,
            None => 8 << 30,
        }
    }

    /// Refuses up front a run estimated to need `estimate_bytes` when that exceeds
    /// [`Run::memory_limit_bytes`]; `what` names the quantity, `advice` says what to change.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming `--max-memory-mb`, the estimate and the advice.
    pub fn guard_memory(&self, estimate_bytes: u64, what: &str, advice: &str) -> Result<()> {
        let limit = self.memory_limit_bytes();
        // The largest estimate of the run goes into its summary (`memory_estimate_mb`), where
        // `stance plan-batch` reads it.
        self.memory_estimate
            .fetch_max(estimate_bytes, Ordering::Relaxed);
        check_memory(estimate_bytes, limit, what, advice)?;
        self.debug(format!(
            "memory estimate {} MiB of {} MiB allowed ({what})",
            estimate_bytes >> 20,
            limit >> 20
        ));
        Ok(())
    }

    /// A log line on stderr (unless `--quiet`).
    pub fn log(&self, message: impl AsRef<str>) {
        if !self.common.quiet {
            print_stderr(message.as_ref());
        }
    }

    /// Warns (one line) when polygons of `layer` are not valid and returns how many are not;
    /// `role` names them in the message ("areas", "mask polygons").
    pub fn warn_invalid_polygons(&self, layer: &gpkg::read::PolygonLayer, role: &str) -> usize {
        let invalid = gpkg::read::invalid_polygons(layer);
        if let Some((fid, reason)) = invalid.first() {
            self.log(format!(
                "warning: {} of the {} {role} in layer '{}' are not valid polygons (first: feature {fid}: {reason}); points on them may be assigned oddly, so repair them in your GIS",
                invalid.len(),
                layer.fids.len(),
                layer.layer
            ));
        }
        invalid.len()
    }

    /// A log line shown only with `-v`, prefixed with the seconds since the run started (so
    /// `-v` shows where a run spends its time).
    pub fn debug(&self, message: impl AsRef<str>) {
        if self.common.verbose && !self.common.quiet {
            print_stderr(&format!(
                "[{:7.3} s] {}",
                self.clock.elapsed().as_secs_f64(),
                message.as_ref()
            ));
        }
    }

    /// Fails with [`Error::Interrupted`] once SIGINT or SIGTERM has arrived.
    ///
    /// # Errors
    /// [`Error::Interrupted`].
    pub fn check_interrupted(&self) -> Result<()> {
        self.interrupted.check()
    }

    /// The interrupt flag, for long loops.
    pub fn interrupt(&self) -> &Interrupt {
        &self.interrupted
    }

    /// The output staging with progress and the interrupt flag, for loops that write while
    /// they report.
    pub fn writing(&mut self) -> (&mut Staging, &Progress, &Interrupt) {
        (&mut self.staging, &self.progress, &self.interrupted)
    }
}

/// The refusal of [`Run::guard_memory`] without recording the estimate, for a tool that must
/// check while the run is borrowed (it records the estimate with `guard_memory` afterwards):
/// `limit_bytes` from [`Run::memory_limit_bytes`].
///
/// # Errors
/// [`Error::BadArgument`] naming `--max-memory-mb`, the estimate and the advice.
pub fn check_memory(estimate_bytes: u64, limit_bytes: u64, what: &str, advice: &str) -> Result<()> {
    if estimate_bytes > limit_bytes {
        return Err(Error::argument(
            "--max-memory-mb",
            format!(
                "{what} needs about {} MiB, over the limit of {} MiB; {advice} (or raise --max-memory-mb)",
                estimate_bytes >> 20,
                limit_bytes >> 20
            ),
        ));
    }
    Ok(())
}
