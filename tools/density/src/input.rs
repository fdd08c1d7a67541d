//! Reading the records (points with class, weight and time) and the mask polygons, in the
//! working CRS.

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use geo_types::MultiPolygon;
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{self, Column, FieldWant, PointLayer, PolygonCrs};
use stance_core::host::Run;
use stance_core::stance::{classify_codes, ClassMap, Stance};

use crate::binning::Points;
use crate::params::{Config, DensityParams};

/// The records of the input layer, in the working CRS.
#[derive(Debug)]
pub struct Records {
    /// The layer's name.
    pub layer: String,
    /// Easting (m).
    pub x: Vec<f64>,
    /// Northing (m).
    pub y: Vec<f64>,
    /// Class of each record.
    pub class_of: Vec<Stance>,
    /// Weight of each record (`--weight-field`).
    pub weights: Option<Vec<f64>>,
    /// UTC seconds of each record (`--time-field`; None where missing).
    pub times: Option<Vec<Option<i64>>>,
    /// The working CRS.
    pub srs: SpatialRef,
}

impl Records {
    /// The records as weighted points.
    pub fn points(&self) -> Points<'_> {
        Points {
            x: &self.x,
            y: &self.y,
            weight: self.weights.as_deref(),
        }
    }

    /// Number of records.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// True when there are no records.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// Reads the points of `--layer` with their stance, weight and time fields, and checks that
/// both compared classes have points of positive total weight.
///
/// # Errors
/// Unreadable layer or field, unknown stance labels, NULL or negative weights, a compared
/// class without points.
pub fn read_records(
    params: &DensityParams,
    config: &Config,
    run: &mut Run,
    input: &Path,
) -> Result<Records> {
    let mut wants: Vec<(&str, FieldWant)> = vec![(params.stance_field.as_str(), FieldWant::Text)];
    if let Some(w) = &params.weight_field {
        wants.push((w.as_str(), FieldWant::Real));
    }
    if let Some(t) = &params.time_field {
        wants.push((t.as_str(), FieldWant::DateTime));
    }
    let layer_arg = run.common.layer.clone();
    let crs_arg = run.common.crs.clone();
    let layer = read::read_points(input, layer_arg.as_deref(), &wants, crs_arg.as_deref())?;
    run.note_input_layer(&layer.layer);
    run.debug(format!("read {} points", layer.x.len()));
    let fields = Fields {
        input,
        layer: &layer,
    };
    let class_of = fields.classes(&params.stance_field, &config.classes)?;
    let weights = match &params.weight_field {
        None => None,
        Some(field) => Some(fields.weights(field)?),
    };
    let times = match &params.time_field {
        None => None,
        Some(field) => {
            let index = 1 + usize::from(params.weight_field.is_some());
            Some(fields.times(field, index)?)
        }
    };
    let records = Records {
        layer: layer.layer,
        x: layer.x,
        y: layer.y,
        class_of,
        weights,
        times,
        srs: layer.srs,
    };
    check_compared(&records, config, &params.stance_field)?;
    Ok(records)
}

/// The mask polygons of `mask_layer` in `input`, projected to the working CRS `working`.
///
/// # Errors
/// Unreadable layer, or a failed projection.
pub fn read_mask(
    run: &mut Run,
    input: &Path,
    mask_layer: &str,
    working: &SpatialRef,
) -> Result<Vec<MultiPolygon<f64>>> {
    let polygons = read::read_polygons(input, Some(mask_layer), &[], PolygonCrs::Into(working))?;
    run.note_input_layer(mask_layer);
    run.warn_invalid_polygons(&polygons, "mask polygons");
    Ok(polygons.polygons)
}

/// The columns of a point layer read for [`read_records`], with the file for error messages.
struct Fields<'a> {
    input: &'a Path,
    layer: &'a PointLayer,
}

impl Fields<'_> {
    fn bad(&self, field: &str, message: String) -> Error {
        Error::BadField {
            path: self.input.to_owned(),
            layer: self.layer.layer.clone(),
            field: field.to_owned(),
            message,
        }
    }

    /// Class of every record from column 0; every label must be known (the shared rule).
    fn classes(&self, field: &str, classes: &ClassMap) -> Result<Vec<Stance>> {
        let Some(Column::Text(column)) = self.layer.columns.first() else {
            return Err(self.bad(field, "is not readable as text".into()));
        };
        let by_code = classify_codes(classes, &column.values, &column.codes)
            .map_err(|message| self.bad(field, message))?;
        Ok(column
            .codes
            .iter()
            .map(|c| by_code.get(*c as usize).copied().unwrap_or(Stance::Neutral))
            .collect())
    }

    /// Weights from column 1: finite and non-negative.
    fn weights(&self, field: &str) -> Result<Vec<f64>> {
        let Some(Column::Real(values)) = self.layer.columns.get(1) else {
            return Err(self.bad(field, "is not numeric".into()));
        };
        let fid = |i: usize| self.layer.fids[i];
        values
            .iter()
            .enumerate()
            .map(|(i, v)| match v {
                None => Err(self.bad(
                    field,
                    format!(
                        "is NULL at feature {}; expected a non-negative number",
                        fid(i)
                    ),
                )),
                Some(w) if !(w.is_finite() && *w >= 0.0) => Err(self.bad(
                    field,
                    format!(
                        "has value {w} at feature {}; expected a non-negative number",
                        fid(i)
                    ),
                )),
                Some(w) => Ok(*w),
            })
            .collect()
    }

    /// Times from column `index`.
    fn times(&self, field: &str, index: usize) -> Result<Vec<Option<i64>>> {
        let Some(Column::DateTime(values)) = self.layer.columns.get(index) else {
            return Err(self.bad(field, "is not readable as date-times".into()));
        };
        Ok(values.clone())
    }
}

/// Both compared classes have points, of positive total weight.
fn check_compared(records: &Records, config: &Config, stance_field: &str) -> Result<()> {
    let points = records.points();
    for class in [config.class_a, config.class_b] {
        let members: Vec<usize> = (0..records.len())
            .filter(|&i| records.class_of[i] == class)
            .collect();
        if members.is_empty() {
            return Err(Error::argument(
                "--compare",
                format!(
                    "class '{class}' has no points in layer '{}' (field '{stance_field}')",
                    records.layer
                ),
            ));
        }
        if points.total_weight(&members) <= 0.0 {
            return Err(Error::argument(
                "--compare",
                format!("class '{class}' has zero total weight"),
            ));
        }
    }
    Ok(())
}
