//! Checks a process description against the rules of OGC API – Processes – Part 1: Core 1.0
//! (OGC 18-062r2), as its published OpenAPI schemas state them (repository
//! opengeospatial/ogcapi-processes, folder `core/openapi/schemas`): `process.yaml` =
//! `processSummary.yaml` (id and version required; `descriptionType.yaml`: title, description,
//! keywords, metadata, additionalParameters) + `inputs` of `inputDescription.yaml` (schema
//! required; minOccurs an integer; maxOccurs an integer or "unbounded") + `outputs` of
//! `outputDescription.yaml` (schema required). Every `schema` is an OpenAPI 3.0 schema object
//! (`schema.yaml`, `additionalProperties: false`): only its listed keywords, `type` one of six
//! names, boolean `exclusiveMinimum`/`exclusiveMaximum`, no JSON Schema 2020 keywords such as
//! `const` or `$defs`.
//!
//! Written in our own code so the host, the plugin checker and the tests share one set of rules.

use serde_json::Value;

/// Keywords `schema.yaml` allows in a schema object (OpenAPI 3.0).
const SCHEMA_KEYWORDS: &[&str] = &[
    "title",
    "multipleOf",
    "maximum",
    "exclusiveMaximum",
    "minimum",
    "exclusiveMinimum",
    "maxLength",
    "minLength",
    "pattern",
    "maxItems",
    "minItems",
    "uniqueItems",
    "maxProperties",
    "minProperties",
    "required",
    "enum",
    "type",
    "not",
    "allOf",
    "oneOf",
    "anyOf",
    "items",
    "properties",
    "additionalProperties",
    "description",
    "format",
    "default",
    "nullable",
    "readOnly",
    "writeOnly",
    "example",
    "deprecated",
    "contentMediaType",
    "contentEncoding",
    "contentSchema",
];

/// `type` values of `schema.yaml`.
const TYPES: &[&str] = &["array", "boolean", "integer", "number", "object", "string"];
/// `jobControlOptions.yaml`.
const JOB_CONTROL: &[&str] = &["sync-execute", "async-execute", "dismiss"];
/// `transmissionMode.yaml`.
const TRANSMISSION: &[&str] = &["value", "reference"];

/// Every rule the description `process` breaks, each as "where: what"; empty when it is valid.
pub fn check_process_description(process: &Value) -> Vec<String> {
    let mut problems = Vec::new();
    let Some(object) = process.as_object() else {
        return vec!["process: expected a JSON object".into()];
    };
    check_description_type(process, "process", &mut problems);
    for key in ["id", "version"] {
        match object.get(key) {
            Some(Value::String(s)) if !s.is_empty() => {}
            Some(_) => problems.push(format!("process.{key}: expected a non-empty string")),
            None => problems.push(format!("process.{key}: required (processSummary.yaml)")),
        }
    }
    check_string_array(
        process,
        "jobControlOptions",
        Some(JOB_CONTROL),
        &mut problems,
    );
    check_string_array(
        process,
        "outputTransmission",
        Some(TRANSMISSION),
        &mut problems,
    );
    for (section, is_input) in [("inputs", true), ("outputs", false)] {
        match object.get(section) {
            None => {}
            Some(Value::Object(entries)) => {
                for (id, entry) in entries {
                    check_parameter(entry, &format!("{section}.{id}"), is_input, &mut problems);
                }
            }
            Some(_) => problems.push(format!("process.{section}: expected an object")),
        }
    }
    problems
}

/// `descriptionType.yaml`: title and description strings, keywords an array of strings,
/// additionalParameters with `parameters` of {name, value: array}.
fn check_description_type(value: &Value, at: &str, problems: &mut Vec<String>) {
    for key in ["title", "description"] {
        if let Some(v) = value.get(key) {
            if !v.is_string() {
                problems.push(format!("{at}.{key}: expected a string"));
            }
        }
    }
    check_string_array(value, "keywords", None, problems);
    if let Some(extra) = value.get("additionalParameters") {
        let parameters = extra.get("parameters").and_then(Value::as_array);
        match parameters {
            Some(parameters) => {
                for (i, p) in parameters.iter().enumerate() {
                    let named = p.get("name").is_some_and(Value::is_string);
                    let valued = p.get("value").is_some_and(Value::is_array);
                    if !named || !valued {
                        problems.push(format!(
                            "{at}.additionalParameters.parameters[{i}]: expected {{name: string, \
                             value: array}} (additionalParameter.yaml)"
                        ));
                    }
                }
            }
            None if extra.get("parameters").is_some() => problems.push(format!(
                "{at}.additionalParameters.parameters: expected an array"
            )),
            None => {}
        }
    }
}

fn check_string_array(
    value: &Value,
    key: &str,
    allowed: Option<&[&str]>,
    problems: &mut Vec<String>,
) {
    let Some(v) = value.get(key) else {
        return;
    };
    let Some(items) = v.as_array() else {
        problems.push(format!("{key}: expected an array"));
        return;
    };
    for item in items {
        match (item.as_str(), allowed) {
            (None, _) => problems.push(format!("{key}: {item} is not a string")),
            (Some(s), Some(allowed)) if !allowed.contains(&s) => {
                problems.push(format!("{key}: '{s}' is not one of {}", allowed.join(", ")))
            }
            _ => {}
        }
    }
}

/// `inputDescription.yaml` / `outputDescription.yaml`.
fn check_parameter(entry: &Value, at: &str, is_input: bool, problems: &mut Vec<String>) {
    if !entry.is_object() {
        problems.push(format!("{at}: expected an object"));
        return;
    }
    check_description_type(entry, at, problems);
    match entry.get("schema") {
        Some(schema) => check_schema(schema, &format!("{at}.schema"), problems),
        None => problems.push(format!("{at}.schema: required")),
    }
    if is_input {
        if let Some(min) = entry.get("minOccurs") {
            if !min.is_u64() {
                problems.push(format!("{at}.minOccurs: expected a non-negative integer"));
            }
        }
        if let Some(max) = entry.get("maxOccurs") {
            if !(max.is_u64() || max.as_str() == Some("unbounded")) {
                problems.push(format!(
                    "{at}.maxOccurs: expected an integer or \"unbounded\""
                ));
            }
        }
    }
}

/// `schema.yaml`: an OpenAPI 3.0 schema object or a `$ref`.
fn check_schema(schema: &Value, at: &str, problems: &mut Vec<String>) {
    let Some(object) = schema.as_object() else {
        problems.push(format!("{at}: expected a schema object"));
        return;
    };
    if object.contains_key("$ref") {
        // reference.yaml: {$ref: string} and nothing else.
        if object.len() != 1 || !object["$ref"].is_string() {
            problems.push(format!("{at}: a reference holds only a $ref string"));
        }
        return;
    }
    for (key, value) in object {
        if !SCHEMA_KEYWORDS.contains(&key.as_str()) {
            problems.push(format!(
                "{at}: '{key}' is not an OpenAPI 3.0 schema keyword (schema.yaml)"
            ));
            continue;
        }
        let here = format!("{at}.{key}");
        match key.as_str() {
            "not" | "items" => check_schema(value, &here, problems),
            "allOf" | "oneOf" | "anyOf" => match value.as_array() {
                Some(items) => {
                    for (i, item) in items.iter().enumerate() {
                        check_schema(item, &format!("{here}[{i}]"), problems);
                    }
                }
                None => problems.push(format!("{here}: expected an array of schemas")),
            },
            "properties" => match value.as_object() {
                Some(properties) => {
                    for (name, item) in properties {
                        check_schema(item, &format!("{here}.{name}"), problems);
                    }
                }
                None => problems.push(format!("{here}: expected an object")),
            },
            "additionalProperties" if !value.is_boolean() => {
                check_schema(value, &here, problems);
            }
            other => {
                if let Some(expected) = keyword_value_problem(other, value) {
                    problems.push(format!("{here}: expected {expected}"));
                }
            }
        }
    }
}

/// What the value of a scalar keyword of `schema.yaml` should be, when `value` is not that.
fn keyword_value_problem(key: &str, value: &Value) -> Option<&'static str> {
    let (ok, expected) = match key {
        "type" => (
            value.as_str().is_some_and(|t| TYPES.contains(&t)),
            "one of array, boolean, integer, number, object, string",
        ),
        "exclusiveMinimum" | "exclusiveMaximum" | "uniqueItems" | "nullable" | "readOnly"
        | "writeOnly" | "deprecated" => (value.is_boolean(), "a boolean"),
        "minimum" | "maximum" => (value.is_number(), "a number"),
        "multipleOf" => (value.as_f64().is_some_and(|v| v > 0.0), "a number > 0"),
        "maxLength" | "minLength" | "maxItems" | "minItems" | "maxProperties" | "minProperties" => {
            (value.is_u64(), "a non-negative integer")
        }
        "enum" => (
            value.as_array().is_some_and(|a| !a.is_empty()),
            "a non-empty array",
        ),
        "required" => (
            value
                .as_array()
                .is_some_and(|a| !a.is_empty() && a.iter().all(Value::is_string)),
            "a non-empty array of strings",
        ),
        "title" | "description" | "format" | "pattern" | "contentMediaType" | "contentEncoding"
        | "contentSchema" => (value.is_string(), "a string"),
        _ => (true, ""),
    };
    (!ok).then_some(expected)
}

#[cfg(test)]
mod tests {
    use super::check_process_description;
    use serde_json::json;

    fn with_schema(schema: serde_json::Value) -> serde_json::Value {
        json!({
            "id": "t", "version": "1", "title": "T",
            "inputs": { "a": { "title": "A", "schema": schema, "minOccurs": 0, "maxOccurs": 1 } },
            "outputs": { "o": { "schema": { "type": "string" } } }
        })
    }

    #[test]
    fn a_plain_enum_passes() {
        let p = with_schema(json!({"type": "string", "enum": ["x", "y"], "default": "x"}));
        assert_eq!(check_process_description(&p), Vec::<String>::new());
    }

    #[test]
    fn const_items_and_type_arrays_fail_as_the_standard_says() {
        // schema.yaml has additionalProperties: false and no `const`; `type` is a single name.
        let p = with_schema(json!({"oneOf": [{"const": "x"}, {"const": "y"}]}));
        let problems = check_process_description(&p);
        assert_eq!(problems.len(), 2, "{problems:?}");
        assert!(problems[0].contains("'const'"));
        let p = with_schema(json!({"type": ["string", "null"]}));
        assert_eq!(check_process_description(&p).len(), 1);
    }

    #[test]
    fn missing_required_members_are_named() {
        let p = json!({"title": "x", "inputs": {"a": {"minOccurs": -1}}});
        let problems = check_process_description(&p).join("\n");
        assert!(problems.contains("process.id: required"));
        assert!(problems.contains("process.version: required"));
        assert!(problems.contains("inputs.a.schema: required"));
        assert!(problems.contains("inputs.a.minOccurs"));
        let p = json!({"id": "x", "version": "1", "jobControlOptions": ["now"]});
        assert_eq!(check_process_description(&p).len(), 1);
    }
}
