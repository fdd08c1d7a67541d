//! stance-render: a surface or an area layer of a GeoPackage drawn to a PNG map with
//! perceptually uniform, colour-blind-safe palettes (Crameri, Shephard & Heron 2020).
//!
//! The tool writes no GeoPackage layer: `--output` only fixes where the run stages (it may be
//! the input file, which is left untouched), and the PNG appears only when the run succeeds.

pub mod classes;
pub mod draw;
pub mod frame;
pub mod paint;
pub mod palette;

use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::read::{read_points, read_polygons};
use stance_core::gpkg::{crs, open_sqlite_read, raster};
use stance_core::host::{InputUse, OutputDecl, Run, Tool};

use classes::{breaks, class_label, class_of, Classing};
use draw::{Legend, Overlay, Scene};
use frame::{layout, scale_bar_length_m, Extent, MapFrame};
use paint::{auto_diverging, paint_area, paint_surface, Canvas, Scale};
use palette::{lisa_type, ColourMap, Rgb, LISA_COLOURS, LISA_TYPES, MISSING, OKABE_ITO};

/// Palette choice for the mapped values.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum PaletteChoice {
    /// Diverging when values have both signs or the surface name ends in _diff, _sqrtdiff or
    /// _logrr; sequential otherwise.
    Auto,
    /// Crameri's batlow.
    Sequential,
    /// Crameri's vik, centred on zero with symmetric limits.
    Diverging,
}

/// Parameters of stance-render.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct RenderParams {
    /// Surface (raster table of the input) to draw as coloured cells.
    #[arg(long, value_name = "NAME")]
    pub surface: Option<String>,

    /// Area (polygon) layer of the input to draw as a choropleth of --field (instead of --surface).
    #[arg(long, value_name = "LAYER")]
    pub areas: Option<String>,

    /// Field of --areas: numeric values are classed, text values drawn as categories (local
    /// Moran cluster types get the toolbox's own colour-blind-safe palette).
    #[arg(long, value_name = "FIELD")]
    pub field: Option<String>,

    /// Draw a numeric --field as categories (e.g. integer codes).
    #[arg(long)]
    pub categorical: bool,

    /// How a numeric --field is cut into classes.
    #[arg(long, value_enum, value_name = "METHOD", default_value_t = Classing::Quantile)]
    pub classing: Classing,

    /// Number of classes for a numeric --field (2–9; ties may give fewer).
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub classes: usize,

    /// PNG file to write (written only when the run succeeds).
    #[arg(long, value_name = "FILE")]
    pub png: PathBuf,

    /// Layer of the input drawn as outlines over the map (polygons, e.g. areas, cluster
    /// circles, tolerance contours) or markers (points); repeatable.
    #[arg(long, value_name = "LAYER")]
    pub overlay: Vec<String>,

    /// Title line (default: the surface or layer and field names).
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,

    /// Colour palette of the values.
    #[arg(long, value_enum, value_name = "PALETTE", default_value_t = PaletteChoice::Auto)]
    pub palette: PaletteChoice,

    /// Width of the PNG in pixels (300–8000); the height follows the map's shape.
    #[arg(long, value_name = "PX", default_value_t = 1000)]
    pub width_px: u32,
}

/// The render tool.
#[derive(Debug)]
pub struct Render;

/// What is mapped, checked at the border.
enum Subject {
    Surface(String),
    Areas { layer: String, field: String },
}

impl Tool for Render {
    type Params = RenderParams;
    const ID: &'static str = "render";
    const TITLE: &'static str = "Render a surface or an area layer to a PNG map";
    const DESCRIPTION: &'static str = "Draws a raster surface as coloured cells (nodata left white), or an area \
        layer by a field — numeric values classed by quantiles or equal intervals, text values as categories, \
        local Moran cluster types in the toolbox's own colour-blind-safe palette — with optional outline \
        overlays (areas, cluster circles, tolerance contours, points), a colour bar or class legend with the \
        unit, a title, a scale bar in metres and a north arrow. Palettes are Crameri's batlow (sequential) and \
        vik (diverging, centred on zero with symmetric limits). No layer is written: --output only sets where \
        the run stages and may be the input file; the PNG appears only when the run succeeds.";
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
        // Check the parameters once.
        let subject = match (&params.surface, &params.areas, &params.field) {
            (Some(surface), None, None) => Subject::Surface(surface.clone()),
            (None, Some(layer), Some(field)) => Subject::Areas {
                layer: layer.clone(),
                field: field.clone(),
            },
            (Some(_), Some(_), _) => {
                return Err(Error::argument(
                    "--areas",
                    "draw either --surface or --areas; to outline areas over a surface use --overlay LAYER",
                ))
            }
            (None, Some(_), None) => {
                return Err(Error::argument(
                    "--field",
                    "missing; --areas needs the field to colour by",
                ))
            }
            (Some(_), None, Some(_)) => {
                return Err(Error::argument("--field", "only applies to --areas"))
            }
            (None, None, _) => {
                return Err(Error::argument(
                    "--surface",
                    "missing; give --surface NAME or --areas LAYER --field FIELD",
                ))
            }
        };
        if run.common.layer.is_some() {
            return Err(Error::argument(
                "--layer",
                "not used by stance-render; name layers with --surface, --areas and --overlay",
            ));
        }
        if !(2..=9).contains(&params.classes) {
            return Err(Error::argument(
                "--classes",
                format!("{} is out of range; expected 2 to 9", params.classes),
            ));
        }
        if !(300..=8000).contains(&params.width_px) {
            return Err(Error::argument(
                "--width-px",
                format!("{} is out of range; expected 300 to 8000", params.width_px),
            ));
        }
        let is_png = params
            .png
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("png"));
        if !is_png {
            return Err(Error::argument(
                "--png",
                format!("'{}' does not end in .png", params.png.display()),
            ));
        }
        let input = run.input()?.to_owned();
        if stance_core::gpkg::same_file(&params.png, &input) {
            return Err(Error::BadOutput {
                path: params.png.clone(),
                message: "is the input GeoPackage; choose another file".into(),
            });
        }
        // Claim the PNG's temporary path and prove it can be written before any work.
        let temporary = run.output().side_file(&params.png)?;
        let drawn = with_png_suffix(&temporary);
        std::fs::write(&drawn, b"").map_err(|e| Error::BadOutput {
            path: params.png.clone(),
            message: format!("cannot be written: {e}"),
        })?;
        let _cleanup = RemoveOnDrop(drawn.clone());

        // Read.
        let mut summary = json!({});
        let (map_srs, mut scene, map_summary) = match &subject {
            Subject::Surface(name) => {
                let surface = raster::read(&input, name)?;
                run.note_input_layer(name);
                let (unit, field_name) = surface_unit(&input, name)?;
                let srs = crs::parse(&surface.crs_wkt)?;
                let prepared = surface_scene(params, &input, name, &surface, &unit, &field_name)?;
                (srs, prepared.0, prepared.1)
            }
            Subject::Areas { layer, field } => {
                let areas = read_polygons(&input, Some(layer), &[field.as_str()])?;
                run.note_input_layer(&areas.layer);
                let srs = crs::working(run.common.crs.as_deref(), &areas.srs, || {
                    let (xs, ys): (Vec<f64>, Vec<f64>) = areas
                        .polygons
                        .iter()
                        .flat_map(|m| m.0.iter())
                        .flat_map(|p| p.exterior().0.iter().map(|c| (c.x, c.y)))
                        .unzip();
                    crs::lonlat_centre(&areas.srs, &xs, &ys)
                })?;
                let rings = project_rings(&areas.polygons, &areas.srs, &srs)?;
                let values = areas.fields.first().cloned().unwrap_or_default();
                let prepared = areas_scene(params, &input, &areas.layer, field, &rings, &values)?;
                (srs, prepared.0, prepared.1)
            }
        };
        scene.note = format!("{}; CRS {}", scene.note, crs_text(&map_srs));
        // Overlays, taken to the map's CRS.
        for name in &params.overlay {
            let overlay = read_overlay(&input, name, &map_srs, &scene.layout.frame)?;
            run.note_input_layer(name);
            scene.overlays.push(overlay);
        }
        run.check_interrupted()?;

        // Draw and hand the file to the staging, which renames it into place on success.
        draw::draw_png(&scene, &drawn).map_err(|message| Error::BadOutput {
            path: params.png.clone(),
            message: format!("drawing failed: {message}"),
        })?;
        std::fs::rename(&drawn, &temporary).map_err(|e| Error::BadOutput {
            path: params.png.clone(),
            message: format!("cannot be written: {e}"),
        })?;
        run.log(format!(
            "stance-render: {} ({} × {} px)",
            params.png.display(),
            scene.layout.width,
            scene.layout.height
        ));

        let frame = scene.layout.frame;
        if let Some(object) = summary.as_object_mut() {
            object.insert("png".into(), json!(params.png));
            object.insert("width_px".into(), json!(scene.layout.width));
            object.insert("height_px".into(), json!(scene.layout.height));
            object.insert("map_px".into(), json!(frame.rect));
            object.insert("extent".into(), json!(frame.extent));
            object.insert("metres_per_px".into(), json!(frame.metres_per_px));
            object.insert("crs".into(), json!(crs_text(&map_srs)));
            object.insert("scale_bar_m".into(), json!(scene.scale_bar_m));
            object.insert("overlays".into(), json!(params.overlay));
            if let Value::Object(extra) = map_summary {
                object.extend(extra);
            }
        }
        Ok(summary)
    }
}

/// `path` with `.png` appended: plotters picks the encoder from the file name.
fn with_png_suffix(path: &Path) -> PathBuf {
    let mut name = path.as_os_str().to_owned();
    name.push(".png");
    PathBuf::from(name)
}

/// Removes a scratch file however the run ends.
struct RemoveOnDrop(PathBuf);

impl Drop for RemoveOnDrop {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// Unit and field name of a surface from `gpkg_2d_gridded_coverage_ancillary` (OGC 17-066r1).
fn surface_unit(path: &Path, name: &str) -> Result<(String, String)> {
    let connection = open_sqlite_read(path)?;
    let row: std::result::Result<(Option<String>, Option<String>), _> = connection.query_row(
        "SELECT uom, field_name FROM gpkg_2d_gridded_coverage_ancillary
         WHERE lower(tile_matrix_set_name) = lower(?1)",
        [name],
        |r| Ok((r.get(0)?, r.get(1)?)),
    );
    Ok(match row {
        Ok((uom, field)) => (uom.unwrap_or_default(), field.unwrap_or_default()),
        Err(_) => (String::new(), String::new()),
    })
}

/// The page width, the map's extent and the footnote, shared by both kinds of map.
fn base_scene(params: &RenderParams, extent: Extent, title: String, legend: Legend) -> Scene {
    let layout = layout(params.width_px, extent);
    let frame = layout.frame;
    let canvas = Canvas::new(&frame);
    // About a quarter of the map, but long enough for its labels on narrow pages.
    let map_w = f64::from(frame.rect.width());
    let bar_px = (0.25 * map_w).max(160.0 * layout.scale).min(0.6 * map_w);
    let scale_bar_m = scale_bar_length_m(bar_px * frame.metres_per_px);
    Scene {
        layout,
        title: params.title.clone().unwrap_or(title),
        canvas,
        area_outlines: Vec::new(),
        overlays: Vec::new(),
        legend,
        scale_bar_m,
        note: String::new(),
    }
}

fn choose_diverging(choice: PaletteChoice, name: &str, min: f64, max: f64) -> bool {
    match choice {
        PaletteChoice::Auto => auto_diverging(name, min, max),
        PaletteChoice::Sequential => false,
        PaletteChoice::Diverging => true,
    }
}

fn palette_name(map: ColourMap) -> &'static str {
    match map {
        ColourMap::Batlow => "batlow (sequential)",
        ColourMap::Vik => "vik (diverging)",
    }
}

/// Scene of a surface: cells coloured on a continuous scale.
fn surface_scene(
    params: &RenderParams,
    input: &Path,
    name: &str,
    surface: &raster::SurfaceData,
    unit: &str,
    field_name: &str,
) -> Result<(Scene, Value)> {
    let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in surface.values.iter().filter(|v| v.is_finite()) {
        min = min.min(f64::from(*v));
        max = max.max(f64::from(*v));
    }
    if !min.is_finite() {
        return Err(Error::BadLayer {
            path: input.to_owned(),
            layer: name.to_owned(),
            message: "has no data (every cell is nodata); nothing to draw".into(),
        });
    }
    let scale = Scale::for_range(min, max, choose_diverging(params.palette, name, min, max));
    let grid = surface.grid;
    let extent = Extent {
        x_min: grid.x_min,
        y_min: grid.y_min,
        x_max: grid.x_max(),
        y_max: grid.y_max(),
    };
    let heading = match (field_name.is_empty(), unit.is_empty()) {
        (false, false) => format!("{field_name} ({unit})"),
        (false, true) => field_name.to_owned(),
        (true, false) => unit.to_owned(),
        (true, true) => name.to_owned(),
    };
    let mut scene = base_scene(
        params,
        extent,
        name.to_owned(),
        Legend::Bar {
            scale,
            heading: heading.clone(),
        },
    );
    let frame = scene.layout.frame;
    paint_surface(&mut scene.canvas, &frame, &grid, &surface.values, |v| {
        scale.colour(v)
    });
    let nodata = surface.values.iter().filter(|v| !v.is_finite()).count();
    scene.note = format!(
        "{} m cells; white = no data ({nodata} cells)",
        classes::format_number(grid.cell_m)
    );
    Ok((
        scene,
        json!({
            "surface": name,
            "unit": unit,
            "value_range": [min, max],
            "colour_limits": [scale.low, scale.high],
            "palette": palette_name(scale.map),
            "nodata_cells": nodata,
        }),
    ))
}

/// Polygons as rings of map coordinates, one list of rings per feature.
type FeatureRings = Vec<Vec<Vec<(f64, f64)>>>;

/// Every ring of every polygon, transformed from `from` to `to` when they differ.
fn project_rings(
    polygons: &[geo_types::MultiPolygon<f64>],
    from: &SpatialRef,
    to: &SpatialRef,
) -> Result<FeatureRings> {
    let mut features: FeatureRings = polygons
        .iter()
        .map(|multi| {
            multi
                .0
                .iter()
                .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
                .map(|ring| ring.0.iter().map(|c| (c.x, c.y)).collect())
                .collect()
        })
        .collect();
    if from.to_wkt().ok() != to.to_wkt().ok() {
        let (mut xs, mut ys): (Vec<f64>, Vec<f64>) =
            features.iter().flatten().flatten().copied().unzip();
        crs::transform(from, to, &mut xs, &mut ys)?;
        for (point, (x, y)) in features
            .iter_mut()
            .flatten()
            .flatten()
            .zip(xs.into_iter().zip(ys))
        {
            *point = (x, y);
        }
    }
    Ok(features)
}

/// Scene of an area layer coloured by a field.
fn areas_scene(
    params: &RenderParams,
    input: &Path,
    layer: &str,
    field: &str,
    rings: &FeatureRings,
    values: &[Option<String>],
) -> Result<(Scene, Value)> {
    let bad_field = |message: String| Error::BadField {
        path: input.to_owned(),
        layer: layer.to_owned(),
        field: field.to_owned(),
        message,
    };
    let present: Vec<&str> = values.iter().flatten().map(|v| v.trim()).collect();
    if present.is_empty() {
        return Err(bad_field("is NULL in every area; nothing to draw".into()));
    }
    let numbers: Option<Vec<Option<f64>>> = values
        .iter()
        .map(|v| match v {
            None => Some(None),
            Some(text) => text.trim().parse::<f64>().ok().map(Some),
        })
        .collect();
    let numbers = numbers.filter(|_| !params.categorical);

    // Colour per feature and the legend.
    let mut colours: Vec<Rgb> = Vec::with_capacity(values.len());
    let (legend_entries, summary) = match numbers {
        Some(numbers) => {
            let finite: Vec<f64> = numbers.iter().flatten().copied().collect();
            let b = breaks(&finite, params.classes, params.classing);
            if b.len() < 2 {
                return Err(bad_field("has no finite numbers to class".into()));
            }
            let (min, max) = (b[0], b[b.len() - 1]);
            let count = b.len() - 1;
            let diverging = choose_diverging(params.palette, "", min, max);
            let scale = Scale::for_range(min, max, diverging);
            let class_colour: Vec<Rgb> = (0..count)
                .map(|i| {
                    if diverging {
                        scale.map.at(scale.position((b[i] + b[i + 1]) / 2.0))
                    } else {
                        // Keep off batlow's darkest end so that outlines stay visible.
                        let t = if count == 1 {
                            0.5
                        } else {
                            i as f64 / (count - 1) as f64
                        };
                        scale.map.at(0.08 + 0.9 * t)
                    }
                })
                .collect();
            let mut counts = vec![0_usize; count];
            let mut missing = 0;
            for v in &numbers {
                match v.and_then(|v| class_of(v, &b)) {
                    Some(k) => {
                        counts[k] += 1;
                        colours.push(class_colour[k]);
                    }
                    None => {
                        missing += 1;
                        colours.push(MISSING);
                    }
                }
            }
            let mut entries: Vec<(Rgb, String)> = (0..count)
                .rev()
                .map(|k| (class_colour[k], class_label(b[k], b[k + 1])))
                .collect();
            if missing > 0 {
                entries.push((MISSING, "no value".into()));
            }
            let classes: Vec<Value> = (0..count)
                .map(|k| {
                    json!({
                        "lower": b[k], "upper": b[k + 1], "colour": class_colour[k].hex(),
                        "areas": counts[k], "label": class_label(b[k], b[k + 1]),
                    })
                })
                .collect();
            (
                entries,
                json!({
                    "areas": layer, "field": field, "kind": "numeric",
                    "classing": params.classing, "value_range": [min, max],
                    "palette": palette_name(scale.map), "classes": classes, "areas_without_value": missing,
                }),
            )
        }
        None => {
            let mut categories: Vec<&str> = present.clone();
            categories.sort_unstable();
            categories.dedup();
            let lisa = categories.iter().all(|c| lisa_type(c).is_some());
            let (labels, palette): (Vec<String>, Vec<Rgb>) = if lisa {
                (
                    LISA_TYPES.iter().map(|s| (*s).to_owned()).collect(),
                    LISA_COLOURS.to_vec(),
                )
            } else {
                if categories.len() > OKABE_ITO.len() {
                    return Err(bad_field(format!(
                        "has {} distinct values; a categorical map tells at most {} apart (use a numeric field or fewer categories)",
                        categories.len(),
                        OKABE_ITO.len()
                    )));
                }
                (
                    categories.iter().map(|c| (*c).to_owned()).collect(),
                    OKABE_ITO[..categories.len()].to_vec(),
                )
            };
            let index = |value: &str| -> Option<usize> {
                if lisa {
                    lisa_type(value)
                } else {
                    labels.iter().position(|l| l == value)
                }
            };
            let mut counts = vec![0_usize; labels.len()];
            let mut missing = 0;
            for v in values {
                match v.as_deref().map(str::trim).and_then(index) {
                    Some(k) => {
                        counts[k] += 1;
                        colours.push(palette[k]);
                    }
                    None => {
                        missing += 1;
                        colours.push(MISSING);
                    }
                }
            }
            let mut entries: Vec<(Rgb, String)> = palette
                .iter()
                .zip(&labels)
                .map(|(c, l)| (*c, l.clone()))
                .collect();
            if missing > 0 {
                entries.push((MISSING, "no value".into()));
            }
            let classes: Vec<Value> = labels
                .iter()
                .zip(&palette)
                .zip(&counts)
                .map(|((l, c), n)| json!({ "label": l, "colour": c.hex(), "areas": n }))
                .collect();
            (
                entries,
                json!({
                    "areas": layer, "field": field, "kind": "categorical",
                    "palette": if lisa { "stance LISA (own design)" } else { "Okabe–Ito" },
                    "classes": classes, "areas_without_value": missing,
                }),
            )
        }
    };
    let extent = Extent::of_points(rings.iter().flatten().flatten().copied())
        .ok_or_else(|| Error::BadLayer {
            path: input.to_owned(),
            layer: layer.to_owned(),
            message: "has no extent (all geometries at one point)".into(),
        })?
        .padded(0.02);
    let mut scene = base_scene(
        params,
        extent,
        format!("{layer}: {field}"),
        Legend::Swatches {
            heading: field.to_owned(),
            entries: legend_entries,
        },
    );
    let frame = scene.layout.frame;
    for (feature, colour) in rings.iter().zip(&colours) {
        let pixel_rings: Vec<Vec<(f64, f64)>> = feature
            .iter()
            .map(|ring| ring.iter().map(|p| frame.to_px(p.0, p.1)).collect())
            .collect();
        paint_area(&mut scene.canvas, &frame, &pixel_rings, *colour);
        scene.area_outlines.extend(pixel_rings);
    }
    scene.note = format!("{} areas", rings.len());
    Ok((scene, summary))
}

/// `EPSG:n` or the CRS's name; a PROJ string for an unnamed CRS (e.g. the centred LAEA).
fn crs_text(srs: &SpatialRef) -> String {
    let label = crs::label(srs);
    if label.eq_ignore_ascii_case("unknown") || label == "unnamed CRS" {
        srs.to_proj4().map(|p| p.trim().to_owned()).unwrap_or(label)
    } else {
        label
    }
}

/// Geometry type of a feature layer from `gpkg_geometry_columns`.
fn geometry_type(path: &Path, layer: &str) -> Result<String> {
    let connection = open_sqlite_read(path)?;
    connection
        .query_row(
            "SELECT geometry_type_name FROM gpkg_geometry_columns WHERE lower(table_name) = lower(?1)",
            [layer],
            |r| r.get::<_, String>(0),
        )
        .map_err(|_| {
            let available = stance_core::gpkg::list_tables(path)
                .map(|t| {
                    t.into_iter()
                        .filter(|(_, kind)| kind == "features")
                        .map(|(n, _)| n)
                        .collect::<Vec<_>>()
                        .join(", ")
                })
                .unwrap_or_default();
            Error::LayerNotFound {
                path: path.to_owned(),
                layer: layer.to_owned(),
                available: if available.is_empty() {
                    "no feature layers".into()
                } else {
                    available
                },
            }
        })
}

/// An overlay layer in pixel coordinates of `frame`, taken to `map_srs`.
fn read_overlay(
    path: &Path,
    name: &str,
    map_srs: &SpatialRef,
    frame: &MapFrame,
) -> Result<Overlay> {
    let kind = geometry_type(path, name)?.to_ascii_uppercase();
    let to_px = |(x, y): (f64, f64)| frame.to_px(x, y);
    match kind.as_str() {
        "POLYGON" | "MULTIPOLYGON" => {
            let layer = read_polygons(path, Some(name), &[])?;
            let rings = project_rings(&layer.polygons, &layer.srs, map_srs)?;
            Ok(Overlay {
                name: layer.layer,
                lines: rings
                    .into_iter()
                    .flatten()
                    .map(|mut ring| {
                        // Close the ring so the outline has no gap.
                        if let Some(first) = ring.first().copied() {
                            ring.push(first);
                        }
                        ring.into_iter().map(to_px).collect()
                    })
                    .collect(),
                points: Vec::new(),
            })
        }
        "POINT" => {
            let wkt = map_srs.to_wkt().map_err(|e| Error::Crs {
                definition: crs::label(map_srs),
                message: e.to_string(),
            })?;
            let layer = read_points(path, Some(name), &[], Some(&wkt))?;
            Ok(Overlay {
                name: layer.layer,
                lines: Vec::new(),
                points: layer.x.into_iter().zip(layer.y).map(to_px).collect(),
            })
        }
        other => Err(Error::BadLayer {
            path: path.to_owned(),
            layer: name.to_owned(),
            message: format!("has {other} geometries; an overlay must be polygons or points"),
        }),
    }
}
