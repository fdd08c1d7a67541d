//! Drawing a laid-out map to a PNG with plotters (bitmap backend, ab_glyph text): map pixels,
//! outlines, title, colour bar or class legend, scale bar and north arrow.

use std::path::Path;
use std::sync::OnceLock;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{register_font, FontStyle};

use crate::frame::{clip_polyline, length_label, nice_ticks, Layout, PixelRect};
use crate::paint::{Canvas, Scale};
use crate::palette::Rgb;

/// DejaVu Sans (Bitstream Vera licence, in `fonts/`), so text needs no system fonts.
const FONT_BYTES: &[u8] = include_bytes!("../fonts/DejaVuSans.ttf");
const FONT: &str = "stance-dejavu-sans";

/// Registers the embedded font once; false if it could not be parsed.
fn font_ready() -> bool {
    static READY: OnceLock<bool> = OnceLock::new();
    *READY.get_or_init(|| register_font(FONT, FontStyle::Normal, FONT_BYTES).is_ok())
}

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

/// How an overlay is drawn and named in the legend.
#[derive(Debug, Clone)]
pub struct Overlay {
    /// Layer name.
    pub name: String,
    /// Lines in pixel coordinates (ring outlines).
    pub lines: Vec<Vec<(f64, f64)>>,
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

fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

/// Draws `scene` to the PNG file `path` (its name must end in `.png`).
///
/// # Errors
/// A message when the font cannot be loaded or plotters cannot draw or write the file.
pub fn draw_png(scene: &Scene, path: &Path) -> Result<(), String> {
    if !font_ready() {
        return Err("the embedded font could not be loaded".into());
    }
    let page = &scene.layout;
    let root = BitMapBackend::new(path, (page.width, page.height)).into_drawing_area();
    let fail = |e: DrawingAreaErrorKind<_>| e.to_string();
    root.fill(&WHITE).map_err(fail)?;
    let s = page.scale;
    let size = |v: f64| (v * s).max(1.0);
    let text = |px: f64| (FONT, size(px)).into_font().color(&BLACK);

    // Map pixels.
    let rect = page.frame.rect;
    for (i, pixel) in scene.canvas.pixels.iter().enumerate() {
        if let Some(c) = pixel {
            let x = rect.left + (i % scene.canvas.width) as i32;
            let y = rect.top + (i / scene.canvas.width) as i32;
            root.draw_pixel((x, y), &rgb(*c)).map_err(fail)?;
        }
    }
    let line = |points: &[(f64, f64)], style: ShapeStyle| -> Result<(), String> {
        for run in clip_polyline(points, &rect) {
            let pts: Vec<(i32, i32)> = run
                .iter()
                .map(|p| (p.0.round() as i32, p.1.round() as i32))
                .collect();
            root.draw(&PathElement::new(pts, style)).map_err(fail)?;
        }
        Ok(())
    };
    let thin = ShapeStyle::from(&RGBColor(64, 64, 64)).stroke_width(size(1.0) as u32);
    for ring in &scene.area_outlines {
        line(ring, thin)?;
    }
    // Overlays: black over a white halo, legible on dark and light colours alike.
    let ink_px = size(2.0).round() as u32;
    let halo = ShapeStyle::from(&WHITE).stroke_width(ink_px + 1);
    let ink = ShapeStyle::from(&BLACK).stroke_width(ink_px);
    for overlay in &scene.overlays {
        for ring in &overlay.lines {
            line(ring, halo)?;
        }
        for ring in &overlay.lines {
            line(ring, ink)?;
        }
        // Many markers would bury the map: smaller ones past a few hundred.
        let radius = size(if overlay.points.len() > 300 { 2.0 } else { 3.5 }) as i32;
        for p in &overlay.points {
            let (x, y) = (p.0.round() as i32, p.1.round() as i32);
            if x >= rect.left && x < rect.right && y >= rect.top && y < rect.bottom {
                root.draw(&Circle::new((x, y), radius, WHITE.filled()))
                    .map_err(fail)?;
                root.draw(&Circle::new((x, y), radius, ink)).map_err(fail)?;
            }
        }
    }
    root.draw(&Rectangle::new(
        [(rect.left, rect.top), (rect.right, rect.bottom)],
        ShapeStyle::from(&RGBColor(96, 96, 96)).stroke_width(1),
    ))
    .map_err(fail)?;

    // Title, shrunk until it fits the page width.
    let mut title_px = 28.0;
    let title_style = loop {
        let style = text(title_px);
        let (w, _) = root
            .estimate_text_size(&scene.title, &style)
            .map_err(fail)?;
        if f64::from(w) <= f64::from(page.width) - 2.0 * size(16.0) || title_px <= 10.0 {
            break style;
        }
        title_px -= 2.0;
    };
    root.draw_text(
        &scene.title,
        &title_style.pos(Pos::new(HPos::Left, VPos::Center)),
        (rect.left, rect.top / 2),
    )
    .map_err(fail)?;

    draw_legend(&root, scene, &page.legend, s).map_err(fail)?;
    draw_footer(&root, scene, s).map_err(fail)?;
    root.present().map_err(fail)?;
    Ok(())
}

type Area<'a> = DrawingArea<BitMapBackend<'a>, plotters::coord::Shift>;
type DrawResult<'a> =
    Result<(), DrawingAreaErrorKind<<BitMapBackend<'a> as DrawingBackend>::ErrorType>>;

fn draw_legend<'a>(root: &Area<'a>, scene: &Scene, panel: &PixelRect, s: f64) -> DrawResult<'a> {
    let size = |v: f64| (v * s).max(1.0);
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, size(15.0)).into_font().color(&BLACK);
    let heading_style = (FONT, size(16.0)).into_font().color(&BLACK);
    let left = panel.left + px(8.0);
    let mut y = panel.top;
    let heading = match &scene.legend {
        Legend::Bar { heading, .. } | Legend::Swatches { heading, .. } => heading,
    };
    for line in wrap(heading, 24) {
        root.draw_text(
            &line,
            &heading_style.pos(Pos::new(HPos::Left, VPos::Top)),
            (left, y),
        )?;
        y += px(20.0);
    }
    y += px(8.0);
    match &scene.legend {
        Legend::Bar { scale, .. } => {
            let bar_w = px(26.0);
            let bar_h = (panel.bottom - y - px(12.0)).clamp(px(60.0), px(360.0));
            let (top, bottom) = (y, y + bar_h);
            for row in top..bottom {
                // Top of the bar is the high end.
                let t = 1.0 - (f64::from(row - top) + 0.5) / f64::from(bar_h);
                let c = scale.map.at(t);
                root.draw(&PathElement::new(
                    vec![(left, row), (left + bar_w, row)],
                    ShapeStyle::from(&rgb(c)),
                ))?;
            }
            root.draw(&Rectangle::new(
                [(left, top), (left + bar_w, bottom)],
                ShapeStyle::from(&BLACK).stroke_width(1),
            ))?;
            for tick in nice_ticks(scale.low, scale.high, 6) {
                let t = scale.position(tick);
                let ty = bottom - (t * f64::from(bar_h)).round() as i32;
                root.draw(&PathElement::new(
                    vec![(left + bar_w, ty), (left + bar_w + px(6.0), ty)],
                    ShapeStyle::from(&BLACK).stroke_width(size(1.0) as u32),
                ))?;
                root.draw_text(
                    &crate::classes::format_number(tick),
                    &small.pos(Pos::new(HPos::Left, VPos::Center)),
                    (left + bar_w + px(10.0), ty),
                )?;
            }
            y = bottom + px(14.0);
        }
        Legend::Swatches { entries, .. } => {
            for (colour, label) in entries {
                root.draw(&Rectangle::new(
                    [(left, y), (left + px(26.0), y + px(18.0))],
                    rgb(*colour).filled(),
                ))?;
                root.draw(&Rectangle::new(
                    [(left, y), (left + px(26.0), y + px(18.0))],
                    ShapeStyle::from(&RGBColor(64, 64, 64)).stroke_width(1),
                ))?;
                root.draw_text(
                    label,
                    &small.pos(Pos::new(HPos::Left, VPos::Center)),
                    (left + px(34.0), y + px(9.0)),
                )?;
                y += px(26.0);
            }
            y += px(6.0);
        }
    }
    // Overlay keys, if they fit.
    for overlay in &scene.overlays {
        if y + px(20.0) > panel.bottom {
            break;
        }
        let mid = y + px(9.0);
        if overlay.points.is_empty() {
            root.draw(&PathElement::new(
                vec![(left, mid), (left + px(26.0), mid)],
                ShapeStyle::from(&BLACK).stroke_width(size(2.0) as u32),
            ))?;
        } else {
            root.draw(&Circle::new(
                (left + px(13.0), mid),
                px(3.5),
                ShapeStyle::from(&BLACK).stroke_width(size(2.0) as u32),
            ))?;
        }
        root.draw_text(
            &overlay.name,
            &small.pos(Pos::new(HPos::Left, VPos::Center)),
            (left + px(34.0), mid),
        )?;
        y += px(24.0);
    }
    Ok(())
}

fn draw_footer<'a>(root: &Area<'a>, scene: &Scene, s: f64) -> DrawResult<'a> {
    let page = &scene.layout;
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, (14.0 * s).max(1.0)).into_font().color(&BLACK);
    let footer = page.footer;
    let left = footer.left;
    let bar_y = footer.top + px(30.0);
    if let Some(length_m) = scene.scale_bar_m {
        let length_px = (length_m / page.frame.metres_per_px).round() as i32;
        let half = length_px / 2;
        let h = px(8.0);
        root.draw(&Rectangle::new(
            [(left, bar_y), (left + half, bar_y + h)],
            BLACK.filled(),
        ))?;
        root.draw(&Rectangle::new(
            [(left, bar_y), (left + length_px, bar_y + h)],
            ShapeStyle::from(&BLACK).stroke_width(1),
        ))?;
        let mut labels = vec![(left, "0".to_owned())];
        // The middle label only where it cannot collide with its neighbours.
        if f64::from(half) >= 50.0 * s {
            labels.push((left + half, length_label(length_m / 2.0)));
        }
        labels.push((left + length_px, length_label(length_m)));
        for (x, label) in labels {
            root.draw_text(
                &label,
                &small.pos(Pos::new(HPos::Center, VPos::Bottom)),
                (x, bar_y - px(3.0)),
            )?;
        }
    }
    root.draw_text(
        &scene.note,
        &small.pos(Pos::new(HPos::Left, VPos::Top)),
        (left, bar_y + px(16.0)),
    )?;
    // North arrow at the right end of the footer: the map is north-up.
    let cx = footer.right - px(18.0);
    let top = footer.top + px(8.0);
    root.draw(&Polygon::new(
        vec![
            (cx, top),
            (cx + px(9.0), top + px(26.0)),
            (cx, top + px(20.0)),
            (cx - px(9.0), top + px(26.0)),
        ],
        BLACK.filled(),
    ))?;
    root.draw_text(
        "N",
        &(FONT, (16.0 * s).max(1.0))
            .into_font()
            .color(&BLACK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
        (cx, top + px(30.0)),
    )?;
    Ok(())
}

/// Splits `text` into lines of at most about `width` characters at spaces.
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in text.split_whitespace() {
        match lines.last_mut() {
            Some(line) if line.chars().count() + 1 + word.chars().count() <= width => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_owned()),
        }
    }
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn headings_wrap_at_spaces() {
        assert_eq!(
            wrap("points per km² (intensity)", 14),
            ["points per km²", "(intensity)"]
        );
        assert!(wrap("", 10).is_empty());
        assert_eq!(
            wrap("averyveryverylongword x", 5),
            ["averyveryverylongword", "x"]
        );
    }

    #[test]
    fn the_embedded_font_loads() {
        assert!(font_ready());
    }
}
