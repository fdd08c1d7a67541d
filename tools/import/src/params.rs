//! Parameters of stance-import and their check into a validated configuration.

use stance_core::error::{Error, Result};
use stance_core::stance::ClassMap;

use crate::checks::Rules;
use crate::source::{encoding_for_label, Dialect, Fields, GeometryColumns, Request};
use crate::times::TimeFormat;

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

    /// Text and spreadsheet input: column of longitudes or x (default: the first of lon, lng,
    /// long, longitude, x); in JSON lines a dotted path such as `location.lon`.
    #[arg(long, value_name = "FIELD")]
    pub x_field: Option<String>,

    /// Text and spreadsheet input: column of latitudes or y (default: the first of lat,
    /// latitude, y); in JSON lines a dotted path such as `location.lat`.
    #[arg(long, value_name = "FIELD")]
    pub y_field: Option<String>,

    /// Text and spreadsheet input: column of WKT point geometries (ISO/IEC 13249-3), instead of
    /// x/y columns.
    #[arg(long, value_name = "FIELD")]
    pub wkt_field: Option<String>,

    /// CRS of the input coordinates (default: EPSG:4326 for CSV, the layer's CRS otherwise).
    #[arg(long, value_name = "CRS")]
    pub source_crs: Option<String>,

    /// Field holding the record's date or date-time (RFC 3339 / ISO 8601 unless --time-format
    /// says otherwise); written as UTC. JSON lines: a dotted path such as `meta.created`.
    #[arg(long, value_name = "FIELD")]
    pub time_field: Option<String>,

    /// How the times are written when not RFC 3339 / ISO 8601: a strftime-style pattern (e.g.
    /// `%d/%m/%Y %H:%M`, taken as UTC unless it has `%z`), `epoch` (seconds since 1970, Unix
    /// time) or `epoch-ms` (milliseconds). Without it a day/month-ambiguous date such as
    /// 03/04/2026 is never guessed: its row is dropped as ambiguous_day_month.
    #[arg(long, value_name = "FORMAT")]
    pub time_format: Option<String>,

    /// Delimited text: the field delimiter, `comma`, `semicolon`, `tab` or `pipe` (default:
    /// guessed from the header and the first rows among these four; RFC 4180 quoting).
    #[arg(long, value_name = "DELIMITER")]
    pub delimiter: Option<DelimiterChoice>,

    /// Text input: its character encoding, a WHATWG Encoding Standard label such as
    /// `windows-1252`, `iso-8859-1` or `iso-8859-15` (default: UTF-8, or UTF-16 when the file
    /// starts with its byte-order mark; a byte-order mark always wins). Stored as UTF-8.
    #[arg(long, value_name = "LABEL")]
    pub encoding: Option<String>,

    /// Coordinates are written with a decimal comma (`12,7`), as in semicolon-separated
    /// exports; without it such values stop the import with an error naming the line.
    #[arg(long)]
    pub decimal_comma: bool,

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
    #[arg(
        long,
        value_name = "LEVEL,…",
        default_value = "exact,street,town,district"
    )]
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

/// A field delimiter of delimited text.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum DelimiterChoice {
    /// `,` (RFC 4180).
    Comma,
    /// `;`, usual where the comma is the decimal separator.
    Semicolon,
    /// A tab character (tab-separated values).
    Tab,
    /// `|`.
    Pipe,
}

impl DelimiterChoice {
    fn byte(self) -> u8 {
        match self {
            DelimiterChoice::Comma => b',',
            DelimiterChoice::Semicolon => b';',
            DelimiterChoice::Tab => b'\t',
            DelimiterChoice::Pipe => b'|',
        }
    }
}

/// Validated parameters.
#[derive(Debug, Clone)]
pub struct ImportConfig {
    /// What to read from the input.
    pub request: Request,
    /// Stance class mapping.
    pub classes: ClassMap,
    /// How the mapping is shown in messages (the `--classes` text, or the default's).
    pub classes_shown: String,
    /// Quality levels from best to worst (lower-cased), when a quality field is read.
    pub quality_levels: Option<Vec<String>>,
    /// Index in the levels of the worst level kept.
    pub min_quality_index: Option<usize>,
    /// At most this many records per author.
    pub max_per_author: Option<usize>,
    /// Name of the records layer.
    pub records_layer: String,
    /// Output field names of the kept fields, in `--keep` order.
    pub kept_columns: Vec<String>,
    /// Name of the rejects table, when asked for.
    pub rejects: Option<String>,
    /// How times are written.
    pub time_format: TimeFormat,
}

impl ImportParams {
    /// Checks the parameters once, at the border; `records_layer` is the output layer's name.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option and what was expected.
    pub fn check(&self, records_layer: &str) -> Result<ImportConfig> {
        let classes = match &self.classes {
            Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
            None => ClassMap::default(),
        };
        let order = self.quality_levels()?;
        let min_quality_index = self.min_quality_index(&order)?;
        if self.max_per_author == Some(0) {
            return Err(Error::argument("--max-per-author", "must be at least 1"));
        }
        if self.max_per_author.is_some() && self.author_field.is_none() {
            return Err(Error::argument("--max-per-author", "needs --author-field"));
        }
        if let Some(rejects) = &self.rejects {
            stance_core::gpkg::check_layer_name(rejects, "--rejects")?;
            if rejects == records_layer {
                return Err(Error::argument(
                    "--rejects",
                    format!("'{records_layer}' is also the records layer; choose another name"),
                ));
            }
        }
        let keep = split_list(self.keep.as_deref());
        let time_format = match &self.time_format {
            None => TimeFormat::Iso,
            Some(_) if self.time_field.is_none() => {
                return Err(Error::argument("--time-format", "needs --time-field"))
            }
            Some(f) => {
                TimeFormat::parse_option(f).map_err(|m| Error::argument("--time-format", m))?
            }
        };
        let dialect = Dialect {
            delimiter: self.delimiter.map(DelimiterChoice::byte),
            encoding: self
                .encoding
                .as_deref()
                .map(encoding_for_label)
                .transpose()?,
            decimal_comma: self.decimal_comma,
        };
        Ok(ImportConfig {
            time_format,
            kept_columns: kept_columns(&keep, &self.leading_columns())?,
            request: self.request(keep, dialect),
            classes_shown: match &self.classes {
                Some(spec) => spec.clone(),
                None => classes.describe(),
            },
            classes,
            quality_levels: self.quality_field.as_ref().map(|_| order),
            min_quality_index,
            max_per_author: self.max_per_author,
            records_layer: records_layer.to_owned(),
            rejects: self.rejects.clone(),
        })
    }

    fn quality_levels(&self) -> Result<Vec<String>> {
        let order: Vec<String> = split_list(Some(&self.quality_order))
            .iter()
            .map(|l| l.to_lowercase())
            .collect();
        if order.is_empty() {
            return Err(Error::argument(
                "--quality-order",
                "is empty; expected levels from best to worst, e.g. exact,street,town,district",
            ));
        }
        Ok(order)
    }

    fn min_quality_index(&self, order: &[String]) -> Result<Option<usize>> {
        let Some(level) = &self.min_quality else {
            return Ok(None);
        };
        if self.quality_field.is_none() {
            return Err(Error::argument("--min-quality", "needs --quality-field"));
        }
        let wanted = level.trim().to_lowercase();
        match order.iter().position(|l| *l == wanted) {
            Some(index) => Ok(Some(index)),
            None => Err(Error::argument(
                "--min-quality",
                format!("'{level}' is not one of the levels {}", order.join(",")),
            )),
        }
    }

    /// The records layer's fields before the kept ones.
    fn leading_columns(&self) -> Vec<&'static str> {
        let mut columns = vec!["stance", "stance_value"];
        if self.time_field.is_some() {
            columns.push("time_utc");
        }
        if self.quality_field.is_some() {
            columns.push("quality");
        }
        columns
    }

    fn request(&self, keep: Vec<String>, dialect: Dialect) -> Request {
        Request {
            geometry: GeometryColumns {
                x: self.x_field.clone(),
                y: self.y_field.clone(),
                wkt: self.wkt_field.clone(),
            },
            source_crs: self.source_crs.clone(),
            fields: Fields {
                stance: self.stance_field.clone(),
                time: self.time_field.clone(),
                author: self.author_field.clone(),
                text: self.text_field.clone(),
                quality: self.quality_field.clone(),
                keep,
            },
            dialect,
        }
    }
}

impl ImportConfig {
    /// The row checks, once the source tells whether its coordinates are geographic.
    pub fn rules(&self, geographic: bool) -> Rules {
        let fields = &self.request.fields;
        Rules {
            classes: self.classes.clone(),
            geographic,
            uses_time: fields.time.is_some(),
            time_format: self.time_format.clone(),
            quality_order: self.quality_levels.clone(),
            min_quality_index: self.min_quality_index,
            drop_duplicates: fields.author.is_some() && fields.text.is_some(),
            max_per_author: self.max_per_author,
        }
    }
}

/// Trimmed, non-empty items of a comma-separated list.
fn split_list(list: Option<&str>) -> Vec<String> {
    list.map(|k| {
        k.split(',')
            .map(|f| f.trim().to_owned())
            .filter(|f| !f.is_empty())
            .collect()
    })
    .unwrap_or_default()
}

/// Output names of the kept fields: lower case, anything but ASCII letters and digits as `_`;
/// refused when one clashes with a `leading` field or another kept field.
fn kept_columns(keep: &[String], leading: &[&str]) -> Result<Vec<String>> {
    let mut columns: Vec<String> = Vec::with_capacity(keep.len());
    for k in keep {
        let clean = k
            .to_lowercase()
            .replace(|c: char| !c.is_ascii_alphanumeric(), "_");
        if leading.contains(&clean.as_str()) || columns.contains(&clean) {
            return Err(Error::argument(
                "--keep",
                format!("field '{k}' clashes with an output field '{clean}'"),
            ));
        }
        columns.push(clean);
    }
    Ok(columns)
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Cli {
        #[command(flatten)]
        params: ImportParams,
    }

    fn params(args: &[&str]) -> ImportParams {
        let argv = std::iter::once("stance-import").chain(args.iter().copied());
        Cli::parse_from(argv).params
    }

    fn message(result: Result<ImportConfig>) -> String {
        result.err().map(|e| e.to_string()).unwrap_or_default()
    }

    #[test]
    fn default_quality_levels_are_ours_from_best_to_worst() {
        let config = params(&["--quality-field", "q", "--min-quality", "Town"])
            .check("records")
            .expect("valid");
        let levels = config.quality_levels.expect("levels");
        assert_eq!(levels, ["exact", "street", "town", "district"]);
        assert_eq!(config.min_quality_index, Some(2));
        // Without a quality field no level is read.
        let config = params(&[]).check("records").expect("valid");
        assert!(config.quality_levels.is_none());
    }

    #[test]
    fn bad_options_are_refused_naming_the_option() {
        let refused = |args: &[&str], expected: &[&str]| {
            let text = message(params(args).check("records"));
            for part in expected {
                assert!(text.contains(part), "{args:?}: {text}");
            }
        };
        refused(
            &["--quality-field", "q", "--min-quality", "place"],
            &["--min-quality", "'place'", "exact,street,town,district"],
        );
        refused(
            &["--min-quality", "town"],
            &["--min-quality", "--quality-field"],
        );
        refused(
            &["--quality-order", " , "],
            &["--quality-order", "is empty"],
        );
        refused(
            &["--max-per-author", "0"],
            &["--max-per-author", "at least 1"],
        );
        refused(&["--max-per-author", "3"], &["--author-field"]);
        refused(&["--rejects", "records"], &["--rejects", "records layer"]);
        refused(&["--keep", "Stance"], &["--keep", "'stance'"]);
        refused(&["--keep", "a b,a-b"], &["--keep", "'a_b'"]);
        refused(
            &["--time-field", "t", "--keep", "time utc"],
            &["--keep", "'time_utc'"],
        );
    }

    #[test]
    fn kept_fields_get_clean_names_and_optional_columns_free_theirs() {
        // time_utc is only an output field when a time field is read.
        let config = params(&["--keep", "Time UTC, region-code ,"])
            .check("records")
            .expect("valid");
        assert_eq!(config.kept_columns, ["time_utc", "region_code"]);
        assert_eq!(config.request.fields.keep, ["Time UTC", "region-code"]);
    }
}
