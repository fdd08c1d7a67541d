//! From an execute request to the tool's arguments: every input must be one the process
//! describes, and its value must fit the input's schema (type, enum, minimum/maximum, length);
//! file inputs are names inside the workspace. Nothing here starts anything: a refused request
//! never runs a tool.
//!
//! Arguments are `--name=value` (one argument each, so a value can never be read as another
//! option), a bare `--name` for a `true` boolean, nothing for `false`; arrays repeat the option.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use serde_json::{Map, Value};

use super::paths::{escapes_job_dir, relative_to, Workspace};

/// Inputs the service sets itself: progress lines must stay on, `--describe` is not a run.
pub const RESERVED: &[&str] = &["quiet", "verbose", "describe"];

/// The output GeoPackage's name inside a job folder when the request names none.
pub const DEFAULT_OUTPUT: &str = "output.gpkg";

/// How the service treats an input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    /// A file the tool reads: a name in the workspace's `files/` (`input`, `…-file`).
    InputFile,
    /// The output GeoPackage (`output`): a name in `files/`, or the job's own file.
    OutputFile,
    /// Any other value.
    Value,
}

/// The role of input `name`.
pub fn role(name: &str) -> Role {
    if name == "input" || name.ends_with("-file") {
        Role::InputFile
    } else if name == "output" {
        Role::OutputFile
    } else {
        Role::Value
    }
}

/// What a run of the tool needs.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// Arguments after the program's leading ones, paths relative to the job folder.
    pub args: Vec<OsString>,
    /// The output GeoPackage (absolute), when the process has an `output` input.
    pub output: Option<PathBuf>,
}

/// Checks `request` (an OGC execute request: `{"inputs": {…}, …}`) against `description` and
/// builds the arguments of a run in `job_dir`.
///
/// # Errors
/// One sentence naming the input, the value and what was expected.
pub fn plan(
    description: &Value,
    request: &Value,
    workspace: &Workspace,
    job_dir: &Path,
) -> Result<Plan, String> {
    let request = request
        .as_object()
        .ok_or("the execute request must be a JSON object with an \"inputs\" object")?;
    let empty = Map::new();
    let inputs = match request.get("inputs") {
        None | Some(Value::Null) => &empty,
        Some(Value::Object(m)) => m,
        Some(_) => return Err("\"inputs\" must be a JSON object of input id → value".into()),
    };
    let described = description["inputs"]
        .as_object()
        .ok_or("the process description has no inputs")?;
    for name in inputs.keys() {
        if RESERVED.contains(&name.as_str()) {
            return Err(format!(
                "input '{name}' is set by the service, not by a request"
            ));
        }
        if !described.contains_key(name) {
            let known: Vec<&str> = described
                .keys()
                .map(String::as_str)
                .filter(|k| !RESERVED.contains(k))
                .collect();
            return Err(format!(
                "unknown input '{name}'; this process takes {}",
                known.join(", ")
            ));
        }
    }
    let mut args = Vec::new();
    let mut output = None;
    for (name, input) in described {
        let given = inputs.get(name).map(unwrap_qualified);
        match role(name) {
            Role::OutputFile => {
                let path = match given {
                    Some(v) => workspace
                        .writable_file(file_name(name, v)?)
                        .map_err(|e| format!("input '{name}': {e}"))?,
                    None => job_dir.join(DEFAULT_OUTPUT),
                };
                output = Some(path);
            }
            Role::InputFile => {
                if let Some(v) = given {
                    let path = workspace
                        .existing_file(file_name(name, v)?)
                        .map_err(|e| format!("input '{name}': {e}"))?;
                    let rel = relative_to(&path, job_dir);
                    let mut arg = OsString::from(format!("--{name}="));
                    arg.push(rel.as_os_str());
                    args.push(arg);
                } else if min_occurs(input) > 0 {
                    return Err(format!(
                        "input '{name}' is required (a file name of the workspace)"
                    ));
                }
            }
            Role::Value => match given {
                Some(v) => args.extend(arguments(name, &input["schema"], v)?),
                None if min_occurs(input) > 0 && !RESERVED.contains(&name.as_str()) => {
                    return Err(format!("input '{name}' is required"));
                }
                None => {}
            },
        }
    }
    if let Some(path) = &output {
        let mut arg = OsString::from("--output=");
        arg.push(relative_to(path, job_dir).as_os_str());
        args.push(arg);
    }
    Ok(Plan { args, output })
}

fn min_occurs(input: &Value) -> u64 {
    input["minOccurs"].as_u64().unwrap_or(1)
}

/// `{"value": v}` (a qualified input value) is `v`.
fn unwrap_qualified(value: &Value) -> &Value {
    match value {
        Value::Object(m) if m.contains_key("value") => &m["value"],
        other => other,
    }
}

/// The file name of a file input: a name, or a link to this service's `/files/{name}`.
fn file_name<'a>(input: &str, value: &'a Value) -> Result<&'a str, String> {
    match value {
        Value::String(s) => Ok(s),
        Value::Object(m) => match m.get("href").and_then(Value::as_str) {
            Some(href) => href
                .rsplit_once("/files/")
                .map(|(_, name)| name)
                .ok_or_else(|| {
                    format!(
                        "input '{input}': the service reads only its own files \
                         (href …/files/NAME), \
                         not {href}"
                    )
                }),
            None => Err(format!(
                "input '{input}': expected a file name or {{\"href\": …}}"
            )),
        },
        other => Err(format!(
            "input '{input}': expected a file name, got {other}"
        )),
    }
}

/// The arguments for input `name` with `value`, checked against `schema`.
///
/// # Errors
/// What the value breaks.
pub fn arguments(name: &str, schema: &Value, value: &Value) -> Result<Vec<OsString>, String> {
    let kind = schema_type(schema);
    if kind == Some("boolean") {
        return match value {
            Value::Bool(true) => Ok(vec![OsString::from(format!("--{name}"))]),
            Value::Bool(false) => Ok(Vec::new()),
            other => Err(format!(
                "input '{name}': expected true or false, got {other}"
            )),
        };
    }
    let items: Vec<&Value> = if kind == Some("array") {
        match value {
            Value::Array(items) => items.iter().collect(),
            single => vec![single],
        }
    } else {
        vec![value]
    };
    let item_schema = if kind == Some("array") {
        &schema["items"]
    } else {
        schema
    };
    items
        .into_iter()
        .map(|item| {
            check_value(name, item_schema, item)
                .map(|text| OsString::from(format!("--{name}={text}")))
        })
        .collect()
}

/// The schema's type, or the type of its enumerated values.
fn schema_type(schema: &Value) -> Option<&str> {
    if let Some(t) = schema["type"].as_str() {
        return Some(t);
    }
    if allowed_values(schema).is_some_and(|v| v.iter().all(Value::is_string)) {
        return Some("string");
    }
    None
}

/// The values an enumerated schema allows: `enum`, or a `oneOf` of `const`/`enum` items.
fn allowed_values(schema: &Value) -> Option<Vec<Value>> {
    if let Some(values) = schema["enum"].as_array() {
        return Some(values.clone());
    }
    let options = schema["oneOf"].as_array()?;
    let mut values = Vec::new();
    for option in options {
        if let Some(c) = option.get("const") {
            values.push(c.clone());
        } else if let Some(e) = option["enum"].as_array() {
            values.extend(e.iter().cloned());
        } else {
            return None;
        }
    }
    Some(values)
}

/// Checks one scalar value and returns its text on the command line.
fn check_value(name: &str, schema: &Value, value: &Value) -> Result<String, String> {
    if let Some(allowed) = allowed_values(schema) {
        if !allowed.contains(value) {
            let list: Vec<String> = allowed.iter().map(Value::to_string).collect();
            return Err(format!(
                "input '{name}': {value} is not one of {}",
                list.join(", ")
            ));
        }
    }
    let text = match (schema_type(schema), value) {
        (Some("integer"), Value::Number(n)) if n.is_i64() || n.is_u64() => n.to_string(),
        (Some("integer"), other) => {
            return Err(format!("input '{name}': expected an integer, got {other}"))
        }
        (Some("number"), Value::Number(n)) => n.to_string(),
        (Some("number"), other) => {
            return Err(format!("input '{name}': expected a number, got {other}"))
        }
        (Some("string") | None, Value::String(s)) => check_text(name, schema, s)?,
        (Some("string") | None, other) => {
            return Err(format!("input '{name}': expected a string, got {other}"))
        }
        (Some(t), _) => {
            return Err(format!(
                "input '{name}': inputs of type {t} cannot be given through the service"
            ))
        }
    };
    if let Value::Number(n) = value {
        check_range(name, schema, n.as_f64().unwrap_or(f64::NAN))?;
    }
    Ok(text)
}

fn check_text(name: &str, schema: &Value, s: &str) -> Result<String, String> {
    if s.contains('\0') {
        return Err(format!(
            "input '{name}': the value contains a NUL character"
        ));
    }
    if escapes_job_dir(s) {
        return Err(format!(
            "input '{name}': '{s}' looks like a path outside the job's folder (absolute or \
             with '..'); files are names inside the workspace"
        ));
    }
    let chars = s.chars().count() as u64;
    if schema["minLength"].as_u64().is_some_and(|min| chars < min) {
        return Err(format!(
            "input '{name}': '{s}' is shorter than {}",
            schema["minLength"]
        ));
    }
    if schema["maxLength"].as_u64().is_some_and(|max| chars > max) {
        return Err(format!(
            "input '{name}': '{s}' is longer than {}",
            schema["maxLength"]
        ));
    }
    Ok(s.to_owned())
}

/// `minimum`/`maximum`, with OpenAPI 3.0's boolean `exclusiveMinimum`/`exclusiveMaximum` or
/// JSON Schema's numeric ones.
fn check_range(name: &str, schema: &Value, x: f64) -> Result<(), String> {
    if !x.is_finite() {
        return Err(format!("input '{name}': expected a finite number"));
    }
    let bound = |key: &str, exclusive: &str| -> Option<(f64, bool)> {
        match (&schema[key], &schema[exclusive]) {
            (Value::Number(b), Value::Bool(e)) => b.as_f64().map(|b| (b, *e)),
            (Value::Number(b), _) => b.as_f64().map(|b| (b, false)),
            (_, Value::Number(b)) => b.as_f64().map(|b| (b, true)),
            _ => None,
        }
    };
    if let Some((min, exclusive)) = bound("minimum", "exclusiveMinimum") {
        if x < min || (exclusive && x == min) {
            let op = if exclusive { ">" } else { "≥" };
            return Err(format!(
                "input '{name}': {x} is out of range (expected {op} {min})"
            ));
        }
    }
    if let Some((max, exclusive)) = bound("maximum", "exclusiveMaximum") {
        if x > max || (exclusive && x == max) {
            let op = if exclusive { "<" } else { "≤" };
            return Err(format!(
                "input '{name}': {x} is out of range (expected {op} {max})"
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// A description in the shape `stance describe` prints (OGC process description).
    fn description() -> Value {
        json!({
            "id": "density",
            "version": "1",
            "inputs": {
                "input": {"schema": {"type": "string"}, "minOccurs": 1, "maxOccurs": 1},
                "layer": {"schema": {"type": "string"}, "minOccurs": 0, "maxOccurs": 1},
                "output": {"schema": {"type": "string"}, "minOccurs": 1, "maxOccurs": 1},
                "seed": {"schema": {"type": "integer", "minimum": 0, "default": 1}, "minOccurs": 0},
                "quiet": {"schema": {"type": "boolean"}, "minOccurs": 0},
                "adaptive": {"schema": {"type": "boolean"}, "minOccurs": 0},
                "kernel": {"schema": {"type": "string", "enum": ["quartic", "gaussian"]},
                           "minOccurs": 0},
                "alpha": {"schema": {"type": "number", "minimum": 0, "maximum": 1,
                                     "exclusiveMinimum": true}, "minOccurs": 0},
                "overlay": {"schema": {"type": "array", "items": {"type": "string"}},
                            "minOccurs": 0},
                "weights-file": {"schema": {"type": "string"}, "minOccurs": 0},
                "title": {"schema": {"type": "string", "maxLength": 10}, "minOccurs": 0}
            },
            "outputs": {}
        })
    }

    fn setup() -> (tempfile::TempDir, Workspace, PathBuf) {
        let dir = tempfile::tempdir().expect("tempdir");
        let ws = Workspace::open(&dir.path().join("ws")).expect("workspace");
        std::fs::write(ws.files.join("in.gpkg"), b"x").expect("write");
        let job = ws.job_dir("j1");
        std::fs::create_dir_all(&job).expect("job dir");
        (dir, ws, job)
    }

    fn run(request: Value) -> Result<Plan, String> {
        let (_dir, ws, job) = setup();
        plan(&description(), &request, &ws, &job)
    }

    #[test]
    fn arguments_follow_the_description_order_with_paths_relative_to_the_job() {
        let plan = run(json!({"inputs": {
            "kernel": "gaussian", "input": "in.gpkg", "seed": 7, "adaptive": true,
            "alpha": {"value": 0.05}, "overlay": ["a", "b"]
        }}))
        .expect("valid");
        let args: Vec<String> = plan
            .args
            .iter()
            .map(|a| a.to_string_lossy().into_owned())
            .collect();
        assert_eq!(
            args,
            [
                "--input=../../files/in.gpkg",
                "--seed=7",
                "--adaptive",
                "--kernel=gaussian",
                "--alpha=0.05",
                "--overlay=a",
                "--overlay=b",
                "--output=output.gpkg",
            ]
        );
        assert!(plan
            .output
            .expect("output")
            .ends_with("jobs/j1/output.gpkg"));
    }

    #[test]
    fn false_booleans_add_nothing_and_a_named_output_lives_in_files() {
        let plan =
            run(json!({"inputs": {"input": "in.gpkg", "adaptive": false, "output": "res.gpkg"}}))
                .expect("valid");
        let args: Vec<String> = plan
            .args
            .iter()
            .map(|a| a.to_string_lossy().into_owned())
            .collect();
        assert_eq!(
            args,
            [
                "--input=../../files/in.gpkg",
                "--output=../../files/res.gpkg"
            ]
        );
        // An href to the service's own file is read as its name.
        let plan = run(json!({"inputs": {"input": {"href": "http://h:1/files/in.gpkg"}}}));
        assert!(plan.is_ok(), "{plan:?}");
    }

    #[test]
    fn bad_values_are_refused_with_the_input_named() {
        let cases = [
            (
                json!({"inputs": {"input": "in.gpkg", "nope": 1}}),
                "unknown input 'nope'",
            ),
            (json!({"inputs": {}}), "input 'input' is required"),
            (
                json!({"inputs": {"input": "in.gpkg", "quiet": true}}),
                "set by the service",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "seed": -1}}),
                "out of range",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "seed": 1.5}}),
                "expected an integer",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "seed": "7"}}),
                "expected an integer",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "alpha": 0}}),
                "expected > 0",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "alpha": 1.5}}),
                "expected ≤ 1",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "kernel": "box"}}),
                "is not one of",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "adaptive": "yes"}}),
                "true or false",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "title": "far too long a title"}}),
                "longer",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "layer": "../x"}}),
                "outside the job",
            ),
            (
                json!({"inputs": {"input": "../in.gpkg"}}),
                "leaves the workspace",
            ),
            (json!({"inputs": {"input": "/etc/passwd"}}), "absolute path"),
            (
                json!({"inputs": {"input": "missing.gpkg"}}),
                "no file 'missing.gpkg'",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "output": "../o.gpkg"}}),
                "leaves",
            ),
            (
                json!({"inputs": {"input": {"href": "http://elsewhere/x.gpkg"}}}),
                "own files",
            ),
            (
                json!({"inputs": {"input": "in.gpkg", "weights-file": "sub/w.gpkg"}}),
                "plain",
            ),
            (json!({"inputs": [1]}), "\"inputs\" must be"),
            (json!([1]), "must be a JSON object"),
        ];
        for (request, expected) in cases {
            let e = run(request.clone()).expect_err(&request.to_string());
            assert!(e.contains(expected), "{request}: {e}");
        }
    }

    #[test]
    fn enumerations_written_as_one_of_constants_are_checked_too() {
        let schema = json!({"oneOf": [
            {"type": "string", "const": "row"},
            {"type": "string", "const": "binary"}
        ]});
        assert_eq!(
            arguments("standardise", &schema, &json!("row")).expect("ok"),
            [OsString::from("--standardise=row")]
        );
        assert!(arguments("standardise", &schema, &json!("col")).is_err());
    }
}
