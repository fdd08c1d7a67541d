//! Small multiples of a surface's time slices (Tufte 1983, *The Visual Display of Quantitative
//! Information*, ch. 4): one panel per period in reading order, every panel on the same
//! extent and the same colour scale, one legend.

use std::path::Path;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::raster::SurfaceData;

use crate::classes::format_number;
use crate::frame::{scale_bar_length_m, Extent, MapFrame, PixelRect};
use crate::paint::{paint_surface, Canvas, Scale};
use crate::params::RenderParams;
use crate::scene::{choose_diverging, palette_name, Legend, Overlay};
use crate::series::Slice;
use crate::surface::legend_heading;

/// Narrowest panel (px): below it a map says nothing.
const MIN_PANEL_PX: i32 = 80;

/// The page of small multiples: panels in a grid, the legend panel right of them, the footer
/// below.
#[derive(Debug, Clone, PartialEq)]
pub struct GridLayout {
    /// Page width (px).
    pub width: u32,
    /// Page height (px).
    pub height: u32,
    /// Scale of text and margins (as [`crate::frame::Layout::scale`]).
    pub scale: f64,
    /// Panels in a row.
    pub columns: usize,
    /// Each panel's label band and map frame, in reading order.
    pub panels: Vec<(PixelRect, MapFrame)>,
    /// Legend panel.
    pub legend: PixelRect,
    /// Footer under the panels (scale bar, note, north arrow).
    pub footer: PixelRect,
}

/// Lays out `n` panels of `extent` on a page `width` px wide: columns ≈ √(n · width/height of
/// the extent), panels filled left to right, top to bottom; each panel keeps the extent's
/// aspect (held between a quarter and 1.3 times its width, as a single map). `None` when the
/// panels would be narrower than [`MIN_PANEL_PX`].
pub fn grid_layout(width: u32, extent: Extent, n: usize) -> Option<GridLayout> {
    let scale = (f64::from(width) / 1000.0).max(0.85);
    let px = |v: f64| (v * scale).round() as i32;
    let (title_h, margin, legend_w, footer_h) = (px(56.0), px(16.0), px(220.0), px(70.0));
    let (label_h, gap) = (px(22.0), px(10.0));
    let (dx, dy) = (
        (extent.x_max - extent.x_min).max(f64::MIN_POSITIVE),
        (extent.y_max - extent.y_min).max(f64::MIN_POSITIVE),
    );
    let n = n.max(1);
    let columns = ((n as f64 * dx / dy).sqrt().ceil() as usize).clamp(1, n);
    let rows = n.div_ceil(columns);
    let avail = width as i32 - 2 * margin - legend_w;
    let panel_w = (avail - (columns as i32 - 1) * gap) / columns as i32;
    if panel_w < MIN_PANEL_PX {
        return None;
    }
    let panel_h = ((f64::from(panel_w) * dy / dx).round() as i32)
        .clamp(panel_w / 4, (f64::from(panel_w) * 1.3) as i32);
    let metres_per_px = (dx / f64::from(panel_w)).max(dy / f64::from(panel_h));
    let (cx, cy) = (
        (extent.x_min + extent.x_max) / 2.0,
        (extent.y_min + extent.y_max) / 2.0,
    );
    let (half_w, half_h) = (
        f64::from(panel_w) * metres_per_px / 2.0,
        f64::from(panel_h) * metres_per_px / 2.0,
    );
    let shown = Extent {
        x_min: cx - half_w,
        y_min: cy - half_h,
        x_max: cx + half_w,
        y_max: cy + half_h,
    };
    let panels = (0..n)
        .map(|k| {
            let (row, col) = ((k / columns) as i32, (k % columns) as i32);
            let left = margin + col * (panel_w + gap);
            let top = title_h + row * (label_h + panel_h + gap);
            let label = PixelRect {
                left,
                top,
                right: left + panel_w,
                bottom: top + label_h,
            };
            let rect = PixelRect {
                left,
                top: top + label_h,
                right: left + panel_w,
                bottom: top + label_h + panel_h,
            };
            let frame = MapFrame {
                extent: shown,
                metres_per_px,
                rect,
            };
            (label, frame)
        })
        .collect();
    let panels_bottom = title_h + rows as i32 * (label_h + panel_h + gap) - gap;
    let panels_right = margin + columns as i32 * (panel_w + gap) - gap;
    let height = (panels_bottom + footer_h) as u32;
    Some(GridLayout {
        width,
        height,
        scale,
        columns,
        panels,
        legend: PixelRect {
            left: panels_right + margin,
            top: title_h,
            right: width as i32 - margin,
            bottom: panels_bottom.max(title_h + px(300.0)).min(height as i32),
        },
        // Across the page, so that the north arrow sits clear of the small print.
        footer: PixelRect {
            left: margin,
            top: panels_bottom,
            right: width as i32 - margin,
            bottom: height as i32,
        },
    })
}

/// One panel: its period, its map frame and pixels, its overlays.
#[derive(Debug, Clone)]
pub struct Panel {
    /// The period (`Period::label`).
    pub label: String,
    /// Where the label goes.
    pub label_rect: PixelRect,
    /// The map frame.
    pub frame: MapFrame,
    /// Map pixels.
    pub canvas: Canvas,
    /// Overlay layers.
    pub overlays: Vec<Overlay>,
}

/// Everything to draw on a page of small multiples.
#[derive(Debug, Clone)]
pub struct Multiples {
    /// The page.
    pub layout: GridLayout,
    /// Title line.
    pub title: String,
    /// Panels in reading order.
    pub panels: Vec<Panel>,
    /// The one legend.
    pub legend: Legend,
    /// Scale-bar length (m).
    pub scale_bar_m: Option<f64>,
    /// Small print under the panels.
    pub note: String,
}

/// The extent holding every slice's grid, and the range of every finite value of all slices.
fn common_extent_and_range(surfaces: &[SurfaceData]) -> (Option<Extent>, f64, f64) {
    let corners = surfaces.iter().flat_map(|s| {
        [
            (s.grid.x_min, s.grid.y_min),
            (s.grid.x_max(), s.grid.y_max()),
        ]
    });
    let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in surfaces.iter().flat_map(|s| &s.values) {
        if v.is_finite() {
            min = min.min(f64::from(*v));
            max = max.max(f64::from(*v));
        }
    }
    (Extent::of_points(corners), min, max)
}

/// The page of small multiples of `surfaces` (one per slice, same order) on one colour scale
/// spanning every panel's values (symmetric about zero when diverging); and its summary.
///
/// # Errors
/// Every cell of every slice is nodata, or the panels do not fit the page width.
pub fn multiples_scene(
    params: &RenderParams,
    (input, surface): (&Path, &str),
    slices: &[Slice],
    surfaces: &[SurfaceData],
    (unit, field_name): (&str, &str),
) -> Result<(Multiples, Value)> {
    let (extent, min, max) = common_extent_and_range(surfaces);
    let no_data = || Error::BadInput {
        path: input.to_owned(),
        message: format!("every time slice of '{surface}' has no data; nothing to draw"),
    };
    let extent = extent.ok_or_else(no_data)?;
    if !min.is_finite() {
        return Err(no_data());
    }
    let layout = grid_layout(params.width_px, extent, slices.len()).ok_or_else(|| {
        Error::argument(
            "--width-px",
            format!(
                "{} px is too narrow for {} panels of at least {MIN_PANEL_PX} px; give a larger width",
                params.width_px,
                slices.len()
            ),
        )
    })?;
    let scale = Scale::for_range(
        min,
        max,
        choose_diverging(params.palette, surface, min, max),
    );
    let mut panels = Vec::with_capacity(slices.len());
    for ((slice, data), (label_rect, frame)) in slices.iter().zip(surfaces).zip(&layout.panels) {
        let mut canvas = Canvas::new(frame);
        paint_surface(&mut canvas, frame, &data.grid, &data.values, |v| {
            scale.colour(v)
        });
        panels.push(Panel {
            label: slice.label(),
            label_rect: *label_rect,
            frame: *frame,
            canvas,
            overlays: Vec::new(),
        });
    }
    let frame = layout.panels[0].1;
    let bar_px = (0.6 * f64::from(frame.rect.width())).max(120.0 * layout.scale);
    let scale_bar_m = scale_bar_length_m(bar_px * frame.metres_per_px);
    let period = slices[0].period;
    let summary = json!({
        "surface": surface,
        "each_period": true,
        "period": period,
        "panels": slices.iter().zip(&layout.panels).map(|(s, (_, f))| json!({
            "layer": s.table, "period": s.label(), "map_px": f.rect,
        })).collect::<Vec<_>>(),
        "columns": layout.columns,
        "unit": unit,
        "value_range": [min, max],
        "colour_limits": [scale.low, scale.high],
        "palette": palette_name(scale.map),
        "width_px": layout.width,
        "height_px": layout.height,
        "extent": frame.extent,
        "metres_per_px": frame.metres_per_px,
        "scale_bar_m": scale_bar_m,
        "overlays": params.overlay,
    });
    let cell = format_number(surfaces[0].grid.cell_m);
    let multiples = Multiples {
        title: params
            .title
            .clone()
            .unwrap_or_else(|| format!("{surface} by {}, one colour scale", period_word(period))),
        legend: Legend::Bar {
            scale,
            heading: legend_heading(surface, unit, field_name),
        },
        note: format!("{cell} m cells; white = no data"),
        layout,
        panels,
        scale_bar_m,
    };
    Ok((multiples, summary))
}

/// The period's name in a title.
fn period_word(period: stance_core::time::Period) -> &'static str {
    use stance_core::time::Period;
    match period {
        Period::Day => "day",
        Period::Week => "week",
        Period::Month => "month",
        Period::Quarter => "quarter",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn square() -> Extent {
        Extent {
            x_min: 0.0,
            y_min: 0.0,
            x_max: 1000.0,
            y_max: 1000.0,
        }
    }

    #[test]
    fn panels_fill_rows_left_to_right_then_top_to_bottom() {
        // 5 square panels: ⌈√5⌉ = 3 columns, 2 rows. Width 1000: (1000 − 32 − 220 − 2·10)/3
        // = 242 px a panel.
        let page = grid_layout(1000, square(), 5).expect("fits");
        assert_eq!(page.columns, 3);
        let rects: Vec<PixelRect> = page.panels.iter().map(|(_, f)| f.rect).collect();
        assert_eq!(rects[0].width(), 242);
        assert_eq!(rects[0].height(), 242);
        assert!(rects[0].left < rects[1].left && rects[1].left < rects[2].left);
        assert_eq!(rects[0].top, rects[2].top);
        assert!(rects[3].top > rects[2].bottom);
        assert_eq!(rects[3].left, rects[0].left);
        // Labels sit right above their maps; the page ends under the footer.
        assert_eq!(page.panels[0].0.bottom, rects[0].top);
        assert_eq!(page.height as i32, page.footer.bottom);
        assert_eq!(page.footer.top, rects[4].bottom);
        // Every panel shows the same extent at the same scale.
        assert!(page.panels.windows(2).all(
            |w| w[0].1.extent == w[1].1.extent && w[0].1.metres_per_px == w[1].1.metres_per_px
        ));
    }

    #[test]
    fn a_wide_extent_gets_more_columns_and_too_many_panels_do_not_fit() {
        let wide = Extent {
            x_min: 0.0,
            y_min: 0.0,
            x_max: 4000.0,
            y_max: 1000.0,
        };
        // √(4 · 4) = 4 columns would be 4 panels in one row; 2 panels take 2 columns.
        assert_eq!(grid_layout(1000, wide, 4).expect("fits").columns, 4);
        assert_eq!(grid_layout(1000, wide, 2).expect("fits").columns, 2);
        assert_eq!(grid_layout(1000, square(), 1).expect("fits").columns, 1);
        // 100 square panels: 10 columns of (748 − 90)/10 = 65 px < 80.
        assert!(grid_layout(1000, square(), 100).is_none());
        assert!(grid_layout(3000, square(), 100).is_some());
    }
}
