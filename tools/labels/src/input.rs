//! Reading the label columns, the reference and the areas of a stance-labels run.

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{self, Column, FieldWant, PointLayer, PolygonCrs, PolygonLayer};
use stance_core::host::Run;
use stance_core::stance::{classify_codes, ClassMap, Stance};

use crate::params::Config;

/// The records as read and classified.
pub struct Records {
    /// The point layer (working CRS).
    pub layer: PointLayer,
    /// The file read.
    pub path: PathBuf,
    /// Per labeller, the class index of every record.
    pub labels: Vec<Vec<usize>>,
    /// The reference class of every hand-coded record (None elsewhere).
    pub reference: Option<Vec<Option<usize>>>,
}

/// The areas as read.
pub struct Areas {
    /// Their file.
    pub path: PathBuf,
    /// The layer, in the records' CRS.
    pub layer: PolygonLayer,
}

/// Reads and classifies the point records.
///
/// # Errors
/// A missing layer or field, unknown labels, or a flagged record without a reference label.
pub fn read_records(config: &Config, run: &mut Run) -> Result<Records> {
    let path = run.input()?.to_owned();
    let mut wants: Vec<(&str, FieldWant)> = config
        .labels
        .iter()
        .map(|f| (f.as_str(), FieldWant::Text))
        .collect();
    wants.extend(
        config
            .reference
            .iter()
            .map(|f| (f.as_str(), FieldWant::Text)),
    );
    wants.extend(config.flag.iter().map(|f| (f.as_str(), FieldWant::Real)));
    let layer = read::read_points(
        &path,
        run.common.layer.as_deref(),
        &wants,
        run.common.crs.as_deref(),
    )?;
    run.note_input_layer(&layer.layer);
    let bad = |field: &str, message: String| Error::BadField {
        path: path.clone(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let mut columns = layer.columns.iter();
    let mut labels = Vec::new();
    for field in &config.labels {
        let column = text(columns.next())?;
        let class_of = classify_codes(&config.classes, &column.values, &column.codes)
            .map_err(|m| bad(field, m))?;
        labels.push(
            column
                .codes
                .iter()
                .map(|&c| class_of[c as usize] as usize)
                .collect(),
        );
    }
    let reference = match &config.reference {
        Some(field) => {
            let column = text(columns.next())?;
            let mut classes =
                classify_present(&config.classes, column).map_err(|m| bad(field, m))?;
            if let Some(flag_field) = &config.flag {
                let Some(Column::Real(flags)) = columns.next() else {
                    return Err(Error::Failed("flag column was not read as numbers".into()));
                };
                apply_flag(&mut classes, flags, &layer.fids).map_err(|m| bad(flag_field, m))?;
            }
            if let Some(size) = config.sample {
                let mut rng = stance_core::montecarlo::replicate_rng(run.common.seed, 0);
                crate::subset::keep_sample(&mut classes, size, &mut rng);
            }
            if classes.iter().all(Option::is_none) {
                return Err(bad(
                    field,
                    "no record is hand-coded; expected a reference label on some records".into(),
                ));
            }
            Some(classes)
        }
        None => None,
    };
    run.debug(format!("read {} records", layer.fids.len()));
    Ok(Records {
        layer,
        path,
        labels,
        reference,
    })
}

fn text(column: Option<&Column>) -> Result<&read::TextColumn> {
    match column {
        Some(Column::Text(t)) => Ok(t),
        _ => Err(Error::Failed("label column was not read as text".into())),
    }
}

/// Classes of a column where missing values are allowed (not hand-coded); unknown labels are
/// refused with the shared message.
fn classify_present(
    map: &ClassMap,
    column: &read::TextColumn,
) -> std::result::Result<Vec<Option<usize>>, String> {
    let present: Vec<u32> = column
        .codes
        .iter()
        .copied()
        .filter(|&c| c != read::TextColumn::NULL)
        .collect();
    let class_of: Vec<Stance> = classify_codes(map, &column.values, &present)?;
    Ok(column
        .codes
        .iter()
        .map(|&c| class_of.get(c as usize).map(|s| *s as usize))
        .collect())
}

/// Keeps the reference only where the flag is non-zero; a flagged record needs a label.
fn apply_flag(
    classes: &mut [Option<usize>],
    flags: &[Option<f64>],
    fids: &[i64],
) -> std::result::Result<(), String> {
    for (i, (class, flag)) in classes.iter_mut().zip(flags).enumerate() {
        let flagged = flag.is_some_and(|f| f != 0.0);
        if flagged && class.is_none() {
            return Err(format!(
                "record fid {} is flagged as hand-coded but has no reference label",
                fids[i]
            ));
        }
        if !flagged {
            *class = None;
        }
    }
    Ok(())
}

/// The compared layers, each in the records' CRS (None without --compare-layers).
///
/// # Errors
/// A missing layer, or geometries that cannot be projected.
pub fn read_compared(
    config: &Config,
    records: &Records,
    run: &mut Run,
) -> Result<Option<Vec<PolygonLayer>>> {
    let Some(compare) = &config.compare else {
        return Ok(None);
    };
    let path = compare.file.clone().unwrap_or_else(|| records.path.clone());
    let wants: Vec<(&str, FieldWant)> = compare
        .side
        .iter()
        .map(|f| (f.as_str(), FieldWant::Text))
        .collect();
    let mut layers = Vec::new();
    for name in &compare.layers {
        let target = PolygonCrs::Into(&records.layer.srs);
        let layer = read::read_polygons_or_none(&path, Some(name), &wants, target)?;
        if path == records.path {
            run.note_input_layer(&layer.layer);
        } else {
            run.note_extra_input(&path, &layer.layer)?;
        }
        layers.push(layer);
    }
    Ok(Some(layers))
}

/// The areas in the records' CRS (None without --areas).
///
/// # Errors
/// A missing layer, or geometries that cannot be projected.
pub fn read_areas(config: &Config, records: &Records, run: &mut Run) -> Result<Option<Areas>> {
    let Some((name, file)) = &config.areas else {
        return Ok(None);
    };
    let path = file.clone().unwrap_or_else(|| records.path.clone());
    let layer = read::read_polygons(&path, Some(name), &[], PolygonCrs::Into(&records.layer.srs))?;
    run.warn_invalid_polygons(&layer, "areas");
    if path == records.path {
        run.note_input_layer(&layer.layer);
    } else {
        run.note_extra_input(&path, &layer.layer)?;
    }
    Ok(Some(Areas { path, layer }))
}
