//! The map of a surface: cells coloured on a continuous scale, with its unit from the
//! coverage's ancillary table.

use std::path::Path;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::{open_sqlite_read, raster};

use crate::classes::format_number;
use crate::frame::Extent;
use crate::paint::{paint_surface, Scale};
use crate::params::RenderParams;
use crate::scene::{base_scene, choose_diverging, palette_name, Legend, Scene};

/// Unit and field name of a surface from `gpkg_2d_gridded_coverage_ancillary` (OGC 17-066r1).
///
/// # Errors
/// The file cannot be opened.
pub fn surface_unit(path: &Path, name: &str) -> Result<(String, String)> {
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

/// The colour bar's heading: the coverage's field and unit, or what of them is known.
pub fn legend_heading(name: &str, unit: &str, field_name: &str) -> String {
    match (field_name.is_empty(), unit.is_empty()) {
        (false, false) => format!("{field_name} ({unit})"),
        (false, true) => field_name.to_owned(),
        (true, false) => unit.to_owned(),
        (true, true) => name.to_owned(),
    }
}

/// Scene of a surface: cells coloured on a continuous scale; and its part of the summary.
///
/// # Errors
/// A surface with no data.
pub fn surface_scene(
    params: &RenderParams,
    input: &Path,
    name: &str,
    surface: &raster::SurfaceData,
    (unit, field_name): (&str, &str),
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
    let heading = legend_heading(name, unit, field_name);
    let mut scene = base_scene(
        params,
        extent,
        name.to_owned(),
        Legend::Bar { scale, heading },
    );
    let frame = scene.layout.frame;
    paint_surface(&mut scene.canvas, &frame, &grid, &surface.values, |v| {
        scale.colour(v)
    });
    let nodata = surface.values.iter().filter(|v| !v.is_finite()).count();
    scene.note = format!(
        "{} m cells; white = no data ({nodata} cells)",
        format_number(grid.cell_m)
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
