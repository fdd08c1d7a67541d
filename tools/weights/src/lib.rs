//! stance-weights: spatial weights of an area layer — queen / rook contiguity, k nearest
//! centroids or a distance band — as a neighbour table (Cliff & Ord 1981, *Spatial Processes*,
//! ch. 1; Anselin 1988, *Spatial Econometrics*, ch. 3).

pub mod output;
pub mod params;

use serde_json::Value;
use stance_core::error::{Error, Result};
use stance_core::gpkg::areas;
use stance_core::gpkg::read::{read_polygons, FieldWant, PolygonCrs, PolygonLayer};
use stance_core::gpkg::weights_table::{self, AreaIds};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::weights::{self, Neighbours};

pub use params::{Config, IslandsArg, WeightsParams};

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
        The areas are projected to the working CRS first, so every distance and tolerance is in metres \
        whatever the CRS of the layer. Writes an attribute table <name> with one row per directed link \
        (area_id, linked_id, weight 1); tools that use it apply row or binary standardisation. The summary \
        gives areas, links, minimum / mean / maximum neighbours, islands by id and connected components.";
    const DEFAULT_NAME: &'static str = "weights";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str = "GeoPackage with the area layer (polygons).";

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
        let config = params.check()?;
        run.progress.phase("reading");
        let (layer, ids) = read_areas(&config, run)?;
        run.progress.set(0.3);
        run.progress.phase("neighbours");
        let mut neighbours = weights::build(&layer.polygons, config.method, config.snap_m)
            .map_err(|e| Error::argument("--method", e.to_string()))?;
        let islands_before = neighbours.islands();
        let linked = handle_islands(&config, run, &layer, &ids, &mut neighbours)?;
        run.progress.set(0.7);
        run.progress.phase("writing");
        let name = run.layer_name("");
        let rows = weights_table::write(run.output(), &name, &ids, &neighbours)?;
        run.progress.set(1.0);
        let summary = neighbours.summary();
        run.log(format!(
            "stance-weights: {} areas, {} links, {} island(s), {} component(s) → table '{name}'",
            summary.areas,
            summary.links,
            summary.islands.len(),
            summary.components
        ));
        let found = output::Found {
            ids: &ids,
            summary: &summary,
            islands_before: &islands_before,
            linked: &linked,
            crs: stance_core::gpkg::crs::summary_text(&layer.srs),
        };
        Ok(output::summary(&name, rows, params, &found))
    }
}

/// The areas in the working CRS and their ids.
fn read_areas(config: &Config, run: &mut Run) -> Result<(PolygonLayer, AreaIds)> {
    let input = run.input()?.to_owned();
    let fields: Vec<(&str, FieldWant)> = config
        .id_field
        .iter()
        .map(|f| (f.as_str(), FieldWant::Text))
        .collect();
    let layer = read_polygons(
        &input,
        run.common.layer.as_deref(),
        &fields,
        PolygonCrs::Working(run.common.crs.as_deref()),
    )?;
    run.note_input_layer(&layer.layer);
    let id = config.id_field.as_deref().zip(layer.columns.first());
    let ids = areas::area_ids(&input, &layer, id)?;
    run.debug(format!("read {} areas", layer.fids.len()));
    Ok((layer, ids))
}

/// Applies `--islands`: an error listing them, keep, or link each to its nearest area.
fn handle_islands(
    config: &Config,
    run: &Run,
    layer: &PolygonLayer,
    ids: &AreaIds,
    neighbours: &mut Neighbours,
) -> Result<Vec<(usize, usize)>> {
    let islands = neighbours.islands();
    match config.islands {
        IslandsArg::Error if !islands.is_empty() => {
            let listed: Vec<String> = islands.iter().take(20).map(|&i| ids.text(i)).collect();
            Err(Error::BadLayer {
                path: run.input()?.to_owned(),
                layer: layer.layer.clone(),
                message: format!(
                    "{} area(s) have no neighbour (ids {}{}); use --islands keep or nearest, or a larger --snap-m",
                    islands.len(),
                    listed.join(", "),
                    if islands.len() > 20 { ", …" } else { "" }
                ),
            })
        }
        IslandsArg::Nearest => {
            let (x, y) = weights::centroids(&layer.polygons);
            Ok(neighbours.link_islands_to_nearest(&x, &y))
        }
        _ => Ok(Vec::new()),
    }
}
