//! stance-moran: global and local Moran's I of a numeric field of an area layer, with analytic
//! and permutation inference and LISA cluster types (Cliff & Ord 1981; Anselin 1995; Sokal,
//! Oden & Thomson 1998), and the Empirical Bayes index for rates (Assunção & Reis 1999).

pub mod maths;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{read_polygons, PolygonLayer};
use stance_core::gpkg::stage::{ExtraColumn, FieldDef, FieldKind};
use stance_core::gpkg::weights_table::{self, AreaIds};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::multiple::{adjust, Adjustment};
use stance_core::weights::{self, Method, Standardisation};

use maths::{Alternative, MoranError};
use stance_core::host::neighbours::NeighbourArgs;

/// Weight scaling.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum StandardiseArg {
    /// Each area's neighbour weights sum to 1.
    Row,
    /// Every neighbour weighs 1.
    Binary,
}

/// Direction of the tests.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum AlternativeArg {
    /// Either direction; permutation p = min(1, 2 × the smaller one-sided p).
    TwoSided,
    /// Positive association (like values together).
    Greater,
    /// Negative association (unlike values together).
    Less,
}

/// Multiple-testing adjustment of the local pseudo p-values.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum AdjustArg {
    /// No adjustment.
    None,
    /// Benjamini–Hochberg (1995) false discovery rate.
    Fdr,
    /// Benjamini–Yekutieli (2001), valid under any dependence.
    By,
    /// Bonferroni.
    Bonferroni,
}

/// Parameters of stance-moran.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct MoranParams {
    /// Numeric field of the areas to analyse (not needed with --events-field and --base-field).
    #[arg(long, value_name = "FIELD")]
    pub field: Option<String>,

    /// Field of event counts: with --base-field, analyse the Assunção–Reis Empirical Bayes
    /// standardised rate instead of --field.
    #[arg(long, value_name = "FIELD")]
    pub events_field: Option<String>,

    /// Field of the base (population at risk, or all records) of the rate; every value > 0.
    #[arg(long, value_name = "FIELD")]
    pub base_field: Option<String>,

    /// Weights table from stance-weights in the --input file (default: build with --method).
    #[arg(long, value_name = "TABLE")]
    pub weights: Option<String>,

    /// How neighbours are built without --weights.
    #[command(flatten)]
    #[serde(flatten)]
    pub neighbours: NeighbourArgs,

    /// Field of the area ids used in the --weights table (default: the one the table records,
    /// else the feature id).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Weight scaling.
    #[arg(long, value_enum, default_value_t = StandardiseArg::Row)]
    #[serde(default = "default_standardise")]
    pub standardise: StandardiseArg,

    /// Random relabellings for the permutation p-values (0 = none).
    #[arg(long, value_name = "N", default_value_t = 999)]
    #[serde(default = "default_permutations")]
    pub permutations: usize,

    /// Direction of the tests (global and local).
    #[arg(long, value_enum, default_value_t = AlternativeArg::TwoSided)]
    #[serde(default = "default_alternative")]
    pub alternative: AlternativeArg,

    /// Adjustment of the local pseudo p-values for the many areas tested.
    #[arg(long, value_enum, default_value_t = AdjustArg::Fdr)]
    #[serde(default = "default_adjust")]
    pub adjust: AdjustArg,

    /// Significance level of the cluster types (on the adjusted pseudo p-values).
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    #[serde(default = "default_alpha")]
    pub alpha: f64,
}

fn default_standardise() -> StandardiseArg {
    StandardiseArg::Row
}
fn default_permutations() -> usize {
    999
}
fn default_alternative() -> AlternativeArg {
    AlternativeArg::TwoSided
}
fn default_adjust() -> AdjustArg {
    AdjustArg::Fdr
}
fn default_alpha() -> f64 {
    0.05
}

/// The Moran tool.
#[derive(Debug)]
pub struct Moran;

/// What is analysed.
enum Variable {
    Field(String),
    Rate { events: String, base: String },
}

fn method_from(params: &MoranParams) -> Result<Method> {
    let neighbours = &params.neighbours;
    if params.weights.is_some() && (neighbours.k.is_some() || neighbours.max_distance_m.is_some()) {
        return Err(Error::argument(
            "--weights",
            "takes its neighbours from the table; drop --k / --max-distance-m",
        ));
    }
    neighbours.method()
}

fn numbers(
    path: &std::path::Path,
    layer: &PolygonLayer,
    column: usize,
    field: &str,
) -> Result<Vec<f64>> {
    layer.fields[column]
        .iter()
        .enumerate()
        .map(|(i, v)| {
            v.as_deref()
                .and_then(|t| t.trim().parse::<f64>().ok())
                .filter(|x| x.is_finite())
                .ok_or_else(|| Error::BadField {
                    path: path.to_owned(),
                    layer: layer.layer.clone(),
                    field: field.to_owned(),
                    message: format!(
                        "feature {} has {}; every area needs a finite number",
                        layer.fids[i],
                        v.as_deref().map_or("NULL".to_owned(), |t| format!("'{t}'"))
                    ),
                })
        })
        .collect()
}

impl Tool for Moran {
    type Params = MoranParams;
    const ID: &'static str = "moran";
    const TITLE: &'static str =
        "Global and local Moran's I of an area field, with LISA cluster types";
    const DESCRIPTION: &'static str = "Global Moran's I of a numeric field of an area layer with its \
        expectation, variances under normality and randomisation, z, analytic p and a seeded permutation p; \
        local Moran's I (Anselin 1995) per area on spdep's scale Ii = (z_i/m2) Σ w_ij z_j, m2 = Σz²/n, with its \
        conditional-randomisation expectation, variance and z (Sokal, Oden & Thomson 1998), a \
        conditional-permutation pseudo p (one set of random draws shared by all areas, as in esda; \
        two-sided: twice the smaller tail, at most 1), adjusted for \
        multiple testing, and a cluster type (high-high, low-low, high-low, low-high by the signs of the \
        centred value and its spatial lag, ≥ 0 counting as high; 'not significant' when the adjusted \
        pseudo p > alpha). Areas without neighbours get NULL statistics and is_island = 1. With \
        --events-field and --base-field the analysed value is the Assunção–Reis (1999) Empirical Bayes \
        standardised rate, and the global I is their EB index. Weights come from a stance-weights table \
        or are built on the fly. A constant field is an error (Moran's I is 0/0).";
    const DEFAULT_NAME: &'static str = "moran";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "moran",
            title: "Areas with local Moran's I",
            description: "Copy of the area layer <name> with value_analysed, value_centred, \
                spatial_lag_centred, local_morans_i, local_morans_i_expected, local_morans_i_variance, \
                local_morans_i_z, p_analytic, p_pseudo, p_pseudo_adjusted, cluster_type, is_island, \
                neighbour_count; global results in the summary and the metadata.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &MoranParams, run: &mut Run) -> Result<Value> {
        // Check the parameters once.
        let variable = match (&params.field, &params.events_field, &params.base_field) {
            (None, Some(e), Some(b)) => Variable::Rate {
                events: e.clone(),
                base: b.clone(),
            },
            (Some(f), None, None) => Variable::Field(f.clone()),
            (Some(_), Some(_), _) | (Some(_), _, Some(_)) => {
                return Err(Error::argument(
                    "--field",
                    "give either --field or --events-field with --base-field, not both",
                ))
            }
            (None, Some(_), None) => {
                return Err(Error::argument(
                    "--base-field",
                    "is required with --events-field",
                ))
            }
            (None, None, Some(_)) => {
                return Err(Error::argument(
                    "--events-field",
                    "is required with --base-field",
                ))
            }
            (None, None, None) => {
                return Err(Error::argument(
                    "--field",
                    "missing; name the numeric field to analyse",
                ))
            }
        };
        let method = method_from(params)?;
        if !(params.alpha > 0.0 && params.alpha < 1.0) {
            return Err(Error::argument(
                "--alpha",
                format!("{} must be between 0 and 1", params.alpha),
            ));
        }
        let alternative = match params.alternative {
            AlternativeArg::TwoSided => Alternative::TwoSided,
            AlternativeArg::Greater => Alternative::Greater,
            AlternativeArg::Less => Alternative::Less,
        };
        let adjustment = match params.adjust {
            AdjustArg::None => Adjustment::None,
            AdjustArg::Fdr => Adjustment::Fdr,
            AdjustArg::By => Adjustment::By,
            AdjustArg::Bonferroni => Adjustment::Bonferroni,
        };
        let style = match params.standardise {
            StandardiseArg::Row => Standardisation::Row,
            StandardiseArg::Binary => Standardisation::Binary,
        };

        // Read.
        let input = run.input()?.to_owned();
        let table = match &params.weights {
            Some(name) => Some(weights_table::read(&input, name)?),
            None => None,
        };
        let id_field: Option<String> = match (&params.id_field, &table) {
            (Some(given), Some(t)) => {
                if let Some(recorded) = &t.id_field {
                    if recorded.as_deref() != Some(given.as_str()) {
                        return Err(Error::argument(
                            "--id-field",
                            format!(
                                "'{given}' differs from the id field the weights table '{}' was built with ({})",
                                t.table,
                                recorded.as_deref().unwrap_or("the feature id")
                            ),
                        ));
                    }
                }
                Some(given.clone())
            }
            (None, Some(t)) => t.id_field.clone().flatten(),
            (given, None) => given.clone(),
        };
        let mut wanted: Vec<String> = match &variable {
            Variable::Field(f) => vec![f.clone()],
            Variable::Rate { events, base } => vec![events.clone(), base.clone()],
        };
        if let Some(f) = &id_field {
            wanted.push(f.clone());
        }
        let wanted_refs: Vec<&str> = wanted.iter().map(String::as_str).collect();
        let layer = read_polygons(&input, run.common.layer.as_deref(), &wanted_refs)?;
        run.note_input_layer(&layer.layer);
        run.debug(format!("read {} areas", layer.fids.len()));
        if let Some(t) = &table {
            run.note_input_layer(&t.table);
        }
        let values = match &variable {
            Variable::Field(f) => numbers(&input, &layer, 0, f)?,
            Variable::Rate { events, base } => {
                let e = numbers(&input, &layer, 0, events)?;
                let b = numbers(&input, &layer, 1, base)?;
                maths::eb_standardised_rates(&e, &b).map_err(|err| match err {
                    MoranError::BadRate { index, message } => Error::BadField {
                        path: input.clone(),
                        layer: layer.layer.clone(),
                        field: format!("{events} / {base}"),
                        message: format!("feature {}: {message}", layer.fids[index]),
                    },
                    other => Error::Failed(other.to_string()),
                })?
            }
        };
        run.progress.set(0.1);

        // Weights.
        let (neighbours, weights_source, crs) = match &table {
            Some(t) => {
                let ids = match &id_field {
                    None => AreaIds::Integer(layer.fids.clone()),
                    Some(f) => {
                        let column = wanted.len() - 1;
                        let texts: Vec<String> = layer.fields[column]
                            .iter()
                            .enumerate()
                            .map(|(i, v)| {
                                v.clone().ok_or_else(|| Error::BadField {
                                    path: input.clone(),
                                    layer: layer.layer.clone(),
                                    field: f.clone(),
                                    message: format!("feature {} has no id", layer.fids[i]),
                                })
                            })
                            .collect::<Result<_>>()?;
                        AreaIds::from_text(texts.into_iter().map(|t| t.trim().to_owned()).collect())
                    }
                };
                if let Some(d) = ids.first_duplicate() {
                    return Err(Error::BadField {
                        path: input.clone(),
                        layer: layer.layer.clone(),
                        field: id_field.clone().unwrap_or_else(|| "fid".into()),
                        message: format!("id '{d}' appears more than once; ids must be unique"),
                    });
                }
                let lists = t.neighbours(&ids).map_err(|m| Error::BadLayer {
                    path: input.clone(),
                    layer: t.table.clone(),
                    message: format!(
                        "{m} (ids matched on {}; set --id-field)",
                        id_field.as_deref().unwrap_or("the feature id")
                    ),
                })?;
                (
                    lists,
                    format!("table {} in {}", t.table, input.display()),
                    None,
                )
            }
            None => {
                let (polygons, srs) =
                    weights_table::project_areas(&layer, run.common.crs.as_deref())?;
                let lists = weights::build(&polygons, method, params.neighbours.snap_m)
                    .map_err(|e| Error::argument("--method", e.to_string()))?;
                (
                    lists,
                    format!("{:?} built on the fly", params.neighbours.method).to_lowercase(),
                    Some(srs),
                )
            }
        };
        let summary = neighbours.summary();
        let w = neighbours.standardise(style);
        run.debug(format!("weights ready ({weights_source})"));
        run.progress.set(0.2);

        // Compute.
        let constant_error = |e: MoranError| Error::BadField {
            path: input.clone(),
            layer: layer.layer.clone(),
            field: wanted[0].clone(),
            message: e.to_string(),
        };
        let global = maths::global_moran(
            &values,
            &w,
            params.permutations,
            run.common.seed,
            alternative,
        )
        .map_err(constant_error)?;
        run.check_interrupted()?;
        run.debug("global Moran's I done");
        run.progress.set(0.4);
        let local = maths::local_moran(
            &values,
            &w,
            params.permutations,
            run.common.seed,
            alternative,
        )
        .map_err(constant_error)?;
        run.check_interrupted()?;
        run.debug("local Moran's I done");
        let p_for_clusters = if params.permutations > 0 {
            &local.p_permutation
        } else {
            &local.p_analytic
        };
        let adjusted = adjust(p_for_clusters, adjustment);
        let clusters: Vec<Option<String>> = (0..values.len())
            .map(|i| {
                maths::cluster_type(local.centred[i], local.lag[i], adjusted[i], params.alpha)
                    .map(str::to_owned)
            })
            .collect();
        run.progress.set(0.8);

        // Write.
        let real =
            |v: &[f64]| ExtraColumn::Real(v.iter().map(|x| x.is_finite().then_some(*x)).collect());
        let island: Vec<bool> = neighbours.lists.iter().map(Vec::is_empty).collect();
        let lag: Vec<f64> = local.lag.clone();
        let extra = vec![
            (
                FieldDef::new("value_analysed", FieldKind::Real),
                real(&values),
            ),
            (
                FieldDef::new("value_centred", FieldKind::Real),
                real(&local.centred),
            ),
            (
                FieldDef::new("spatial_lag_centred", FieldKind::Real),
                real(&lag),
            ),
            (
                FieldDef::new("local_morans_i", FieldKind::Real),
                real(&local.ii),
            ),
            (
                FieldDef::new("local_morans_i_expected", FieldKind::Real),
                real(&local.expected),
            ),
            (
                FieldDef::new("local_morans_i_variance", FieldKind::Real),
                real(&local.variance),
            ),
            (
                FieldDef::new("local_morans_i_z", FieldKind::Real),
                real(&local.z),
            ),
            (
                FieldDef::new("p_analytic", FieldKind::Real),
                real(&local.p_analytic),
            ),
            (
                FieldDef::new("p_pseudo", FieldKind::Real),
                real(&local.p_permutation),
            ),
            (
                FieldDef::new("p_pseudo_adjusted", FieldKind::Real),
                real(&adjusted),
            ),
            (
                FieldDef::new("cluster_type", FieldKind::Text),
                ExtraColumn::Text(clusters.clone()),
            ),
            (
                FieldDef::new("is_island", FieldKind::Integer),
                ExtraColumn::Integer(island.iter().map(|b| Some(i64::from(*b))).collect()),
            ),
            (
                FieldDef::new("neighbour_count", FieldKind::Integer),
                ExtraColumn::Integer(
                    neighbours
                        .lists
                        .iter()
                        .map(|l| Some(l.len() as i64))
                        .collect(),
                ),
            ),
        ];
        let name = run.layer_name("");
        run.output()
            .copy_with_fields(&input, &layer.layer, &name, &layer.fids, &extra)?;
        run.progress.set(1.0);

        let mut counts = serde_json::Map::new();
        for kind in [
            "high-high",
            "low-low",
            "high-low",
            "low-high",
            "not significant",
        ] {
            counts.insert(
                kind.into(),
                json!(clusters
                    .iter()
                    .filter(|c| c.as_deref() == Some(kind))
                    .count()),
            );
        }
        let finite = |x: f64| if x.is_finite() { json!(x) } else { Value::Null };
        let analysed = match &variable {
            Variable::Field(f) => json!({ "field": f }),
            Variable::Rate { events, base } => json!({
                "empirical_bayes_rate": { "events_field": events, "base_field": base,
                    "standardisation": "Assunção & Reis (1999), prior variance clipped at 0 as spdep EBImoran.mc" }
            }),
        };
        run.log(format!(
            "stance-moran: I = {:.4} (E = {:.4}, z = {:.3}, p = {:.4}); {} area(s) in clusters → layer '{name}'",
            global.i,
            global.expected,
            global.z_randomisation,
            global.p_randomisation,
            clusters.iter().filter(|c| matches!(c.as_deref(), Some(k) if k != "not significant")).count()
        ));
        Ok(json!({
            "layer": name,
            "analysed": analysed,
            "weights": {
                "source": weights_source,
                "id_field": id_field,
                "standardise": params.standardise,
                "areas": summary.areas,
                "links": summary.links,
                "min_neighbours": summary.min_neighbours,
                "mean_neighbours": summary.mean_neighbours,
                "max_neighbours": summary.max_neighbours,
                "islands": summary.islands.iter().map(|&i| layer.fids[i]).collect::<Vec<_>>(),
                "connected_components": summary.components,
                "crs": crs.as_ref().map(crs_text),
            },
            "global_morans_i": {
                "i": global.i,
                "expected": global.expected,
                "variance_normality": global.variance_normality,
                "variance_randomisation": global.variance_randomisation,
                "z_normality": global.z_normality,
                "z_randomisation": global.z_randomisation,
                "p_normality": global.p_normality,
                "p_randomisation": global.p_randomisation,
                "p_permutation": finite(global.p_permutation),
                "permutation_mean_i": finite(global.permutation_mean),
                "permutations": params.permutations,
                "alternative": params.alternative,
                "n_with_neighbours": global.n,
                "s0": global.s0, "s1": global.s1, "s2": global.s2,
            },
            "local": {
                "scale": "spdep: Ii = (z_i / m2) * sum_j w_ij z_j, m2 = sum z^2 / n (esda Is = (n-1)/n * Ii)",
                "moments": "conditional randomisation, Sokal, Oden & Thomson (1998) eqs. A7-A8",
                "p_for_clusters": if params.permutations > 0 { "conditional-permutation pseudo p" } else { "analytic p" },
                "permutation_draws": "shared by all areas (as esda): each draw is an ordered sample of max |N| + 1 other areas, area i takes the first |N(i)| that are not i",
                "adjust": params.adjust,
                "alpha": params.alpha,
                "cluster_counts": counts,
                "islands": island.iter().filter(|b| **b).count(),
            },
        }))
    }
}

/// The working CRS for the summary: `EPSG:n` when known, else its PROJ string (the centred
/// Lambert azimuthal equal-area projection has no name).
fn crs_text(srs: &gdal::spatial_ref::SpatialRef) -> String {
    let label = stance_core::gpkg::crs::label(srs);
    if label.eq_ignore_ascii_case("unknown") {
        srs.to_proj4().map(|p| p.trim().to_owned()).unwrap_or(label)
    } else {
        label
    }
}
