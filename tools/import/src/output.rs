//! The checked records and the dropped ones as layers, and the run's summary.

use std::collections::BTreeMap;

use gdal::spatial_ref::SpatialRef;
use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging};

use crate::checks::{Checker, CleanRecord, Reason};
use crate::params::ImportConfig;
use crate::source::{RawValues, Row};
use crate::whole::Warning;

/// A dropped record, as the rejects table shows it.
#[derive(Debug, Clone)]
pub struct Rejected {
    /// Data row (CSV) or feature id (GDAL sources).
    pub source_row: u64,
    /// The first check it failed.
    pub reason: Reason,
    /// The raw values checked (never author or text).
    pub raw: RawValues,
}

/// Fields of the records layer: stance, stance_value, time_utc and quality when read, then the
/// kept fields as text.
pub fn record_fields(config: &ImportConfig) -> Vec<FieldDef> {
    let mut fields = vec![
        FieldDef::new("stance", FieldKind::Text),
        FieldDef::new("stance_value", FieldKind::Integer),
    ];
    if config.request.fields.time.is_some() {
        fields.push(FieldDef::new("time_utc", FieldKind::DateTime));
    }
    if config.quality_levels.is_some() {
        fields.push(FieldDef::new("quality", FieldKind::Text));
    }
    for column in &config.kept_columns {
        fields.push(FieldDef::new(column, FieldKind::Text));
    }
    fields
}

/// The values of one kept record, in the order of [`record_fields`].
pub fn record_values<'a>(
    clean: &CleanRecord,
    row: &'a Row,
    config: &'a ImportConfig,
) -> Vec<FieldData<'a>> {
    let mut values: Vec<FieldData<'_>> = Vec::with_capacity(4 + row.keep.len());
    values.push(FieldData::Text(clean.stance.label()));
    values.push(FieldData::Integer(i64::from(clean.stance.value())));
    if config.request.fields.time.is_some() {
        values.push(
            clean
                .time_utc_s
                .map_or(FieldData::Null, FieldData::DateTime),
        );
    }
    if let Some(levels) = &config.quality_levels {
        let level = clean
            .quality_level
            .and_then(|i| levels.get(i))
            .map(String::as_str);
        values.push(level.map_or(FieldData::Null, FieldData::Text));
    }
    for kept in &row.keep {
        values.push(text(kept));
    }
    values
}

/// Stages the attribute table `name` of dropped records.
///
/// # Errors
/// A staging failure.
pub fn write_rejects(staging: &mut Staging, name: &str, rejects: &[Rejected]) -> Result<()> {
    let fields = [
        FieldDef::new("source_row", FieldKind::Integer),
        FieldDef::new("reason", FieldKind::Text),
        FieldDef::new("x_raw", FieldKind::Text),
        FieldDef::new("y_raw", FieldKind::Text),
        FieldDef::new("stance_raw", FieldKind::Text),
        FieldDef::new("time_raw", FieldKind::Text),
        FieldDef::new("quality_raw", FieldKind::Text),
    ];
    let mut writer = staging.create_vector(name, GeometryKind::None, None, &fields)?;
    for r in rejects {
        writer.add(
            Shape::None,
            &[
                FieldData::Integer(r.source_row as i64),
                FieldData::Text(r.reason.name()),
                text(&r.raw.x),
                text(&r.raw.y),
                text(&r.raw.stance),
                text(&r.raw.time),
                text(&r.raw.quality),
            ],
        )?;
    }
    writer.finish().map(drop)
}

fn text(value: &Option<String>) -> FieldData<'_> {
    value.as_deref().map_or(FieldData::Null, FieldData::Text)
}

/// Dropped records per reason, every reason listed (zero when none).
pub fn dropped_by_reason(checker: &Checker) -> BTreeMap<&'static str, u64> {
    Reason::ALL
        .iter()
        .map(|r| (r.name(), checker.dropped.get(r).copied().unwrap_or(0)))
        .collect()
}

/// The run's results: counts read, kept and dropped by reason, what was not understood, the
/// classes kept, the CRS and the layers written.
pub fn summary(
    config: &ImportConfig,
    (checker, rows_read): (&Checker, u64),
    srs: &SpatialRef,
    read_as: Value,
    warnings: &[Warning],
) -> Value {
    let kept: u64 = checker.kept.values().sum();
    let classes: BTreeMap<&str, u64> = checker.kept.iter().map(|(s, c)| (s.label(), *c)).collect();
    json!({
        "layer": config.records_layer,
        "rows_read": rows_read,
        "records_written": kept,
        "records_dropped": rows_read - kept,
        "dropped_by_reason": dropped_by_reason(checker),
        "unknown_stance_labels": checker.unknown_labels,
        "unknown_quality_levels": checker.unknown_quality,
        "unparsed_time_examples": checker.time_examples,
        "records_by_class": classes,
        "crs": stance_core::gpkg::crs::label(srs),
        "rejects_layer": config.rejects,
        "read_as": read_as,
        "warnings": warnings.iter().map(warning_entry).collect::<Vec<_>>(),
    })
}

/// A warning as the summary shows it: its counts and its one-line message.
fn warning_entry(warning: &Warning) -> Value {
    let mut entry = warning.entry.clone();
    if let Value::Object(map) = &mut entry {
        map.insert("message".into(), Value::String(warning.message.clone()));
    }
    entry
}
