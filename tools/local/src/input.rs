//! Reading the places (areas or point records), their attributes or values, and their
//! neighbours, through the shared readers and input rules.

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::gpkg::read::{
    read_points, read_polygons, Column, FieldWant, PointLayer, PolygonCrs, PolygonLayer,
};
use stance_core::gpkg::weights_table::WeightsTable;
use stance_core::host::Run;
use stance_core::stance::{classify_codes, ClassMap};
use stance_core::weights::{self, Method, Neighbours};

use crate::params::{Analysis, Attribute, Config, Places};
use stance_core::host::neighbours::WeightsSource;

/// The layer read, in the working CRS.
pub enum Layer {
    /// Polygons.
    Areas(PolygonLayer),
    /// Point records.
    Points(PointLayer),
}

/// The places read, with the fields asked for.
pub struct Input {
    /// File of the layer.
    pub path: PathBuf,
    /// The layer.
    pub layer: Layer,
    /// Names of the columns read, in order.
    pub fields: Vec<String>,
}

impl Input {
    /// Layer name.
    pub fn name(&self) -> &str {
        match &self.layer {
            Layer::Areas(l) => &l.layer,
            Layer::Points(l) => &l.layer,
        }
    }

    /// Feature ids in reading order.
    pub fn fids(&self) -> &[i64] {
        match &self.layer {
            Layer::Areas(l) => &l.fids,
            Layer::Points(l) => &l.fids,
        }
    }

    fn column(&self, field: &str) -> Result<&Column> {
        let columns = match &self.layer {
            Layer::Areas(l) => &l.columns,
            Layer::Points(l) => &l.columns,
        };
        self.fields
            .iter()
            .position(|f| f == field)
            .and_then(|i| columns.get(i))
            .ok_or_else(|| Error::Failed(format!("field '{field}' was not read")))
    }

    fn bad_field(&self, field: &str, message: String) -> Error {
        Error::BadField {
            path: self.path.clone(),
            layer: self.name().to_owned(),
            field: field.to_owned(),
            message,
        }
    }

    /// Whether each place has `attribute`.
    ///
    /// # Errors
    /// [`Error::BadField`] for a missing number or an unknown stance label.
    pub fn binary(&self, attribute: &Attribute, classes: &ClassMap) -> Result<Vec<bool>> {
        match attribute {
            Attribute::Threshold { field, rule } => {
                let Column::Real(values) = self.column(field)? else {
                    return Err(Error::Failed(format!(
                        "field '{field}' was not read as numbers"
                    )));
                };
                values
                    .iter()
                    .zip(self.fids())
                    .map(|(v, fid)| match v {
                        Some(x) if x.is_finite() => Ok(rule.holds(*x)),
                        _ => Err(self.bad_field(
                            field,
                            format!(
                                "feature {fid} has no finite value; the rule '{rule}' needs one"
                            ),
                        )),
                    })
                    .collect()
            }
            Attribute::Class { field, class } => {
                let Column::Text(column) = self.column(field)? else {
                    return Err(Error::Failed(format!(
                        "field '{field}' was not read as text"
                    )));
                };
                let by_code = classify_codes(classes, &column.values, &column.codes)
                    .map_err(|m| self.bad_field(field, m))?;
                Ok(column
                    .codes
                    .iter()
                    .map(|c| by_code.get(*c as usize) == Some(class))
                    .collect())
            }
        }
    }

    /// The values of a numeric field of the areas (every one finite).
    ///
    /// # Errors
    /// [`Error::BadField`] naming the first feature without a finite value.
    pub fn values(&self, field: &str) -> Result<Vec<f64>> {
        match &self.layer {
            Layer::Areas(l) => areas::finite(&self.path, l, field, self.column(field)?),
            Layer::Points(_) => Err(Error::Failed("values are read from areas".into())),
        }
    }
}

/// The fields to read: the attributes' or the values' field, then the id field.
fn wanted(config: &Config, id_field: Option<&str>) -> Vec<(String, FieldWant)> {
    let mut out: Vec<(String, FieldWant)> = Vec::new();
    let mut add = |name: &str, want| {
        if !out.iter().any(|(n, _)| n == name) {
            out.push((name.to_owned(), want));
        }
    };
    match &config.analysis {
        Analysis::Getis { field, .. } => add(field, FieldWant::Real),
        Analysis::Joins { a, b, .. } => {
            for attribute in std::iter::once(a).chain(b) {
                match attribute {
                    Attribute::Threshold { field, .. } => add(field, FieldWant::Real),
                    Attribute::Class { field, .. } => add(field, FieldWant::Text),
                }
            }
        }
    }
    if let Some(id) = id_field {
        add(id, FieldWant::Text);
    }
    out
}

/// Reads the areas or the point records in the working CRS.
///
/// # Errors
/// As the shared readers: missing file, layer or field, wrong geometry, bad CRS.
pub fn read(config: &Config, id_field: Option<&str>, run: &mut Run) -> Result<Input> {
    let path = run.input()?.to_owned();
    let want = wanted(config, id_field);
    let fields: Vec<(&str, FieldWant)> = want.iter().map(|(n, w)| (n.as_str(), *w)).collect();
    let layer = match config.places {
        Places::Areas => Layer::Areas(read_polygons(
            &path,
            run.common.layer.as_deref(),
            &fields,
            PolygonCrs::Working(run.common.crs.as_deref()),
        )?),
        Places::Points => Layer::Points(read_points(
            &path,
            run.common.layer.as_deref(),
            &fields,
            run.common.crs.as_deref(),
        )?),
    };
    let input = Input {
        path,
        layer,
        fields: want.into_iter().map(|(n, _)| n).collect(),
    };
    run.note_input_layer(input.name());
    run.debug(format!("read {} places", input.fids().len()));
    Ok(input)
}

/// The neighbours of the places and where they came from.
pub struct Links {
    /// Neighbour lists.
    pub neighbours: Neighbours,
    /// "table … in …" or "… built here".
    pub source: String,
    /// The id field that matched the table's ids.
    pub id_field: Option<String>,
    /// The working CRS the neighbours were built in (None for a table).
    pub crs: Option<String>,
}

/// The weights table named by `--weights`, with its file (default: the input).
///
/// # Errors
/// A missing or malformed table.
pub fn read_table(config: &Config, run: &mut Run) -> Result<Option<(PathBuf, WeightsTable)>> {
    let WeightsSource::Table { name, file } = &config.weights else {
        return Ok(None);
    };
    let input = run.input()?.to_owned();
    run.weights_table(name, file.as_deref(), &input).map(Some)
}

/// The neighbours: from the table, matched by id, or built in the working CRS.
///
/// # Errors
/// Ids of the table that are not places; a builder's refusal (e.g. k too large).
pub fn neighbours(
    config: &Config,
    input: &Input,
    table: Option<(PathBuf, WeightsTable)>,
    id_field: Option<String>,
) -> Result<Links> {
    if let (Some((path, table)), Layer::Areas(layer)) = (table, &input.layer) {
        let id = match id_field.as_deref() {
            Some(f) => Some((f, input.column(f)?)),
            None => None,
        };
        let ids = areas::area_ids(&input.path, layer, id)?;
        let neighbours = areas::table_neighbours(&path, &table, &ids, id_field.as_deref())?;
        return Ok(Links {
            neighbours,
            source: format!("table {} in {}", table.table, path.display()),
            id_field,
            crs: None,
        });
    }
    let WeightsSource::Built { method, snap_m } = config.weights else {
        return Err(Error::Failed("weights table expected".into()));
    };
    let refused = |e: weights::WeightsError| Error::argument("--method", e.to_string());
    let (neighbours, srs) = match &input.layer {
        Layer::Areas(l) => (
            weights::build(&l.polygons, method, snap_m).map_err(refused)?,
            &l.srs,
        ),
        Layer::Points(p) => {
            let built = match method {
                Method::KNearest(k) => weights::k_nearest(&p.x, &p.y, k),
                Method::DistanceBand(d) => weights::distance_band(&p.x, &p.y, d),
                _ => return Err(Error::argument("--method", "points need knn or distance")),
            };
            (built.map_err(refused)?, &p.srs)
        }
    };
    Ok(Links {
        neighbours,
        source: format!("{method:?} built here").to_lowercase(),
        id_field,
        crs: Some(stance_core::gpkg::crs::summary_text(srs)),
    })
}
