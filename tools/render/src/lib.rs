//! stance-render: a surface or an area layer of a GeoPackage drawn to a PNG map with
//! perceptually uniform, colour-blind-safe palettes (Crameri, Shephard & Heron 2020).
//!
//! The tool writes no GeoPackage layer: `--output` only fixes where the run stages (it may be
//! the input file, which is left untouched), and the PNG appears only when the run succeeds.

pub mod areas;
pub mod classes;
pub mod draw;
pub mod frame;
pub mod output;
pub mod overlay;
pub mod paint;
pub mod palette;
pub mod params;
pub mod projection;
pub mod scene;
pub mod surface;

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use serde_json::Value;
use stance_core::error::Result;
use stance_core::gpkg::read::{read_polygons, FieldWant, PolygonCrs};
use stance_core::gpkg::{crs, raster};
use stance_core::host::{InputUse, OutputDecl, Run, Tool};

use areas::areas_scene;
use output::{summary, PngTarget};
use overlay::read_overlay;
pub use params::{PaletteChoice, RenderParams, Subject};
use projection::{crs_text, feature_rings};
use scene::Scene;
use surface::{surface_scene, surface_unit};

/// The render tool.
#[derive(Debug)]
pub struct Render;

impl Tool for Render {
    type Params = RenderParams;
    const ID: &'static str = "render";
    const TITLE: &'static str = "Render a surface or an area layer to a PNG map";
    const DESCRIPTION: &'static str = "Draws a raster surface as coloured cells (nodata left white), or an area \
        layer by a field — numeric values classed by quantiles or equal intervals, text values as categories, \
        local Moran cluster types in the toolbox's own colour-blind-safe palette — with optional outline \
        overlays (areas, cluster circles drawn by the side they lean to with one legend entry per side, \
        tolerance contours, points), a colour bar or class legend with the unit, a title, a scale bar in metres \
        and a north arrow. Palettes are Crameri's batlow (sequential) and vik (diverging, centred on zero with \
        symmetric limits; chosen for surfaces with both signs or named *_diff, *_sqrtdiff or *_log_ratio). No \
        layer is written: --output only sets where the run stages and may be the input file; the PNG appears \
        only when the run succeeds.";
    const DEFAULT_NAME: &'static str = "render";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "png",
            title: "PNG map",
            description: "The map as a PNG file at --png (no GeoPackage layer is written).",
            media_type: "image/png",
        }]
    }

    fn run(params: &RenderParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.layer.as_deref())?;
        let input = run.input()?.to_owned();
        let target = PngTarget::claim(run, &params.png, &input)?;
        run.progress.phase("reading");
        let (srs, mut scene, map_summary) = map_scene(params, run, &input, &config.subject)?;
        scene.note = format!("{}; CRS {}", scene.note, crs_text(&srs));
        for name in &params.overlay {
            let overlay = read_overlay(&input, name, &srs, &scene.layout.frame)?;
            run.note_input_layer(name);
            scene.overlays.push(overlay);
        }
        run.check_interrupted()?;
        run.progress.phase("drawing");
        target.write(&scene)?;
        run.log(format!(
            "stance-render: {} ({} × {} px)",
            params.png.display(),
            scene.layout.width,
            scene.layout.height
        ));
        Ok(summary(params, &scene, &srs, map_summary))
    }
}

/// Reads what is mapped and lays out its scene: the map's CRS, the scene and its summary.
fn map_scene(
    params: &RenderParams,
    run: &mut Run,
    input: &Path,
    subject: &Subject,
) -> Result<(SpatialRef, Scene, Value)> {
    match subject {
        Subject::Surface(name) => {
            let surface = raster::read(input, name)?;
            run.note_input_layer(name);
            let (unit, field_name) = surface_unit(input, name)?;
            let srs = crs::parse(&surface.crs_wkt)?;
            let (scene, summary) =
                surface_scene(params, input, name, &surface, (&unit, &field_name))?;
            Ok((srs, scene, summary))
        }
        Subject::Areas { layer, field } => {
            let areas = read_polygons(
                input,
                Some(layer),
                &[(field.as_str(), FieldWant::Text)],
                PolygonCrs::Working(run.common.crs.as_deref()),
            )?;
            run.note_input_layer(&areas.layer);
            let srs = areas.srs.clone();
            let rings = feature_rings(&areas.polygons);
            let values = areas
                .columns
                .first()
                .map(|c| c.as_texts())
                .unwrap_or_default();
            let (scene, summary) =
                areas_scene(params, input, (&areas.layer, field), &rings, &values)?;
            Ok((srs, scene, summary))
        }
    }
}
