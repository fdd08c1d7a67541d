//! Running jobs: at most `--workers` tools at once, the rest wait in submission order (the
//! semaphore is fair). A tool is started without a shell, in its job folder, stdin closed; its
//! stdout is the JSON summary, its stderr the progress and log lines (also kept in the job
//! folder as `stderr.log`). Dismissing a running job sends the tool SIGTERM, on which the tools
//! roll back (nothing half-written); if the service dies, the kernel sends it SIGTERM too.

use std::ffi::OsString;
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::sync::Arc;

use serde_json::Value;
use tokio::io::{AsyncBufReadExt, AsyncReadExt, AsyncWriteExt, BufReader};
use tokio::sync::Notify;

use super::progress;
use super::App;

/// Largest summary read from a tool's stdout.
const MAX_SUMMARY: u64 = 64 << 20;

/// What to run for one job.
#[derive(Debug, Clone)]
pub struct Launch {
    /// The job id.
    pub id: String,
    /// Program and all its arguments.
    pub program: PathBuf,
    /// Arguments.
    pub args: Vec<OsString>,
    /// The job's folder (the tool's working directory).
    pub dir: PathBuf,
    /// The output GeoPackage, when there is one.
    pub output: Option<PathBuf>,
}

/// Waits for a worker slot, runs the job and records how it ended.
pub async fn run(app: Arc<App>, launch: Launch) {
    let Ok(_permit) = Arc::clone(&app.slots).acquire_owned().await else {
        return;
    };
    // Registered before the job reads as running, so a dismissal always finds it.
    let cancel = Arc::new(Notify::new());
    if let Ok(mut running) = app.running.lock() {
        running.insert(launch.id.clone(), Arc::clone(&cancel));
    }
    if !app.store(|s| s.start(&launch.id)).unwrap_or(false) {
        // Dismissed while it waited.
        if let Ok(mut running) = app.running.lock() {
            running.remove(&launch.id);
        }
        return;
    }
    let ended = execute(&app, &launch, &cancel).await;
    if let Ok(mut running) = app.running.lock() {
        running.remove(&launch.id);
    }
    let (outcome, code) = match ended {
        Ok(Ended {
            code: Some(0),
            stdout,
            ..
        }) => match serde_json::from_str::<Value>(&stdout) {
            Ok(summary) => (Ok(summary), Some(0)),
            Err(_) => (
                Err("the tool exited 0 but printed no JSON summary".to_owned()),
                Some(0),
            ),
        },
        Ok(Ended { code, last_log, .. }) => {
            let reason = last_log.unwrap_or_else(|| match code {
                Some(c) => format!("the tool exited with code {c}"),
                None => "the tool was stopped by a signal".to_owned(),
            });
            (Err(reason), code)
        }
        Err(reason) => (Err(reason), None),
    };
    let summary = outcome.as_ref().ok().cloned();
    let recorded = app
        .store(|s| s.finish(&launch.id, outcome.as_ref().map_err(String::as_str), code))
        .unwrap_or(false);
    if !recorded {
        // Dismissed while it ran: its results go.
        remove_job_files(&launch.dir);
        return;
    }
    if let (Some(summary), Some(output)) = (summary, &launch.output) {
        let previews = previews_of(output, &summary);
        let _ = app.store(|s| s.set_previews(&launch.id, &previews));
    }
}

/// The previewable layers among those the summary lists.
fn previews_of(output: &Path, summary: &Value) -> Value {
    let names: Vec<String> = summary["layers"]
        .as_array()
        .map(|layers| {
            layers
                .iter()
                .filter_map(|l| l["name"].as_str().or(l.as_str()).map(str::to_owned))
                .collect()
        })
        .unwrap_or_default();
    Value::Array(
        super::preview::layers(output, &names)
            .iter()
            .map(super::preview::Layer::to_json)
            .collect(),
    )
}

/// Removes what a dismissed job left in its folder (never anything in `files/`).
pub fn remove_job_files(dir: &Path) {
    let _ = std::fs::remove_dir_all(dir);
}

struct Ended {
    code: Option<i32>,
    stdout: String,
    last_log: Option<String>,
}

async fn execute(app: &Arc<App>, launch: &Launch, cancel: &Notify) -> Result<Ended, String> {
    let mut command = tokio::process::Command::new(&launch.program);
    command
        .args(&launch.args)
        .current_dir(&launch.dir)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    stop_with_parent(&mut command);
    let mut child = command
        .spawn()
        .map_err(|e| format!("cannot start {} ({e})", launch.program.display()))?;
    let stdout = child.stdout.take();
    let reader = tokio::spawn(async move {
        let mut text = String::new();
        if let Some(out) = stdout {
            let _ = out.take(MAX_SUMMARY).read_to_string(&mut text).await;
        }
        text
    });
    let stderr = child.stderr.take();
    let logger = tokio::spawn(follow_stderr(
        Arc::clone(app),
        launch.id.clone(),
        launch.dir.join("stderr.log"),
        stderr,
    ));
    let status = tokio::select! {
        status = child.wait() => status,
        () = cancel.notified() => {
            if let Some(pid) = child.id() {
                terminate(pid);
            }
            child.wait().await
        }
    }
    .map_err(|e| format!("lost the tool's process ({e})"))?;
    let stdout = reader.await.unwrap_or_default();
    let last_log = logger.await.unwrap_or_default();
    Ok(Ended {
        code: status.code(),
        stdout,
        last_log,
    })
}

/// Reads stderr line by line: progress lines update the job, the others are log lines, all are
/// kept in `log`. Returns the last log line.
async fn follow_stderr(
    app: Arc<App>,
    id: String,
    log: PathBuf,
    stderr: Option<tokio::process::ChildStderr>,
) -> Option<String> {
    let stderr = stderr?;
    let mut file = tokio::fs::File::create(&log).await.ok();
    let mut lines = BufReader::new(stderr).lines();
    let mut last_log = None;
    while let Ok(Some(line)) = lines.next_line().await {
        if let Some(f) = file.as_mut() {
            let _ = f.write_all(format!("{line}\n").as_bytes()).await;
        }
        match progress::parse(&line) {
            Some(p) => {
                let _ = app.store(|s| s.progress(&id, p.percent, &p.message()));
            }
            None if !line.trim().is_empty() => last_log = Some(line),
            None => {}
        }
    }
    last_log
}

/// Asks the kernel to send the child SIGTERM when the thread that started it ends, so a killed
/// service leaves no tool running on (and the tool rolls back its output).
fn stop_with_parent(command: &mut tokio::process::Command) {
    // SAFETY: the closure runs in the forked child before exec and calls only prctl, which is
    // async-signal-safe; it allocates nothing and touches no lock.
    unsafe {
        command.pre_exec(|| {
            if libc::prctl(libc::PR_SET_PDEATHSIG, libc::SIGTERM) != 0 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
}

/// Sends SIGTERM to the running child `pid` (owned and not yet reaped by the caller, so the
/// id cannot belong to another process).
fn terminate(pid: u32) {
    if let Ok(pid) = libc::pid_t::try_from(pid) {
        // SAFETY: kill has no memory-safety preconditions.
        unsafe {
            libc::kill(pid, libc::SIGTERM);
        }
    }
}
