//! stance-import: CSV or any GDAL vector source → a checked point layer of stance records.

pub mod checks;
mod source;

use std::collections::BTreeMap;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::stance::ClassMap;

use checks::{Checker, Reason, Rules};

/// Parameters of stance-import.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct ImportParams {
    /// Field holding the stance label.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" with class oppose, neutral, support or
    /// -1, 0, 1 (default: recognise oppose/neutral/support and -1/0/1, case-insensitive).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// CSV: column of longitudes or x (default: the first of lon, lng, long, longitude, x).
    #[arg(long, value_name = "FIELD")]
    pub x_field: Option<String>,

    /// CSV: column of latitudes or y (default: the first of lat, latitude, y).
    #[arg(long, value_name = "FIELD")]
    pub y_field: Option<String>,

    /// CSV: column of WKT point geometries, instead of x/y columns.
    #[arg(long, value_name = "FIELD")]
    pub wkt_field: Option<String>,

    /// CRS of the input coordinates (default: EPSG:4326 for CSV, the layer's CRS otherwise).
    #[arg(long, value_name = "CRS")]
    pub source_crs: Option<String>,

    /// Field holding the record's date or date-time (RFC 3339 / ISO 8601); written as UTC.
    #[arg(long, value_name = "FIELD")]
    pub time_field: Option<String>,

    /// Field holding the author id (for duplicates and --max-per-author; not copied unless kept).
    #[arg(long, value_name = "FIELD")]
    pub author_field: Option<String>,

    /// Field holding the record's text (for duplicates; never copied unless kept).
    #[arg(long, value_name = "FIELD")]
    pub text_field: Option<String>,

    /// Field holding the geocoding-quality level.
    #[arg(long, value_name = "FIELD")]
    pub quality_field: Option<String>,

    /// Geocoding-quality levels from best to worst: exact (device or surveyed coordinates),
    /// street (geocoded to a street or address), town (snapped to a town centre), district (known
    /// only to a district or coarser area).
    #[arg(long, value_name = "LEVEL,…", default_value = "exact,street,town,district")]
    pub quality_order: String,

    /// Keep only records at this quality level or better (needs --quality-field).
    #[arg(long, value_name = "LEVEL")]
    pub min_quality: Option<String>,

    /// Keep at most N records per author, the first N in input order (needs --author-field).
    #[arg(long, value_name = "N")]
    pub max_per_author: Option<usize>,

    /// Extra fields to copy as text, comma-separated (author or text only if listed here).
    #[arg(long, value_name = "FIELD,…")]
    pub keep: Option<String>,

    /// Also write the dropped records, with their reason, to this attribute table.
    #[arg(long, value_name = "NAME")]
    pub rejects: Option<String>,
}

/// The import tool.
#[derive(Debug)]
pub struct Import;

impl Tool for Import {
    type Params = ImportParams;
    const ID: &'static str = "import";
    const TITLE: &'static str =
        "Import stance records into a GeoPackage point layer, checking every row";
    const DESCRIPTION: &'static str = "Reads a CSV (x/y or WKT columns) or any vector source GDAL reads, \
        maps stance labels to oppose/neutral/support, parses times to UTC, and drops rows with missing or \
        out-of-range coordinates, empty geometries, unknown labels, unparseable times, low geocoding quality, \
        exact duplicates (same author and text) or beyond a per-author cap. Every dropped row is counted by \
        reason in the summary and can be written to a rejects table. Author and text are not copied unless asked.";
    const DEFAULT_NAME: &'static str = "records";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "records",
                title: "Checked records",
                description: "Point layer <name>: stance, stance_value (-1/0/1), time_utc, quality and kept fields, in the source CRS.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "rejects",
                title: "Dropped records",
                description: "With --rejects NAME: attribute table NAME with source_row, reason and the raw values checked.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &ImportParams, run: &mut Run) -> Result<Value> {
        // Check parameters once, at the border.
        let classes = match &params.classes {
            Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
            None => ClassMap::default(),
        };
        let quality_order: Vec<String> = params
            .quality_order
            .split(',')
            .map(|l| l.trim().to_lowercase())
            .filter(|l| !l.is_empty())
            .collect();
        if quality_order.is_empty() {
            return Err(Error::argument("--quality-order", "is empty; expected levels from best to worst, e.g. exact,street,town,district"));
        }
        let min_quality_index = match &params.min_quality {
            None => None,
            Some(level) => {
                if params.quality_field.is_none() {
                    return Err(Error::argument("--min-quality", "needs --quality-field"));
                }
                Some(
                    quality_order
                        .iter()
                        .position(|l| *l == level.trim().to_lowercase())
                        .ok_or_else(|| {
                            Error::argument(
                                "--min-quality",
                                format!(
                                    "'{level}' is not one of the levels {}",
                                    quality_order.join(",")
                                ),
                            )
                        })?,
                )
            }
        };
        if params.max_per_author == Some(0) {
            return Err(Error::argument("--max-per-author", "must be at least 1"));
        }
        if params.max_per_author.is_some() && params.author_field.is_none() {
            return Err(Error::argument("--max-per-author", "needs --author-field"));
        }
        if let Some(rejects) = &params.rejects {
            stance_core::gpkg::check_layer_name(rejects, "--rejects")?;
        }
        let keep: Vec<String> = params
            .keep
            .as_deref()
            .map(|k| {
                k.split(',')
                    .map(|f| f.trim().to_owned())
                    .filter(|f| !f.is_empty())
                    .collect()
            })
            .unwrap_or_default();

        // Read.
        let input = run.input()?.to_owned();
        let fields = source::Fields {
            stance: params.stance_field.clone(),
            time: params.time_field.clone(),
            author: params.author_field.clone(),
            text: params.text_field.clone(),
            quality: params.quality_field.clone(),
            keep: keep.clone(),
        };
        let mut reader = source::open(&input, run.common.layer.as_deref(), params, &fields)?;
        if let Some(layer) = reader.layer_name() {
            run.note_input_layer(&layer);
        }
        let srs = reader.srs().clone();
        let rules = Rules {
            classes,
            geographic: srs.is_geographic(),
            uses_time: params.time_field.is_some(),
            quality_order: params.quality_field.as_ref().map(|_| quality_order.clone()),
            min_quality_index,
            drop_duplicates: params.author_field.is_some() && params.text_field.is_some(),
            max_per_author: params.max_per_author,
        };
        let mut checker = Checker::new(rules);

        // Check and write, streaming.
        let name = run.layer_name("");
        if params.rejects.as_deref() == Some(name.as_str()) {
            return Err(Error::argument(
                "--rejects",
                format!("'{name}' is also the records layer; choose another name"),
            ));
        }
        let mut out_fields = vec![
            FieldDef::new("stance", FieldKind::Text),
            FieldDef::new("stance_value", FieldKind::Integer),
        ];
        if params.time_field.is_some() {
            out_fields.push(FieldDef::new("time_utc", FieldKind::DateTime));
        }
        if params.quality_field.is_some() {
            out_fields.push(FieldDef::new("quality", FieldKind::Text));
        }
        for k in &keep {
            let clean = k
                .to_lowercase()
                .replace(|c: char| !c.is_ascii_alphanumeric(), "_");
            if out_fields.iter().any(|f| f.name == clean) {
                return Err(Error::argument(
                    "--keep",
                    format!("field '{k}' clashes with an output field '{clean}'"),
                ));
            }
            out_fields.push(FieldDef::new(&clean, FieldKind::Text));
        }
        let mut rejects: Vec<(u64, Reason, source::RawValues)> = Vec::new();
        let mut rows_read: u64 = 0;
        {
            let (staging, progress, interrupt) = run.writing();
            let mut writer =
                staging.create_vector(&name, GeometryKind::Point, Some(&srs), &out_fields)?;
            while let Some(row) = reader.next_row()? {
                rows_read += 1;
                let raw = row.record();
                match checker.check(&raw) {
                    Ok(clean) => {
                        let mut values: Vec<FieldData<'_>> = Vec::with_capacity(out_fields.len());
                        values.push(FieldData::Text(clean.stance.label()));
                        values.push(FieldData::Integer(i64::from(clean.stance.value())));
                        if params.time_field.is_some() {
                            values.push(
                                clean
                                    .time_utc_s
                                    .map_or(FieldData::Null, FieldData::DateTime),
                            );
                        }
                        if params.quality_field.is_some() {
                            let level = clean
                                .quality_level
                                .and_then(|i| quality_order.get(i))
                                .map(String::as_str);
                            values.push(level.map_or(FieldData::Null, FieldData::Text));
                        }
                        for kept in &row.keep {
                            values.push(kept.as_deref().map_or(FieldData::Null, FieldData::Text));
                        }
                        writer.add(Shape::Point(clean.x, clean.y), &values)?;
                    }
                    Err(reason) => {
                        if params.rejects.is_some() {
                            rejects.push((row.source_row, reason, row.raw_values()));
                        }
                    }
                }
                if rows_read.is_multiple_of(65_536) {
                    progress.set(reader.fraction_read());
                    interrupt.check()?;
                }
            }
            writer.finish()?;
        }
        run.progress.set(1.0);

        // Whole-input checks: a column where nothing parses is an error, not a silent drop.
        let whole = |message: String| match reader.layer_name() {
            Some(layer) => Error::BadLayer {
                path: input.clone(),
                layer,
                message,
            },
            None => Error::BadInput {
                path: input.clone(),
                message,
            },
        };
        if rows_read == 0 {
            return Err(whole("has no rows".into()));
        }
        if checker.stances_recognised == 0 && !checker.unknown_labels.is_empty() {
            let found: Vec<String> = checker
                .unknown_labels
                .iter()
                .take(10)
                .map(|(l, c)| format!("'{l}' ×{c}"))
                .collect();
            return Err(Error::BadField {
                path: input.clone(),
                layer: reader.layer_name().unwrap_or_else(|| "(csv)".into()),
                field: params.stance_field.clone(),
                message: format!(
                    "no value is a known stance label (expected {}; found {}); map them with --classes",
                    checker_classes(params),
                    found.join(", ")
                ),
            });
        }
        if params.time_field.is_some()
            && checker.times_parsed == 0
            && !checker.time_examples.is_empty()
        {
            let examples: Vec<&str> = checker
                .time_examples
                .values()
                .take(5)
                .map(String::as_str)
                .collect();
            return Err(Error::BadField {
                path: input.clone(),
                layer: reader.layer_name().unwrap_or_else(|| "(csv)".into()),
                field: params.time_field.clone().unwrap_or_default(),
                message: format!(
                    "no value is an RFC 3339 / ISO 8601 date or date-time (examples: {})",
                    examples.join(" | ")
                ),
            });
        }
        if let Some(rejects_name) = &params.rejects {
            let fields = [
                FieldDef::new("source_row", FieldKind::Integer),
                FieldDef::new("reason", FieldKind::Text),
                FieldDef::new("x_raw", FieldKind::Text),
                FieldDef::new("y_raw", FieldKind::Text),
                FieldDef::new("stance_raw", FieldKind::Text),
                FieldDef::new("time_raw", FieldKind::Text),
                FieldDef::new("quality_raw", FieldKind::Text),
            ];
            let mut writer =
                run.output()
                    .create_vector(rejects_name, GeometryKind::None, None, &fields)?;
            for (row, reason, raw) in &rejects {
                writer.add(
                    Shape::None,
                    &[
                        FieldData::Integer(*row as i64),
                        FieldData::Text(reason.name()),
                        text(&raw.x),
                        text(&raw.y),
                        text(&raw.stance),
                        text(&raw.time),
                        text(&raw.quality),
                    ],
                )?;
            }
            writer.finish()?;
        }

        let dropped: BTreeMap<&str, u64> = Reason::ALL
            .iter()
            .map(|r| (r.name(), checker.dropped.get(r).copied().unwrap_or(0)))
            .collect();
        let kept: u64 = checker.kept.values().sum();
        let classes: BTreeMap<&str, u64> =
            checker.kept.iter().map(|(s, c)| (s.label(), *c)).collect();
        if kept == 0 {
            let reasons: Vec<String> = dropped
                .iter()
                .filter(|(_, c)| **c > 0)
                .map(|(r, c)| format!("{r}: {c}"))
                .collect();
            return Err(whole(format!(
                "every row was dropped ({})",
                reasons.join(", ")
            )));
        }
        run.log(format!(
            "stance-import: kept {kept} of {rows_read} records into layer '{name}'; dropped {}",
            rows_read - kept
        ));
        Ok(json!({
            "layer": name,
            "rows_read": rows_read,
            "records_written": kept,
            "records_dropped": rows_read - kept,
            "dropped_by_reason": dropped,
            "unknown_stance_labels": checker.unknown_labels,
            "unknown_quality_levels": checker.unknown_quality,
            "unparsed_time_examples": checker.time_examples,
            "records_by_class": classes,
            "crs": stance_core::gpkg::crs::label(&srs),
            "rejects_layer": params.rejects,
        }))
    }
}

fn text(value: &Option<String>) -> FieldData<'_> {
    value.as_deref().map_or(FieldData::Null, FieldData::Text)
}

fn checker_classes(params: &ImportParams) -> String {
    match &params.classes {
        Some(spec) => spec.clone(),
        None => ClassMap::default().describe(),
    }
}
