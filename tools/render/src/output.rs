//! The run's output: the PNG, claimed before any work and moved into place by the staging only
//! when the run succeeds, and the summary of what was drawn.

use std::path::{Path, PathBuf};

use gdal::spatial_ref::SpatialRef;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::host::Run;

use crate::draw::draw_png;
use crate::params::RenderParams;
use crate::projection::crs_text;
use crate::scene::{Page, Scene};

/// The PNG's place in the staging: drawn to a scratch file, renamed to the staged name.
pub struct PngTarget {
    /// The file the user asked for.
    png: PathBuf,
    /// The staged name the host renames into place on success.
    staged: PathBuf,
    /// Scratch file drawn first (plotters picks the encoder from its `.png` name); removed
    /// however the run ends.
    scratch: RemoveOnDrop,
}

/// Removes a scratch file however the run ends.
struct RemoveOnDrop(PathBuf);

impl Drop for RemoveOnDrop {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// `path` with `.png` appended.
fn with_png_suffix(path: &Path) -> PathBuf {
    let mut name = path.as_os_str().to_owned();
    name.push(".png");
    PathBuf::from(name)
}

impl PngTarget {
    /// Claims the PNG's staged path and proves it can be written, before any work.
    ///
    /// # Errors
    /// The PNG is the input, or cannot be written.
    pub fn claim(run: &mut Run, png: &Path, input: &Path) -> Result<Self> {
        if stance_core::gpkg::same_file(png, input) {
            return Err(Error::BadOutput {
                path: png.to_owned(),
                message: "is the input GeoPackage; choose another file".into(),
            });
        }
        let staged = run.output().side_file(png)?;
        let scratch = with_png_suffix(&staged);
        std::fs::write(&scratch, b"").map_err(|e| Error::BadOutput {
            path: png.to_owned(),
            message: format!("cannot be written: {e}"),
        })?;
        Ok(PngTarget {
            png: png.to_owned(),
            staged,
            scratch: RemoveOnDrop(scratch),
        })
    }

    /// Draws `page` and hands the file to the staging.
    ///
    /// # Errors
    /// Drawing or renaming fails.
    pub fn write(&self, page: &Page) -> Result<()> {
        let failed = |message: String| Error::BadOutput {
            path: self.png.clone(),
            message,
        };
        draw_png(page, &self.scratch.0).map_err(|m| failed(format!("drawing failed: {m}")))?;
        std::fs::rename(&self.scratch.0, &self.staged)
            .map_err(|e| failed(format!("cannot be written: {e}")))
    }
}

/// How each overlay's lines were drawn: layer, legend label, ink colour and line pattern.
fn overlay_styles(scene: &Scene) -> Vec<Value> {
    scene
        .overlays
        .iter()
        .flat_map(|o| {
            o.groups.iter().map(|g| {
                json!({
                    "layer": o.name,
                    "label": g.label,
                    "colour": g.style.colour.hex(),
                    "line": g.style.dash,
                })
            })
        })
        .collect()
}

/// The summary: the page, the map frame, the CRS, the overlays, and what the map shows.
pub fn summary(params: &RenderParams, scene: &Scene, srs: &SpatialRef, map: Value) -> Value {
    let frame = scene.layout.frame;
    let mut summary = json!({
        "png": params.png,
        "width_px": scene.layout.width,
        "height_px": scene.layout.height,
        "map_px": frame.rect,
        "extent": frame.extent,
        "metres_per_px": frame.metres_per_px,
        "crs": crs_text(srs),
        "scale_bar_m": scene.scale_bar_m,
        "overlays": params.overlay,
        "overlay_lines": overlay_styles(scene),
    });
    if let (Some(object), Value::Object(extra)) = (summary.as_object_mut(), map) {
        object.extend(extra);
    }
    summary
}
