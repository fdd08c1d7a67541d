//! What a map holds before it is drawn — page layout, painted pixels, outlines, overlays, legend
//! and footnote — and the scene every map starts from.

use crate::frame::{layout, scale_bar_length_m, Extent, Layout};
use crate::paint::{auto_diverging, Canvas, Scale};
use crate::palette::{ColourMap, LineStyle, Rgb};
use crate::params::{PaletteChoice, RenderParams};

/// The legend beside the map.
#[derive(Debug, Clone)]
pub enum Legend {
    /// A continuous colour bar.
    Bar {
        /// The scale.
        scale: Scale,
        /// Heading (quantity and unit).
        heading: String,
    },
    /// One swatch per class or category.
    Swatches {
        /// Heading (field name).
        heading: String,
        /// Colour and label of each entry.
        entries: Vec<(Rgb, String)>,
    },
}

/// Lines of an overlay drawn alike, with their legend label.
#[derive(Debug, Clone)]
pub struct OverlayLines {
    /// Legend label: the layer name, or the side of the clusters for a layer drawn by side.
    pub label: String,
    /// How the lines look.
    pub style: LineStyle,
    /// Lines in pixel coordinates (ring outlines).
    pub lines: Vec<Vec<(f64, f64)>>,
}

/// How an overlay is drawn and named in the legend.
#[derive(Debug, Clone)]
pub struct Overlay {
    /// Layer name.
    pub name: String,
    /// Whether the lines are grouped by the side of the clusters (`leans_to`).
    pub by_side: bool,
    /// Groups of lines, one per legend entry.
    pub groups: Vec<OverlayLines>,
    /// Points in pixel coordinates.
    pub points: Vec<(f64, f64)>,
}

/// Everything to draw.
#[derive(Debug, Clone)]
pub struct Scene {
    /// The page layout.
    pub layout: Layout,
    /// Title line.
    pub title: String,
    /// Map pixels.
    pub canvas: Canvas,
    /// Thin boundaries of the mapped areas, pixel coordinates.
    pub area_outlines: Vec<Vec<(f64, f64)>>,
    /// Overlay layers.
    pub overlays: Vec<Overlay>,
    /// The legend.
    pub legend: Legend,
    /// Scale-bar length (m), if the map is in metres.
    pub scale_bar_m: Option<f64>,
    /// Small print under the map (CRS).
    pub note: String,
}

/// The page, the map's extent and an empty canvas, shared by both kinds of map.
pub fn base_scene(params: &RenderParams, extent: Extent, title: String, legend: Legend) -> Scene {
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

/// Whether the values get the diverging palette.
pub fn choose_diverging(choice: PaletteChoice, name: &str, min: f64, max: f64) -> bool {
    match choice {
        PaletteChoice::Auto => auto_diverging(name, min, max),
        PaletteChoice::Sequential => false,
        PaletteChoice::Diverging => true,
    }
}

/// The palette's name in the summary.
pub fn palette_name(map: ColourMap) -> &'static str {
    match map {
        ColourMap::Batlow => "batlow (sequential)",
        ColourMap::Vik => "vik (diverging)",
    }
}

/// A page to draw: one map, small multiples of time slices, or a chart of share over periods.
#[derive(Debug, Clone)]
pub enum Page {
    /// One map.
    Map(Scene),
    /// Small multiples.
    Multiples(crate::multiples::Multiples),
    /// A chart.
    Chart(crate::chart::ChartPage),
}

impl Page {
    /// Width and height (px).
    pub fn size(&self) -> (u32, u32) {
        match self {
            Page::Map(scene) => (scene.layout.width, scene.layout.height),
            Page::Multiples(m) => (m.layout.width, m.layout.height),
            Page::Chart(c) => (c.width, c.height),
        }
    }
}
