//! Whole-input checks after every row was seen: an input with no rows, a stance or time column
//! where nothing parses, or a run that kept nothing is an error, not a silent drop.

use std::path::Path;

use stance_core::error::{Error, Result};

use serde_json::{json, Value};

use crate::checks::{Checker, Reason};
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
    warnings: &[Warning],
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
                    "no value is {} (examples: {}); give their form with --time-format (e.g. --time-format '%d/%m/%Y %H:%M', epoch or epoch-ms)",
                    match config.time_format {
                        crate::times::TimeFormat::Iso => "an RFC 3339 / ISO 8601 date or date-time",
                        _ => "in the form --time-format gives",
                    },
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
        let hints: Vec<&str> = warnings.iter().map(|w| w.message.as_str()).collect();
        return Err(whole(format!(
            "every row was dropped ({}){}{}",
            reasons.join(", "),
            if hints.is_empty() { "" } else { "; " },
            hints.join("; ")
        )));
    }
    Ok(())
}

/// Something about the input as a whole that looks wrong but does not stop the import.
#[derive(Debug, Clone)]
pub struct Warning {
    /// One line saying what and how to fix it.
    pub message: String,
    /// The same as a summary entry, with the counts.
    pub entry: Value,
}

/// The whole-input warnings: coordinates that look swapped, all at (0, 0), and day/month-
/// ambiguous dates dropped.
pub fn warnings(checker: &Checker) -> Vec<Warning> {
    let mut out = Vec::new();
    let tally = checker.coordinates;
    if tally.looks_swapped() {
        out.push(Warning {
            message: format!(
                "{} of {} coordinate pairs are out of range as longitude/latitude but in range swapped; the columns look swapped: give them with --x-field (longitude) and --y-field (latitude)",
                tally.in_range_swapped, tally.points
            ),
            entry: json!({
                "kind": "coordinates_look_swapped",
                "pairs": tally.points,
                "out_of_range": tally.out_of_range,
                "in_range_swapped": tally.in_range_swapped,
            }),
        });
    }
    if tally.all_at_origin() {
        out.push(Warning {
            message: format!(
                "all {} coordinate pairs are (0, 0), a placeholder rather than a place; check the x/y columns",
                tally.points
            ),
            entry: json!({ "kind": "all_coordinates_at_origin", "pairs": tally.points }),
        });
    }
    let ambiguous = checker
        .dropped
        .get(&Reason::AmbiguousDayMonth)
        .copied()
        .unwrap_or(0);
    if let (true, Some(example)) = (ambiguous > 0, &checker.ambiguous_example) {
        out.push(Warning {
            message: format!(
                "{ambiguous} rows dropped with a day/month-ambiguous date such as '{example}'; give the order with --time-format (e.g. --time-format '%d/%m/%Y' or '%m/%d/%Y', with %H:%M for times)"
            ),
            entry: json!({
                "kind": "ambiguous_day_month",
                "rows": ambiguous,
                "example": example,
                "fix": "--time-format",
            }),
        });
    }
    out
}
