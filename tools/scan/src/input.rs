//! Reading what a scan works on: stance records (Bernoulli, ordinal) or areas with case counts
//! (Poisson), as plain arrays in the working CRS.

use std::collections::BTreeMap;
use std::path::Path;

use geo::Centroid;
use stance_core::error::{Error, Result};
use stance_core::gpkg::crs;
use stance_core::gpkg::read::{read_points, read_polygons, Column, FieldWant};
use stance_core::host::Run;
use stance_core::stance::{ClassMap, Stance};

use crate::analysis::PointModel;
use crate::params::{AreaFields, RecordRoles};
use crate::windows;

/// The records or areas of a scan.
pub enum DataKind {
    /// Records with a class each.
    Points {
        /// Label of each record as scanned: Bernoulli 1 = case, 0 = control; ordinal 0…2.
        labels: Vec<u8>,
        /// Stance class of each record.
        stances: Vec<Stance>,
        /// The model.
        model: PointModel,
    },
    /// Areas with observed and expected cases.
    Areas {
        /// Observed cases per area.
        cases: Vec<u32>,
        /// Expected cases per area, summing to the observed total.
        expected: Vec<f64>,
    },
}

/// What was read, in the working CRS.
pub struct Data {
    /// Feature ids of the analysed records (areas).
    pub fids: Vec<i64>,
    /// Eastings (m): record positions or area centroids.
    pub x: Vec<f64>,
    /// Northings (m).
    pub y: Vec<f64>,
    /// The records or areas.
    pub kind: DataKind,
    /// The working CRS.
    pub srs: gdal::spatial_ref::SpatialRef,
    /// Records left out (a class outside the population at risk).
    pub excluded: u64,
}

impl Data {
    /// Distinct locations.
    pub fn distinct_locations(&self) -> usize {
        windows::merge_locations(&self.x, &self.y).x.len()
    }

    /// Records per stance class (empty for areas).
    pub fn class_totals(&self) -> BTreeMap<Stance, u64> {
        let mut totals = BTreeMap::new();
        if let DataKind::Points { stances, .. } = &self.kind {
            for s in stances {
                *totals.entry(*s).or_default() += 1;
            }
        }
        totals
    }
}

/// Each record's class, or an error naming the labels that are not a class.
fn classify_records(
    column: &stance_core::gpkg::read::TextColumn,
    classes: &ClassMap,
    bad_field: impl Fn(String) -> Error,
) -> Result<Vec<Stance>> {
    let mapped: Vec<Option<Stance>> = column.values.iter().map(|v| classes.classify(v)).collect();
    let mut unknown: BTreeMap<String, u64> = BTreeMap::new();
    let mut per_record = Vec::with_capacity(column.codes.len());
    for &code in &column.codes {
        match mapped.get(code as usize).copied().flatten() {
            Some(stance) => per_record.push(stance),
            None => {
                let label = column
                    .values
                    .get(code as usize)
                    .map_or("NULL".to_owned(), |v| format!("'{v}'"));
                *unknown.entry(label).or_default() += 1;
            }
        }
    }
    if !unknown.is_empty() {
        let found: Vec<String> = unknown
            .iter()
            .take(10)
            .map(|(v, c)| format!("{v} ×{c}"))
            .collect();
        return Err(bad_field(format!(
            "values that are not a stance class (expected {}; found {}); map them with --classes",
            classes.describe(),
            found.join(", ")
        )));
    }
    Ok(per_record)
}

/// "oppose ×n, neutral ×n, support ×n".
fn counts_text(per_record: &[Stance]) -> String {
    Stance::ALL
        .iter()
        .map(|s| format!("{s} ×{}", per_record.iter().filter(|r| *r == s).count()))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Reads the stance records of the input's point layer.
///
/// # Errors
/// Unreadable input, labels that are not a class, or too few classes for the model.
pub fn read_records(
    run: &mut Run,
    input: &Path,
    field: &str,
    classes: &ClassMap,
    roles: &RecordRoles,
) -> Result<Data> {
    let layer = read_points(
        input,
        run.common.layer.as_deref(),
        &[(field, FieldWant::Text)],
        run.common.crs.as_deref(),
    )?;
    run.note_input_layer(&layer.layer);
    let Some(Column::Text(column)) = layer.columns.first() else {
        return Err(Error::Failed("stance column missing after reading".into()));
    };
    let bad_field = |message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let per_record = classify_records(column, classes, bad_field)?;
    let (at_risk, model): (Vec<Stance>, PointModel) = match roles {
        RecordRoles::Bernoulli { cases, controls } => {
            let has = |s: &Stance| per_record.contains(s);
            if !has(cases) || !controls.iter().any(has) {
                return Err(bad_field(format!(
                    "needs both cases ({cases}) and controls ({}); found {}",
                    crate::params::joined(controls).replace('+', ","),
                    counts_text(&per_record)
                )));
            }
            let mut at_risk = controls.clone();
            at_risk.push(*cases);
            (at_risk, PointModel::Bernoulli)
        }
        RecordRoles::Ordinal { classes } => {
            let present = classes.iter().filter(|s| per_record.contains(s)).count();
            if present < 2 {
                return Err(bad_field(format!(
                    "the ordinal model needs at least two classes present; found {}",
                    counts_text(&per_record)
                )));
            }
            (classes.clone(), PointModel::Ordinal)
        }
    };
    let label_of = |s: Stance| -> u8 {
        match roles {
            RecordRoles::Bernoulli { cases, .. } => u8::from(s == *cases),
            RecordRoles::Ordinal { .. } => (s.value() + 1) as u8,
        }
    };
    let (mut fids, mut x, mut y) = (Vec::new(), Vec::new(), Vec::new());
    let (mut labels, mut stances) = (Vec::new(), Vec::new());
    for (i, s) in per_record.iter().enumerate() {
        if !at_risk.contains(s) {
            continue;
        }
        fids.push(layer.fids[i]);
        x.push(layer.x[i]);
        y.push(layer.y[i]);
        labels.push(label_of(*s));
        stances.push(*s);
    }
    let excluded = (per_record.len() - fids.len()) as u64;
    Ok(Data {
        fids,
        x,
        y,
        kind: DataKind::Points {
            labels,
            stances,
            model,
        },
        srs: layer.srs,
        excluded,
    })
}

/// A non-negative whole count, or an error naming the feature.
fn parse_count(text: Option<&str>, fid: i64) -> std::result::Result<u32, String> {
    let text = text.unwrap_or("");
    let value: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("feature {fid}: '{text}' is not a count"))?;
    if !(value >= 0.0 && value.fract() == 0.0 && value <= f64::from(u32::MAX)) {
        return Err(format!(
            "feature {fid}: {value} is not a non-negative whole count"
        ));
    }
    Ok(value as u32)
}

/// A finite number ≥ 0, or an error naming the feature.
fn parse_size(text: Option<&str>, fid: i64) -> std::result::Result<f64, String> {
    let text = text.unwrap_or("");
    let value: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("feature {fid}: '{text}' is not a number"))?;
    if !(value.is_finite() && value >= 0.0) {
        return Err(format!(
            "feature {fid}: {value} must be a finite number ≥ 0"
        ));
    }
    Ok(value)
}

/// Reads the areas of a Poisson scan: observed cases, expected cases (from the population at
/// risk or given) and centroids in the working CRS.
///
/// # Errors
/// Unreadable input, counts or sizes that are not numbers, or nothing to scan.
pub fn read_areas(run: &mut Run, input: &Path, fields: &AreaFields) -> Result<Data> {
    let layer = read_polygons(
        input,
        Some(&fields.layer),
        &[fields.cases.as_str(), fields.size.as_str()],
    )?;
    run.note_input_layer(&layer.layer);
    run.warn_invalid_polygons(&layer, "areas");
    let bad = |field: &str, message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let mut cases = Vec::with_capacity(layer.fids.len());
    let mut size = Vec::with_capacity(layer.fids.len());
    for (i, &fid) in layer.fids.iter().enumerate() {
        let c =
            parse_count(layer.fields[0][i].as_deref(), fid).map_err(|m| bad(&fields.cases, m))?;
        let s = parse_size(layer.fields[1][i].as_deref(), fid).map_err(|m| bad(&fields.size, m))?;
        if s == 0.0 && c > 0 {
            return Err(bad(
                &fields.size,
                format!(
                    "feature {fid}: {c} cases with {} 0; every case needs a population at risk",
                    fields.size
                ),
            ));
        }
        cases.push(c);
        size.push(s);
    }
    let total_cases: u64 = cases.iter().map(|&c| u64::from(c)).sum();
    let total_size: f64 = size.iter().sum();
    if total_cases == 0 {
        return Err(bad(
            &fields.cases,
            "every count is 0; there is nothing to scan".into(),
        ));
    }
    if total_size <= 0.0 {
        return Err(bad(&fields.size, "sums to 0".into()));
    }
    // Expected cases under H0 sum to the observed total (Kulldorff 1997, §5).
    let expected: Vec<f64> = size
        .iter()
        .map(|s| s * total_cases as f64 / total_size)
        .collect();
    let (mut x, mut y): (Vec<f64>, Vec<f64>) = layer
        .polygons
        .iter()
        .map(|p| {
            p.centroid()
                .map_or((f64::NAN, f64::NAN), |c| (c.x(), c.y()))
        })
        .unzip();
    if let Some(i) = x.iter().position(|v| !v.is_finite()) {
        return Err(Error::BadLayer {
            path: input.to_owned(),
            layer: layer.layer.clone(),
            message: format!(
                "feature {} has no centroid (degenerate polygon)",
                layer.fids[i]
            ),
        });
    }
    let srs = crs::working(run.common.crs.as_deref(), &layer.srs, || {
        crs::lonlat_centre(&layer.srs, &x, &y)
    })?;
    if layer.srs.to_wkt().ok() != srs.to_wkt().ok() {
        crs::transform(&layer.srs, &srs, &mut x, &mut y)?;
    }
    Ok(Data {
        fids: layer.fids,
        x,
        y,
        kind: DataKind::Areas { cases, expected },
        srs,
        excluded: 0,
    })
}
