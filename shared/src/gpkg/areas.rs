//! The input rules of area layers, once for every tool: area ids from `--id-field`, the id
//! field a weights table was built with, and numeric fields that must hold counts.

use std::path::Path;

use super::read::{Column, PolygonLayer};
use super::weights_table::{AreaIds, WeightsTable};
use crate::error::{Error, Result};
use crate::weights::Neighbours;

/// The id field to match a weights table with: `--id-field` as given, else the one the table's
/// provenance records. A `--id-field` that differs from the recorded one is refused, since the
/// links would then join the wrong areas.
///
/// # Errors
/// [`Error::BadArgument`] on `--id-field` when it contradicts the table.
pub fn id_field_for(given: Option<&str>, table: Option<&WeightsTable>) -> Result<Option<String>> {
    match (given, table) {
        (Some(given), Some(t)) => {
            if let Some(recorded) = &t.id_field {
                if recorded.as_deref() != Some(given) {
                    return Err(Error::argument(
                        "--id-field",
                        format!(
                            "'{given}' differs from the id field the weights table '{}' was \
                             built with ({})",
                            t.table,
                            recorded.as_deref().unwrap_or("the feature id")
                        ),
                    ));
                }
            }
            Ok(Some(given.to_owned()))
        }
        (None, Some(t)) => Ok(t.id_field.clone().flatten()),
        (given, None) => Ok(given.map(str::to_owned)),
    }
}

/// The areas' ids: feature ids without an id field, else the field's values trimmed. A NULL or
/// blank id, or one that appears twice, is refused with the feature named.
///
/// # Errors
/// [`Error::BadField`] naming the file, layer, field and feature.
pub fn area_ids(path: &Path, layer: &PolygonLayer, id: Option<(&str, &Column)>) -> Result<AreaIds> {
    let Some((field, column)) = id else {
        return Ok(AreaIds::Integer(layer.fids.clone()));
    };
    let bad = |message: String| Error::BadField {
        path: path.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let texts = column.as_texts();
    let mut values = Vec::with_capacity(texts.len());
    for (value, fid) in texts.iter().zip(&layer.fids) {
        match value.as_deref().map(str::trim) {
            Some(v) if !v.is_empty() => values.push(v.to_owned()),
            _ => {
                return Err(bad(format!(
                    "feature {fid} has no id (missing or blank); every area needs a unique id"
                )))
            }
        }
    }
    let ids = AreaIds::from_text(values);
    if let Some(duplicate) = ids.first_duplicate() {
        return Err(bad(format!(
            "id '{duplicate}' appears more than once; ids must be unique"
        )));
    }
    Ok(ids)
}

/// The neighbours a weights table gives the areas `ids` (matched by `id_field`, or feature ids).
///
/// # Errors
/// [`Error::BadLayer`] on the table when an id of it is not an area of the layer.
pub fn table_neighbours(
    path: &Path,
    table: &WeightsTable,
    ids: &AreaIds,
    id_field: Option<&str>,
) -> Result<Neighbours> {
    table.neighbours(ids).map_err(|message| Error::BadLayer {
        path: path.to_owned(),
        layer: table.table.clone(),
        message: format!("{message} (ids by {})", id_field.unwrap_or("feature id")),
    })
}

/// A numeric field of the areas that must hold a finite number ≥ 0 in every feature (counts,
/// populations at risk).
///
/// # Errors
/// [`Error::BadField`] naming the first feature with a missing, negative or non-finite value.
pub fn non_negative(
    path: &Path,
    layer: &PolygonLayer,
    field: &str,
    column: &Column,
) -> Result<Vec<f64>> {
    let Column::Real(values) = column else {
        return Err(Error::Failed(format!(
            "field '{field}' was not read as numbers"
        )));
    };
    let bad = |message: String| Error::BadField {
        path: path.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    values
        .iter()
        .zip(&layer.fids)
        .map(|(v, fid)| match v {
            None => Err(bad(format!(
                "feature {fid} has no value (missing); expected a finite number ≥ 0"
            ))),
            Some(x) if x.is_finite() && *x >= 0.0 => Ok(*x),
            Some(x) => Err(bad(format!(
                "feature {fid} has {x}; expected a finite number ≥ 0"
            ))),
        })
        .collect()
}

/// A numeric field analysed as it is: every feature needs a finite value.
///
/// # Errors
/// [`Error::BadField`] naming the first feature with a missing or non-finite value.
pub fn finite(path: &Path, layer: &PolygonLayer, field: &str, column: &Column) -> Result<Vec<f64>> {
    let Column::Real(values) = column else {
        return Err(Error::Failed(format!(
            "field '{field}' was not read as numbers"
        )));
    };
    values
        .iter()
        .zip(&layer.fids)
        .map(|(v, fid)| match v {
            Some(x) if x.is_finite() => Ok(*x),
            _ => Err(Error::BadField {
                path: path.to_owned(),
                layer: layer.layer.clone(),
                field: field.to_owned(),
                message: format!("feature {fid} has no finite value; every area needs one"),
            }),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gpkg::read::TextColumn;

    fn layer(fids: Vec<i64>) -> PolygonLayer {
        let srs = crate::gpkg::crs::wgs84().expect("wgs84");
        PolygonLayer {
            layer: "areas".into(),
            polygons: vec![geo_types::MultiPolygon::new(vec![]); fids.len()],
            fids,
            columns: vec![],
            srs: srs.clone(),
            source_srs: srs,
        }
    }

    fn text(values: &[Option<&str>]) -> Column {
        let mut c = TextColumn::default();
        for v in values {
            match v {
                None => c.codes.push(TextColumn::NULL),
                Some(v) => {
                    c.values.push((*v).to_owned());
                    c.codes.push((c.values.len() - 1) as u32);
                }
            }
        }
        Column::Text(c)
    }

    #[test]
    fn ids_are_trimmed_and_blank_or_missing_ids_name_the_feature() {
        let l = layer(vec![10, 11, 12]);
        let ids = area_ids(
            Path::new("a.gpkg"),
            &l,
            Some(("code", &text(&[Some(" A1 "), Some("B2"), Some("C3")]))),
        )
        .expect("ids");
        assert_eq!(
            ids,
            AreaIds::Text(vec!["A1".into(), "B2".into(), "C3".into()])
        );
        // Integer-looking ids after trimming become integers (weights tables match either way).
        let ids = area_ids(
            Path::new("a.gpkg"),
            &l,
            Some(("code", &text(&[Some(" 7"), Some("8 "), Some("9")]))),
        )
        .expect("ids");
        assert_eq!(ids, AreaIds::Integer(vec![7, 8, 9]));
        for bad in [
            [Some("A"), Some("  "), Some("C")],
            [Some("A"), None, Some("C")],
        ] {
            let e =
                area_ids(Path::new("a.gpkg"), &l, Some(("code", &text(&bad)))).expect_err("blank");
            assert!(e.to_string().contains("feature 11 has no id"), "{e}");
            assert_eq!(e.exit_code(), 2);
        }
        let e = area_ids(
            Path::new("a.gpkg"),
            &l,
            Some(("code", &text(&[Some("A"), Some("B"), Some(" A")]))),
        )
        .expect_err("duplicate");
        assert!(e.to_string().contains("'A' appears more than once"), "{e}");
        assert_eq!(
            area_ids(Path::new("a.gpkg"), &l, None).expect("fids"),
            AreaIds::Integer(vec![10, 11, 12])
        );
    }

    #[test]
    fn the_recorded_id_field_of_a_table_wins_and_a_contradiction_is_refused() {
        let table = WeightsTable {
            table: "w".into(),
            links: vec![],
            id_field: Some(Some("code".into())),
        };
        assert_eq!(
            id_field_for(None, Some(&table)).expect("recorded"),
            Some("code".into())
        );
        assert_eq!(
            id_field_for(Some("code"), Some(&table)).expect("same"),
            Some("code".into())
        );
        let e = id_field_for(Some("name"), Some(&table)).expect_err("differs");
        assert!(e.to_string().contains("differs from the id field"), "{e}");
        let by_fid = WeightsTable {
            id_field: Some(None),
            ..table
        };
        assert!(id_field_for(Some("code"), Some(&by_fid)).is_err());
        assert_eq!(
            id_field_for(Some("x"), None).expect("no table"),
            Some("x".into())
        );
    }

    #[test]
    fn counts_must_be_finite_and_not_negative() {
        let l = layer(vec![1, 2]);
        let ok = non_negative(
            Path::new("a"),
            &l,
            "n",
            &Column::Real(vec![Some(0.0), Some(3.5)]),
        );
        assert_eq!(ok.expect("valid"), vec![0.0, 3.5]);
        for bad in [
            vec![Some(1.0), None],
            vec![Some(1.0), Some(-1.0)],
            vec![Some(f64::NAN), Some(1.0)],
        ] {
            let e = non_negative(Path::new("a"), &l, "n", &Column::Real(bad)).expect_err("bad");
            assert!(e.to_string().contains("feature"), "{e}");
        }
        assert!(finite(
            Path::new("a"),
            &l,
            "x",
            &Column::Real(vec![Some(-2.0), Some(1.0)])
        )
        .is_ok());
        assert!(finite(
            Path::new("a"),
            &l,
            "x",
            &Column::Real(vec![Some(-2.0), None])
        )
        .is_err());
    }
}
