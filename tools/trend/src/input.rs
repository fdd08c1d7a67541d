//! Reading the records (stance and time), the areas and the clusters of a stance-trend run.
//! The polygons are read into the records' working CRS, where the points are assigned.

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::gpkg::read::{self, Column, FieldWant, PointLayer, PolygonCrs, PolygonLayer};
use stance_core::gpkg::weights_table::AreaIds;
use stance_core::host::Run;
use stance_core::stance::{classify_codes, Stance};

use crate::params::{count_field, Config, LayerRef, Source};
use crate::tally::Tally;

/// The point records with their class and time.
pub struct Records {
    /// The layer, in the working CRS.
    pub layer: PointLayer,
    /// The class of each record.
    pub classes: Vec<Stance>,
    /// The UTC second of each record (None: missing or unparseable).
    pub times: Vec<Option<i64>>,
}

/// A polygon layer as read, with its file.
pub struct Polygons {
    /// Its file.
    pub path: PathBuf,
    /// The layer, in the working CRS.
    pub layer: PolygonLayer,
}

/// The areas with their ids.
pub struct Areas {
    /// The polygons.
    pub polygons: Polygons,
    /// Their ids (feature ids or --id-field).
    pub ids: AreaIds,
    /// The counts of --count-fields.
    pub counts: Option<Tally>,
}

/// The clusters with their numbers as text.
pub struct Clusters {
    /// The polygons.
    pub polygons: Polygons,
    /// `cluster_no` of each, as text.
    pub numbers: Vec<String>,
}

/// The point records of `--layer`, each classified, with their times.
///
/// # Errors
/// A missing layer or field, or stance labels the class map does not know.
pub fn read_records(config: &Config, time_field: &str, run: &mut Run) -> Result<Records> {
    let input = run.input()?.to_owned();
    let layer = read::read_points(
        &input,
        run.common.layer.as_deref(),
        &[
            (config.stance_field.as_str(), FieldWant::Text),
            (time_field, FieldWant::DateTime),
        ],
        run.common.crs.as_deref(),
    )?;
    run.note_input_layer(&layer.layer);
    let bad = |field: &str, message: String| Error::BadField {
        path: input.clone(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let Some(Column::Text(stances)) = layer.columns.first() else {
        return Err(bad(&config.stance_field, "is not readable as text".into()));
    };
    let class_of = classify_codes(&config.classes, &stances.values, &stances.codes)
        .map_err(|m| bad(&config.stance_field, m))?;
    let classes = stances
        .codes
        .iter()
        .map(|&c| class_of[c as usize])
        .collect();
    let Some(Column::DateTime(times)) = layer.columns.get(1) else {
        return Err(bad(time_field, "is not readable as date-times".into()));
    };
    let times = times.clone();
    run.debug(format!("read {} records", layer.fids.len()));
    Ok(Records {
        layer,
        classes,
        times,
    })
}

/// Polygons in the records' CRS, or in the working CRS without records.
fn read_layer(
    spec: &LayerRef,
    fields: &[(&str, FieldWant)],
    records: Option<&Records>,
    role: &str,
    run: &mut Run,
) -> Result<Polygons> {
    let input = run.input()?.to_owned();
    let path = spec.file.clone().unwrap_or(input);
    let user_crs = run.common.crs.clone();
    let target = match records {
        Some(r) => PolygonCrs::Into(&r.layer.srs),
        None => PolygonCrs::Working(user_crs.as_deref()),
    };
    let layer = read::read_polygons(&path, Some(&spec.layer), fields, target)?;
    run.warn_invalid_polygons(&layer, role);
    run.note_layer(&path, &layer.layer)?;
    Ok(Polygons { path, layer })
}

/// The areas with their ids (and the counts of `--count-fields`), in the records' CRS.
///
/// # Errors
/// A missing layer, id or count field, missing, blank or repeated ids, counts that are not
/// whole numbers ≥ 0.
pub fn read_areas(config: &Config, records: Option<&Records>, run: &mut Run) -> Result<Areas> {
    let count_fields = match &config.source {
        Source::Fields { pattern, range } => (0..range.1 as i64)
            .flat_map(|p| Stance::ALL.map(|c| count_field(pattern, c, config.period, range.0 + p)))
            .collect(),
        Source::Records { .. } => Vec::new(),
    };
    let wants: Vec<(&str, FieldWant)> = config
        .id_field
        .iter()
        .map(|f| (f.as_str(), FieldWant::Text))
        .chain(count_fields.iter().map(|f| (f.as_str(), FieldWant::Real)))
        .collect();
    let polygons = read_layer(&config.areas, &wants, records, "areas", run)?;
    let id = config
        .id_field
        .as_deref()
        .zip(polygons.layer.columns.first());
    let ids = areas::area_ids(&polygons.path, &polygons.layer, id)?;
    let counts = match &config.source {
        Source::Fields { range, .. } => {
            let offset = usize::from(config.id_field.is_some());
            Some(field_counts(&polygons, &count_fields, offset, *range)?)
        }
        Source::Records { .. } => None,
    };
    Ok(Areas {
        polygons,
        ids,
        counts,
    })
}

/// The counts of the count fields (three per period, in class order) as a tally per area.
fn field_counts(
    polygons: &Polygons,
    fields: &[String],
    offset: usize,
    (first, periods): (i64, usize),
) -> Result<Tally> {
    let layer = &polygons.layer;
    let mut counts = vec![vec![[0u64; 3]; periods]; layer.fids.len()];
    for (k, field) in fields.iter().enumerate() {
        let values = areas::non_negative(&polygons.path, layer, field, &layer.columns[offset + k])?;
        for (area, value) in values.iter().enumerate() {
            if value.fract() != 0.0 || *value > 1e15 {
                return Err(Error::BadField {
                    path: polygons.path.clone(),
                    layer: layer.layer.clone(),
                    field: field.clone(),
                    message: format!(
                        "holds {value} on feature {}; counts must be whole numbers",
                        layer.fids[area]
                    ),
                });
            }
            counts[area][k / 3][k % 3] = *value as u64;
        }
    }
    Ok(Tally {
        first,
        periods,
        counts,
    })
}

/// The clusters of `--clusters` with their `cluster_no`, in the records' CRS.
///
/// # Errors
/// A missing layer or `cluster_no` field, or a cluster without a number.
pub fn read_clusters(
    config: &Config,
    records: &Records,
    run: &mut Run,
) -> Result<Option<Clusters>> {
    let Some(spec) = &config.clusters else {
        return Ok(None);
    };
    let wants = [("cluster_no", FieldWant::Text)];
    let polygons = read_layer(spec, &wants, Some(records), "clusters", run)?;
    let Some(column) = polygons.layer.columns.first() else {
        return Err(Error::Failed("cluster_no was not read".into()));
    };
    let numbers = column
        .as_texts()
        .into_iter()
        .enumerate()
        .map(|(i, n)| {
            n.ok_or_else(|| Error::BadField {
                path: polygons.path.clone(),
                layer: polygons.layer.layer.clone(),
                field: "cluster_no".into(),
                message: format!("is missing on feature {}", polygons.layer.fids[i]),
            })
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(Some(Clusters { polygons, numbers }))
}
