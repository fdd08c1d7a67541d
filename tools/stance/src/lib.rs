//! The umbrella `stance`: lists, describes and runs every tool of the toolbox.

use std::ffi::OsString;
use std::process::ExitCode;

use serde_json::{json, Value};
use stance_core::host::{self, Tool};

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
        entry::<stance_render::Render>(),
    ]
}

const USAGE: &str =
    "usage: stance list | stance describe [TOOL] | stance <TOOL> ARGS… (stance <TOOL> --help)";

/// Runs the umbrella with `args` (`args[0]` is the program name).
pub fn main_with_args(args: Vec<OsString>) -> ExitCode {
    let tools = tools();
    let command = args.get(1).map(|a| a.to_string_lossy().into_owned());
    match command.as_deref() {
        None | Some("-h") | Some("--help") | Some("help") => {
            let mut text = format!(
                "stance {} — map stance toward a topic from geolocated records\n\n{USAGE}\n\ntools:\n",
                stance_core::VERSION
            );
            for t in &tools {
                text.push_str(&format!("  {:<10} {}\n", t.id, t.title));
            }
            host::print_stdout(&text)
        }
        Some("--version") | Some("-V") => {
            host::print_stdout(&format!("stance {}\n", stance_core::VERSION))
        }
        Some("list") => {
            let text: String = tools
                .iter()
                .map(|t| format!("{}\t{}\n", t.id, t.title))
                .collect();
            host::print_stdout(&text)
        }
        Some("describe") => {
            let wanted = args.get(2).map(|a| a.to_string_lossy().into_owned());
            let value = match wanted {
                None => {
                    json!({ "processes": tools.iter().map(|t| (t.describe)()).collect::<Vec<_>>() })
                }
                Some(id) => match tools.iter().find(|t| t.id == id) {
                    Some(t) => (t.describe)(),
                    None => return unknown(&id, &tools),
                },
            };
            let text = serde_json::to_string_pretty(&value).unwrap_or_default();
            host::print_stdout(&format!("{text}\n"))
        }
        Some(id) => match tools.iter().find(|t| t.id == id) {
            Some(t) => {
                let mut rest: Vec<OsString> = vec![OsString::from(format!("stance-{id}"))];
                rest.extend(args.into_iter().skip(2));
                (t.run)(rest)
            }
            None => unknown(id, &tools),
        },
    }
}

fn unknown(id: &str, tools: &[Entry]) -> ExitCode {
    let ids: Vec<&str> = tools.iter().map(|t| t.id).collect();
    host::print_stderr(&format!(
        "stance: error: unknown tool '{id}'; expected one of {} ({USAGE})",
        ids.join(", ")
    ));
    ExitCode::from(2)
}
