//! The fields added to the areas and the summary of a stance-rates run.

use serde_json::{json, Value};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind};
use stance_core::stance::Stance;
use stance_core::weights::Neighbours;

use crate::eb::{GlobalEb, LocalEb, Model};
use crate::input::{Areas, Counts};
use crate::params::{AtRisk, Config, Source};
use crate::zonal::ZoneStats;

/// Local EB smoothing with its neighbours.
pub struct Local {
    /// The neighbours used.
    pub neighbours: Neighbours,
    /// Where they came from.
    pub source: String,
    /// The smoothed rates.
    pub eb: LocalEb,
}

/// Everything computed for the areas.
pub struct Rated<'a> {
    /// Cases and population at risk.
    pub counts: &'a Counts,
    /// Raw rate and standard error.
    pub raw: Vec<Option<(f64, f64)>>,
    /// Global EB.
    pub global: GlobalEb,
    /// Local EB (None with `--no-local`).
    pub local: Option<Local>,
    /// Surface statistics per area, with the summary of the join.
    pub surface: Option<(Vec<Option<ZoneStats>>, Value)>,
}

fn real(values: impl Iterator<Item = Option<f64>>) -> ExtraColumn {
    ExtraColumn::Real(values.collect())
}

fn integer(values: impl Iterator<Item = i64>) -> ExtraColumn {
    ExtraColumn::Integer(values.map(Some).collect())
}

/// The fields added to the copy of the area layer, in order.
pub fn fields(rated: &Rated) -> Vec<(FieldDef, ExtraColumn)> {
    let mut extra = Vec::new();
    let mut add = |name: &str, kind, column| extra.push((FieldDef::new(name, kind), column));
    let counts = rated.counts;
    if let Some(per_class) = &counts.per_class {
        for class in Stance::ALL {
            let name = format!("count_{}", class.label());
            let values = per_class.iter().map(|c| c[class as usize] as i64);
            add(&name, FieldKind::Integer, integer(values));
        }
        let totals = per_class.iter().map(|c| c.iter().sum::<u64>() as i64);
        add("count_total", FieldKind::Integer, integer(totals));
    }
    add(
        "cases",
        FieldKind::Real,
        real(counts.cases.iter().map(|v| Some(*v))),
    );
    add(
        "at_risk",
        FieldKind::Real,
        real(counts.at_risk.iter().map(|v| Some(*v))),
    );
    add(
        "rate_raw",
        FieldKind::Real,
        real(rated.raw.iter().map(|r| r.map(|r| r.0))),
    );
    add(
        "rate_se",
        FieldKind::Real,
        real(rated.raw.iter().map(|r| r.map(|r| r.1))),
    );
    let global = rated.global.smoothed.iter().map(|v| Some(*v));
    add("rate_eb_global", FieldKind::Real, real(global));
    if let Some(local) = &rated.local {
        add(
            "rate_eb_local",
            FieldKind::Real,
            real(local.eb.smoothed.iter().copied()),
        );
        let means = local.eb.priors.iter().map(|p| p.map(|p| p.mean));
        add("eb_local_prior_mean", FieldKind::Real, real(means));
    }
    let nobody = counts.at_risk.iter().map(|b| i64::from(*b <= 0.0));
    add("no_one_at_risk", FieldKind::Integer, integer(nobody));
    if let Some((stats, _)) = &rated.surface {
        for (name, pick) in [
            (
                "surface_mean",
                (|s: &ZoneStats| s.mean) as fn(&ZoneStats) -> f64,
            ),
            ("surface_min", |s| s.min),
            ("surface_max", |s| s.max),
            ("surface_cells", |s| s.cells),
        ] {
            add(
                name,
                FieldKind::Real,
                real(stats.iter().map(|s| s.as_ref().map(pick))),
            );
        }
    }
    extra
}

/// The summary of the run that wrote layer `name`.
pub fn summary(config: &Config, areas: &Areas, rated: &Rated, name: &str) -> Value {
    let fids = &areas.layer.fids;
    let counts = rated.counts;
    let nobody: Vec<usize> = (0..fids.len())
        .filter(|&i| counts.at_risk[i] <= 0.0)
        .collect();
    let (case_class, case_field, at_risk_classes, at_risk_field) = match &config.source {
        Source::Fields { cases, at_risk } => (None, Some(cases), None, Some(at_risk)),
        Source::Points { case, at_risk, .. } => match at_risk {
            AtRisk::Classes(c) => {
                let labels: Vec<&str> = c.iter().map(|s| s.label()).collect();
                (Some(case.label()), None, Some(labels), None)
            }
            AtRisk::Field(f) => (Some(case.label()), None, None, Some(f)),
        },
    };
    let prior = &rated.global.prior;
    json!({
        "layer": name,
        "areas": fids.len(),
        "invalid_areas": areas.invalid,
        "case_class": case_class,
        "case_field": case_field,
        "at_risk_classes": at_risk_classes,
        "at_risk_field": at_risk_field,
        "model": match config.model { Model::Poisson => "poisson", Model::Binomial => "binomial" },
        "cases_total": counts.cases.iter().sum::<f64>(),
        "at_risk_total": counts.at_risk.iter().sum::<f64>(),
        "working_crs": stance_core::gpkg::crs::label(&areas.layer.srs),
        "points": counts.points,
        "global_eb": {
            "method": "global EB, method of moments (Marshall 1991; binomial after Martuzzi & Elliott 1996)",
            "prior_mean": prior.mean,
            "prior_variance": prior.variance,
            "prior_variance_estimate": prior.variance_estimate,
            "prior_variance_truncated": prior.truncated(),
            "areas_in_prior": prior.areas,
        },
        "local_eb": rated.local.as_ref().map(|l| local_summary(l, fids)),
        "areas_with_no_one_at_risk": nobody.iter().map(|&i| fids[i]).collect::<Vec<_>>(),
        "cases_in_areas_with_no_one_at_risk": nobody.iter().map(|&i| counts.cases[i]).sum::<f64>(),
        "surface": rated.surface.as_ref().map(|(_, s)| s),
    })
}

fn local_summary(local: &Local, fids: &[i64]) -> Value {
    let s = local.neighbours.summary();
    json!({
        "method": "local EB: prior from each area and its neighbours, variance around the local mean (Marshall 1991)",
        "source": local.source,
        "links": s.links,
        "min_neighbours": s.min_neighbours,
        "mean_neighbours": s.mean_neighbours,
        "max_neighbours": s.max_neighbours,
        "islands": s.islands.iter().map(|&i| fids[i]).collect::<Vec<_>>(),
        "prior_variance_truncated_areas": local.eb.truncated(),
        "prior_undefined_areas": local.eb.undefined(),
    })
}
