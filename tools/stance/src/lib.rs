//! The umbrella `stance`: lists, describes and runs every tool of the toolbox.

use std::ffi::OsString;
use std::path::Path;
use std::process::ExitCode;

use serde_json::{json, Value};
use stance_core::host::{self, Tool};
use stance_serve::registry::{self, Process, State};

/// One registered tool.
#[derive(Debug, Clone, Copy)]
pub struct Entry {
    /// Tool id (`stance-<id>`).
    pub id: &'static str,
    /// One-line title.
    pub title: &'static str,
    run: fn(Vec<OsString>) -> ExitCode,
    describe: fn() -> Value,
}

fn entry<T: Tool>() -> Entry {
    Entry {
        id: T::ID,
        title: T::TITLE,
        run: host::main_with_args::<T>,
        describe: host::describe::describe::<T>,
    }
}

/// Every tool, in the order of a typical chain.
pub fn tools() -> Vec<Entry> {
    vec![
        entry::<stance_synth::Synth>(),
        entry::<stance_import::Import>(),
        entry::<stance_density::Density>(),
        entry::<stance_scan::Scan>(),
        entry::<stance_weights::Weights>(),
        entry::<stance_rates::Rates>(),
        entry::<stance_moran::Moran>(),
        entry::<stance_labels::Labels>(),
        entry::<stance_local::Local>(),
        entry::<stance_trend::Trend>(),
        entry::<stance_render::Render>(),
    ]
}

const USAGE: &str = "usage: stance list | stance describe [TOOL] | stance <TOOL> ARGS… \
    (stance <TOOL> --help) | stance check-plugin PATH | stance serve [OPTIONS] | \
    stance plan-batch --shards N|--tiles N --dir DIR -- TOOL ARGS…";

/// Every process: the built-in tools, then plugins from `STANCE_PLUGIN_PATH` and `PATH`.
pub fn processes(tools: &[Entry]) -> Vec<Process> {
    let builtins = tools
        .iter()
        .map(|t| (t.id.to_owned(), (t.describe)()))
        .collect();
    let own_dir = std::env::current_exe()
        .ok()
        .and_then(|p| p.parent().map(Path::to_owned));
    registry::discover(
        builtins,
        std::env::var_os("STANCE_PLUGIN_PATH"),
        std::env::var_os("PATH"),
        own_dir.as_deref(),
    )
}

/// Runs the umbrella with `args` (`args[0]` is the program name).
pub fn main_with_args(args: Vec<OsString>) -> ExitCode {
    let tools = tools();
    let command = args.get(1).map(|a| a.to_string_lossy().into_owned());
    match command.as_deref() {
        None | Some("-h") | Some("--help") | Some("help") => help(&tools),
        Some("--version") | Some("-V") => {
            host::print_stdout(&format!("stance {}\n", stance_core::VERSION))
        }
        Some("list") => list(&processes(&tools)),
        Some("describe") => describe(&processes(&tools), args.get(2)),
        Some("check-plugin") => check_plugin(args.get(2)),
        Some("plan-batch") => stance_batch::main(
            args.into_iter().skip(2).collect(),
            &std::env::current_exe().unwrap_or_else(|_| "stance".into()),
        ),
        Some("serve") => stance_serve::service::main(
            args.into_iter().skip(2).collect(),
            processes(&tools),
            std::env::current_exe().unwrap_or_else(|_| "stance".into()),
        ),
        Some(id) => match tools.iter().find(|t| t.id == id) {
            Some(t) => {
                let mut rest: Vec<OsString> = vec![OsString::from(format!("stance-{id}"))];
                rest.extend(args.into_iter().skip(2));
                (t.run)(rest)
            }
            None => run_plugin(id, &processes(&tools), args.into_iter().skip(2).collect()),
        },
    }
}

fn help(tools: &[Entry]) -> ExitCode {
    let mut text = format!(
        "stance {} — map stance toward a topic from geolocated records\n\n{USAGE}\n\ntools:\n",
        stance_core::VERSION
    );
    for t in tools {
        text.push_str(&format!("  {:<10} {}\n", t.id, t.title));
    }
    text.push_str("\n`stance list` also shows plugins (stance-<id> executables on STANCE_PLUGIN_PATH or PATH).\n");
    host::print_stdout(&text)
}

/// One line per process: id, title (or why it is broken), origin; tab-separated.
fn list(processes: &[Process]) -> ExitCode {
    let text: String = processes
        .iter()
        .map(|p| format!("{}\t{}\t{}\n", p.id, p.title(), p.origin_label()))
        .collect();
    host::print_stdout(&text)
}

fn describe(processes: &[Process], wanted: Option<&OsString>) -> ExitCode {
    let value = match wanted.map(|w| w.to_string_lossy().into_owned()) {
        None => json!({
            "processes": processes.iter().filter_map(Process::description).collect::<Vec<_>>()
        }),
        Some(id) => match processes.iter().find(|p| p.id == id) {
            Some(p) => match &p.state {
                State::Ready(d) => d.clone(),
                State::Broken(reason) => {
                    host::print_stderr(&format!(
                        "stance: error: plugin '{id}' is broken: {reason}"
                    ));
                    return ExitCode::from(2);
                }
            },
            None => return unknown(&id, processes),
        },
    };
    let text = serde_json::to_string_pretty(&value).unwrap_or_default();
    host::print_stdout(&format!("{text}\n"))
}

fn check_plugin(path: Option<&OsString>) -> ExitCode {
    let Some(path) = path else {
        host::print_stderr(
            "stance: error: check-plugin needs the plugin's path (stance check-plugin PATH)",
        );
        return ExitCode::from(2);
    };
    let umbrella = std::env::current_exe().unwrap_or_else(|_| "stance".into());
    let plugin = Path::new(path);
    match stance_serve::check::check_plugin(plugin, &umbrella) {
        Err(message) => {
            host::print_stderr(&format!("stance check-plugin: error: {message}"));
            ExitCode::from(2)
        }
        Ok(items) => {
            let code = host::print_stdout(&stance_serve::check::report(plugin, &items));
            if items.iter().all(|i| i.holds) {
                code
            } else {
                ExitCode::from(1)
            }
        }
    }
}

/// Runs plugin `id` with `rest`, without a shell, passing its exit code on.
fn run_plugin(id: &str, processes: &[Process], rest: Vec<OsString>) -> ExitCode {
    let Some(process) = processes.iter().find(|p| p.id == id) else {
        return unknown(id, processes);
    };
    if let State::Broken(reason) = &process.state {
        host::print_stderr(&format!("stance: error: plugin '{id}' is broken: {reason}"));
        return ExitCode::from(2);
    }
    let umbrella = std::env::current_exe().unwrap_or_else(|_| "stance".into());
    let (program, mut leading) = process.command(&umbrella);
    leading.extend(rest);
    match std::process::Command::new(&program).args(&leading).status() {
        Ok(status) => match status.code() {
            Some(code) => ExitCode::from(u8::try_from(code).unwrap_or(1)),
            None => ExitCode::from(1),
        },
        Err(e) => {
            host::print_stderr(&format!(
                "stance: error: cannot run plugin {} ({e})",
                program.display()
            ));
            ExitCode::from(1)
        }
    }
}

fn unknown(id: &str, processes: &[Process]) -> ExitCode {
    let ids: Vec<&str> = processes.iter().map(|p| p.id.as_str()).collect();
    host::print_stderr(&format!(
        "stance: error: unknown tool '{id}'; expected one of {} ({USAGE})",
        ids.join(", ")
    ));
    ExitCode::from(2)
}
