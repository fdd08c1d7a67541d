//! Reading the areas, the point records and the weights table of a stance-rates run, and
//! counting the records per area. The areas are read into the working CRS (the points' when
//! points are counted), so contiguity tolerances are metres whatever the layers' own CRS.

use std::path::PathBuf;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{self, Column, FieldWant, PointLayer, PolygonCrs, PolygonLayer};
use stance_core::gpkg::weights_table::WeightsTable;
use stance_core::gpkg::{areas, crs};
use stance_core::host::Run;
use stance_core::stance::{classify_codes, Stance};

use crate::params::{AtRisk, Config, LocalNeighbours, Source};

/// The areas as read.
pub struct Areas {
    /// Their file.
    pub path: PathBuf,
    /// The layer, in the working CRS.
    pub layer: PolygonLayer,
    /// The fields read, in the order of `layer.columns`.
    pub fields: Vec<String>,
    /// Features that are not valid polygons.
    pub invalid: usize,
}

impl Areas {
    /// The column of `field`.
    fn column(&self, field: &str) -> Result<&Column> {
        self.fields
            .iter()
            .position(|f| f == field)
            .map(|k| &self.layer.columns[k])
            .ok_or_else(|| Error::Failed(format!("field '{field}' was not read")))
    }

    /// A field of counts or populations: finite and ≥ 0 everywhere.
    pub fn counts(&self, field: &str) -> Result<Vec<f64>> {
        areas::non_negative(&self.path, &self.layer, field, self.column(field)?)
    }

    /// The id column of `field`, if read.
    pub fn id_column(&self, field: Option<&str>) -> Result<Option<(String, &Column)>> {
        field
            .map(|f| Ok((f.to_owned(), self.column(f)?)))
            .transpose()
    }
}

/// Point records with the class of each.
pub struct Points {
    /// The layer, in the working CRS.
    pub layer: PointLayer,
    /// The class of each record.
    pub classes: Vec<Stance>,
}

/// The weights table of `--weights`, with its file (default: the areas' file).
///
/// # Errors
/// A missing or malformed table.
pub fn read_table(
    config: &Config,
    areas_path: &std::path::Path,
    run: &mut Run,
) -> Result<Option<(PathBuf, WeightsTable)>> {
    let Some(LocalNeighbours::Table { name, file }) = &config.local else {
        return Ok(None);
    };
    run.weights_table(name, file.as_deref(), areas_path)
        .map(Some)
}

/// The point records (with points) in the working CRS, each classified.
///
/// # Errors
/// A missing layer or field, or stance labels the class map does not know.
pub fn read_points(config: &Config, run: &mut Run) -> Result<Option<Points>> {
    let Source::Points {
        stance_field,
        classes,
        ..
    } = &config.source
    else {
        return Ok(None);
    };
    let input = run.input()?.to_owned();
    let layer = read::read_points(
        &input,
        run.common.layer.as_deref(),
        &[(stance_field.as_str(), FieldWant::Text)],
        run.common.crs.as_deref(),
    )?;
    run.note_input_layer(&layer.layer);
    let Some(Column::Text(stances)) = layer.columns.first() else {
        return Err(Error::Failed("stance column was not read as text".into()));
    };
    let class_of = classify_codes(classes, &stances.values, &stances.codes).map_err(|message| {
        Error::BadField {
            path: input.clone(),
            layer: layer.layer.clone(),
            field: stance_field.clone(),
            message,
        }
    })?;
    let classes = stances
        .codes
        .iter()
        .map(|&c| class_of[c as usize])
        .collect();
    Ok(Some(Points { layer, classes }))
}

/// The areas with the fields the run needs, in `target` (the points' CRS, or the working CRS).
///
/// # Errors
/// A missing layer or field, or a geometry that cannot be projected.
pub fn read_areas(
    config: &Config,
    id_field: Option<&str>,
    target: PolygonCrs<'_>,
    run: &mut Run,
) -> Result<Areas> {
    let input = run.input()?.to_owned();
    let path = config.areas_file.clone().unwrap_or(input);
    let mut fields: Vec<String> = match &config.source {
        Source::Fields { cases, at_risk } => vec![cases.clone(), at_risk.clone()],
        Source::Points {
            at_risk: AtRisk::Field(field),
            ..
        } => vec![field.clone()],
        Source::Points { .. } => Vec::new(),
    };
    let wants: Vec<(&str, FieldWant)> = fields
        .iter()
        .map(|f| (f.as_str(), FieldWant::Real))
        .chain(id_field.map(|f| (f, FieldWant::Text)))
        .collect();
    let layer = read::read_polygons(&path, Some(&config.areas), &wants, target)?;
    fields.extend(id_field.map(str::to_owned));
    let invalid = run.warn_invalid_polygons(&layer, "areas");
    run.note_layer(&path, &layer.layer)?;
    Ok(Areas {
        path,
        layer,
        fields,
        invalid,
    })
}

/// Cases and population at risk of each area, the per-class counts (with points), and the
/// points' part of the summary.
pub struct Counts {
    /// Cases per area.
    pub cases: Vec<f64>,
    /// Population at risk per area.
    pub at_risk: Vec<f64>,
    /// Records of each class per area (with points).
    pub per_class: Option<Vec<[u64; 3]>>,
    /// What happened to the points.
    pub points: Value,
}

/// Counts the records of each class in each area (see [`assign`] for the boundary rule), or
/// takes the counts from the areas' fields.
///
/// # Errors
/// A count field with a missing, negative or non-finite value.
pub fn count(config: &Config, areas: &Areas, points: Option<&Points>, run: &Run) -> Result<Counts> {
    let (case, at_risk) = match &config.source {
        Source::Fields { cases, at_risk } => {
            return Ok(Counts {
                cases: areas.counts(cases)?,
                at_risk: areas.counts(at_risk)?,
                per_class: None,
                points: Value::Null,
            })
        }
        Source::Points { case, at_risk, .. } => (*case, at_risk),
    };
    let Some(points) = points else {
        return Err(Error::Failed("points were not read".into()));
    };
    let assignment =
        stance_core::assign::assign(&areas.layer.polygons, &points.layer.x, &points.layer.y);
    run.check_interrupted()?;
    let mut per_class = vec![[0u64; 3]; areas.layer.fids.len()];
    for (area, class) in assignment.area.iter().zip(&points.classes) {
        if let Some(a) = area {
            per_class[*a as usize][*class as usize] += 1;
        }
    }
    let read = points.layer.fids.len() as u64;
    if assignment.outside > 0 {
        run.log(format!(
            "stance-rates: {} of {read} points lie outside every area and are not counted",
            assignment.outside
        ));
    }
    let cases = per_class.iter().map(|c| c[case as usize] as f64).collect();
    let at_risk = match at_risk {
        AtRisk::Classes(classes) => per_class
            .iter()
            .map(|c| classes.iter().map(|s| c[*s as usize] as f64).sum())
            .collect(),
        AtRisk::Field(field) => areas.counts(field)?,
    };
    Ok(Counts {
        cases,
        at_risk,
        per_class: Some(per_class),
        points: json!({
            "layer": points.layer.layer,
            "points_read": read,
            "points_in_areas": read - assignment.outside,
            "points_outside": assignment.outside,
            "points_on_shared_boundary": assignment.on_shared_boundary,
            "boundary_rule": "a point in several closed areas goes to the first in the layer's order",
            "working_crs": crs::label(&points.layer.srs),
        }),
    })
}
