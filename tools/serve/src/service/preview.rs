//! Preview maps of a job's output: which layers can be drawn (surfaces, and polygon layers with
//! a numeric field), and the arguments of the built-in render tool that draws one as a PNG.

use std::ffi::OsString;
use std::path::Path;

use rusqlite::{Connection, OpenFlags};
use serde_json::{json, Value};

/// A layer that can be previewed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Layer {
    /// Table name.
    pub name: String,
    /// `Some(field)` for a polygon layer drawn as a choropleth of its first numeric field;
    /// `None` for a surface (coverage).
    pub field: Option<String>,
}

impl Layer {
    /// As stored in the job table and listed in the page.
    pub fn to_json(&self) -> Value {
        match &self.field {
            None => json!({"layer": self.name, "kind": "surface"}),
            Some(field) => json!({"layer": self.name, "kind": "areas", "field": field}),
        }
    }

    /// Back from [`Layer::to_json`].
    pub fn from_json(value: &Value) -> Option<Layer> {
        Some(Layer {
            name: value["layer"].as_str()?.to_owned(),
            field: value["field"].as_str().map(str::to_owned),
        })
    }

    /// The render tool's arguments (after `render`) drawing this layer of `input` (a path as
    /// the tool sees it) into `png`, with its own scratch GeoPackage `output`.
    pub fn render_args(&self, input: &Path, output: &str, png: &str) -> Vec<OsString> {
        let mut arg = OsString::from("--input=");
        arg.push(input.as_os_str());
        let mut args = vec![
            arg,
            OsString::from(format!("--output={output}")),
            OsString::from(format!("--png={png}")),
            OsString::from("--overwrite"),
            OsString::from("--quiet"),
            OsString::from("--width-px=800"),
        ];
        match &self.field {
            None => args.push(OsString::from(format!("--surface={}", self.name))),
            Some(field) => {
                args.push(OsString::from(format!("--areas={}", self.name)));
                args.push(OsString::from(format!("--field={field}")));
            }
        }
        args
    }
}

/// The layers among `names` (those a run wrote) of GeoPackage `gpkg` that can be previewed.
/// Unreadable files give none.
pub fn layers(gpkg: &Path, names: &[String]) -> Vec<Layer> {
    let Ok(db) = Connection::open_with_flags(gpkg, OpenFlags::SQLITE_OPEN_READ_ONLY) else {
        return Vec::new();
    };
    names.iter().filter_map(|name| layer(&db, name)).collect()
}

fn layer(db: &Connection, name: &str) -> Option<Layer> {
    let data_type: String = db
        .query_row(
            "SELECT data_type FROM gpkg_contents WHERE table_name = ?1",
            [name],
            |r| r.get(0),
        )
        .ok()?;
    if data_type == "2d-gridded-coverage" {
        return Some(Layer {
            name: name.to_owned(),
            field: None,
        });
    }
    if data_type != "features" {
        return None;
    }
    let (geometry_type, geometry_column): (String, String) = db
        .query_row(
            "SELECT geometry_type_name, column_name FROM gpkg_geometry_columns
             WHERE table_name = ?1",
            [name],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .ok()?;
    if !geometry_type.to_ascii_uppercase().contains("POLYGON") {
        return None;
    }
    let field = first_numeric_field(db, name, &geometry_column)?;
    Some(Layer {
        name: name.to_owned(),
        field: Some(field),
    })
}

/// The first column of `table` declared numeric that is neither its key nor its geometry.
fn first_numeric_field(db: &Connection, table: &str, geometry: &str) -> Option<String> {
    let quoted = table.replace('"', "\"\"");
    let mut statement = db
        .prepare(&format!(
            "SELECT name, type, pk FROM pragma_table_info(\"{quoted}\")"
        ))
        .ok()?;
    let columns = statement
        .query_map([], |r| {
            Ok((
                r.get::<_, String>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, i64>(2)?,
            ))
        })
        .ok()?;
    for (name, declared, pk) in columns.flatten() {
        let declared = declared.to_ascii_uppercase();
        let numeric = ["INT", "REAL", "DOUBLE", "FLOAT", "NUMERIC"]
            .iter()
            .any(|t| declared.contains(t));
        if numeric && pk == 0 && name != geometry {
            return Some(name);
        }
    }
    None
}

/// Whether `name` is safe as a layer in a preview file name and render argument.
pub fn valid_layer_name(name: &str) -> bool {
    !name.is_empty()
        && name.len() <= 200
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn surfaces_and_polygon_layers_with_a_numeric_field_can_be_previewed() {
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("o.gpkg");
        let db = Connection::open(&path).expect("open");
        // The GeoPackage system tables (OGC 12-128r18, tables 4 and 6), only the columns read.
        db.execute_batch(
            "CREATE TABLE gpkg_contents (table_name TEXT PRIMARY KEY, data_type TEXT);
             CREATE TABLE gpkg_geometry_columns (table_name TEXT, column_name TEXT,
                 geometry_type_name TEXT);
             INSERT INTO gpkg_contents VALUES ('s', '2d-gridded-coverage'), ('areas', 'features'),
                 ('pts', 'features'), ('tbl', 'attributes'), ('names', 'features');
             INSERT INTO gpkg_geometry_columns VALUES ('areas', 'geom', 'MULTIPOLYGON'),
                 ('pts', 'geom', 'POINT'), ('names', 'geom', 'POLYGON');
             CREATE TABLE areas (fid INTEGER PRIMARY KEY, geom BLOB, name TEXT, rate REAL);
             CREATE TABLE names (fid INTEGER PRIMARY KEY, geom BLOB, name TEXT);",
        )
        .expect("tables");
        drop(db);
        let names: Vec<String> = ["s", "areas", "pts", "tbl", "names", "absent"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        let found = layers(&path, &names);
        assert_eq!(
            found,
            [
                Layer {
                    name: "s".into(),
                    field: None
                },
                Layer {
                    name: "areas".into(),
                    field: Some("rate".into())
                },
            ]
        );
        for layer in &found {
            assert_eq!(Layer::from_json(&layer.to_json()).as_ref(), Some(layer));
        }
        let args = found[1].render_args(Path::new("../../files/x.gpkg"), "p.gpkg", "p.png");
        assert!(args.contains(&OsString::from("--areas=areas")));
        assert!(args.contains(&OsString::from("--field=rate")));
        assert!(layers(&dir.path().join("missing.gpkg"), &names).is_empty());
    }

    #[test]
    fn layer_names_in_urls_are_plain() {
        assert!(valid_layer_name("density_support"));
        for bad in ["", "../x", "a b", "a.png", "a/b"] {
            assert!(!valid_layer_name(bad), "{bad}");
        }
    }
}
