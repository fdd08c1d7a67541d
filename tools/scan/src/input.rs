//! Reading what a scan works on: stance records (Bernoulli, ordinal, multinomial) or areas with
//! case counts (Poisson), as plain arrays in the working CRS.

use std::collections::BTreeMap;
use std::path::Path;

use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::gpkg::read::{read_points, read_polygons, Column, FieldWant, PolygonCrs};
use stance_core::host::Run;
use stance_core::stance::{classify_codes, ClassMap, Stance};
use stance_core::time::Period;
use stance_core::weights;

use crate::analysis::PointModel;
use crate::params::{AreaFields, RecordRoles, TimeConfig};
use crate::windows;

/// The records or areas of a scan.
pub enum DataKind {
    /// Records with a class each.
    Points {
        /// Label of each record as scanned: Bernoulli 1 = case, 0 = control; ordinal and
        /// multinomial 0…2.
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

/// The records' periods of a space-time scan.
#[derive(Debug, Clone)]
pub struct Times {
    /// The calendar period.
    pub period: Period,
    /// Index ([`Period::index`]) of the first period studied: the first holding a record.
    pub first: i64,
    /// Periods studied, from the first to the last holding a record.
    pub periods: usize,
    /// Per analysed record: its period, 0…periods−1.
    pub of_record: Vec<u32>,
    /// Records left out for want of a usable time.
    pub without_time: u64,
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
    /// Records left out (a class outside the population at risk, or no usable time).
    pub excluded: u64,
    /// Space-time scans: the records' periods.
    pub times: Option<Times>,
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

/// Each record's class, or an error naming the labels that are not a class (the shared rule).
fn classify_records(
    column: &stance_core::gpkg::read::TextColumn,
    classes: &ClassMap,
    bad_field: impl Fn(String) -> Error,
) -> Result<Vec<Stance>> {
    let by_code = classify_codes(classes, &column.values, &column.codes).map_err(bad_field)?;
    Ok(column
        .codes
        .iter()
        .map(|c| by_code.get(*c as usize).copied().unwrap_or(Stance::Neutral))
        .collect())
}

/// "oppose ×n, neutral ×n, support ×n".
fn counts_text(per_record: &[Stance]) -> String {
    Stance::ALL
        .iter()
        .map(|s| format!("{s} ×{}", per_record.iter().filter(|r| *r == s).count()))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The classes a model analyses and how the records are labelled, or why the records cannot be
/// scanned.
fn analysed_classes(
    roles: &RecordRoles,
    per_record: &[Stance],
) -> std::result::Result<(Vec<Stance>, PointModel), String> {
    let found = || counts_text(per_record);
    Ok(match roles {
        RecordRoles::Bernoulli { cases, controls } => {
            let has = |s: &Stance| per_record.contains(s);
            if !has(cases) || !controls.iter().any(has) {
                return Err(format!(
                    "needs both cases ({cases}) and controls ({}); found {}",
                    crate::params::joined(controls).replace('+', ","),
                    found()
                ));
            }
            let mut at_risk = controls.clone();
            at_risk.push(*cases);
            (at_risk, PointModel::Bernoulli)
        }
        RecordRoles::Permutation { classes, .. } => {
            if !classes.iter().any(|s| per_record.contains(s)) {
                return Err(format!(
                    "has no record of {} to count; found {}",
                    crate::params::joined(classes).replace('+', ","),
                    found()
                ));
            }
            // The permutation model reads no label; the class values are kept as labels.
            (classes.clone(), PointModel::Multinomial)
        }
        RecordRoles::Ordinal { classes } | RecordRoles::Multinomial { classes } => {
            let (name, model) = match roles {
                RecordRoles::Ordinal { .. } => ("ordinal", PointModel::Ordinal),
                _ => ("multinomial", PointModel::Multinomial),
            };
            let present = classes.iter().filter(|s| per_record.contains(s)).count();
            if present < 2 {
                return Err(format!(
                    "the {name} model needs at least two classes present; found {}",
                    found()
                ));
            }
            (classes.clone(), model)
        }
    })
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
    time: Option<&TimeConfig>,
) -> Result<Data> {
    let mut wants = vec![(field, FieldWant::Text)];
    if let Some(t) = time {
        wants.push((t.field.as_str(), FieldWant::DateTime));
    }
    let layer = read_points(
        input,
        run.common.layer.as_deref(),
        &wants,
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
    let (at_risk, model) = analysed_classes(roles, &per_record).map_err(bad_field)?;
    let label_of = |s: Stance| -> u8 {
        match roles {
            RecordRoles::Bernoulli { cases, .. } => u8::from(s == *cases),
            RecordRoles::Ordinal { .. }
            | RecordRoles::Multinomial { .. }
            | RecordRoles::Permutation { .. } => (s.value() + 1) as u8,
        }
    };
    let seconds = match layer.columns.get(1) {
        Some(Column::DateTime(v)) => Some(v),
        _ => None,
    };
    let period_of = |i: usize| -> Option<i64> {
        let t = time?;
        seconds.and_then(|v| v[i]).and_then(|s| t.period.index(s))
    };
    let (mut fids, mut x, mut y) = (Vec::new(), Vec::new(), Vec::new());
    let (mut labels, mut stances, mut periods) = (Vec::new(), Vec::new(), Vec::new());
    let mut without_time = 0u64;
    for (i, s) in per_record.iter().enumerate() {
        if !at_risk.contains(s) {
            continue;
        }
        let period = period_of(i);
        if time.is_some() {
            match period {
                Some(p) => periods.push(p),
                None => {
                    without_time += 1;
                    continue;
                }
            }
        }
        fids.push(layer.fids[i]);
        x.push(layer.x[i]);
        y.push(layer.y[i]);
        labels.push(label_of(*s));
        stances.push(*s);
    }
    let excluded = (per_record.len() - fids.len()) as u64;
    let times = match time {
        Some(t) => Some(
            study_periods(t.period, &periods, without_time).ok_or_else(|| Error::BadField {
                path: input.to_owned(),
                layer: layer.layer.clone(),
                field: t.field.clone(),
                message: format!(
                    "no analysed record has a usable date-time ({without_time} without); expected \
                     e.g. 2026-03-04 or 2026-03-04T05:06:07Z"
                ),
            })?,
        ),
        None => None,
    };
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
        times,
    })
}

/// The periods studied (first to last holding a record) and each record's place among them;
/// None without records.
fn study_periods(period: Period, of_record: &[i64], without_time: u64) -> Option<Times> {
    let first = *of_record.iter().min()?;
    let last = *of_record.iter().max()?;
    Some(Times {
        period,
        first,
        periods: usize::try_from(last - first + 1).ok()?,
        of_record: of_record.iter().map(|p| (p - first) as u32).collect(),
        without_time,
    })
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
        &[
            (fields.cases.as_str(), FieldWant::Real),
            (fields.size.as_str(), FieldWant::Real),
        ],
        PolygonCrs::Working(run.common.crs.as_deref()),
    )?;
    run.note_input_layer(&layer.layer);
    run.warn_invalid_polygons(&layer, "areas");
    let bad = |field: &str, message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let counts = areas::non_negative(input, &layer, &fields.cases, &layer.columns[0])?;
    let size = areas::non_negative(input, &layer, &fields.size, &layer.columns[1])?;
    let mut cases = Vec::with_capacity(counts.len());
    for ((c, s), fid) in counts.iter().zip(&size).zip(&layer.fids) {
        if c.fract() != 0.0 || *c > f64::from(u32::MAX) {
            return Err(bad(
                &fields.cases,
                format!("feature {fid}: {c} is not a whole count"),
            ));
        }
        if *s == 0.0 && *c > 0.0 {
            return Err(bad(
                &fields.size,
                format!(
                    "feature {fid}: {c} cases with {} 0; every case needs a population at risk",
                    fields.size
                ),
            ));
        }
        cases.push(*c as u32);
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
    // Centroids of the areas in the working CRS, by the one definition every tool uses.
    let (x, y) = weights::centroids(&layer.polygons);
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
    Ok(Data {
        fids: layer.fids,
        x,
        y,
        kind: DataKind::Areas { cases, expected },
        srs: layer.srs,
        excluded: 0,
        times: None,
    })
}
