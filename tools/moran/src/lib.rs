//! stance-moran: global and local Moran's I of a numeric field of an area layer, with analytic
//! and permutation inference and LISA cluster types (Cliff & Ord 1981; Anselin 1995; Sokal,
//! Oden & Thomson 1998), and the empirical Bayes index for rates (Assunção & Reis 1999).

pub mod maths;
pub mod output;
pub mod params;

use std::path::PathBuf;

use serde_json::Value;
use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::gpkg::read::{read_polygons, FieldWant, PolygonCrs, PolygonLayer};
use stance_core::gpkg::weights_table::WeightsTable;
use stance_core::host::shard::{Partial, ShardRun};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::multiple::adjust;
use stance_core::weights::{self, Neighbours};

use maths::{GlobalMoran, LocalMoran, MoranError, Part};
pub use params::{Config, MoranParams, Variable};
pub use stance_core::host::neighbours::WeightsSource;

/// The Moran tool.
#[derive(Debug)]
pub struct Moran;

/// The areas read, with the value analysed.
pub struct Areas {
    /// File of the layer.
    pub path: PathBuf,
    /// The layer, in the working CRS.
    pub layer: PolygonLayer,
    /// The analysed value of each area.
    pub values: Vec<f64>,
}

/// The neighbours of the areas and where they came from.
pub struct Links {
    /// Neighbour lists.
    pub neighbours: Neighbours,
    /// "table … in …" or "… built here".
    pub source: String,
    /// The id field that matched the table's ids.
    pub id_field: Option<String>,
    /// The working CRS the neighbours were built in (None for a table).
    pub crs: Option<String>,
}

/// The statistics of a run.
pub struct Stats {
    /// Global Moran's I.
    pub global: GlobalMoran,
    /// Local Moran's I.
    pub local: LocalMoran,
    /// Adjusted local p-values (permutation p with permutations, else analytic).
    pub adjusted: Vec<f64>,
    /// Cluster type of each area (None for islands).
    pub clusters: Vec<Option<String>>,
}

impl Tool for Moran {
    type Params = MoranParams;
    const ID: &'static str = "moran";
    const TITLE: &'static str =
        "Global and local Moran's I of an area field, with LISA cluster types";
    const DESCRIPTION: &'static str = "Global Moran's I of a numeric field of an area layer (Cliff & Ord \
        1981) with its expectation, variances under normality and randomisation, z, analytic p and a seeded \
        permutation p; local Moran's I per area on the n-divisor scale (Anselin 1995), I_i = (z_i / m2) \
        Σ_j w_ij z_j with m2 = Σ z² / n, with its conditional randomisation moments and z (Sokal, Oden & \
        Thomson 1998), a conditional-permutation p (one set of random draws shared by all areas; \
        two-sided: twice the smaller tail, at most 1), adjusted for multiple testing (Bonferroni, Holm \
        1979, Benjamini & Hochberg 1995, Benjamini & Yekutieli 2001), and a cluster type (high-high, \
        low-low, high-low, low-high by the signs of the centred value and its spatial lag, ≥ 0 counting \
        as high; 'not significant' when the adjusted p > alpha). Areas without neighbours get NULL \
        statistics and is_island = 1. With --case-field and --at-risk-field the analysed value is the \
        empirical Bayes standardised rate and the global I is the EB index (Assunção & Reis 1999). \
        Weights come from a stance-weights table or are built here on the areas projected to the working \
        CRS (distances in metres). A constant field is an error (Moran's I is 0/0).";
    const DEFAULT_NAME: &'static str = "moran";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str = "GeoPackage with the area layer (polygons) to analyse.";

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "moran",
            title: "Areas with local Moran's I",
            description: "Copy of the area layer <name> with value_analysed, value_centred, \
                spatial_lag_centred, local_i, expected_i, variance_i, z, p_analytic, p_permutation, \
                p_adjusted, cluster, is_island, neighbours (their count); global results in the \
                summary and the metadata.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &MoranParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.seed)?;
        run.progress.phase("reading");
        let table = read_table(&config, run)?;
        let id_field =
            areas::id_field_for(params.id_field.as_deref(), table.as_ref().map(|t| &t.1))?;
        let areas = read_areas(&config, id_field.as_deref(), run)?;
        run.progress.set(0.1);
        run.progress.phase("neighbours");
        let links = neighbours(&config, &areas, table, id_field)?;
        run.debug(format!("weights ready ({})", links.source));
        run.progress.set(0.2);
        let shards = ShardRun::prepare(
            &config.sharding,
            config.inference.permutations,
            "stance-moran",
            params,
            run,
        )?;
        let part = shard_part(&shards)?;
        run.progress.phase("permutations");
        let stats = compute(&config, &areas, &links, &part, run)?;
        // A shard writes its permutations' global I and local counts, nothing else.
        if let Some(summary) = shards.write(run, || {
            let mut partial = Partial::default();
            partial.values("global", &stats.global.permutation_values);
            let column = |k: usize| -> Vec<u32> {
                stats
                    .local
                    .permutation_counts
                    .iter()
                    .map(|c| c[k])
                    .collect()
            };
            partial.counts("upper", &column(0));
            partial.counts("lower", &column(1));
            Ok(partial)
        })? {
            return Ok(summary);
        }
        run.progress.phase("writing");
        let name = run.layer_name("");
        let extra = output::local_fields(&areas, &links, &stats);
        run.output().copy_with_fields(
            &areas.path,
            &areas.layer.layer,
            &name,
            &areas.layer.fids,
            &extra,
        )?;
        run.progress.set(1.0);
        run.log(output::log_line(&stats, &name));
        Ok(output::summary(
            params, &config, &areas, &links, &stats, &name,
        ))
    }
}

/// The weights table named by `--weights`, with its file (default: the input).
fn read_table(config: &Config, run: &mut Run) -> Result<Option<(PathBuf, WeightsTable)>> {
    let WeightsSource::Table { name, file } = &config.weights else {
        return Ok(None);
    };
    let input = run.input()?.to_owned();
    run.weights_table(name, file.as_deref(), &input).map(Some)
}

/// The area layer in the working CRS and the analysed value of each area.
fn read_areas(config: &Config, id_field: Option<&str>, run: &mut Run) -> Result<Areas> {
    let path = run.input()?.to_owned();
    let mut fields: Vec<(&str, FieldWant)> = config
        .variable
        .fields()
        .into_iter()
        .map(|f| (f, FieldWant::Real))
        .collect();
    fields.extend(id_field.map(|f| (f, FieldWant::Text)));
    let layer = read_polygons(
        &path,
        run.common.layer.as_deref(),
        &fields,
        PolygonCrs::Working(run.common.crs.as_deref()),
    )?;
    run.note_input_layer(&layer.layer);
    run.debug(format!("read {} areas", layer.fids.len()));
    let values = match &config.variable {
        Variable::Field(f) => areas::finite(&path, &layer, f, &layer.columns[0])?,
        Variable::Rate { cases, at_risk } => {
            let c = areas::non_negative(&path, &layer, cases, &layer.columns[0])?;
            let n = areas::non_negative(&path, &layer, at_risk, &layer.columns[1])?;
            maths::eb_standardised_rates(&c, &n).map_err(|err| match err {
                MoranError::BadRate { index, message } => Error::BadField {
                    path: path.clone(),
                    layer: layer.layer.clone(),
                    field: config.variable.label(),
                    message: format!("feature {}: {message}", layer.fids[index]),
                },
                other => Error::Failed(other.to_string()),
            })?
        }
    };
    Ok(Areas {
        path,
        layer,
        values,
    })
}

/// The neighbours: from the table, matched by id, or built on the projected areas.
fn neighbours(
    config: &Config,
    areas: &Areas,
    table: Option<(PathBuf, WeightsTable)>,
    id_field: Option<String>,
) -> Result<Links> {
    let layer = &areas.layer;
    if let Some((path, table)) = table {
        let id = id_field.as_deref().zip(layer.columns.last());
        let ids = areas::area_ids(&areas.path, layer, id)?;
        let neighbours = areas::table_neighbours(&path, &table, &ids, id_field.as_deref())?;
        return Ok(Links {
            neighbours,
            source: format!("table {} in {}", table.table, path.display()),
            id_field,
            crs: None,
        });
    }
    let WeightsSource::Built { method, snap_m } = config.weights else {
        return Err(Error::Failed("weights table expected".into()));
    };
    let neighbours = weights::build(&layer.polygons, method, snap_m)
        .map_err(|e| Error::argument("--method", e.to_string()))?;
    Ok(Links {
        neighbours,
        source: format!("{method:?} built here").to_lowercase(),
        id_field,
        crs: Some(stance_core::gpkg::crs::summary_text(&layer.srs)),
    })
}

/// The permutations this run draws, or those its shards drew.
fn shard_part(shards: &ShardRun) -> Result<Part> {
    let mut part = Part {
        drawn: Some(shards.drawn()),
        ..Part::default()
    };
    if let Some(merged) = shards.merged() {
        part.global = Some(merged.per_replicate("global")?);
        let upper = merged.sum("upper")?;
        let lower = merged.sum("lower")?;
        part.local = Some(upper.into_iter().zip(lower).map(|(u, l)| [u, l]).collect());
    }
    Ok(part)
}

/// Global and local Moran's I, adjusted local p-values and cluster types.
fn compute(config: &Config, areas: &Areas, links: &Links, part: &Part, run: &Run) -> Result<Stats> {
    let w = links.neighbours.standardise(config.style);
    let constant_error = |e: MoranError| Error::BadField {
        path: areas.path.clone(),
        layer: areas.layer.layer.clone(),
        field: config.variable.label(),
        message: e.to_string(),
    };
    let total = config.inference.permutations as u64 * 2;
    let report = |offset: u64, from: f64, span: f64| {
        move |done: usize| {
            let share = done as f64 / config.inference.permutations.max(1) as f64;
            run.progress
                .set_counted(from + span * share, offset + done as u64, total);
        }
    };
    let global = maths::global_moran_part(
        &areas.values,
        &w,
        &config.inference,
        part,
        &report(0, 0.2, 0.2),
    )
    .map_err(constant_error)?;
    run.check_interrupted()?;
    run.debug("global Moran's I done");
    let half = total / 2;
    let local = maths::local_moran_part(
        &areas.values,
        &w,
        &config.inference,
        part,
        &report(half, 0.4, 0.5),
    )
    .map_err(constant_error)?;
    run.check_interrupted()?;
    run.debug("local Moran's I done");
    let p_for_clusters = if config.inference.permutations > 0 {
        &local.p_permutation
    } else {
        &local.p_analytic
    };
    let adjusted = adjust(p_for_clusters, config.adjustment);
    let clusters = (0..areas.values.len())
        .map(|i| {
            maths::cluster_type(local.centred[i], local.lag[i], adjusted[i], config.alpha)
                .map(str::to_owned)
        })
        .collect();
    run.progress.set(0.9);
    Ok(Stats {
        global,
        local,
        adjusted,
        clusters,
    })
}
