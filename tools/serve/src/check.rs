//! `stance check-plugin PATH`: runs a plugin through the contract every tool keeps, on a small
//! generated GeoPackage, and reports item by item what holds and what does not.
//!
//! The run with valid arguments needs values for the plugin's required inputs. `--input`,
//! `--output` and `--layer` are filled by the check; other required inputs take their default,
//! or the plugin states the arguments of an example run in its description, as the
//! additional parameter `example` (`{"name": "example", "value": ["--areas", "{areas}", …]}`)
//! with the placeholders `{input}`, `{output}`, `{records}` (a point layer with a `stance`
//! field), `{areas}` (polygons with `code` and `population`) and `{towns}` (points).

use std::path::Path;
use std::process::{Command, Stdio};

use serde_json::Value;

use crate::registry::{check_description, describe_timeout, run_with_timeout, valid_id};

/// The outcome of one contract item.
#[derive(Debug, Clone)]
pub struct Item {
    /// Short name of the item.
    pub name: &'static str,
    /// Whether it holds.
    pub holds: bool,
    /// What was seen.
    pub detail: String,
}

/// Layers of the generated check GeoPackage.
const RECORDS: &str = "check_records";
const AREAS: &str = "check_districts";
const TOWNS: &str = "check_towns";

struct Outcome {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn run(program: &Path, args: &[String], dir: &Path) -> std::io::Result<Outcome> {
    let out = Command::new(program)
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()?;
    Ok(Outcome {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    })
}

fn sha256(path: &Path) -> String {
    use sha2::{Digest, Sha256};
    std::fs::read(path)
        .map(|b| format!("{:x}", Sha256::digest(b)))
        .unwrap_or_else(|_| "missing".into())
}

/// Checks the plugin `plugin`; `umbrella` is the host executable (used to generate the data).
///
/// # Errors
/// A message when the check itself cannot run (no such file, no temporary directory, the
/// data cannot be generated).
pub fn check_plugin(plugin: &Path, umbrella: &Path) -> Result<Vec<Item>, String> {
    let name = plugin
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let id = name.strip_prefix("stance-").unwrap_or("").to_owned();
    if !plugin.is_file() {
        return Err(format!("{} is not a file", plugin.display()));
    }
    let plugin = plugin
        .canonicalize()
        .map_err(|e| format!("{}: {e}", plugin.display()))?;
    let work = tempfile::tempdir().map_err(|e| format!("temporary directory: {e}"))?;
    let dir = work.path();
    let input = dir.join("check.gpkg");
    let generated = run(
        umbrella,
        &[
            "synth".into(),
            "--output".into(),
            input.display().to_string(),
            "--name".into(),
            "check".into(),
            "--points".into(),
            "1500".into(),
            "--seed".into(),
            "11".into(),
            "-q".into(),
        ],
        dir,
    )
    .map_err(|e| format!("generating the check data: {e}"))?;
    if generated.code != Some(0) {
        return Err(format!(
            "generating the check data failed: {}",
            generated.stderr.trim()
        ));
    }
    let mut items = Vec::new();
    items.push(Item {
        name: "file name",
        holds: valid_id(&id),
        detail: format!("'{name}' must be stance-<id>, id of lower-case letters, digits, dashes"),
    });
    let description = check_describe(&plugin, &id, &mut items);
    check_help(&plugin, dir, &mut items);
    check_failures(&plugin, dir, &input, &mut items);
    if let Some(description) = description {
        check_run(&plugin, dir, &input, &description, &mut items);
    } else {
        items.push(Item {
            name: "run",
            holds: false,
            detail: "not attempted: no valid description to build arguments from".into(),
        });
    }
    Ok(items)
}

fn check_describe(plugin: &Path, id: &str, items: &mut Vec<Item>) -> Option<Value> {
    match run_with_timeout(plugin, &["--describe"], describe_timeout()) {
        Err(reason) => {
            items.push(Item {
                name: "describe",
                holds: false,
                detail: reason,
            });
            None
        }
        Ok((code, _)) if code != Some(0) => {
            items.push(Item {
                name: "describe",
                holds: false,
                detail: format!("--describe exited with {code:?}, expected 0"),
            });
            None
        }
        Ok((_, stdout)) => match check_description(&stdout, id) {
            Ok(d) => {
                items.push(Item {
                    name: "describe",
                    holds: true,
                    detail: "a valid OGC API – Processes process description with the file's id"
                        .into(),
                });
                Some(d)
            }
            Err(reason) => {
                items.push(Item {
                    name: "describe",
                    holds: false,
                    detail: reason,
                });
                None
            }
        },
    }
}

fn check_help(plugin: &Path, dir: &Path, items: &mut Vec<Item>) {
    let item = match run(plugin, &["--help".into()], dir) {
        Ok(o) => Item {
            name: "help",
            holds: o.code == Some(0) && !o.stdout.trim().is_empty(),
            detail: format!(
                "--help exited with {:?} and printed {} bytes",
                o.code,
                o.stdout.len()
            ),
        },
        Err(e) => Item {
            name: "help",
            holds: false,
            detail: e.to_string(),
        },
    };
    items.push(item);
}

/// Bad arguments and a missing input: exit 2, one line on stderr, nothing written, and an
/// existing output file left as it was.
fn check_failures(plugin: &Path, dir: &Path, input: &Path, items: &mut Vec<Item>) {
    let existing = dir.join("existing-output.gpkg");
    let _ = std::fs::copy(input, &existing);
    let before = sha256(&existing);
    let cases: [(&'static str, Vec<String>); 2] = [
        (
            "bad arguments",
            vec![
                "--input".into(),
                input.display().to_string(),
                "--output".into(),
                existing.display().to_string(),
                "--no-such-option-of-any-tool".into(),
            ],
        ),
        (
            "missing input",
            vec![
                "--input".into(),
                dir.join("no-such-file.gpkg").display().to_string(),
                "--output".into(),
                existing.display().to_string(),
            ],
        ),
    ];
    for (name, args) in cases {
        let item = match run(plugin, &args, dir) {
            Err(e) => Item {
                name,
                holds: false,
                detail: e.to_string(),
            },
            Ok(o) => {
                let lines = o
                    .stderr
                    .lines()
                    .filter(|l| !l.trim_start().starts_with('{'))
                    .count();
                let unchanged = sha256(&existing) == before;
                let mut problems = Vec::new();
                if o.code != Some(2) {
                    problems.push(format!("exit {:?}, expected 2", o.code));
                }
                if lines != 1 {
                    problems.push(format!("{lines} error lines on stderr, expected 1"));
                }
                if !unchanged {
                    problems.push("the existing output file changed".into());
                }
                Item {
                    name,
                    holds: problems.is_empty(),
                    detail: if problems.is_empty() {
                        format!("exit 2, one line ({}), output untouched", o.stderr.trim())
                    } else {
                        problems.join("; ")
                    },
                }
            }
        };
        items.push(item);
    }
}

/// The arguments of a run on the check data, from the description.
fn run_arguments(description: &Value, input: &Path, output: &Path) -> Result<Vec<String>, String> {
    let fill = |text: &str| {
        text.replace("{input}", &input.display().to_string())
            .replace("{output}", &output.display().to_string())
            .replace("{records}", RECORDS)
            .replace("{areas}", AREAS)
            .replace("{towns}", TOWNS)
    };
    let example = description["additionalParameters"]["parameters"]
        .as_array()
        .and_then(|ps| ps.iter().find(|p| p["name"] == "example"))
        .and_then(|p| p["value"].as_array());
    let mut args: Vec<String> = vec![
        "--input".into(),
        input.display().to_string(),
        "--output".into(),
        output.display().to_string(),
    ];
    if let Some(example) = example {
        args.extend(example.iter().filter_map(Value::as_str).map(fill));
        return Ok(args);
    }
    let inputs = description["inputs"]
        .as_object()
        .cloned()
        .unwrap_or_default();
    if inputs.contains_key("layer") {
        args.extend(["--layer".into(), RECORDS.into()]);
    }
    let mut unfilled = Vec::new();
    for (name, input) in &inputs {
        let required = input["minOccurs"].as_u64().unwrap_or(1) > 0;
        let known = ["input", "output", "layer"].contains(&name.as_str());
        if required && !known && input["schema"].get("default").is_none() {
            unfilled.push(name.clone());
        }
    }
    if unfilled.is_empty() {
        Ok(args)
    } else {
        Err(format!(
            "required inputs without a default: {}; state an example run in the description \
             (additional parameter 'example')",
            unfilled.join(", ")
        ))
    }
}

fn check_run(plugin: &Path, dir: &Path, input: &Path, description: &Value, items: &mut Vec<Item>) {
    let output = dir.join("run-output.gpkg");
    let args = match run_arguments(description, input, &output) {
        Ok(a) => a,
        Err(reason) => {
            items.push(Item {
                name: "run",
                holds: false,
                detail: reason,
            });
            return;
        }
    };
    let before = sha256(input);
    let outcome = match run(plugin, &args, dir) {
        Ok(o) => o,
        Err(e) => {
            items.push(Item {
                name: "run",
                holds: false,
                detail: e.to_string(),
            });
            return;
        }
    };
    items.push(Item {
        name: "run",
        holds: outcome.code == Some(0),
        detail: format!(
            "`{} {}` exited with {:?}{}",
            plugin.display(),
            args.join(" "),
            outcome.code,
            if outcome.code == Some(0) {
                String::new()
            } else {
                format!(": {}", outcome.stderr.trim())
            }
        ),
    });
    let summary: Option<Value> = serde_json::from_str(outcome.stdout.trim()).ok();
    let layers: Vec<String> = summary
        .as_ref()
        .and_then(|s| s["layers"].as_array())
        .map(|ls| {
            ls.iter()
                .filter_map(|l| l["name"].as_str().or(l.as_str()).map(str::to_owned))
                .collect()
        })
        .unwrap_or_default();
    items.push(Item {
        name: "summary",
        holds: summary.as_ref().is_some_and(Value::is_object) && !layers.is_empty(),
        detail: if layers.is_empty() {
            "stdout must be one JSON object whose `layers` lists the layers written".into()
        } else {
            format!("one JSON object; layers written: {}", layers.join(", "))
        },
    });
    items.push(check_provenance(&output, &layers));
    items.push(check_progress(&outcome.stderr));
    let after = sha256(input);
    items.push(Item {
        name: "input unchanged",
        holds: before == after,
        detail: format!(
            "SHA-256 of the input before {} and after {}",
            &before[..12.min(before.len())],
            &after[..12.min(after.len())]
        ),
    });
}

/// Every layer written carries a provenance record (gpkg_metadata with scope table).
fn check_provenance(output: &Path, layers: &[String]) -> Item {
    let name = "provenance";
    if layers.is_empty() {
        return Item {
            name,
            holds: false,
            detail: "no layers to check".into(),
        };
    }
    let connection = match rusqlite::Connection::open_with_flags(
        output,
        rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY,
    ) {
        Ok(c) => c,
        Err(e) => {
            return Item {
                name,
                holds: false,
                detail: format!("{}: {e}", output.display()),
            }
        }
    };
    let mut missing = Vec::new();
    for layer in layers {
        let found: rusqlite::Result<String> = connection.query_row(
            "SELECT m.metadata FROM gpkg_metadata m JOIN gpkg_metadata_reference r
             ON r.md_file_id = m.id WHERE r.reference_scope = 'table' AND r.table_name = ?1",
            [layer],
            |r| r.get(0),
        );
        let ok = found
            .ok()
            .and_then(|text| serde_json::from_str::<Value>(&text).ok())
            .is_some_and(|v| v.get("tool").is_some() && v.get("parameters").is_some());
        if !ok {
            missing.push(layer.clone());
        }
    }
    Item {
        name,
        holds: missing.is_empty(),
        detail: if missing.is_empty() {
            "every layer written has a JSON record with tool and parameters in gpkg_metadata".into()
        } else {
            format!(
                "no provenance record (tool, parameters) for: {}",
                missing.join(", ")
            )
        },
    }
}

/// Progress lines, if any, are JSON objects with a fraction that never decreases.
fn check_progress(stderr: &str) -> Item {
    let name = "progress lines";
    let mut last = 0.0;
    let mut count = 0;
    for line in stderr.lines().filter(|l| l.trim_start().starts_with('{')) {
        let Some(fraction) = serde_json::from_str::<Value>(line)
            .ok()
            .and_then(|v| v["progress"].as_f64())
        else {
            return Item {
                name,
                holds: false,
                detail: format!("not a progress object: {line}"),
            };
        };
        if !(0.0..=1.0).contains(&fraction) || fraction < last {
            return Item {
                name,
                holds: false,
                detail: format!("fraction out of order: {line}"),
            };
        }
        last = fraction;
        count += 1;
    }
    Item {
        name,
        holds: true,
        detail: format!("{count} JSON progress lines, never decreasing"),
    }
}

/// The report as text: one line per item, then the verdict.
pub fn report(plugin: &Path, items: &[Item]) -> String {
    let mut text = format!("checking {}\n", plugin.display());
    for item in items {
        text.push_str(&format!(
            "{} {:<16} {}\n",
            if item.holds { "ok  " } else { "FAIL" },
            item.name,
            item.detail
        ));
    }
    let failed = items.iter().filter(|i| !i.holds).count();
    if failed == 0 {
        text.push_str("the plugin keeps the contract\n");
    } else {
        text.push_str(&format!("{failed} of {} items do not hold\n", items.len()));
    }
    text
}
