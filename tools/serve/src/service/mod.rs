//! `stance serve`: the toolbox over HTTP as OGC API – Processes – Part 1: Core 1.0, with a
//! browser page. Built-in tools and plugins are served alike; each job runs the tool as its own
//! process (no shell), in its own folder of the workspace, with arguments built from validated
//! inputs only.

pub mod documents;
pub mod inputs;
pub mod paths;
pub mod preview;
pub mod progress;
mod routes;
mod runner;
pub mod store;
mod transfer;

use std::collections::HashMap;
use std::ffi::OsString;
use std::net::{SocketAddr, ToSocketAddrs};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::{Arc, Mutex};

use clap::Parser;
use stance_core::host::{one_line, print_stderr, print_stdout};
use tokio::sync::{Notify, Semaphore};

use crate::registry::{Process, State};
use paths::Workspace;
use store::Store;

/// Options of `stance serve`.
#[derive(Debug, Clone, Parser)]
#[command(
    name = "stance serve",
    about = "Serve every tool and plugin as OGC API – Processes (with a browser page)",
    long_about = None
)]
pub struct Options {
    /// Address and port to listen on (port 0: any free port, printed at start).
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:8470")]
    pub bind: String,

    /// Folder of uploaded inputs (files/), job folders (jobs/) and the job table
    /// (jobs.sqlite); created if missing.
    #[arg(long, value_name = "DIR", default_value = "stance-workspace")]
    pub workspace: PathBuf,

    /// Jobs running at once; the others wait in the order they came.
    #[arg(long, value_name = "N", default_value_t = 2,
          value_parser = clap::value_parser!(u32).range(1..=256))]
    pub workers: u32,

    /// Token every request must carry as `Authorization: Bearer TOKEN`; required when the
    /// bind address is not loopback.
    #[arg(long, value_name = "TOKEN")]
    pub token: Option<String>,

    /// Largest upload (PUT /files/NAME), in MiB.
    #[arg(long, value_name = "MIB", default_value_t = 512)]
    pub max_upload_mb: u64,
}

/// Largest JSON request body (an execute request), in bytes.
pub const MAX_BODY: usize = 1 << 20;

/// Everything a request handler needs.
pub struct App {
    /// Processes that can run (`State::Ready`), by id order of discovery.
    processes: Vec<Process>,
    /// The umbrella executable (runs built-in tools and the render tool for previews).
    umbrella: PathBuf,
    workspace: Workspace,
    jobs: Mutex<Store>,
    slots: Arc<Semaphore>,
    /// Dismissal signals of the jobs whose tool is running.
    running: Mutex<HashMap<String, Arc<Notify>>>,
    token: Option<String>,
    max_upload: u64,
    /// One preview is drawn at a time.
    previews: tokio::sync::Mutex<()>,
}

impl App {
    /// Runs `f` on the job table.
    fn store<T>(&self, f: impl FnOnce(&Store) -> rusqlite::Result<T>) -> Result<T, String> {
        let store = self
            .jobs
            .lock()
            .map_err(|_| "the job table is unusable after a crash of a request".to_owned())?;
        f(&store).map_err(|e| format!("job table: {e}"))
    }

    /// The description of ready process `id`.
    fn process(&self, id: &str) -> Option<(&Process, &serde_json::Value)> {
        self.processes
            .iter()
            .find(|p| p.id == id)
            .and_then(|p| p.description().map(|d| (p, d)))
    }
}

/// Runs `stance serve` with `args` (the words after `serve`), offering the `State::Ready` ones
/// of `processes`; built-in tools run through `umbrella`.
pub fn main(args: Vec<OsString>, processes: Vec<Process>, umbrella: PathBuf) -> ExitCode {
    let argv = std::iter::once(OsString::from("stance serve")).chain(args);
    let options = match Options::try_parse_from(argv) {
        Ok(o) => o,
        Err(e) => {
            use clap::error::ErrorKind;
            return match e.kind() {
                ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => {
                    print_stdout(&e.render().to_string())
                }
                _ => {
                    print_stderr(&format!(
                        "stance serve: {}",
                        one_line(&e.render().to_string())
                    ));
                    ExitCode::from(2)
                }
            };
        }
    };
    let (app, address, recovered) = match prepare(options, processes, umbrella) {
        Ok(ready) => ready,
        Err(message) => {
            print_stderr(&format!("stance serve: error: {message}"));
            return ExitCode::from(2);
        }
    };
    let runtime = match tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
    {
        Ok(r) => r,
        Err(e) => {
            print_stderr(&format!(
                "stance serve: error: cannot start the runtime ({e})"
            ));
            return ExitCode::from(1);
        }
    };
    runtime.block_on(serve(app, address, recovered))
}

/// Checks the options and opens the workspace and job table.
fn prepare(
    options: Options,
    processes: Vec<Process>,
    umbrella: PathBuf,
) -> Result<(Arc<App>, SocketAddr, usize), String> {
    let addresses: Vec<SocketAddr> = options
        .bind
        .to_socket_addrs()
        .map_err(|e| format!("--bind {}: not an address and port ({e})", options.bind))?
        .collect();
    let address = *addresses
        .first()
        .ok_or_else(|| format!("--bind {}: resolves to no address", options.bind))?;
    let loopback = addresses.iter().all(|a| a.ip().is_loopback());
    let token = options.token.filter(|t| !t.is_empty());
    if !loopback && token.is_none() {
        return Err(format!(
            "--bind {} is reachable from other machines; give --token TOKEN (clients then send \
             'Authorization: Bearer TOKEN'), or bind to 127.0.0.1",
            options.bind
        ));
    }
    let workspace = Workspace::open(&options.workspace)?;
    let (store, recovered) = Store::open(&workspace.database())
        .map_err(|e| format!("{}: {e}", workspace.database().display()))?;
    let processes = processes
        .into_iter()
        .filter(|p| matches!(p.state, State::Ready(_)))
        .collect();
    let app = App {
        processes,
        umbrella,
        workspace,
        jobs: Mutex::new(store),
        slots: Arc::new(Semaphore::new(options.workers as usize)),
        running: Mutex::new(HashMap::new()),
        token,
        max_upload: options.max_upload_mb.saturating_mul(1 << 20),
        previews: tokio::sync::Mutex::new(()),
    };
    Ok((Arc::new(app), address, recovered))
}

async fn serve(app: Arc<App>, address: SocketAddr, recovered: usize) -> ExitCode {
    let listener = match tokio::net::TcpListener::bind(address).await {
        Ok(l) => l,
        Err(e) => {
            print_stderr(&format!(
                "stance serve: error: cannot listen on {address} ({e})"
            ));
            return ExitCode::from(1);
        }
    };
    let local = listener.local_addr().unwrap_or(address);
    let workspace = app.workspace.root.display().to_string();
    let processes = app.processes.len();
    if recovered > 0 {
        print_stderr(&format!(
            "stance serve: {recovered} job(s) left unfinished by a previous run now read as \
             failed ({})",
            store::STOPPED
        ));
    }
    print_stderr(&format!(
        "stance serve: listening on http://{local} ({processes} processes, workspace {workspace})"
    ));
    let router = routes::router(app);
    tokio::select! {
        result = axum::serve(listener, router) => match result {
            Ok(()) => ExitCode::SUCCESS,
            Err(e) => {
                print_stderr(&format!("stance serve: error: {e}"));
                ExitCode::from(1)
            }
        },
        () = shutdown() => {
            print_stderr("stance serve: stopping (running tools are stopped and roll back)");
            ExitCode::SUCCESS
        }
    }
}

/// Resolves on SIGINT or SIGTERM.
async fn shutdown() {
    use tokio::signal::unix::{signal, SignalKind};
    let (Ok(mut term), Ok(mut int)) = (
        signal(SignalKind::terminate()),
        signal(SignalKind::interrupt()),
    ) else {
        std::future::pending::<()>().await;
        return;
    };
    tokio::select! {
        _ = term.recv() => {}
        _ = int.recv() => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn options(args: &[&str]) -> Options {
        Options::try_parse_from(std::iter::once("stance serve").chain(args.iter().copied()))
            .expect("options")
    }

    #[test]
    fn defaults_are_loopback_two_workers_and_a_local_workspace() {
        let o = options(&[]);
        assert_eq!(o.bind, "127.0.0.1:8470");
        assert_eq!(o.workers, 2);
        assert_eq!(o.workspace, PathBuf::from("stance-workspace"));
        assert_eq!(o.max_upload_mb, 512);
        assert!(o.token.is_none());
    }

    #[test]
    fn a_non_loopback_bind_needs_a_token() {
        let dir = tempfile::tempdir().expect("tempdir");
        let ws = dir.path().join("ws").display().to_string();
        let e = prepare(
            options(&["--bind", "0.0.0.0:0", "--workspace", &ws]),
            Vec::new(),
            PathBuf::from("stance"),
        )
        .err()
        .expect("refused");
        assert!(e.contains("--token"), "{e}");
        assert!(
            !dir.path().join("ws").exists(),
            "refused before touching the workspace"
        );
        let ok = prepare(
            options(&[
                "--bind",
                "0.0.0.0:0",
                "--workspace",
                &ws,
                "--token",
                "s3cret",
            ]),
            Vec::new(),
            PathBuf::from("stance"),
        );
        assert!(ok.is_ok());
        let ok = prepare(
            options(&["--bind", "[::1]:0", "--workspace", &ws]),
            Vec::new(),
            PathBuf::from("stance"),
        );
        assert!(ok.is_ok());
        assert!(Options::try_parse_from(["stance serve", "--workers", "0"]).is_err());
    }
}
