//! Reading a period table (`<name>_periods`, written by stance-trend): one row per unit and
//! period with the share of the case class and its interval, and the case class the table
//! was made for (from its provenance record).

use std::path::Path;

use stance_core::error::{Error, Result};
use stance_core::gpkg::{list_tables, open_sqlite_read, quote_identifier};

use crate::params::UnitKind;

/// The fields a chart needs.
pub const NEEDED: [&str; 7] = [
    "unit_kind",
    "unit",
    "period",
    "period_start",
    "share",
    "share_low",
    "share_high",
];

/// One row of a period table.
#[derive(Debug, Clone, PartialEq)]
pub struct PeriodRow {
    /// Whole study area, area or cluster.
    pub kind: UnitKind,
    /// The unit (`all`, an area id, a cluster number).
    pub unit: String,
    /// The period (`Period::label`).
    pub period: String,
    /// RFC 3339 start of the period (orders the periods).
    pub start: String,
    /// Share of the case class (NULL when no one is at risk).
    pub share: Option<f64>,
    /// Low end of its interval.
    pub low: Option<f64>,
    /// High end of its interval.
    pub high: Option<f64>,
}

/// Checks that `table` is an attribute or feature table of `path` holding every [`NEEDED`]
/// field.
fn check_table(path: &Path, table: &str) -> Result<()> {
    let tables = list_tables(path)?;
    if !tables
        .iter()
        .any(|(t, kind)| t == table && (kind == "attributes" || kind == "features"))
    {
        let available: Vec<&str> = tables
            .iter()
            .filter(|(_, k)| k == "attributes")
            .map(|(t, _)| t.as_str())
            .collect();
        return Err(Error::LayerNotFound {
            path: path.to_owned(),
            layer: table.to_owned(),
            available: if available.is_empty() {
                "no attribute tables; stance-trend writes <name>_periods".into()
            } else {
                available.join(", ")
            },
        });
    }
    let connection = open_sqlite_read(path)?;
    let columns: Vec<String> = connection
        .prepare("SELECT name FROM pragma_table_info(?1)")
        .and_then(|mut s| {
            s.query_map([table], |r| r.get::<_, String>(0))?
                .collect::<std::result::Result<Vec<_>, _>>()
        })
        .map_err(Error::sqlite(format!("reading the fields of '{table}'")))?;
    if let Some(missing) = NEEDED
        .iter()
        .find(|f| !columns.iter().any(|c| c.eq_ignore_ascii_case(f)))
    {
        return Err(Error::FieldNotFound {
            path: path.to_owned(),
            layer: table.to_owned(),
            field: (*missing).to_owned(),
            available: columns.join(", "),
        });
    }
    Ok(())
}

/// Every row of period table `table`, ordered by period start, unit kind and unit.
///
/// # Errors
/// The table or one of its [`NEEDED`] fields is missing, a `unit_kind` is not one of
/// `study_area`, `area`, `cluster`, or the table has no rows.
pub fn read_period_table(path: &Path, table: &str) -> Result<Vec<PeriodRow>> {
    check_table(path, table)?;
    let connection = open_sqlite_read(path)?;
    let sql = format!(
        "SELECT {} FROM {} ORDER BY period_start, unit_kind, unit",
        NEEDED.join(", "),
        quote_identifier(table)
    );
    type Raw = (
        Option<String>,
        Option<String>,
        Option<String>,
        Option<String>,
        Option<f64>,
        Option<f64>,
        Option<f64>,
    );
    let raw: Vec<Raw> = connection
        .prepare(&sql)
        .and_then(|mut s| {
            s.query_map([], |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                    r.get(6)?,
                ))
            })?
            .collect::<std::result::Result<Vec<_>, _>>()
        })
        .map_err(|e| Error::BadLayer {
            path: path.to_owned(),
            layer: table.to_owned(),
            message: format!("cannot be read as a period table ({e})"),
        })?;
    let bad_field = |field: &str, message: String| Error::BadField {
        path: path.to_owned(),
        layer: table.to_owned(),
        field: field.to_owned(),
        message,
    };
    if raw.is_empty() {
        return Err(Error::BadLayer {
            path: path.to_owned(),
            layer: table.to_owned(),
            message: "has no rows; nothing to draw".into(),
        });
    }
    raw.into_iter()
        .map(|(kind, unit, period, start, share, low, high)| {
            let kind_text = kind.unwrap_or_default();
            let kind = UnitKind::parse(&kind_text).ok_or_else(|| {
                bad_field(
                    "unit_kind",
                    format!("value '{kind_text}'; expected study_area, area or cluster"),
                )
            })?;
            Ok(PeriodRow {
                kind,
                unit: unit.unwrap_or_default().trim().to_owned(),
                period: period.unwrap_or_default(),
                start: start.unwrap_or_default(),
                share,
                low,
                high,
            })
        })
        .collect()
}

/// The case class a table was made for, from the parameters in its provenance record
/// (`case-class`); `None` when the file keeps no such record.
pub fn case_class_of(path: &Path, table: &str) -> Option<String> {
    stance_core::gpkg::provenance_of(path, table)?["parameters"]["case-class"]
        .as_str()
        .map(str::to_owned)
}

/// The level of the table's intervals, 1 − `alpha` of the run that wrote it (e.g. 0.95).
pub fn interval_level_of(path: &Path, table: &str) -> Option<f64> {
    let alpha = stance_core::gpkg::provenance_of(path, table)?["parameters"]["alpha"].as_f64()?;
    (alpha > 0.0 && alpha < 1.0).then_some(1.0 - alpha)
}
