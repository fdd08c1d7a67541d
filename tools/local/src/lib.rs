//! stance-local: local statistics of categories and of area values — local join counts
//! (univariate, bivariate, co-location; Anselin & Li 2019) with the global join counts (Cliff &
//! Ord 1981), and the Getis–Ord Gi and Gi* (Getis & Ord 1992; Ord & Getis 1995) — with
//! conditional-permutation inference (Anselin 1995), multiple-testing adjustment and flags.

pub mod getis_ord;
pub mod input;
pub mod joincount;
pub mod output;
pub mod params;
pub mod permutation;
pub mod rule;
mod shards;

use serde_json::Value;
use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::multiple::adjust;
use stance_core::weights::{SparseWeights, Standardisation};

use getis_ord::{GError, LocalG};
use input::{Input, Links};
use joincount::{GlobalJoins, JoinKind, LocalJoins};
pub use params::{Analysis, Config, LocalParams};
use permutation::Replicates;

/// The local-statistics tool.
#[derive(Debug)]
pub struct Local;

/// The statistics of a run.
pub enum Stats {
    /// Local join counts.
    Joins {
        /// Attribute A of each place.
        x: Vec<bool>,
        /// Attribute B (bivariate, co-location).
        z: Option<Vec<bool>>,
        /// The local counts and p-values.
        local: LocalJoins,
        /// Adjusted p-values of the tested places.
        adjusted: Vec<f64>,
        /// "cluster", "not significant", or None for places not tested.
        cluster: Vec<Option<String>>,
        /// Global join counts of A (and of B).
        global: Vec<GlobalJoins>,
    },
    /// Getis–Ord Gi / Gi*.
    Getis {
        /// The values analysed.
        values: Vec<f64>,
        /// The statistics.
        local: LocalG,
        /// The self weight of each area (Gi*), else None.
        self_weights: Option<Vec<f64>>,
        /// Adjusted p-values.
        adjusted: Vec<f64>,
        /// "hot", "cold", "not significant".
        hot_cold: Vec<Option<String>>,
    },
}

impl Tool for Local {
    type Params = LocalParams;
    const ID: &'static str = "local";
    const TITLE: &'static str = "Local statistics of categories and of area values";
    const DESCRIPTION: &'static str = "Local join counts of a binary attribute (Anselin & Li 2019): \
        univariate (a place with the attribute among neighbours with it), bivariate without \
        co-location (A next to B) and co-location (A and B together next to A and B together), on \
        areas (the attribute from a numeric field and a rule such as \"> 0.5\", or a stance class in \
        a text field) or on point records of a stance class with k-nearest or distance-band \
        neighbours in metres; binary weights; only places with the attribute are tested, by \
        conditional permutation (Anselin 1995; upper tail), the p-values adjusted for multiple \
        testing and flagged 'cluster' at --alpha. The global join counts BB, WW and BW with their \
        expectations and variances under non-free sampling and z (Cliff & Ord 1981) go in the \
        summary. Getis–Ord Gi and Gi* of non-negative area values (Getis & Ord 1992; Ord & Getis \
        1995) with binary or row-standardised weights, Gi* counting the area among its own \
        neighbours (self weight 1, or 1 / (|N| + 1) row-standardised): the statistic, its \
        expectation and variance, z and a two-sided normal p, a two-sided conditional-permutation p, \
        the adjusted p and a hot / cold flag. Places without neighbours get NULL statistics. \
        Weights come from a stance-weights table or are built here in the working CRS.";
    const DEFAULT_NAME: &'static str = "local";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str =
        "GeoPackage with the area layer (polygons) or the point records to analyse.";

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "local",
            title: "Places with local statistics",
            description: "Copy of the input layer <name> with, for join counts, attribute \
                (attribute_b), join_count, tested, p_permutation, p_adjusted, cluster; for Gi / Gi*, \
                value_analysed, g, expected_g, variance_g, z, p_analytic, p_permutation, \
                p_adjusted, hot_cold (Gi*: self_weight); and is_island, neighbours. Global join counts in the summary.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &LocalParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.seed)?;
        run.progress.phase("reading");
        let table = input::read_table(&config, run)?;
        let id_field =
            areas::id_field_for(params.id_field.as_deref(), table.as_ref().map(|t| &t.1))?;
        let places = input::read(&config, id_field.as_deref(), run)?;
        run.progress.set(0.1);
        run.progress.phase("neighbours");
        let links = input::neighbours(&config, &places, table, id_field)?;
        run.debug(format!("weights ready ({})", links.source));
        run.progress.set(0.2);
        run.progress.phase("permutations");
        let shards = shards::prepare(params, &config, run)?;
        let stats = compute(&config, &places, &links, run, shards.replicates(&config))?;
        run.check_interrupted()?;
        run.progress.phase("writing");
        if let Some(summary) = shards.write_shard(&stats, run)? {
            return Ok(summary);
        }
        let name = run.layer_name("");
        let extra = output::fields(&links, &stats);
        run.output()
            .copy_with_fields(&places.path, places.name(), &name, places.fids(), &extra)?;
        run.progress.set(1.0);
        run.log(output::log_line(&stats, &name));
        Ok(output::summary(
            params, &config, &places, &links, &stats, &name,
        ))
    }
}

/// The statistics of the configured analysis, over `replicates`.
fn compute(
    config: &Config,
    places: &Input,
    links: &Links,
    run: &Run,
    replicates: Replicates,
) -> Result<Stats> {
    let total = config.permutations as u64;
    let report = |done: usize| {
        let share = done as f64 / config.permutations.max(1) as f64;
        run.progress
            .set_counted(0.2 + 0.7 * share, done as u64, total);
    };
    match &config.analysis {
        Analysis::Joins { kind, a, b } => {
            let x = places.binary(a, &config.classes)?;
            let z = b
                .as_ref()
                .map(|b| places.binary(b, &config.classes))
                .transpose()?;
            let w = links.neighbours.standardise(Standardisation::Binary);
            let zz = z.clone().unwrap_or_else(|| vec![false; x.len()]);
            let local = joincount::local_join_counts(*kind, &x, &zz, &w, &replicates, &report);
            let mut global = vec![joincount::global_join_counts(&x, &w)];
            if *kind != JoinKind::Univariate {
                global.push(joincount::global_join_counts(&zz, &w));
            }
            let adjusted = adjust(&local.p_permutation, config.adjustment);
            let cluster = (0..x.len())
                .map(|i| {
                    let p = adjusted[i];
                    (local.tested[i] && p.is_finite()).then(|| {
                        if p <= config.alpha {
                            "cluster"
                        } else {
                            "not significant"
                        }
                        .to_owned()
                    })
                })
                .collect();
            Ok(Stats::Joins {
                x,
                z,
                local,
                adjusted,
                cluster,
                global,
            })
        }
        Analysis::Getis { star, field, row } => {
            let values = places.values(field)?;
            let (w, self_weights) = getis_weights(links, *star, *row);
            let local =
                getis_ord::local_g(&values, &w, self_weights.as_deref(), &replicates, &report)
                    .map_err(|e| g_error(places, field, e))?;
            let p = if config.permutations > 0 {
                &local.p_permutation
            } else {
                &local.p_analytic
            };
            let adjusted = adjust(p, config.adjustment);
            let hot_cold = (0..values.len())
                .map(|i| {
                    getis_ord::hot_cold(local.g[i], local.expected[i], adjusted[i], config.alpha)
                        .map(str::to_owned)
                })
                .collect();
            Ok(Stats::Getis {
                values,
                local,
                self_weights,
                adjusted,
                hot_cold,
            })
        }
    }
}

/// The neighbour weights of Gi / Gi* and the self weights of Gi*: binary (w_ij = 1, w_ii = 1)
/// or row-standardised over the terms of the statistic (Gi: 1 / |N(i)|; Gi*: 1 / (|N(i)| + 1)
/// for the area and each neighbour).
fn getis_weights(links: &Links, star: bool, row: bool) -> (SparseWeights, Option<Vec<f64>>) {
    let lists = &links.neighbours.lists;
    if !star {
        let style = if row {
            Standardisation::Row
        } else {
            Standardisation::Binary
        };
        return (links.neighbours.standardise(style), None);
    }
    let mut w = links.neighbours.standardise(Standardisation::Binary);
    let own: Vec<f64> = lists
        .iter()
        .map(|l| {
            if row {
                1.0 / (l.len() as f64 + 1.0)
            } else {
                1.0
            }
        })
        .collect();
    if row {
        for (i, scale) in own.iter().enumerate() {
            let span = w.offsets[i]..w.offsets[i + 1];
            for v in &mut w.weights[span] {
                *v = *scale;
            }
        }
    }
    (w, Some(own))
}

fn g_error(places: &Input, field: &str, e: GError) -> Error {
    let message = match e {
        GError::BadValue(i) => format!(
            "feature {} has a negative value; Gi and Gi* need values ≥ 0 (Getis & Ord 1992)",
            places.fids()[i]
        ),
        GError::AllZero => "every value is 0; Gi and Gi* are 0/0".to_owned(),
    };
    Error::BadField {
        path: places.path.clone(),
        layer: places.name().to_owned(),
        field: field.to_owned(),
        message,
    }
}
