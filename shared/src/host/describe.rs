//! The tool's process description in the structure of OGC API – Processes – Part 1: Core
//! (OGC 18-062r2, "process description"), generated from the same definitions as the CLI.

use serde_json::{json, Map, Value};

use super::{CommonArgs, OutputDecl, Tool};

/// JSON Schema of `T` (draft 2020-12, subschemas inlined so each input stands alone).
fn schema_of<T: schemars::JsonSchema>() -> Value {
    let generator = schemars::generate::SchemaSettings::draft2020_12()
        .with(|s| s.inline_subschemas = true)
        .into_generator();
    generator.into_root_schema_for::<T>().to_value()
}

/// Builds the process description of tool `T`.
///
/// Types, descriptions and allowed values come from the schemars derive on the parameter
/// structs; defaults and whether an input is required come from the clap definitions, so the
/// CLI stays the one source of both.
pub fn describe<T: Tool>() -> Value {
    let command = super::command::<T>();
    let mut inputs = Map::new();
    for schema in [schema_of::<CommonArgs>(), schema_of::<T::Params>()] {
        let Some(properties) = schema.get("properties").and_then(Value::as_object) else {
            continue;
        };
        for (name, property) in properties {
            if name == "describe" {
                continue;
            }
            if (name == "input" || name == "layer") && T::INPUT == super::InputUse::None {
                continue;
            }
            inputs.insert(name.clone(), input_of::<T>(&command, name, property));
        }
    }
    let mut outputs = Map::new();
    for OutputDecl {
        id,
        title,
        description,
        media_type,
    } in T::outputs()
    {
        outputs.insert(
            id.to_owned(),
            json!({
                "title": title,
                "description": description,
                "schema": { "type": "string", "contentMediaType": media_type },
            }),
        );
    }
    outputs.insert(
        "summary".into(),
        json!({
            "title": "Run summary",
            "description": "The JSON object printed on stdout: layers written and key results.",
            "schema": { "type": "object", "contentMediaType": "application/json" },
        }),
    );
    json!({
        "id": T::ID,
        "title": T::TITLE,
        "description": T::DESCRIPTION,
        "version": crate::VERSION,
        "keywords": ["stance", "geopackage", T::ID],
        "jobControlOptions": ["sync-execute"],
        "outputTransmission": ["reference"],
        "inputs": inputs,
        "outputs": outputs,
        "additionalParameters": {
            "parameters": [
                { "name": "executable", "value": [format!("stance-{}", T::ID)] },
                { "name": "exitCodes", "value": [{"0": "done", "1": "failure while working", "2": "bad arguments or unusable input"}] }
            ]
        }
    })
}

/// One input of the description: its schema from the derive, its default and required-ness
/// from clap, its description (with enum meanings) and a short title.
fn input_of<T: Tool>(command: &clap::Command, name: &str, property: &Value) -> Value {
    let arg = command.get_arguments().find(|a| a.get_long() == Some(name));
    let mut property = property.clone();
    let description = property
        .as_object_mut()
        .and_then(|p| p.remove("description"))
        .and_then(|d| d.as_str().map(str::to_owned))
        .or_else(|| arg.and_then(|a| a.get_help().map(|h| h.to_string())))
        .unwrap_or_default();
    let mut required = arg.is_some_and(|a| a.is_required_set());
    if name == "input" && T::INPUT == super::InputUse::Required {
        required = true;
    }
    if let (Some(arg), Some(object)) = (arg, property.as_object_mut()) {
        apply_clap(arg, object);
    }
    let description = if name == "input" {
        T::INPUT_DESCRIPTION.to_owned()
    } else {
        description
    };
    // Doc comments wrap at 100 columns; a description is one paragraph.
    let description = description.split_whitespace().collect::<Vec<_>>().join(" ");
    let description = openapi_enums(&mut property, description);
    json!({
        "title": short_title(name),
        "description": description,
        "schema": property,
        "minOccurs": u32::from(required),
        "maxOccurs": 1,
    })
}

/// Clap's default into the schema; an optional value's `["T", "null"]` or `anyOf [T, null]`
/// becomes `T` (absence is expressed by minOccurs = 0).
fn apply_clap(arg: &clap::Arg, object: &mut Map<String, Value>) {
    let defaults: Vec<String> = arg
        .get_default_values()
        .iter()
        .map(|v| v.to_string_lossy().into_owned())
        .collect();
    if let Some(first) = defaults.first() {
        object.insert("default".into(), typed_default(object, first));
    }
    if let Some(Value::Array(types)) = object.get("type") {
        let non_null: Vec<Value> = types
            .iter()
            .filter(|t| t.as_str() != Some("null"))
            .cloned()
            .collect();
        if non_null.len() == 1 {
            object.insert("type".into(), non_null[0].clone());
        }
    }
    if let Some(Value::Array(options)) = object.get("anyOf") {
        let non_null: Vec<Value> = options
            .iter()
            .filter(|o| o.get("type").and_then(Value::as_str) != Some("null"))
            .cloned()
            .collect();
        if non_null.len() == 1 {
            object.remove("anyOf");
            if let Some(inner) = non_null[0].as_object() {
                for (k, v) in inner {
                    object.insert(k.clone(), v.clone());
                }
            }
        }
    }
}

/// Turns clap's textual default into a JSON value of the schema's type.
fn typed_default(schema: &Map<String, Value>, text: &str) -> Value {
    let types: Vec<&str> = match schema.get("type") {
        Some(Value::String(t)) => vec![t.as_str()],
        Some(Value::Array(ts)) => ts.iter().filter_map(Value::as_str).collect(),
        _ => vec![],
    };
    if types.contains(&"integer") {
        if let Ok(i) = text.parse::<i64>() {
            return json!(i);
        }
    }
    if types.contains(&"number") {
        if let Ok(f) = text.parse::<f64>() {
            return json!(f);
        }
    }
    if types.contains(&"boolean") {
        if let Ok(b) = text.parse::<bool>() {
            return json!(b);
        }
    }
    json!(text)
}

/// "Areas sharing…" → "areas sharing…", leaving acronyms and names ("LAEA", "Holm") alone.
fn lower_first(text: &str) -> String {
    let mut chars = text.chars();
    match (chars.next(), chars.next()) {
        (Some(first), Some(second)) if first.is_uppercase() && second.is_lowercase() => {
            let word = text.split(' ').next().unwrap_or("");
            // Names of people stay capitalised: they are followed by a year or "&".
            if text.contains(&format!("{word} (")) || text.contains(&format!("{word} &")) {
                return text.to_owned();
            }
            first.to_lowercase().collect::<String>() + &text[first.len_utf8()..]
        }
        _ => text.to_owned(),
    }
}

/// A short label from an option name: `max-radius-m` → "Max radius (m)".
fn short_title(name: &str) -> String {
    let mut words: Vec<&str> = name.split('-').collect();
    let unit = match words.last() {
        Some(&"m") => Some("m"),
        Some(&"mb") => Some("MiB"),
        Some(&"px") => Some("px"),
        _ => None,
    };
    if unit.is_some() {
        words.pop();
    }
    let words: Vec<&str> = words
        .into_iter()
        .map(|w| match w {
            "crs" => "CRS",
            "id" => "ID",
            "png" => "PNG",
            "csv" => "CSV",
            "wkt" => "WKT",
            other => other,
        })
        .collect();
    let mut title = words.join(" ");
    if let Some(first) = title.get(..1) {
        title = first.to_uppercase() + &title[1..];
    }
    match unit {
        Some(unit) => format!("{title} ({unit})"),
        None => title,
    }
}

/// Rewrites the schema derive's `oneOf` of `const` items (one per documented enum variant) as
/// the OpenAPI 3.0 `enum` that OGC API – Processes – Part 1 allows (`schema.yaml` of the
/// standard's schemas has no `const`), and moves the per-value explanations into the input's
/// description. Returns the description.
fn openapi_enums(property: &mut Value, description: String) -> String {
    let Some(object) = property.as_object_mut() else {
        return description;
    };
    let Some(Value::Array(options)) = object.get("oneOf") else {
        return description;
    };
    let mut values = Vec::new();
    let mut explained = Vec::new();
    let mut kind = None;
    for option in options {
        let value = option.get("const").or_else(|| {
            // A variant without its own doc comment comes as {"type": "string", "enum": [v]}.
            option
                .get("enum")
                .and_then(Value::as_array)
                .filter(|e| e.len() == 1)
                .map(|e| &e[0])
        });
        let Some(value) = value else {
            return description;
        };
        kind = option.get("type").cloned().or(kind);
        if let (Some(text), Some(doc)) = (
            value.as_str(),
            option.get("description").and_then(Value::as_str),
        ) {
            let doc = doc.split_whitespace().collect::<Vec<_>>().join(" ");
            explained.push(format!(
                "{text}: {}",
                lower_first(doc.trim_end_matches('.'))
            ));
        }
        values.push(value.clone());
    }
    object.remove("oneOf");
    object.insert("type".into(), kind.unwrap_or_else(|| json!("string")));
    object.insert("enum".into(), Value::Array(values));
    if explained.is_empty() {
        description
    } else {
        format!(
            "{} ({}).",
            description.trim_end_matches('.'),
            explained.join("; ")
        )
    }
}
