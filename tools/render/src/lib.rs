//! stance-render: a surface or an area layer of a GeoPackage drawn to a PNG map with
//! perceptually uniform, colour-blind-safe palettes (Crameri, Shephard & Heron 2020); the time
//! slices of a surface as small multiples on one colour scale; a period table as a chart of
//! share over periods with its interval band.
//!
//! The tool writes no GeoPackage layer: `--output` only fixes where the run stages (it may be
//! the input file, which is left untouched), and the PNG appears only when the run succeeds.

pub mod areas;
pub mod chart;
pub mod classes;
pub mod draw;
pub mod draw_chart;
pub mod frame;
pub mod multiples;
pub mod output;
pub mod overlay;
pub mod paint;
pub mod palette;
pub mod params;
pub mod periods;
pub mod projection;
pub mod scene;
pub mod series;
pub mod surface;

use std::path::Path;

use gdal::spatial_ref::SpatialRef;
use serde_json::Value;
use stance_core::error::Result;
use stance_core::gpkg::read::{read_polygons, FieldWant, PolygonCrs};
use stance_core::gpkg::{crs, raster};
use stance_core::host::{InputUse, OutputDecl, Run, Tool};

use areas::areas_scene;
use chart::{chart_model, chart_summary, ChartPage};
use multiples::multiples_scene;
use output::{summary, PngTarget};
use overlay::read_overlay;
pub use params::{PaletteChoice, RenderParams, Subject};
use params::{UnitChoice, MAX_UNITS};
use periods::{case_class_of, interval_level_of, read_period_table};
use projection::{crs_text, feature_rings};
use scene::{Page, Scene};
use series::{periods_present, slices_of, Slice};
use stance_core::error::Error;
use stance_core::gpkg::list_tables;
use stance_core::time::Period;
use surface::{surface_scene, surface_unit};

/// The render tool.
#[derive(Debug)]
pub struct Render;

impl Tool for Render {
    type Params = RenderParams;
    const ID: &'static str = "render";
    const TITLE: &'static str = "Render a surface, an area layer or a period table to a PNG";
    const DESCRIPTION: &'static str = "Draws a raster surface as coloured cells (nodata left white), or an area \
        layer by a field — numeric values classed by quantiles or equal intervals, text values as categories, \
        local Moran cluster types, trend classes (rising, falling, steady, too few records), hot and cold spots and join-count clusters in the \
        toolbox's own colour-blind-safe palettes — with optional outline overlays (areas, cluster circles \
        drawn by the side they lean to with one legend entry per side, tolerance contours, points), a colour \
        bar or class legend with the unit, a title, a scale bar in metres and a north arrow. With \
        --each-period, every time slice of a surface as small multiples (Tufte 1983), panels in time and \
        reading order, labelled by period, on one colour scale. With --periods, a period table as a chart of \
        the share of the case class over periods with its stored interval (the score interval of Wilson \
        1927) as a shaded band, for the whole study area and each cluster or chosen units. Palettes are \
        Crameri's batlow (sequential) and vik (diverging, centred on zero with symmetric limits; chosen for \
        surfaces with both signs or named *_diff, *_sqrtdiff or *_log_ratio). No layer is written: --output \
        only sets where the run stages and may be the input file; the PNG appears only when the run succeeds.";
    const DEFAULT_NAME: &'static str = "render";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![OutputDecl {
            id: "png",
            title: "PNG map or chart",
            description: "The map, small multiples or chart as a PNG file at --png (no GeoPackage layer is written).",
            media_type: "image/png",
        }]
    }

    fn run(params: &RenderParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.layer.as_deref())?;
        let input = run.input()?.to_owned();
        let target = PngTarget::claim(run, &params.png, &input)?;
        run.progress.phase("reading");
        let (page, summary) = match &config.subject {
            Subject::Chart { table, units } => chart_page(params, run, &input, table, units)?,
            Subject::Series { surface, period } => {
                series_page(params, run, &input, surface, *period)?
            }
            subject => map_page(params, run, &input, subject)?,
        };
        run.check_interrupted()?;
        run.progress.phase("drawing");
        target.write(&page)?;
        let (width, height) = page.size();
        run.log(format!(
            "stance-render: {} ({width} × {height} px)",
            params.png.display()
        ));
        Ok(summary)
    }
}

/// One map with its overlays, and its summary.
fn map_page(
    params: &RenderParams,
    run: &mut Run,
    input: &Path,
    subject: &Subject,
) -> Result<(Page, Value)> {
    let (srs, mut scene, map_summary) = map_scene(params, run, input, subject)?;
    scene.note = format!("{}; CRS {}", scene.note, crs_text(&srs));
    for name in &params.overlay {
        let overlay = read_overlay(input, name, &srs, &scene.layout.frame)?;
        run.note_input_layer(name);
        scene.overlays.push(overlay);
    }
    let summary = summary(params, &scene, &srs, map_summary);
    Ok((Page::Map(scene), summary))
}

/// Small multiples of every time slice of `surface`, with the overlays on each panel.
fn series_page(
    params: &RenderParams,
    run: &mut Run,
    input: &Path,
    surface: &str,
    period: Option<Period>,
) -> Result<(Page, Value)> {
    let slices = find_slices(input, surface, period)?;
    let mut surfaces = Vec::with_capacity(slices.len());
    for slice in &slices {
        surfaces.push(raster::read(input, &slice.table)?);
        run.note_input_layer(&slice.table);
        run.check_interrupted()?;
    }
    let (unit, field_name) = surface_unit(input, &slices[0].table)?;
    let srs = crs::parse(&surfaces[0].crs_wkt)?;
    let (mut multiples, mut summary) = multiples_scene(
        params,
        (input, surface),
        &slices,
        &surfaces,
        (&unit, &field_name),
    )?;
    multiples.note = format!("{}; CRS {}", multiples.note, crs_text(&srs));
    for panel in &mut multiples.panels {
        for name in &params.overlay {
            panel
                .overlays
                .push(read_overlay(input, name, &srs, &panel.frame)?);
        }
    }
    for name in &params.overlay {
        run.note_input_layer(name);
    }
    if let Some(object) = summary.as_object_mut() {
        object.insert("png".into(), serde_json::json!(params.png));
        object.insert("crs".into(), serde_json::json!(crs_text(&srs)));
    }
    Ok((Page::Multiples(multiples), summary))
}

/// A chart of share over periods from the period table `table`.
fn chart_page(
    params: &RenderParams,
    run: &mut Run,
    input: &Path,
    table: &str,
    units: &[UnitChoice],
) -> Result<(Page, Value)> {
    let rows = read_period_table(input, table)?;
    run.note_input_layer(table);
    let model = chart_model(&rows, units).map_err(|message| Error::BadLayer {
        path: input.to_owned(),
        layer: table.to_owned(),
        message,
    })?;
    if !model.left_out.is_empty() {
        run.log(format!(
            "warning: {} clusters beyond the first {MAX_UNITS} are not drawn (name units with --unit)",
            model.left_out.len()
        ));
    }
    let y_label = match case_class_of(input, table) {
        Some(class) => format!("share of {class} (%)"),
        None => "share of the case class (%)".to_owned(),
    };
    let title = params
        .title
        .clone()
        .unwrap_or_else(|| format!("{table}: {}", y_label.trim_end_matches(" (%)")));
    let mut page = ChartPage::new(params.width_px, title, y_label, model);
    if let Some(level) = interval_level_of(input, table) {
        page.band_label = format!("shaded: {:.0} % interval of each share", level * 100.0);
    }
    let mut summary = chart_summary(&page, table);
    if let Some(object) = summary.as_object_mut() {
        object.insert("png".into(), serde_json::json!(params.png));
    }
    Ok((Page::Chart(page), summary))
}

/// The time slices of `surface` of one kind of period, in time order.
///
/// # Errors
/// No slice found, or slices of several kinds of period and no --period to choose.
fn find_slices(input: &Path, surface: &str, period: Option<Period>) -> Result<Vec<Slice>> {
    let tables: Vec<String> = list_tables(input)?
        .into_iter()
        .filter(|(_, kind)| kind.contains("gridded"))
        .map(|(t, _)| t)
        .collect();
    let mut slices = slices_of(&tables, surface);
    let kinds = periods_present(&slices);
    let name = |p: &Period| serde_json::json!(p).as_str().unwrap_or_default().to_owned();
    match (period, kinds.as_slice()) {
        (Some(p), _) => slices.retain(|s| s.period == p),
        (None, [_, _, ..]) => {
            return Err(Error::argument(
                "--period",
                format!(
                    "'{surface}' has time slices by {}; choose one with --period",
                    kinds.iter().map(name).collect::<Vec<_>>().join(" and ")
                ),
            ))
        }
        (None, _) => {}
    }
    if slices.is_empty() {
        return Err(Error::BadInput {
            path: input.to_owned(),
            message: format!(
                "no time slices of '{surface}'{} (expected surfaces such as {}, written by stance-density --time-field FIELD --slice month); surfaces present: {}",
                period.map(|p| format!(" by {}", name(&p))).unwrap_or_default(),
                example_slice(surface),
                if tables.is_empty() { "none".to_owned() } else { tables.join(", ") }
            ),
        });
    }
    Ok(slices)
}

/// An example slice name of `surface`.
fn example_slice(surface: &str) -> String {
    format!("{surface}_2026_03")
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
        Subject::Series { .. } | Subject::Chart { .. } => Err(Error::Failed(
            "internal: a series or chart is not a single map".into(),
        )),
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
