//! Drawing a laid-out page to a PNG with plotters (bitmap backend, ab_glyph text): map pixels,
//! outlines, title, colour bar or class legend, scale bar and north arrow — for one map or for
//! small multiples; the share chart is drawn by [`crate::draw_chart`].

use std::path::Path;
use std::sync::OnceLock;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{register_font, FontStyle};

use crate::frame::{clip_polyline, dash_polyline, length_label, nice_ticks, PixelRect};
use crate::multiples::Multiples;
use crate::palette::{LineStyle, Rgb};
use crate::scene::{Legend, Overlay, Page, Scene};

/// DejaVu Sans (Bitstream Vera licence, in `fonts/`), so text needs no system fonts.
const FONT_BYTES: &[u8] = include_bytes!("../fonts/DejaVuSans.ttf");
pub(crate) const FONT: &str = "stance-dejavu-sans";

/// Registers the embedded font once; false if it could not be parsed.
pub(crate) fn font_ready() -> bool {
    static READY: OnceLock<bool> = OnceLock::new();
    *READY.get_or_init(|| register_font(FONT, FontStyle::Normal, FONT_BYTES).is_ok())
}

pub(crate) fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

/// Draws `page` to the PNG file `path` (its name must end in `.png`).
///
/// # Errors
/// A message when the font cannot be loaded or plotters cannot draw or write the file.
pub fn draw_png(page: &Page, path: &Path) -> Result<(), String> {
    if !font_ready() {
        return Err("the embedded font could not be loaded".into());
    }
    let (width, height) = page.size();
    let root = BitMapBackend::new(path, (width, height)).into_drawing_area();
    let fail = |e: DrawingAreaErrorKind<_>| e.to_string();
    root.fill(&WHITE).map_err(fail)?;
    match page {
        Page::Map(scene) => draw_map_page(&root, scene).map_err(fail)?,
        Page::Multiples(multiples) => draw_multiples(&root, multiples).map_err(fail)?,
        Page::Chart(chart) => crate::draw_chart::draw_chart(&root, chart).map_err(fail)?,
    }
    root.present().map_err(fail)?;
    Ok(())
}

pub(crate) type Area<'a> = DrawingArea<BitMapBackend<'a>, plotters::coord::Shift>;
pub(crate) type DrawResult<'a> =
    Result<(), DrawingAreaErrorKind<<BitMapBackend<'a> as DrawingBackend>::ErrorType>>;

/// What goes under a map: scale bar, small print, north arrow.
struct Footer<'s> {
    rect: PixelRect,
    scale_bar_m: Option<f64>,
    metres_per_px: f64,
    note: &'s str,
}

/// One map: its pixels, outlines, overlays, title, legend and footer.
fn draw_map_page<'a>(root: &Area<'a>, scene: &Scene) -> DrawResult<'a> {
    let page = &scene.layout;
    let s = page.scale;
    let rect = page.frame.rect;
    draw_panel(
        root,
        rect,
        &scene.canvas,
        &scene.area_outlines,
        &scene.overlays,
        s,
    )?;
    draw_title(
        root,
        &scene.title,
        (page.width, s),
        (rect.left, rect.top / 2),
    )?;
    draw_legend(root, &scene.legend, &scene.overlays, &page.legend, s)?;
    let footer = Footer {
        rect: page.footer,
        scale_bar_m: scene.scale_bar_m,
        metres_per_px: page.frame.metres_per_px,
        note: &scene.note,
    };
    draw_footer(root, &footer, s)
}

/// Small multiples: every panel with its period label above it, one title, legend and footer.
fn draw_multiples<'a>(root: &Area<'a>, multiples: &Multiples) -> DrawResult<'a> {
    let page = &multiples.layout;
    let s = page.scale;
    let label_style = (FONT, (15.0 * s).max(1.0)).into_font().color(&BLACK);
    for panel in &multiples.panels {
        draw_panel(
            root,
            panel.frame.rect,
            &panel.canvas,
            &[],
            &panel.overlays,
            s,
        )?;
        root.draw_text(
            &panel.label,
            &label_style.pos(Pos::new(HPos::Left, VPos::Center)),
            (
                panel.label_rect.left + 2,
                (panel.label_rect.top + panel.label_rect.bottom) / 2,
            ),
        )?;
    }
    let first = multiples.panels.first().map(|p| p.frame);
    let left = first.map_or(0, |f| f.rect.left);
    let top = page.panels.first().map_or(0, |(label, _)| label.top);
    draw_title(root, &multiples.title, (page.width, s), (left, top / 2))?;
    let overlays = multiples
        .panels
        .first()
        .map(|p| p.overlays.as_slice())
        .unwrap_or_default();
    draw_legend(root, &multiples.legend, overlays, &page.legend, s)?;
    let footer = Footer {
        rect: page.footer,
        scale_bar_m: multiples.scale_bar_m,
        metres_per_px: first.map_or(1.0, |f| f.metres_per_px),
        note: &multiples.note,
    };
    draw_footer(root, &footer, s)
}

/// A polyline clipped to `rect`, in `style`.
fn draw_line<'a>(
    root: &Area<'a>,
    rect: &PixelRect,
    points: &[(f64, f64)],
    style: ShapeStyle,
) -> DrawResult<'a> {
    for run in clip_polyline(points, rect) {
        let pts: Vec<(i32, i32)> = run
            .iter()
            .map(|p| (p.0.round() as i32, p.1.round() as i32))
            .collect();
        root.draw(&PathElement::new(pts, style))?;
    }
    Ok(())
}

/// A line in `style`: its halo unbroken, then the ink cut by the style's dashes (scaled by `s`).
pub(crate) fn draw_styled<'a>(
    root: &Area<'a>,
    rect: &PixelRect,
    points: &[(f64, f64)],
    style: LineStyle,
    s: f64,
) -> DrawResult<'a> {
    let ink_px = (2.0 * s).max(1.0).round() as u32;
    let halo = ShapeStyle::from(&rgb(style.halo)).stroke_width(ink_px + 2);
    draw_line(root, rect, points, halo)?;
    let ink = ShapeStyle::from(&rgb(style.colour)).stroke_width(ink_px);
    let pattern: Vec<f64> = style.dash.pattern().iter().map(|v| v * s).collect();
    for piece in dash_polyline(points, &pattern) {
        draw_line(root, rect, &piece, ink)?;
    }
    Ok(())
}

/// Map pixels, area outlines and overlays in `rect`, and the frame around them.
fn draw_panel<'a>(
    root: &Area<'a>,
    rect: PixelRect,
    canvas: &crate::paint::Canvas,
    outlines: &[Vec<(f64, f64)>],
    overlays: &[Overlay],
    s: f64,
) -> DrawResult<'a> {
    for (i, pixel) in canvas.pixels.iter().enumerate() {
        if let Some(c) = pixel {
            let x = rect.left + (i % canvas.width) as i32;
            let y = rect.top + (i / canvas.width) as i32;
            root.draw_pixel((x, y), &rgb(*c))?;
        }
    }
    let thin = ShapeStyle::from(&RGBColor(64, 64, 64)).stroke_width((s.max(1.0)) as u32);
    for ring in outlines {
        draw_line(root, &rect, ring, thin)?;
    }
    for overlay in overlays {
        draw_overlay(root, &rect, overlay, s)?;
    }
    root.draw(&Rectangle::new(
        [(rect.left, rect.top), (rect.right, rect.bottom)],
        ShapeStyle::from(&RGBColor(96, 96, 96)).stroke_width(1),
    ))
}

/// One overlay: its lines group by group (ink over a halo, legible on dark and light colours
/// alike), then its points as ringed markers.
fn draw_overlay<'a>(
    root: &Area<'a>,
    rect: &PixelRect,
    overlay: &Overlay,
    s: f64,
) -> DrawResult<'a> {
    for group in &overlay.groups {
        for ring in &group.lines {
            draw_styled(root, rect, ring, group.style, s)?;
        }
    }
    // Many markers would bury the map: smaller ones past a few hundred.
    let radius = ((if overlay.points.len() > 300 { 2.0 } else { 3.5 }) * s).max(1.0) as i32;
    let ink = ShapeStyle::from(&BLACK).stroke_width((2.0 * s).max(1.0).round() as u32);
    for p in &overlay.points {
        let (x, y) = (p.0.round() as i32, p.1.round() as i32);
        if x >= rect.left && x < rect.right && y >= rect.top && y < rect.bottom {
            root.draw(&Circle::new((x, y), radius, WHITE.filled()))?;
            root.draw(&Circle::new((x, y), radius, ink))?;
        }
    }
    Ok(())
}

/// The title at `at` (left end, middle), shrunk until it fits the page width.
pub(crate) fn draw_title<'a>(
    root: &Area<'a>,
    title: &str,
    (width, scale): (u32, f64),
    at: (i32, i32),
) -> DrawResult<'a> {
    let size = |v: f64| (v * scale).max(1.0);
    let mut title_px = 28.0;
    let title_style = loop {
        let style = (FONT, size(title_px)).into_font().color(&BLACK);
        let (w, _) = root.estimate_text_size(title, &style)?;
        if f64::from(w) <= f64::from(width) - 2.0 * size(16.0) || title_px <= 10.0 {
            break style;
        }
        title_px -= 2.0;
    };
    root.draw_text(
        title,
        &title_style.pos(Pos::new(HPos::Left, VPos::Center)),
        at,
    )
}

fn draw_legend<'a>(
    root: &Area<'a>,
    legend: &Legend,
    overlays: &[Overlay],
    panel: &PixelRect,
    s: f64,
) -> DrawResult<'a> {
    let size = |v: f64| (v * s).max(1.0);
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, size(15.0)).into_font().color(&BLACK);
    let heading_style = (FONT, size(16.0)).into_font().color(&BLACK);
    let left = panel.left + px(8.0);
    let mut y = panel.top;
    let heading = match legend {
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
    match legend {
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
    draw_overlay_keys(root, overlays, panel, s, y)
}

/// Overlay keys under the legend, as many as fit: a marker or a line sample in each group's
/// style; a layer drawn by side gets its name as a heading and one entry per side.
fn draw_overlay_keys<'a>(
    root: &Area<'a>,
    overlays: &[Overlay],
    panel: &PixelRect,
    s: f64,
    mut y: i32,
) -> DrawResult<'a> {
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, (15.0 * s).max(1.0)).into_font().color(&BLACK);
    let left = panel.left + px(8.0);
    let label_at = |y: i32| (left + px(34.0), y);
    for overlay in overlays {
        if y + px(20.0) > panel.bottom {
            break;
        }
        let mid = y + px(9.0);
        if !overlay.points.is_empty() {
            let ink = ShapeStyle::from(&BLACK).stroke_width((2.0 * s).max(1.0) as u32);
            root.draw(&Circle::new((left + px(13.0), mid), px(3.5), ink))?;
            root.draw_text(
                &overlay.name,
                &small.pos(Pos::new(HPos::Left, VPos::Center)),
                label_at(mid),
            )?;
            y += px(24.0);
            continue;
        }
        if overlay.by_side {
            root.draw_text(
                &format!("{}, leans to:", overlay.name),
                &small.pos(Pos::new(HPos::Left, VPos::Center)),
                (left, mid),
            )?;
            y += px(24.0);
        }
        for group in &overlay.groups {
            if y + px(20.0) > panel.bottom {
                break;
            }
            let mid = y + px(9.0);
            let sample = [
                (f64::from(left), f64::from(mid)),
                (f64::from(left + px(26.0)), f64::from(mid)),
            ];
            draw_styled(root, panel, &sample, group.style, s)?;
            root.draw_text(
                &group.label,
                &small.pos(Pos::new(HPos::Left, VPos::Center)),
                label_at(mid),
            )?;
            y += px(24.0);
        }
    }
    Ok(())
}

fn draw_footer<'a>(root: &Area<'a>, what: &Footer<'_>, s: f64) -> DrawResult<'a> {
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, (14.0 * s).max(1.0)).into_font().color(&BLACK);
    let footer = what.rect;
    let left = footer.left;
    let bar_y = footer.top + px(30.0);
    if let Some(length_m) = what.scale_bar_m {
        let length_px = (length_m / what.metres_per_px).round() as i32;
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
        what.note,
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
