//! The records as CSV, with a share of rows damaged on purpose (see [`crate::defects`]) so the
//! import's checks have work to do.

use std::path::Path;

use stance_core::error::{Error, Result};
use stance_core::host::{Interrupt, Progress};

use std::io::Write;

use crate::defects::{self, Defect};
use crate::dialect::Encoded;
use crate::output::REPORT_EVERY;
use crate::params::CsvExport;
use crate::scenario::{stance_label, Record};

const HEADER: [&str; 10] = [
    "id", "lon", "lat", "stance", "label_a", "label_b", "time", "author", "text", "quality",
];

fn failed(e: impl std::fmt::Display) -> Error {
    Error::Failed(format!("writing CSV: {e}"))
}

/// Writes `records` to `path` (the staged file of `export`); returns the number of rows given a
/// defect. Progress runs from 0.8 to 1.0.
///
/// # Errors
/// A write failure, or an interrupt.
pub fn write(
    path: &Path,
    export: &CsvExport,
    records: &[Record],
    (progress, interrupt): (&Progress, &Interrupt),
) -> Result<usize> {
    progress.phase("csv");
    let file = std::fs::File::create(path).map_err(failed)?;
    let out = Encoded::new(std::io::BufWriter::new(file), export.dialect.charset());
    let mut sink = match export.dialect.delimiter() {
        Some(delimiter) => {
            let mut csv = csv::WriterBuilder::new()
                .delimiter(delimiter)
                .terminator(if export.dialect.crlf() {
                    csv::Terminator::CRLF
                } else {
                    csv::Terminator::Any(b'\n')
                })
                .from_writer(out);
            csv.write_record(HEADER).map_err(failed)?;
            Sink::Csv(Box::new(csv))
        }
        None => Sink::Jsonl(out),
    };
    let mut defects_written = 0usize;
    for (i, r) in records.iter().enumerate() {
        let (mut cells, damaged) = row(i, r, export);
        defects_written += usize::from(damaged);
        if export.dialect.decimal_comma() {
            cells[1] = cells[1].replace('.', ",");
            cells[2] = cells[2].replace('.', ",");
        }
        sink.write(&cells)?;
        if i.is_multiple_of(REPORT_EVERY) {
            let share = i as f64 / records.len() as f64;
            progress.set_counted(0.8 + 0.2 * share, i as u64, records.len() as u64);
            interrupt.check()?;
        }
    }
    sink.flush()?;
    Ok(defects_written)
}

/// Where rows go: a delimited writer, or JSON lines.
enum Sink {
    Csv(Box<csv::Writer<Encoded<std::io::BufWriter<std::fs::File>>>>),
    Jsonl(Encoded<std::io::BufWriter<std::fs::File>>),
}

impl Sink {
    fn write(&mut self, cells: &[String; 10]) -> Result<()> {
        match self {
            Sink::Csv(csv) => csv.write_record(cells).map_err(failed),
            Sink::Jsonl(out) => {
                let line = json_line(cells);
                out.write_all(line.as_bytes()).map_err(failed)
            }
        }
    }

    fn flush(&mut self) -> Result<()> {
        match self {
            Sink::Csv(csv) => csv.flush().map_err(failed),
            Sink::Jsonl(out) => out.flush().map_err(failed),
        }
    }
}

/// One record as a JSON object on one line: numbers for id and coordinates (null when
/// missing), `location` nesting the coordinates, text for the rest.
fn json_line(cells: &[String; 10]) -> String {
    let number = |text: &str| {
        text.parse::<f64>()
            .ok()
            .and_then(serde_json::Number::from_f64)
            .map_or(serde_json::Value::Null, serde_json::Value::Number)
    };
    let mut object = serde_json::Map::new();
    let id = cells[0]
        .parse::<u64>()
        .map_or(serde_json::Value::Null, serde_json::Value::from);
    object.insert("id".into(), id);
    object.insert(
        "location".into(),
        serde_json::json!({ "lon": number(&cells[1]), "lat": number(&cells[2]) }),
    );
    for (i, name) in HEADER.iter().enumerate().skip(3) {
        object.insert((*name).into(), serde_json::Value::String(cells[i].clone()));
    }
    let mut line = serde_json::Value::Object(object).to_string();
    line.push('\n');
    line
}

/// The cells of record `index` (0-based), and whether it was given a defect.
fn row(index: usize, r: &Record, export: &CsvExport) -> ([String; 10], bool) {
    let mut lon = format!("{:.6}", r.lon);
    let mut lat = format!("{:.6}", r.lat);
    let mut stance = stance_label(r.stance).to_owned();
    let mut time = stance_core::time::format_utc(r.time_unix_s);
    let defect = defects::defect_for(index, export.seed, export.defect_share);
    if let Some((defect, detail)) = defect {
        match defect {
            Defect::MissingCoordinates => (lon, lat) = (String::new(), String::new()),
            Defect::SwappedCoordinates => std::mem::swap(&mut lon, &mut lat),
            Defect::LabelTypo => {
                stance = defects::TYPOS[(detail % defects::TYPOS.len() as u64) as usize].to_owned()
            }
            Defect::LocalTimeFormat => {
                if let Some(t) = chrono::DateTime::from_timestamp(r.time_unix_s, 0) {
                    time = t.format("%m/%d/%Y %I:%M %p").to_string();
                }
            }
            Defect::BlankTime => time.clear(),
        }
    }
    let cells = [
        (index + 1).to_string(),
        lon,
        lat,
        stance,
        stance_label(r.label_a).to_owned(),
        stance_label(r.label_b).to_owned(),
        time,
        r.author.clone(),
        r.text.clone(),
        r.quality.as_str().to_owned(),
    ];
    (cells, defect.is_some())
}
