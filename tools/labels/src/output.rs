//! The records layer, the area fields and the summary of a stance-labels run.

use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::gpkg::stage::{ExtraColumn, FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::Run;
use stance_core::stance::Stance;

use crate::analysis::{Agreement, AreaResult};
use crate::confusion::{Proportion, Scores};
use crate::consensus::Consensus;
use crate::correct::Misclassification;
use crate::input::{Areas, Records};
use crate::params::Config;

/// The label of a class index.
pub fn class_label(c: usize) -> &'static str {
    Stance::ALL.get(c).map_or("undecided", |s| s.label())
}

/// A field name made of a user's field name: lower case, other characters as `_`.
pub fn snake(name: &str) -> String {
    name.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '_'
            }
        })
        .collect()
}

/// Writes the records layer `name`: a copy of the input points (every field, the stored CRS)
/// with the consensus fields added. Returns the rows written.
///
/// # Errors
/// Staging failures; an input field already named like an added one.
pub fn write_records(
    run: &mut Run,
    name: &str,
    records: &Records,
    consensus: &[Consensus],
) -> Result<u64> {
    let mut extra = Vec::new();
    if let Some(reference) = &records.reference {
        extra.push((
            FieldDef::new("in_reference", FieldKind::Integer),
            ExtraColumn::Integer(
                reference
                    .iter()
                    .map(|r| Some(i64::from(r.is_some())))
                    .collect(),
            ),
        ));
    }
    let texts = consensus
        .iter()
        .map(|c| Some(c.class.map_or("undecided", class_label).to_owned()));
    let ints = |f: &dyn Fn(&Consensus) -> i64| consensus.iter().map(|c| Some(f(c))).collect();
    let reals = |f: &dyn Fn(&Consensus) -> f64| consensus.iter().map(|c| Some(f(c))).collect();
    extra.extend([
        (
            FieldDef::new("consensus", FieldKind::Text),
            ExtraColumn::Text(texts.collect()),
        ),
        (
            FieldDef::new("consensus_votes", FieldKind::Integer),
            ExtraColumn::Integer(ints(&|c| c.votes as i64)),
        ),
        (
            FieldDef::new("consensus_share", FieldKind::Real),
            ExtraColumn::Real(reals(&|c| c.share)),
        ),
        (
            FieldDef::new("consensus_posterior", FieldKind::Real),
            ExtraColumn::Real(reals(&|c| c.posterior)),
        ),
        (
            FieldDef::new("all_agree", FieldKind::Integer),
            ExtraColumn::Integer(ints(&|c| i64::from(c.unanimous))),
        ),
    ]);
    let layer = &records.layer;
    run.output()
        .copy_with_fields(&records.path, &layer.layer, name, &layer.fids, &extra)
}

/// The fields added to the copy of the areas.
pub fn area_fields(config: &Config, results: &[AreaResult]) -> Vec<(FieldDef, ExtraColumn)> {
    let mut extra = Vec::new();
    let mut add = |name: String, kind, column| extra.push((FieldDef::new(&name, kind), column));
    let ints = |f: &dyn Fn(&AreaResult) -> i64| {
        ExtraColumn::Integer(results.iter().map(|r| Some(f(r))).collect())
    };
    let reals =
        |f: &dyn Fn(&AreaResult) -> Option<f64>| ExtraColumn::Real(results.iter().map(f).collect());
    add(
        "count_total".into(),
        FieldKind::Integer,
        ints(&|r| r.records as i64),
    );
    add(
        "all_agree_share".into(),
        FieldKind::Real,
        reals(&|r| r.unanimous),
    );
    let mut p = 0;
    for a in 0..config.labels.len() {
        for b in a + 1..config.labels.len() {
            let name = format!(
                "kappa_{}_{}",
                snake(&config.labels[a]),
                snake(&config.labels[b])
            );
            add(name, FieldKind::Real, reals(&|r| r.kappa[p]));
            p += 1;
        }
    }
    if config.correct.is_none() {
        return extra;
    }
    let z = config.z;
    for class in Stance::ALL {
        let c = class as usize;
        let label = class.label();
        add(
            format!("share_{label}_raw"),
            FieldKind::Real,
            reals(&|r| r.corrected.as_ref().map(|s| s.raw[c])),
        );
        add(
            format!("share_{label}_corrected"),
            FieldKind::Real,
            reals(&|r| r.corrected.as_ref().map(|s| s.shares[c])),
        );
        let bound = |sign: f64| {
            move |r: &AreaResult| {
                r.corrected
                    .as_ref()
                    .map(|s| (s.shares[c] + sign * z * s.se[c]).clamp(0.0, 1.0))
            }
        };
        add(
            format!("share_{label}_lower"),
            FieldKind::Real,
            reals(&bound(-1.0)),
        );
        add(
            format!("share_{label}_upper"),
            FieldKind::Real,
            reals(&bound(1.0)),
        );
    }
    let flag = |f: fn(&crate::correct::Corrected) -> bool| {
        ExtraColumn::Integer(
            results
                .iter()
                .map(|r| r.corrected.as_ref().map(|s| i64::from(f(s))))
                .collect(),
        )
    };
    add(
        "correction_clamped".into(),
        FieldKind::Integer,
        flag(|s| s.clamped),
    );
    add(
        "correction_unstable".into(),
        FieldKind::Integer,
        flag(|s| s.unstable),
    );
    extra
}

fn proportion(p: &Proportion) -> Value {
    json!({"estimate": p.estimate, "lower": p.lower, "upper": p.upper, "n": p.trials})
}

/// A labeller's scores as JSON.
fn scores_json(field: &str, s: &Scores) -> Value {
    let classes: serde_json::Map<String, Value> = s
        .classes
        .iter()
        .enumerate()
        .map(|(c, cs)| {
            let v = json!({"precision": proportion(&cs.precision), "recall": proportion(&cs.recall), "f1": cs.f1});
            (class_label(c).to_owned(), v)
        })
        .collect();
    json!({
        "field": field,
        "confusion_matrix": s.matrix,
        "accuracy": proportion(&s.accuracy),
        "classes": classes,
    })
}

/// Everything the summary reports.
pub struct Found<'a> {
    /// Overall agreement.
    pub agreement: &'a Agreement,
    /// Scores on the reference subset.
    pub scores: Option<&'a [Scores]>,
    /// Consensus per record.
    pub consensus: &'a [Consensus],
    /// The correction matrix.
    pub correction: Option<&'a Misclassification>,
    /// Layers written: records, areas.
    pub layers: (&'a str, Option<&'a str>),
    /// Areas read.
    pub areas: Option<&'a Areas>,
    /// Records outside every area.
    pub outside: u64,
    /// The comparison of cluster layers.
    pub comparison: Option<Value>,
}

/// The summary of the run.
pub fn summary(config: &Config, records: &Records, found: &Found) -> Value {
    let names = &config.labels;
    let pairs: Vec<Value> = found
        .agreement
        .pairs
        .iter()
        .map(|p| {
            json!({
                "fields": [names[p.a], names[p.b]],
                "kappa": p.kappa.kappa, "kappa_se": p.kappa.se,
                "weighted_kappa": p.weighted.kappa, "weighted_kappa_se": p.weighted.se,
                "observed_agreement": p.kappa.observed, "table": p.table,
            })
        })
        .collect();
    let undecided = found.consensus.iter().filter(|c| c.class.is_none()).count();
    json!({
        "layer": found.layers.0,
        "areas_layer": found.layers.1,
        "records": records.layer.fids.len(),
        "label_fields": names,
        "weighting": format!("{:?}", config.weighting).to_lowercase(),
        "pairs": pairs,
        "fleiss_kappa": found.agreement.fleiss,
        "krippendorff_alpha_ordinal": found.agreement.alpha,
        "all_agree_share": found.agreement.unanimous,
        "reference_records": records.reference.as_ref().map(|r| r.iter().flatten().count()),
        "labellers": found.scores.map(|s| s.iter().zip(names).map(|(s, f)| scores_json(f, s)).collect::<Vec<_>>()),
        "consensus_undecided": undecided,
        "correction": found.correction.map(|m| json!({
            "field": config.correct.map(|j| &names[j]),
            "misclassification": m.p,
            "condition_number": m.condition,
            "unstable_above": crate::correct::MAX_CONDITION,
        })),
        "areas": found.areas.map(|a| a.layer.fids.len()),
        "records_outside_areas": found.areas.map(|_| found.outside),
        "min_records": config.min_records,
        "comparison": found.comparison,
        "methods": "Cohen 1960 kappa; Cohen 1968 weighted kappa; standard errors Fleiss, Cohen & Everitt 1969; \
            Fleiss 1971; Krippendorff 2004 ordinal alpha; Wilson 1927 intervals; consensus ties by reference \
            accuracy, posterior after Dawid & Skene 1979; corrected shares by matrix inversion with delta-method \
            variance (Buonaccorsi 2010, ch. 3)",
    })
}

/// Writes the compared features as polygon layer `name` (the records' CRS): source_layer,
/// source_fid, best_jaccard_<layer> per compared layer, matched_layers, found_under_all,
/// labeller_specific. Returns the rows written.
///
/// # Errors
/// Staging failures.
pub fn write_clusters(
    run: &mut Run,
    name: &str,
    layers: &[stance_core::gpkg::read::PolygonLayer],
    comparison: &crate::overlap::Comparison,
) -> Result<u64> {
    let mut fields = vec![
        FieldDef::new("source_layer", FieldKind::Text),
        FieldDef::new("source_fid", FieldKind::Integer),
    ];
    fields.extend(layers.iter().map(|l| {
        FieldDef::new(
            &format!("best_jaccard_{}", snake(&l.layer)),
            FieldKind::Real,
        )
    }));
    for f in ["matched_layers", "found_under_all", "labeller_specific"] {
        fields.push(FieldDef::new(f, FieldKind::Integer));
    }
    let Some(srs) = layers.first().map(|l| &l.srs) else {
        return Ok(0);
    };
    let others = layers.len() - 1;
    let mut writer =
        run.output()
            .create_vector(name, GeometryKind::MultiPolygon, Some(srs), &fields)?;
    for f in &comparison.features {
        let layer = &layers[f.layer];
        let mut values = vec![
            FieldData::Text(&layer.layer),
            FieldData::Integer(layer.fids[f.index]),
        ];
        values.extend(f.best.iter().map(|&v| FieldData::Real(v)));
        values.push(FieldData::Integer(f.matched_in as i64));
        values.push(FieldData::Integer(i64::from(f.matched_in == others)));
        values.push(FieldData::Integer(i64::from(f.matched_in == 0)));
        writer.add(Shape::MultiPolygon(&layer.polygons[f.index]), &values)?;
    }
    writer.finish()
}

/// The comparison's part of the summary.
pub fn comparison_json(
    layers: &[stance_core::gpkg::read::PolygonLayer],
    comparison: &crate::overlap::Comparison,
    layer: &str,
) -> Value {
    let others = layers.len().saturating_sub(1);
    let count = |pick: &dyn Fn(usize) -> bool| {
        comparison
            .features
            .iter()
            .filter(|f| pick(f.matched_in))
            .count()
    };
    json!({
        "layer": layer,
        "method": "Jaccard (1912) index of areas in the working CRS",
        "pairs": comparison.pairs.iter().map(|(a, b, j)| json!({
            "layers": [layers[*a].layer, layers[*b].layer], "jaccard_of_regions": j,
        })).collect::<Vec<_>>(),
        "features": comparison.features.len(),
        "found_under_all": count(&|m| m == others),
        "labeller_specific": count(&|m| m == 0),
    })
}
