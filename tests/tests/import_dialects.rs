//! stance-import on the exports people actually have: the same invented records written in
//! every dialect (delimiter × encoding × decimal comma × line ends × byte-order mark, JSON
//! lines, Office Open XML and OpenDocument spreadsheets) import to the same kept rows, field by
//! field, and the same drop counts as the clean CSV; the failing cases exit 2 with one line
//! naming the file, the line and the option that fixes it, and write nothing.
//!
//! The expected values come from outside the import: the clean CSV's own import (the existing
//! CSV path, itself checked row by row in import.rs), the encodings' byte tables (WHATWG
//! Encoding Standard, Unicode code charts) and calendar arithmetic done by hand.

use std::path::Path;
use std::process::Command;

use serde_json::Value;
use stance_tests::{out_dir, rows, run_in, Ran};

/// Options every import of the records uses.
const FIELDS: [&str; 14] = [
    "--time-field",
    "time",
    "--author-field",
    "author",
    "--text-field",
    "text",
    "--quality-field",
    "quality",
    "--keep",
    "id,label_a,text",
    "--rejects",
    "rejected",
    "-q",
    "--overwrite",
];

/// The kept records, field by field, in id order (geometry as a digest of its blob).
const KEPT: &str = "SELECT id, stance, stance_value, time_utc, quality, label_a, text, geom \
                    FROM records ORDER BY CAST(id AS INTEGER)";

/// What an import produced: the summary's drop counts and the kept rows.
#[derive(Debug, PartialEq)]
struct Imported {
    rows_read: u64,
    dropped: Value,
    kept: Vec<Vec<String>>,
    rejected: Vec<Vec<String>>,
}

fn import(dir: &Path, input: &str, extra: &[&str]) -> Imported {
    let output = format!("{input}.gpkg");
    let mut args = vec!["--input", input, "--output", &output];
    args.extend_from_slice(&FIELDS);
    args.extend_from_slice(extra);
    let summary = run_in(dir, "stance-import", &args).ok();
    let results = &summary["results"];
    let gpkg = dir.join(&output);
    Imported {
        rows_read: results["rows_read"].as_u64().expect("rows_read"),
        dropped: results["dropped_by_reason"].clone(),
        kept: rows(&gpkg, KEPT),
        rejected: rows(
            &gpkg,
            "SELECT source_row, reason, stance_raw, time_raw FROM rejected ORDER BY source_row",
        ),
    }
}

fn synth_export(dir: &Path, file: &str, dialect: &str) {
    run_in(
        dir,
        "stance-synth",
        &[
            "--output",
            &format!("{file}.synth.gpkg"),
            "--points",
            "800",
            "--seed",
            "11",
            "--csv",
            file,
            "--csv-dialect",
            dialect,
            "--csv-defects",
            "0.05",
            "-q",
        ],
    )
    .ok();
}

/// The records of the JSON-lines export as CSV cells (header first); numbers as the export
/// wrote them, a missing coordinate as an empty cell.
fn cells_from_jsonl(path: &Path) -> Vec<Vec<String>> {
    let header = [
        "id", "lon", "lat", "stance", "label_a", "label_b", "time", "author", "text", "quality",
    ];
    let text = std::fs::read_to_string(path).expect("read jsonl");
    let mut out = vec![header.iter().map(|s| (*s).to_owned()).collect::<Vec<_>>()];
    for line in text.lines() {
        let record: Value = serde_json::from_str(line).expect("json line");
        let cell = |v: &Value| match v {
            Value::Null => String::new(),
            Value::String(s) => s.clone(),
            other => other.to_string(),
        };
        out.push(
            header
                .iter()
                .map(|h| match *h {
                    "lon" | "lat" => cell(&record["location"][*h]),
                    _ => cell(&record[*h]),
                })
                .collect(),
        );
    }
    out
}

/// One variant of the delimited export.
#[derive(Debug, Clone, Copy)]
struct Variant {
    delimiter: u8,
    encoding: &'static str,
    decimal_comma: bool,
    crlf: bool,
}

/// RFC 4180 text of `cells` in `variant` (quotes only where needed), encoded.
fn write_variant(cells: &[Vec<String>], v: Variant) -> Vec<u8> {
    let delimiter = char::from(v.delimiter);
    let mut text = String::new();
    for (r, row) in cells.iter().enumerate() {
        let fields: Vec<String> = row
            .iter()
            .enumerate()
            .map(|(c, cell)| {
                let cell = if v.decimal_comma && r > 0 && (c == 1 || c == 2) {
                    cell.replace('.', ",")
                } else {
                    cell.clone()
                };
                if cell.contains([delimiter, '"', '\n', '\r']) {
                    format!("\"{}\"", cell.replace('"', "\"\""))
                } else {
                    cell
                }
            })
            .collect();
        text.push_str(&fields.join(&delimiter.to_string()));
        text.push_str(if v.crlf { "\r\n" } else { "\n" });
    }
    match v.encoding {
        "utf-8" => text.into_bytes(),
        "utf-8-bom" => [b"\xEF\xBB\xBF".as_slice(), text.as_bytes()].concat(),
        // UTF-16LE: byte-order mark FF FE, then each code unit low byte first.
        "utf-16le" => [0xFF, 0xFE]
            .into_iter()
            .chain(text.encode_utf16().flat_map(u16::to_le_bytes))
            .collect(),
        // windows-1252 agrees with Unicode for U+0000..U+007F and U+00A0..U+00FF.
        "windows-1252" => text
            .chars()
            .map(|c| {
                let code = u32::from(c);
                assert!(code < 0x80 || (0xA0..=0xFF).contains(&code), "{c}");
                code as u8
            })
            .collect(),
        other => panic!("unknown encoding {other}"),
    }
}

/// The same records in every dialect import to the same kept rows and drop counts.
#[test]
fn every_dialect_imports_like_the_clean_csv() {
    let dir = out_dir("import_dialects_matrix");
    synth_export(&dir, "clean.csv", "comma-utf8");
    let clean = import(&dir, "clean.csv", &[]);
    assert_eq!(clean.rows_read, 800);
    assert!(clean.rejected.len() > 20, "the export has defects to drop");
    let dropped_ambiguous = clean.dropped["ambiguous_day_month"].as_u64();
    assert!(
        dropped_ambiguous.is_some_and(|n| n > 0),
        "{:?}",
        clean.dropped
    );

    let mut checked = 0;
    for (dialect, file, extra) in [
        (
            "semicolon-latin1",
            "s1.csv",
            &["--encoding", "windows-1252"][..],
        ),
        (
            "semicolon-bom-crlf-decimal-comma",
            "s2.csv",
            &["--decimal-comma"][..],
        ),
        (
            "semicolon-latin1-crlf-decimal-comma",
            "s3.txt",
            &["--decimal-comma", "--encoding", "iso-8859-1"][..],
        ),
        ("tab-utf16", "s4.tsv", &[][..]),
        ("pipe", "s5.csv", &[][..]),
        ("jsonl", "s6.jsonl", &[][..]),
    ] {
        synth_export(&dir, file, dialect);
        assert_eq!(import(&dir, file, extra), clean, "dialect {dialect}");
        checked += 1;
    }
    std::fs::copy(dir.join("s6.jsonl"), dir.join("s7.ndjson")).expect("copy");
    assert_eq!(import(&dir, "s7.ndjson", &[]), clean, "ndjson");

    let cells = cells_from_jsonl(&dir.join("s6.jsonl"));
    for delimiter in [b',', b';', b'\t', b'|'] {
        for encoding in ["utf-8", "utf-8-bom", "utf-16le", "windows-1252"] {
            for decimal_comma in [false, true] {
                for crlf in [false, true] {
                    let v = Variant {
                        delimiter,
                        encoding,
                        decimal_comma,
                        crlf,
                    };
                    let file = format!("m{checked}.csv");
                    std::fs::write(dir.join(&file), write_variant(&cells, v)).expect("write");
                    let mut extra = Vec::new();
                    if decimal_comma {
                        extra.push("--decimal-comma");
                    }
                    if encoding == "windows-1252" {
                        extra.extend(["--encoding", "windows-1252"]);
                    }
                    assert_eq!(import(&dir, &file, &extra), clean, "{v:?}");
                    checked += 1;
                }
            }
        }
    }
    assert_eq!(checked, 6 + 64);
}

/// Spreadsheets made from the clean CSV by GDAL's own writers import like the CSV (rows are
/// numbered by the spreadsheet, so the rejects are compared by reason and values).
#[test]
fn spreadsheets_import_like_the_clean_csv() {
    let dir = out_dir("import_dialects_spreadsheets");
    synth_export(&dir, "clean.csv", "comma-utf8");
    let clean = import(&dir, "clean.csv", &[]);
    for (format, file) in [("XLSX", "records.xlsx"), ("ODS", "records.ods")] {
        let _ = std::fs::remove_file(dir.join(file));
        let status = Command::new("ogr2ogr")
            .args(["-f", format, file, "clean.csv", "-nln", "records"])
            .current_dir(&dir)
            .status()
            .expect("run ogr2ogr (Debian gdal-bin)");
        assert!(status.success(), "ogr2ogr -f {format}");
        let mut sheet = import(&dir, file, &["--layer", "records"]);
        let values = |r: &[Vec<String>]| -> Vec<Vec<String>> {
            let mut v: Vec<Vec<String>> = r.iter().map(|row| row[1..].to_vec()).collect();
            v.sort();
            v
        };
        assert_eq!(values(&sheet.rejected), values(&clean.rejected), "{file}");
        sheet.rejected = clean.rejected.clone();
        assert_eq!(sheet, clean, "{file}");
    }
}

fn failing(dir: &Path, file: &str, content: &[u8], extra: &[&str]) -> Ran {
    std::fs::write(dir.join(file), content).expect("write");
    let mut args = vec!["--input", file, "--output", "failed.gpkg"];
    args.extend_from_slice(extra);
    let ran = run_in(dir, "stance-import", &args);
    assert!(!dir.join("failed.gpkg").exists(), "{file}: wrote output");
    ran
}

/// Each misread input stops with exit 2 and one line naming the file, the line and the option.
#[test]
fn failing_dialects_name_file_line_and_option() {
    let dir = out_dir("import_dialects_failing");
    failing(
        &dir,
        "comma.csv",
        b"id;lon;lat;stance\r\n1;-140,25;35,5;oppose\r\n",
        &[],
    )
    .usage_error(&["comma.csv", "line 2", "'-140,25'", "--decimal-comma"]);
    // 0xFC is 'ü' in windows-1252 and never valid alone in UTF-8.
    failing(
        &dir,
        "latin.csv",
        b"id,lon,lat,stance,text\n1,-140.25,35.5,oppose,ok\n2,-140.25,35.5,oppose,M\xFCller\n",
        &["--keep", "text"],
    )
    .usage_error(&["latin.csv", "line 3", "UTF-8", "--encoding"]);
    failing(
        &dir,
        "latin.jsonl",
        b"{\"lon\":-140.2,\"lat\":35.1,\"stance\":\"oppose\",\"t\":\"M\xFCller\"}\n",
        &[],
    )
    .usage_error(&["latin.jsonl", "line 1", "--encoding"]);
    failing(
        &dir,
        "semi.jsonl",
        b"{\"lon\":-140.2,\"lat\":35.1,\"stance\":\"oppose\"}\n",
        &["--delimiter", "semicolon"],
    )
    .usage_error(&["--delimiter", "semi.jsonl", "JSON lines"]);
    failing(
        &dir,
        "x.csv",
        b"lon,lat,stance\n1,2,oppose\n",
        &["--encoding", "klingon"],
    )
    .usage_error(&["--encoding", "klingon", "WHATWG"]);
    failing(
        &dir,
        "dates.csv",
        b"lon,lat,stance,t\n-140.2,35.1,oppose,03/04/2026\n-140.2,35.1,oppose,05/06/2026\n",
        &["--time-field", "t"],
    )
    .usage_error(&["dates.csv", "'t'", "03/04/2026", "--time-format"]);
    failing(
        &dir,
        "swapped.csv",
        b"lon,lat,stance\n35.1,-140.2,oppose\n35.2,-140.3,support\n",
        &[],
    )
    .usage_error(&["swapped.csv", "look swapped", "--x-field", "--y-field"]);
    failing(
        &dir,
        "x.csv",
        b"lon,lat,stance\n1,2,oppose\n",
        &["--time-format", "%Q"],
    )
    .usage_error(&["--time-format"]);
}

/// Day/month-ambiguous dates are counted apart with an example and the fix; with
/// `--time-format` they are read in the stated order; epoch forms are read.
#[test]
fn ambiguous_dates_are_never_guessed_and_time_formats_read_them() {
    let dir = out_dir("import_dialects_dates");
    // 2026-04-03T00:00:00Z = 2026-03-04 (1_772_582_400 s, 20516 days) + 30 days.
    std::fs::write(
        dir.join("d.csv"),
        "id,lon,lat,stance,t\n1,-140.2,35.1,oppose,2026-04-03\n2,-140.2,35.1,oppose,03/04/2026\n",
    )
    .expect("write");
    let run = |args: &[&str]| {
        let mut all = vec![
            "--input",
            "d.csv",
            "--output",
            "d.gpkg",
            "--overwrite",
            "-q",
        ];
        all.extend_from_slice(&["--time-field", "t", "--keep", "id"]);
        all.extend_from_slice(args);
        run_in(&dir, "stance-import", &all).ok()["results"].clone()
    };
    let results = run(&[]);
    assert_eq!(results["dropped_by_reason"]["ambiguous_day_month"], 1);
    assert_eq!(results["warnings"][0]["kind"], "ambiguous_day_month");
    assert_eq!(results["warnings"][0]["example"], "03/04/2026");
    assert_eq!(results["warnings"][0]["fix"], "--time-format");
    let day_first = |dir: &Path| {
        rows(
            &dir.join("d.gpkg"),
            "SELECT id, time_utc FROM records ORDER BY id",
        )
    };
    std::fs::write(
        dir.join("d.csv"),
        "id,lon,lat,stance,t\n1,-140.2,35.1,oppose,03/04/2026\n2,-140.2,35.1,oppose,3/4/2026 14:30\n",
    )
    .expect("write");
    let results = run(&["--time-format", "%d/%m/%Y"]);
    assert_eq!(results["records_written"], 1);
    assert_eq!(day_first(&dir), [["1", "2026-04-03T00:00:00.000Z"]]);
    std::fs::write(
        dir.join("d.csv"),
        "id,lon,lat,stance,t\n1,-140.2,35.1,oppose,1775174400\n2,-140.2,35.1,oppose,1775174400999\n",
    )
    .expect("write");
    // 1_775_174_400 = 1_772_582_400 + 30 × 86_400: 2026-04-03T00:00:00Z.
    run(&["--time-format", "epoch"]);
    let epoch = day_first(&dir);
    assert_eq!(epoch[0], ["1", "2026-04-03T00:00:00.000Z"]);
    run(&["--time-format", "epoch-ms"]);
    assert_eq!(day_first(&dir)[1], ["2", "2026-04-03T00:00:00.000Z"]);
}

/// Latin-1 and UTF-16 text is stored as UTF-8; a malformed JSON line is a dropped row with its
/// line number; nested fields are read by dotted path; swapped and (0, 0) coordinates warn.
#[test]
fn text_is_stored_as_utf8_and_odd_inputs_are_reported() {
    let dir = out_dir("import_dialects_text");
    let text_of = |file: &str, extra: &[&str]| {
        let output = format!("{file}.gpkg");
        let mut args = vec!["--input", file, "--output", &output, "--keep", "text", "-q"];
        args.extend_from_slice(extra);
        let summary = run_in(&dir, "stance-import", &args).ok();
        (
            rows(&dir.join(&output), "SELECT text FROM records"),
            summary,
        )
    };
    // "Müller, café" in windows-1252: ü = FC, é = E9.
    std::fs::write(
        dir.join("l.csv"),
        b"lon;lat;stance;text\n-140,2;35,1;oppose;\"M\xFCller, caf\xE9\"\n",
    )
    .expect("write");
    let (texts, summary) = text_of("l.csv", &["--encoding", "windows-1252", "--decimal-comma"]);
    assert_eq!(texts, [["Müller, café"]]);
    assert_eq!(summary["results"]["read_as"]["encoding"], "windows-1252");
    assert_eq!(summary["results"]["read_as"]["delimiter"], "semicolon");
    let utf16: Vec<u8> = [0xFF, 0xFE]
        .into_iter()
        .chain(
            "lon\tlat\tstance\ttext\r\n-140.2\t35.1\toppose\tMüller\r\n"
                .encode_utf16()
                .flat_map(u16::to_le_bytes),
        )
        .collect();
    std::fs::write(dir.join("u.tsv"), utf16).expect("write");
    assert_eq!(text_of("u.tsv", &[]).0, [["Müller"]]);

    std::fs::write(
        dir.join("n.jsonl"),
        "{\"place\":{\"x\":-140.2,\"y\":35.1},\"stance\":\"oppose\",\"text\":\"a\"}\n{not json\n\n{\"place\":{\"x\":-140.3,\"y\":35.2},\"stance\":\"support\",\"text\":\"b\"}\n",
    )
    .expect("write");
    let (texts, summary) = text_of(
        "n.jsonl",
        &[
            "--x-field",
            "place.x",
            "--y-field",
            "place.y",
            "--rejects",
            "bad",
        ],
    );
    assert_eq!(texts, [["a"], ["b"]]);
    assert_eq!(
        summary["results"]["dropped_by_reason"]["malformed_record"],
        1
    );
    assert_eq!(
        rows(
            &dir.join("n.jsonl.gpkg"),
            "SELECT source_row, reason FROM bad"
        ),
        [["2", "malformed_record"]]
    );

    // Three of four pairs are (lat, lon): out of range as lon/lat, in range swapped.
    std::fs::write(
        dir.join("s.csv"),
        "lon,lat,stance,text\n35.1,-140.2,oppose,a\n35.2,-140.3,oppose,b\n35.3,-140.1,oppose,c\n-140.2,35.1,oppose,d\n",
    )
    .expect("write");
    let (texts, summary) = text_of("s.csv", &[]);
    assert_eq!(texts, [["d"]]);
    let results = &summary["results"];
    assert_eq!(results["dropped_by_reason"]["coordinates_out_of_range"], 3);
    assert_eq!(results["warnings"][0]["kind"], "coordinates_look_swapped");
    assert_eq!(results["warnings"][0]["in_range_swapped"], 3);
    assert_eq!(results["warnings"][0]["pairs"], 4);
    std::fs::write(
        dir.join("z.csv"),
        "lon,lat,stance,text\n0,0,oppose,a\n0.0,0.0,support,b\n",
    )
    .expect("write");
    let (_, summary) = text_of("z.csv", &[]);
    assert_eq!(
        summary["results"]["warnings"][0]["kind"],
        "all_coordinates_at_origin"
    );
    assert_eq!(summary["results"]["warnings"][0]["pairs"], 2);
}

/// A forced delimiter wins over the guess, and quoted fields keep their delimiters and line
/// breaks.
#[test]
fn forced_delimiter_and_quoted_fields() {
    let dir = out_dir("import_dialects_delimiter");
    std::fs::write(
        dir.join("q.txt"),
        "lon|lat|stance|text\n-140.2|35.1|oppose|\"a|b;c,d\nnext line\"\n",
    )
    .expect("write");
    for extra in [&[][..], &["--delimiter", "pipe"][..]] {
        let mut args = vec![
            "--input",
            "q.txt",
            "--output",
            "q.gpkg",
            "--keep",
            "text",
            "-q",
            "--overwrite",
        ];
        args.extend_from_slice(extra);
        let summary = run_in(&dir, "stance-import", &args).ok();
        assert_eq!(summary["results"]["read_as"]["delimiter"], "pipe");
        assert_eq!(
            rows(&dir.join("q.gpkg"), "SELECT text FROM records"),
            [["a|b;c,d\nnext line"]]
        );
    }
    // Forced to a delimiter the file does not use: one column, so no lon column.
    let ran = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "q.txt",
            "--output",
            "r.gpkg",
            "--delimiter",
            "tab",
        ],
    );
    ran.usage_error(&["--x-field"]);
}
