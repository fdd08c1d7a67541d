//! The per-area fields and the summary of a stance-moran run. Names are the method's own:
//! `local_i`, `expected_i`, `variance_i`, `z`, `p_analytic`, `p_permutation`, `p_adjusted`,
//! `cluster` per area, and the same words in the summary's `global` section.

use serde_json::{json, Value};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind};

use crate::{Areas, Config, Links, MoranParams, Stats, Variable};

/// The cluster types, in the order the summary counts them.
pub const CLUSTERS: [&str; 5] = [
    "high-high",
    "low-low",
    "high-low",
    "low-high",
    "not significant",
];

/// The fields added to the copy of the area layer.
pub fn local_fields(areas: &Areas, links: &Links, stats: &Stats) -> Vec<(FieldDef, ExtraColumn)> {
    let real =
        |v: &[f64]| ExtraColumn::Real(v.iter().map(|x| x.is_finite().then_some(*x)).collect());
    let local = &stats.local;
    let lists = &links.neighbours.lists;
    let field = |name: &str, kind| FieldDef::new(name, kind);
    vec![
        (
            field("value_analysed", FieldKind::Real),
            real(&areas.values),
        ),
        (
            field("value_centred", FieldKind::Real),
            real(&local.centred),
        ),
        (
            field("spatial_lag_centred", FieldKind::Real),
            real(&local.lag),
        ),
        (field("local_i", FieldKind::Real), real(&local.local_i)),
        (field("expected_i", FieldKind::Real), real(&local.expected)),
        (field("variance_i", FieldKind::Real), real(&local.variance)),
        (field("z", FieldKind::Real), real(&local.z)),
        (
            field("p_analytic", FieldKind::Real),
            real(&local.p_analytic),
        ),
        (
            field("p_permutation", FieldKind::Real),
            real(&local.p_permutation),
        ),
        (field("p_adjusted", FieldKind::Real), real(&stats.adjusted)),
        (
            field("cluster", FieldKind::Text),
            ExtraColumn::Text(stats.clusters.clone()),
        ),
        (
            field("is_island", FieldKind::Integer),
            ExtraColumn::Integer(
                lists
                    .iter()
                    .map(|l| Some(i64::from(l.is_empty())))
                    .collect(),
            ),
        ),
        (
            field("neighbours", FieldKind::Integer),
            ExtraColumn::Integer(lists.iter().map(|l| Some(l.len() as i64)).collect()),
        ),
    ]
}

/// The one log line of a run.
pub fn log_line(stats: &Stats, name: &str) -> String {
    let g = &stats.global;
    let in_clusters = stats
        .clusters
        .iter()
        .filter(|c| matches!(c.as_deref(), Some(k) if k != "not significant"))
        .count();
    format!(
        "stance-moran: I = {:.4} (E = {:.4}, z = {:.3}, p = {:.4}); {in_clusters} area(s) in clusters → layer '{name}'",
        g.i, g.expected, g.z_randomisation, g.p_randomisation
    )
}

/// The summary: what was analysed, the weights, the global test and the local overview.
pub fn summary(
    params: &MoranParams,
    config: &Config,
    areas: &Areas,
    links: &Links,
    stats: &Stats,
    name: &str,
) -> Value {
    let analysed = match &config.variable {
        Variable::Field(f) => json!({ "field": f }),
        Variable::Rate { cases, at_risk } => json!({
            "empirical_bayes_rate": {
                "case_field": cases,
                "at_risk_field": at_risk,
                "standardisation": "Assunção & Reis (1999): (r_i − b) / √(a + b / n_i), prior variance a set to 0 when negative (Marshall 1991)",
            }
        }),
    };
    let s = links.neighbours.summary();
    let fids = &areas.layer.fids;
    json!({
        "layer": name,
        "analysed": analysed,
        "weights": {
            "source": links.source,
            "id_field": links.id_field,
            "standardise": params.standardise,
            "areas": s.areas,
            "links": s.links,
            "min_neighbours": s.min_neighbours,
            "mean_neighbours": s.mean_neighbours,
            "max_neighbours": s.max_neighbours,
            "islands": s.islands.iter().map(|&i| fids[i]).collect::<Vec<_>>(),
            "connected_components": s.components,
            "crs": links.crs,
        },
        "global": global(params, stats),
        "local": local(params, links, stats),
    })
}

fn finite(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

/// Global Moran's I (Cliff & Ord 1981): the moments under normality and randomisation.
fn global(params: &MoranParams, stats: &Stats) -> Value {
    let g = &stats.global;
    json!({
        "i": g.i,
        "expected_i": g.expected,
        "variance_i_normality": g.variance_normality,
        "variance_i_randomisation": g.variance_randomisation,
        "z_normality": g.z_normality,
        "z_randomisation": g.z_randomisation,
        "p_normality": g.p_normality,
        "p_randomisation": g.p_randomisation,
        "p_permutation": finite(g.p_permutation),
        "mean_i_permutations": finite(g.permutation_mean),
        "permutations": params.permutations,
        "alternative": params.alternative,
        "areas_with_neighbours": g.n,
        "s0": g.s0, "s1": g.s1, "s2": g.s2,
    })
}

/// How the local statistics were formed, and the cluster counts.
fn local(params: &MoranParams, links: &Links, stats: &Stats) -> Value {
    let mut counts = serde_json::Map::new();
    for kind in CLUSTERS {
        let count = stats
            .clusters
            .iter()
            .filter(|c| c.as_deref() == Some(kind))
            .count();
        counts.insert(kind.into(), json!(count));
    }
    json!({
        "scale": "local I_i on the n-divisor scale (Anselin 1995): (z_i / m2) Σ_j w_ij z_j, m2 = Σ z² / n",
        "moments": "conditional randomisation moments (Sokal, Oden & Thomson 1998, eqs. A7–A8)",
        "p_for_clusters": if params.permutations > 0 { "conditional-permutation p" } else { "analytic p" },
        "permutation_draws": "shared by all areas: each draw is an ordered sample of max |N| + 1 other areas; area i takes the first |N(i)| that are not i",
        "adjust": params.adjust,
        "alpha": params.alpha,
        "cluster_counts": counts,
        "islands": links.neighbours.lists.iter().filter(|l| l.is_empty()).count(),
    })
}
