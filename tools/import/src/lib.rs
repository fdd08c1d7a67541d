//! stance-import: CSV or any GDAL vector source → a checked point layer of stance records.

pub mod checks;
pub mod dialect;
mod memory;
mod output;
pub mod params;
mod source;
pub mod times;
mod whole;

use serde_json::Value;
use stance_core::error::Result;
use stance_core::gpkg::stage::{GeometryKind, Shape};
use stance_core::host::{check_memory, InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

use checks::Checker;
use output::Rejected;
use params::ImportConfig;
pub use params::ImportParams;
use source::Reader;

/// The import tool.
#[derive(Debug)]
pub struct Import;

/// Rows between progress reports and interrupt checks.
const REPORT_EVERY: u64 = 65_536;

/// What to do when an import would need more memory than allowed.
const MEMORY_ADVICE: &str = "split the input into parts and import them one by one";

/// Where the memory an import will need is projected from the share of the input read.
const PROJECT_AFTER: u64 = REPORT_EVERY;

impl Tool for Import {
    type Params = ImportParams;
    const ID: &'static str = "import";
    const TITLE: &'static str =
        "Import stance records into a GeoPackage point layer, checking every row";
    const DESCRIPTION: &'static str = "Reads stance records from delimited text (.csv, .tsv, .txt: RFC 4180, delimiter comma, \
        semicolon, tab or pipe guessed or given; UTF-8, UTF-16 with byte-order mark or a legacy encoding named by its \
        WHATWG Encoding Standard label; decimal point or comma), JSON lines (.jsonl, .ndjson; nested fields by \
        dotted path), spreadsheets (.xlsx ECMA-376, .ods ISO/IEC 26300; a sheet by --layer), all with x/y or WKT \
        columns, or from a vector layer of points (a GeoPackage, shapefile or GeoJSON layer of points), maps stance labels to \
        oppose/neutral/support, parses times to UTC (RFC 3339 / ISO 8601, or the form --time-format gives; \
        day/month-ambiguous dates are never guessed), and drops rows with missing or out-of-range coordinates, \
        empty geometries, unknown labels, unparseable times, low geocoding quality, exact duplicates (same \
        author and text) or beyond a per-author cap. Every dropped row is counted by reason in the summary \
        and can be written to a rejects table. Author and text are not copied unless asked.";
    const DEFAULT_NAME: &'static str = "records";
    const INPUT_DESCRIPTION: &'static str = "Records to import: delimited text (.csv, .tsv, .txt), JSON lines (.jsonl, .ndjson), a \
        spreadsheet (.xlsx, .ods; the sheet by --layer) or a vector layer of points (e.g. GeoPackage, shapefile, GeoJSON).";
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
        run.progress.phase("checking");
        let config = params.check(&run.layer_name(""))?;

        run.progress.phase("reading");
        let input = run.input()?.to_owned();
        let mut reader = source::open(&input, run.common.layer.as_deref(), &config.request)?;
        if let Some(layer) = reader.layer_name() {
            run.note_input_layer(&layer);
        }
        let mut checker = Checker::new(config.rules(reader.srs().is_geographic()));
        let (rows_read, rejects, estimate) =
            stream_records(run, &config, &mut reader, &mut checker)?;
        // Checked while streaming; recorded for the summary (`memory_estimate_mb`).
        run.guard_memory(estimate as u64, "the import", MEMORY_ADVICE)?;
        let warnings = whole::warnings(&checker);
        whole::check(
            &input,
            reader.layer_name(),
            &config,
            &checker,
            rows_read,
            &warnings,
        )?;
        for warning in &warnings {
            run.log(format!("stance-import: warning: {}", warning.message));
        }

        if let Some(name) = &config.rejects {
            run.progress.phase("writing");
            output::write_rejects(run.output(), name, &rejects)?;
        }
        run.progress.set(1.0);
        let kept: u64 = checker.kept.values().sum();
        run.log(format!(
            "stance-import: kept {kept} of {rows_read} records into layer '{}'; dropped {}",
            config.records_layer,
            rows_read - kept
        ));
        let read_as = reader.dialect_summary();
        Ok(output::summary(
            &config,
            (&checker, rows_read),
            reader.srs(),
            read_as,
            &warnings,
        ))
    }
}

/// What the checker and the writer hold after the rows read so far.
fn held(checker: &Checker) -> memory::Held {
    let (duplicate_keys, authors) = checker.keys_held();
    memory::Held {
        records: checker.kept.values().sum::<u64>() as f64,
        duplicate_keys: duplicate_keys as f64,
        authors: authors as f64,
    }
}

/// Reads, checks and writes every row in one pass; returns the rows read, the dropped rows
/// (kept only when a rejects table was asked for) and the memory estimate (bytes). The
/// estimate is checked against `--max-memory-mb` twice: projected from the first
/// [`PROJECT_AFTER`] rows and the share of the input they are, and before the spatial index
/// is packed (the peak) from what is held.
fn stream_records(
    run: &mut Run,
    config: &ImportConfig,
    reader: &mut Reader,
    checker: &mut Checker,
) -> Result<(u64, Vec<Rejected>, f64)> {
    let limit = run.memory_limit_bytes();
    let mut estimate = 0.0f64;
    let fields = output::record_fields(config);
    let srs = reader.srs().clone();
    let total = reader.rows_total();
    let (staging, progress, interrupt) = run.writing();
    let mut writer = staging.create_vector(
        &config.records_layer,
        GeometryKind::Point,
        Some(&srs),
        &fields,
    )?;
    let mut rejects: Vec<Rejected> = Vec::new();
    let mut rows_read: u64 = 0;
    while let Some(row) = reader.next_row()? {
        rows_read += 1;
        match checker.check(&row.record()) {
            Ok(clean) => writer.add(
                Shape::Point(clean.x, clean.y),
                &output::record_values(&clean, &row, config),
            )?,
            Err(reason) if config.rejects.is_some() => rejects.push(Rejected {
                source_row: row.source_row,
                reason,
                raw: row.raw_values(),
            }),
            Err(_) => {}
        }
        if rows_read == PROJECT_AFTER {
            let share = reader.fraction_read();
            if share > 0.0 {
                let projected = held(checker).scaled(1.0 / share.min(1.0));
                estimate = projected.estimate();
                let what = format!(
                    "importing about {:.0} records (projected from the first {PROJECT_AFTER} rows)",
                    projected.records
                );
                check_memory(estimate as u64, limit, &what, MEMORY_ADVICE)?;
            }
        }
        if rows_read.is_multiple_of(REPORT_EVERY) {
            let fraction = 0.95 * reader.fraction_read();
            match total {
                Some(total) => progress.set_counted(fraction, rows_read, total),
                None => progress.set(fraction),
            }
            interrupt.check()?;
        }
    }
    let now = held(checker);
    estimate = estimate.max(now.estimate());
    let what = format!("indexing {} records", now.records);
    check_memory(now.estimate() as u64, limit, &what, MEMORY_ADVICE)?;
    writer.finish()?;
    Ok((rows_read, rejects, estimate))
}
