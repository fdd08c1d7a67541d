//! Spatial weights as a GeoPackage attribute table (OGC 12-128r18, §2.4 attributes): one row
//! per directed link with `area_id`, `linked_id` and `weight` (1; standardisation is
//! applied by the tool that uses it): the neighbour list of Cliff & Ord (1981) in table form.

use std::collections::HashMap;
use std::path::Path;

use rusqlite::types::ValueRef;

use super::quote_identifier as q;
use super::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape, Staging, PROVENANCE_URI};
use crate::error::{Error, Result};
use crate::weights::Neighbours;

/// Column of the area whose neighbour the row names.
pub const AREA_COLUMN: &str = "area_id";
/// Column of the neighbour (the linked area).
pub const LINKED_COLUMN: &str = "linked_id";
/// Column of the weight.
pub const WEIGHT_COLUMN: &str = "weight";

/// Stable ids of the areas, aligned with their order.
#[derive(Debug, Clone, PartialEq)]
pub enum AreaIds {
    /// Integer ids (feature ids, or an integer id field).
    Integer(Vec<i64>),
    /// Text ids.
    Text(Vec<String>),
}

impl AreaIds {
    /// Ids from text values: integers when every value parses as one, text otherwise.
    pub fn from_text(values: Vec<String>) -> Self {
        let parsed: Option<Vec<i64>> = values.iter().map(|v| v.trim().parse().ok()).collect();
        match parsed {
            Some(integers) => AreaIds::Integer(integers),
            None => AreaIds::Text(values),
        }
    }

    /// Number of ids.
    pub fn len(&self) -> usize {
        match self {
            AreaIds::Integer(v) => v.len(),
            AreaIds::Text(v) => v.len(),
        }
    }

    /// True when there are no ids.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Id `i` as text (the form in which tables are matched).
    pub fn text(&self, i: usize) -> String {
        match self {
            AreaIds::Integer(v) => v[i].to_string(),
            AreaIds::Text(v) => v[i].clone(),
        }
    }

    /// The first id that appears twice, as text.
    pub fn first_duplicate(&self) -> Option<String> {
        let mut seen = std::collections::HashSet::new();
        (0..self.len())
            .map(|i| self.text(i))
            .find(|t| !seen.insert(t.clone()))
    }
}

/// Stages the weights table `name`: one row (focal id, neighbour id, weight 1) per directed link,
/// focal areas in their order. Islands have no row.
///
/// # Errors
/// Name problems (see [`Staging::check_name`]) or GDAL failures.
pub fn write(
    staging: &mut Staging,
    name: &str,
    ids: &AreaIds,
    neighbours: &Neighbours,
) -> Result<u64> {
    let kind = match ids {
        AreaIds::Integer(_) => FieldKind::Integer,
        AreaIds::Text(_) => FieldKind::Text,
    };
    let fields = [
        FieldDef::new(AREA_COLUMN, kind),
        FieldDef::new(LINKED_COLUMN, kind),
        FieldDef::new(WEIGHT_COLUMN, FieldKind::Real),
    ];
    let mut writer = staging.create_vector(name, GeometryKind::None, None, &fields)?;
    for (i, list) in neighbours.lists.iter().enumerate() {
        for &j in list {
            let j = j as usize;
            match ids {
                AreaIds::Integer(v) => writer.add(
                    Shape::None,
                    &[
                        FieldData::Integer(v[i]),
                        FieldData::Integer(v[j]),
                        FieldData::Real(1.0),
                    ],
                )?,
                AreaIds::Text(v) => writer.add(
                    Shape::None,
                    &[
                        FieldData::Text(&v[i]),
                        FieldData::Text(&v[j]),
                        FieldData::Real(1.0),
                    ],
                )?,
            }
        }
    }
    writer.finish()
}

/// A weights table as read: links by area id (as text), and the id field its provenance names.
#[derive(Debug, Clone, PartialEq)]
pub struct WeightsTable {
    /// Table name as found.
    pub table: String,
    /// (focal id, neighbour id, weight) per row.
    pub links: Vec<(String, String, f64)>,
    /// The `--id-field` recorded in the table's provenance: `Some(None)` for feature ids,
    /// `None` when the table has no stance-toolbox provenance.
    pub id_field: Option<Option<String>>,
}

fn value_text(value: ValueRef<'_>) -> Option<String> {
    match value {
        ValueRef::Null => None,
        ValueRef::Integer(i) => Some(i.to_string()),
        ValueRef::Real(r) if r.fract() == 0.0 && r.abs() < 9e15 => Some((r as i64).to_string()),
        ValueRef::Real(r) => Some(r.to_string()),
        ValueRef::Text(t) => Some(String::from_utf8_lossy(t).into_owned()),
        ValueRef::Blob(_) => None,
    }
}

/// Reads the weights table `table` of the GeoPackage `path`.
///
/// # Errors
/// Missing file or table ([`Error::LayerNotFound`]), a missing column ([`Error::FieldNotFound`]),
/// NULL ids or a weight that is not a finite number ([`Error::BadField`]).
pub fn read(path: &Path, table: &str) -> Result<WeightsTable> {
    let connection = super::open_sqlite_read(path)?;
    let tables = super::list_tables(path)?;
    let found = tables
        .iter()
        .find(|(n, _)| n == table)
        .or_else(|| tables.iter().find(|(n, _)| n.eq_ignore_ascii_case(table)))
        .map(|(n, _)| n.clone())
        .ok_or_else(|| Error::LayerNotFound {
            path: path.to_owned(),
            layer: table.to_owned(),
            available: tables
                .iter()
                .filter(|(_, t)| t == "attributes")
                .map(|(n, _)| n.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        })?;
    let bad = |message: String| Error::BadLayer {
        path: path.to_owned(),
        layer: found.clone(),
        message,
    };
    let mut statement = connection
        .prepare(&format!("PRAGMA table_info({})", q(&found)))
        .map_err(|e| bad(e.to_string()))?;
    let columns: Vec<String> = statement
        .query_map([], |r| r.get::<_, String>(1))
        .and_then(|rows| rows.collect())
        .map_err(|e| bad(e.to_string()))?;
    for wanted in [AREA_COLUMN, LINKED_COLUMN, WEIGHT_COLUMN] {
        if !columns.iter().any(|c| c.eq_ignore_ascii_case(wanted)) {
            return Err(Error::FieldNotFound {
                path: path.to_owned(),
                layer: found.clone(),
                field: wanted.to_owned(),
                available: format!(
                    "{}; expected a weights table from stance-weights",
                    columns.join(", ")
                ),
            });
        }
    }
    let mut statement = connection
        .prepare(&format!(
            "SELECT {}, {}, {} FROM {} ORDER BY rowid",
            q(AREA_COLUMN),
            q(LINKED_COLUMN),
            q(WEIGHT_COLUMN),
            q(&found)
        ))
        .map_err(|e| bad(e.to_string()))?;
    let mut rows = statement.query([]).map_err(|e| bad(e.to_string()))?;
    let mut links = Vec::new();
    let field_error = |field: &str, message: String| Error::BadField {
        path: path.to_owned(),
        layer: found.clone(),
        field: field.to_owned(),
        message,
    };
    let mut row_number = 0u64;
    while let Some(row) = rows.next().map_err(|e| bad(e.to_string()))? {
        row_number += 1;
        let focal = value_text(row.get_ref(0).map_err(|e| bad(e.to_string()))?)
            .ok_or_else(|| field_error(AREA_COLUMN, format!("row {row_number} has no id")))?;
        let neighbour = value_text(row.get_ref(1).map_err(|e| bad(e.to_string()))?)
            .ok_or_else(|| field_error(LINKED_COLUMN, format!("row {row_number} has no id")))?;
        let weight = match row.get_ref(2).map_err(|e| bad(e.to_string()))? {
            ValueRef::Integer(i) => i as f64,
            ValueRef::Real(r) if r.is_finite() => r,
            _ => {
                return Err(field_error(
                    WEIGHT_COLUMN,
                    format!("row {row_number}: expected a finite number"),
                ))
            }
        };
        links.push((focal, neighbour, weight));
    }
    drop(rows);
    drop(statement);
    let id_field = provenance_id_field(&connection, &found);
    Ok(WeightsTable {
        table: found,
        links,
        id_field,
    })
}

/// The `id-field` parameter in the newest stance-toolbox provenance record of `table`.
fn provenance_id_field(connection: &rusqlite::Connection, table: &str) -> Option<Option<String>> {
    let record: String = connection
        .query_row(
            "SELECT m.metadata FROM gpkg_metadata m JOIN gpkg_metadata_reference r ON r.md_file_id = m.id
             WHERE lower(r.table_name) = lower(?1) AND m.md_standard_uri = ?2 ORDER BY m.id DESC LIMIT 1",
            rusqlite::params![table, PROVENANCE_URI],
            |r| r.get(0),
        )
        .ok()?;
    let value: serde_json::Value = serde_json::from_str(&record).ok()?;
    let parameters = value.get("parameters")?;
    Some(
        parameters
            .get("id-field")
            .and_then(|v| v.as_str())
            .map(str::to_owned),
    )
}

impl WeightsTable {
    /// Neighbour lists over areas with `ids` (text form, aligned with the areas). Areas with no
    /// row are islands. Weights other than 1 are reported, as the lists keep only the links.
    ///
    /// # Errors
    /// A message naming the first id of the table that is not among `ids`.
    pub fn neighbours(&self, ids: &AreaIds) -> std::result::Result<Neighbours, String> {
        let index: HashMap<String, u32> = (0..ids.len()).map(|i| (ids.text(i), i as u32)).collect();
        let mut links = Vec::with_capacity(self.links.len());
        for (focal, neighbour, _) in &self.links {
            let a = index.get(focal).ok_or_else(|| {
                format!("id '{focal}' of the weights table is not an area of the layer")
            })?;
            let b = index.get(neighbour).ok_or_else(|| {
                format!("id '{neighbour}' of the weights table is not an area of the layer")
            })?;
            links.push((*a, *b));
        }
        Ok(Neighbours::from_links(ids.len(), links))
    }
}
