//! The per-place fields and the summary of a stance-local run: `join_count`, `tested`,
//! `p_permutation`, `p_adjusted`, `cluster` for join counts; `g`, `expected_g`, `variance_g`,
//! `z`, `p_analytic`, `p_permutation`, `p_adjusted`, `hot_cold` for Gi / Gi*.

use serde_json::{json, Value};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind};

use crate::input::{Input, Links};
use crate::joincount::{GlobalJoins, JoinMoments};
use crate::params::{Analysis, Config, LocalParams, Places};
use crate::Stats;
use stance_core::normal::upper_tail;

fn real(v: &[f64]) -> ExtraColumn {
    ExtraColumn::Real(v.iter().map(|x| x.is_finite().then_some(*x)).collect())
}

fn flag(v: &[bool]) -> ExtraColumn {
    ExtraColumn::Integer(v.iter().map(|b| Some(i64::from(*b))).collect())
}

fn text(v: &[Option<String>]) -> ExtraColumn {
    ExtraColumn::Text(v.to_vec())
}

/// The fields added to the copy of the input layer.
pub fn fields(links: &Links, stats: &Stats) -> Vec<(FieldDef, ExtraColumn)> {
    let f = |name: &str, kind| FieldDef::new(name, kind);
    let mut out = match stats {
        Stats::Joins {
            x,
            z,
            local,
            adjusted,
            cluster,
            ..
        } => {
            let mut v = vec![(f("attribute", FieldKind::Integer), flag(x))];
            if let Some(z) = z {
                v.push((f("attribute_b", FieldKind::Integer), flag(z)));
            }
            v.extend([
                (f("join_count", FieldKind::Real), real(&local.join_count)),
                (f("tested", FieldKind::Integer), flag(&local.tested)),
                (
                    f("p_permutation", FieldKind::Real),
                    real(&local.p_permutation),
                ),
                (f("p_adjusted", FieldKind::Real), real(adjusted)),
                (f("cluster", FieldKind::Text), text(cluster)),
            ]);
            v
        }
        Stats::Getis {
            values,
            local,
            adjusted,
            hot_cold,
            self_weights,
        } => {
            let mut v = vec![
                (f("value_analysed", FieldKind::Real), real(values)),
                (f("g", FieldKind::Real), real(&local.g)),
                (f("expected_g", FieldKind::Real), real(&local.expected)),
                (f("variance_g", FieldKind::Real), real(&local.variance)),
                (f("z", FieldKind::Real), real(&local.z)),
                (f("p_analytic", FieldKind::Real), real(&local.p_analytic)),
                (
                    f("p_permutation", FieldKind::Real),
                    real(&local.p_permutation),
                ),
                (f("p_adjusted", FieldKind::Real), real(adjusted)),
                (f("hot_cold", FieldKind::Text), text(hot_cold)),
            ];
            if let Some(own) = self_weights {
                v.push((f("self_weight", FieldKind::Real), real(own)));
            }
            v
        }
    };
    let lists = &links.neighbours.lists;
    let islands: Vec<bool> = lists.iter().map(Vec::is_empty).collect();
    out.push((f("is_island", FieldKind::Integer), flag(&islands)));
    out.push((
        f("neighbours", FieldKind::Integer),
        ExtraColumn::Integer(lists.iter().map(|l| Some(l.len() as i64)).collect()),
    ));
    out
}

fn count(v: &[Option<String>], what: &str) -> usize {
    v.iter().filter(|c| c.as_deref() == Some(what)).count()
}

/// The one log line of a run.
pub fn log_line(stats: &Stats, name: &str) -> String {
    match stats {
        Stats::Joins { local, cluster, .. } => format!(
            "stance-local: {} place(s) tested, {} in clusters → layer '{name}'",
            local.tested.iter().filter(|t| **t).count(),
            count(cluster, "cluster")
        ),
        Stats::Getis { hot_cold, .. } => format!(
            "stance-local: {} hot and {} cold spot(s) → layer '{name}'",
            count(hot_cold, "hot"),
            count(hot_cold, "cold")
        ),
    }
}

fn finite(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

fn moments(m: &JoinMoments, upper: bool) -> Value {
    let p = if upper {
        upper_tail(m.z)
    } else {
        upper_tail(-m.z)
    };
    json!({
        "count": m.count,
        "expected": finite(m.expected),
        "variance": finite(m.variance),
        "z": finite(m.z),
        "p_analytic": finite(p),
    })
}

/// Global join counts (Cliff & Ord 1981): p one-sided toward clustering (more BB or WW joins,
/// fewer BW joins than expected).
fn global(g: &GlobalJoins, attribute: String) -> Value {
    json!({
        "attribute": attribute,
        "places": g.n,
        "with_attribute": g.n1,
        "joins": g.joins,
        "bb": moments(&g.bb, true),
        "ww": moments(&g.ww, true),
        "bw": moments(&g.bw, false),
        "moments": "non-free sampling (Cliff & Ord 1981); p one-sided toward clustering: more BB / WW, fewer BW joins",
    })
}

/// The summary: what was analysed, the weights, the global statistics and the local overview.
pub fn summary(
    params: &LocalParams,
    config: &Config,
    places: &Input,
    links: &Links,
    stats: &Stats,
    name: &str,
) -> Value {
    let s = links.neighbours.summary();
    let fids = places.fids();
    let weights = json!({
        "source": links.source,
        "id_field": links.id_field,
        "areas": s.areas,
        "links": s.links,
        "min_neighbours": s.min_neighbours,
        "mean_neighbours": s.mean_neighbours,
        "max_neighbours": s.max_neighbours,
        "islands": s.islands.iter().map(|&i| fids[i]).collect::<Vec<_>>(),
        "connected_components": s.components,
        "crs": links.crs,
    });
    let places_kind = match config.places {
        Places::Areas => "areas",
        Places::Points => "points",
    };
    let inference = json!({
        "permutations": params.permutations,
        "scheme": "conditional permutation (Anselin 1995): each place keeps its value, its neighbours draw theirs from the other places; one set of draws shared by all places",
        "adjust": params.adjust,
        "alpha": params.alpha,
    });
    let detail = match (stats, &config.analysis) {
        (
            Stats::Joins {
                local,
                cluster,
                global: g,
                ..
            },
            Analysis::Joins { a, b, .. },
        ) => {
            let mut globals = vec![global(&g[0], a.describe())];
            if let (Some(g1), Some(b)) = (g.get(1), b) {
                globals.push(global(g1, b.describe()));
            }
            json!({
                "attribute": a.describe(),
                "attribute_b": b.as_ref().map(|b| b.describe()),
                "weights_style": "binary (Anselin & Li 2019)",
                "tested": local.tested.iter().filter(|t| **t).count(),
                "tested_rule": "only places whose own attribute makes the statistic possible are tested (Anselin & Li 2019): A for the univariate count, A without B for the bivariate count, A with B for co-location",
                "p_permutation": "upper tail: (1 + #{permuted ≥ observed}) / (permutations + 1)",
                "clusters": count(cluster, "cluster"),
                "global_join_counts": globals,
            })
        }
        (
            Stats::Getis {
                local, hot_cold, ..
            },
            Analysis::Getis { star, field, row },
        ) => {
            json!({
                "field": field,
                "star": star,
                "weights_style": if *row { "row-standardised" } else { "binary" },
                "self_weight": if !star { Value::Null } else if *row {
                    json!("1 / (|N(i)| + 1), the same as each neighbour (Ord & Getis 1995)")
                } else { json!(1.0) },
                "moments": "Ord & Getis (1995), eqs. 5-6: E = W_i / n', Var = s² (n' S1_i − W_i²) / ((n' − 1) n'² x̄²)",
                "p_analytic": "two-sided normal",
                "p_permutation": "two-sided: min(1, 2 × the smaller tail)",
                "p_for_flags": if params.permutations > 0 { "conditional-permutation p" } else { "analytic p" },
                "hot": count(hot_cold, "hot"),
                "cold": count(hot_cold, "cold"),
                "defined": local.g.iter().filter(|g| g.is_finite()).count(),
            })
        }
        _ => Value::Null,
    };
    json!({
        "layer": name,
        "statistic": params.statistic,
        "places": places_kind,
        "weights": weights,
        "inference": inference,
        "local": detail,
    })
}
