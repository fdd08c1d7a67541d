//! stance-weights: spatial weights of an area layer — queen / rook contiguity, k nearest
//! centroids or a distance band — as a neighbour table (Anselin 1988, *Spatial Econometrics*,
//! ch. 3; Bivand et al. 2013, *Applied Spatial Data Analysis with R*, ch. 9).

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::read_polygons;
use stance_core::gpkg::weights_table::{self, AreaIds};
use stance_core::host::neighbours::NeighbourArgs;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::weights;

/// What to do with areas that have no neighbour.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum IslandsArg {
    /// Stop with an error listing them.
    Error,
    /// Keep them without neighbours (listed in the summary).
    Keep,
    /// Link each to its nearest area by centroid distance, both ways.
    Nearest,
}

/// Parameters of stance-weights.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct WeightsParams {
    #[command(flatten)]
    #[serde(flatten)]
    pub neighbours: NeighbourArgs,

    /// Field with a stable id per area (default: the feature id); ids must be unique.
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// What to do with areas that have no neighbour.
    #[arg(long, value_enum, default_value_t = IslandsArg::Keep)]
    #[serde(default = "default_islands")]
    pub islands: IslandsArg,
}

fn default_islands() -> IslandsArg {
    IslandsArg::Keep
}

/// The weights tool.
#[derive(Debug)]
pub struct Weights;

impl Tool for Weights {
    type Params = WeightsParams;
    const ID: &'static str = "weights";
    const TITLE: &'static str = "Spatial weights of an area layer as a neighbour table";
    const DESCRIPTION: &'static str = "Builds the neighbours of every area of a polygon layer: queen or \
        rook contiguity from shared vertices or edges (found through a sorted vertex index, with an optional \
        snap tolerance in metres), the k nearest area centroids, or every centroid within a distance band. \
        Writes an attribute table <name> with one row per directed link (area_id, linked_id, weight 1); \
        tools that use it apply row or binary standardisation. The summary gives areas, links, minimum / \
        mean / maximum neighbours, islands by id and connected components.";
    const DEFAULT_NAME: &'static str = "weights";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "weights",
            title: "Neighbour table",
            description:
                "Attribute table <name>: area_id, linked_id (the area ids: feature ids or \
                --id-field values), weight (1). Islands have no row.",
            media_type: GEOPACKAGE_MEDIA_TYPE,
        }]
    }

    fn run(params: &WeightsParams, run: &mut Run) -> Result<Value> {
        let method = params.neighbours.method()?;
        let input = run.input()?.to_owned();
        let fields: Vec<&str> = params.id_field.iter().map(String::as_str).collect();
        let layer = read_polygons(&input, run.common.layer.as_deref(), &fields)?;
        run.note_input_layer(&layer.layer);
        let ids = area_ids(&input, &layer, params.id_field.as_deref())?;
        run.progress.set(0.2);
        run.debug(format!("read {} areas", layer.fids.len()));
        let (polygons, srs) = weights_table::project_areas(&layer, run.common.crs.as_deref())?;
        run.progress.set(0.4);
        let mut neighbours = weights::build(&polygons, method, params.neighbours.snap_m)
            .map_err(|e| Error::argument("--method", e.to_string()))?;
        run.progress.set(0.7);
        let islands_before = neighbours.islands();
        let mut linked = Vec::new();
        match params.islands {
            IslandsArg::Error if !islands_before.is_empty() => {
                let listed: Vec<String> = islands_before
                    .iter()
                    .take(20)
                    .map(|&i| ids.text(i))
                    .collect();
                return Err(Error::BadLayer {
                    path: input,
                    layer: layer.layer,
                    message: format!(
                        "{} area(s) have no neighbour (ids {}{}); use --islands keep or nearest, or a larger --snap-m",
                        islands_before.len(),
                        listed.join(", "),
                        if islands_before.len() > 20 { ", …" } else { "" }
                    ),
                });
            }
            IslandsArg::Nearest => {
                let (x, y) = weights::centroids(&polygons);
                linked = neighbours.link_islands_to_nearest(&x, &y);
            }
            _ => {}
        }
        let summary = neighbours.summary();
        let name = run.layer_name("");
        run.debug("neighbours found; writing the table");
        let rows = weights_table::write(run.output(), &name, &ids, &neighbours)?;
        run.debug(format!("{rows} links written"));
        run.progress.set(1.0);
        let id_json = |i: usize| match &ids {
            AreaIds::Integer(v) => json!(v[i]),
            AreaIds::Text(v) => json!(v[i]),
        };
        run.log(format!(
            "stance-weights: {} areas, {} links, {} island(s), {} component(s) → table '{name}'",
            summary.areas,
            summary.links,
            summary.islands.len(),
            summary.components
        ));
        Ok(json!({
            "table": name,
            "rows": rows,
            "method": params.neighbours.method,
            "id_field": params.id_field,
            "areas": summary.areas,
            "links": summary.links,
            "min_neighbours": summary.min_neighbours,
            "mean_neighbours": summary.mean_neighbours,
            "max_neighbours": summary.max_neighbours,
            "islands": summary.islands.iter().map(|&i| id_json(i)).collect::<Vec<_>>(),
            "islands_before_linking": islands_before.iter().map(|&i| id_json(i)).collect::<Vec<_>>(),
            "islands_linked_to": linked.iter().map(|&(i, j)| json!([id_json(i), id_json(j)])).collect::<Vec<_>>(),
            "connected_components": summary.components,
            "symmetric": summary.symmetric,
            "crs": crs_text(&srs),
        }))
    }
}

/// The areas' ids: feature ids, or the values of `id_field` (unique, not NULL).
///
/// # Errors
/// [`Error::BadField`] for a NULL or duplicate id.
pub fn area_ids(
    path: &std::path::Path,
    layer: &stance_core::gpkg::read::PolygonLayer,
    id_field: Option<&str>,
) -> Result<AreaIds> {
    let Some(field) = id_field else {
        return Ok(AreaIds::Integer(layer.fids.clone()));
    };
    let bad = |message: String| Error::BadField {
        path: path.to_owned(),
        layer: layer.layer.clone(),
        field: field.to_owned(),
        message,
    };
    let mut values = Vec::with_capacity(layer.fids.len());
    for (i, v) in layer.fields[0].iter().enumerate() {
        match v {
            Some(v) if !v.trim().is_empty() => values.push(v.trim().to_owned()),
            _ => {
                return Err(bad(format!(
                    "feature {} has no id; every area needs a unique id",
                    layer.fids[i]
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
