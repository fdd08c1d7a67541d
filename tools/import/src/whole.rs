//! Whole-input checks after every row was seen: an input with no rows, a stance or time column
//! where nothing parses, or a run that kept nothing is an error, not a silent drop.

use std::path::Path;

use stance_core::error::{Error, Result};

use crate::checks::Checker;
use crate::output::dropped_by_reason;
use crate::params::ImportConfig;

/// Refuses the input as a whole when the rows show it was misread.
///
/// # Errors
/// [`Error::BadInput`] / [`Error::BadLayer`] for no rows or nothing kept; [`Error::BadField`]
/// naming the stance or time field when none of its values could be read.
pub fn check(
    input: &Path,
    layer: Option<String>,
    config: &ImportConfig,
    checker: &Checker,
    rows_read: u64,
) -> Result<()> {
    let whole = |message: String| match &layer {
        Some(layer) => Error::BadLayer {
            path: input.to_owned(),
            layer: layer.clone(),
            message,
        },
        None => Error::BadInput {
            path: input.to_owned(),
            message,
        },
    };
    let field_error = |field: &str, message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.clone().unwrap_or_else(|| "(csv)".into()),
        field: field.to_owned(),
        message,
    };
    if rows_read == 0 {
        return Err(whole("has no rows".into()));
    }
    let fields = &config.request.fields;
    if checker.stances_recognised == 0 && !checker.unknown_labels.is_empty() {
        let found: Vec<String> = checker
            .unknown_labels
            .iter()
            .take(10)
            .map(|(l, c)| format!("'{l}' ×{c}"))
            .collect();
        return Err(field_error(
            &fields.stance,
            format!(
                "no value is a known stance label (expected {}; found {}); map them with --classes",
                config.classes_shown,
                found.join(", ")
            ),
        ));
    }
    if let Some(time_field) = &fields.time {
        if checker.times_parsed == 0 && !checker.time_examples.is_empty() {
            let examples: Vec<&str> = checker
                .time_examples
                .values()
                .take(5)
                .map(String::as_str)
                .collect();
            return Err(field_error(
                time_field,
                format!(
                    "no value is an RFC 3339 / ISO 8601 date or date-time (examples: {})",
                    examples.join(" | ")
                ),
            ));
        }
    }
    if checker.kept.values().sum::<u64>() == 0 {
        let reasons: Vec<String> = dropped_by_reason(checker)
            .iter()
            .filter(|(_, c)| **c > 0)
            .map(|(r, c)| format!("{r}: {c}"))
            .collect();
        return Err(whole(format!(
            "every row was dropped ({})",
            reasons.join(", ")
        )));
    }
    Ok(())
}
