//! Drawing the chart of share over periods with plotters: axes with labels and units, each
//! unit's interval as a shaded band, its share as a line with markers, and a legend naming the
//! units.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::chart::{ChartPage, ChartSeries, SharePoint};
use crate::classes::format_number;
use crate::draw::{draw_styled, draw_title, rgb, wrap, Area, DrawResult, FONT};
use crate::frame::PixelRect;

/// How strongly a band is tinted with its line's colour (the rest is what lies under it).
const BAND_OPACITY: f64 = 0.18;

/// Runs of consecutive periods holding a share.
fn runs(points: &[Option<SharePoint>]) -> Vec<Vec<(f64, SharePoint)>> {
    let mut out: Vec<Vec<(f64, SharePoint)>> = Vec::new();
    let mut current = Vec::new();
    for (i, p) in points.iter().enumerate() {
        match p {
            Some(p) => current.push((i as f64, *p)),
            None if !current.is_empty() => out.push(std::mem::take(&mut current)),
            None => {}
        }
    }
    if !current.is_empty() {
        out.push(current);
    }
    out
}

/// Every `step`-th period index as an x tick, so that about `fit` labels fit.
fn x_ticks(n: usize, fit: usize) -> Vec<f64> {
    let step = n.div_ceil(fit.max(1)).max(1);
    (0..n).step_by(step).map(|i| i as f64).collect()
}

/// Draws `page` on `root`.
///
/// # Errors
/// Plotters cannot draw.
pub fn draw_chart<'a>(root: &Area<'a>, page: &ChartPage) -> DrawResult<'a> {
    let s = page.scale;
    let px = |v: f64| (v * s).round() as i32;
    let size = |v: f64| (v * s).max(1.0);
    let (title_h, margin, legend_w) = (px(56.0), px(16.0), px(220.0));
    draw_title(root, &page.title, (page.width, s), (margin, title_h / 2))?;
    let plot_w = page.width as i32 - legend_w - 2 * margin;
    let plot_h = page.height as i32 - title_h - margin;
    let area = root.clone().shrink((margin, title_h), (plot_w, plot_h));
    let model = &page.model;
    let n = model.periods.len();
    let label_w = model.periods.iter().map(|p| p.len()).max().unwrap_or(7) as f64 * 9.0 + 16.0;
    let ticks = x_ticks(n, (f64::from(plot_w) / (label_w * s)).floor() as usize);
    let mut chart = ChartBuilder::on(&area)
        .x_label_area_size(px(64.0))
        .y_label_area_size(px(80.0))
        .margin_right(px(12.0))
        .build_cartesian_2d(-0.5..n as f64 - 0.5, model.y_low..model.y_high)?;
    let y_label = |y: &f64| format_number(*y);
    // Period labels are drawn below by draw_period_ticks: the mesh gets none.
    let no_label = |_: &f64| String::new();
    chart
        .configure_mesh()
        .x_desc(page.x_label.as_str())
        .y_desc(page.y_label.as_str())
        .x_label_formatter(&no_label)
        .y_label_formatter(&y_label)
        .disable_x_mesh()
        .y_labels(6)
        .label_style((FONT, size(14.0)))
        .axis_desc_style((FONT, size(16.0)))
        .bold_line_style(RGBColor(225, 225, 225))
        .light_line_style(TRANSPARENT)
        .draw()?;
    for series in &model.series {
        let band = rgb(series.style.colour).mix(BAND_OPACITY);
        for run in runs(&series.points) {
            if let [(x, p)] = run.as_slice() {
                chart.draw_series(std::iter::once(PathElement::new(
                    vec![(*x, p.low), (*x, p.high)],
                    band.stroke_width(px(6.0).max(2) as u32),
                )))?;
                continue;
            }
            let mut outline: Vec<(f64, f64)> = run.iter().map(|(x, p)| (*x, p.high)).collect();
            outline.extend(run.iter().rev().map(|(x, p)| (*x, p.low)));
            chart.draw_series(std::iter::once(Polygon::new(outline, band.filled())))?;
        }
    }
    let (xs, ys) = chart.plotting_area().get_pixel_range();
    let plot = PixelRect {
        left: xs.start,
        top: ys.start,
        right: xs.end,
        bottom: ys.end,
    };
    draw_period_ticks(root, &chart, (&ticks, &model.periods), model.y_low, s)?;
    for series in &model.series {
        draw_series_line(root, &chart, series, &plot, s)?;
    }
    let legend = PixelRect {
        left: plot_w + 2 * margin,
        top: title_h,
        right: page.width as i32 - margin,
        bottom: page.height as i32 - margin,
    };
    draw_chart_legend(root, page, &legend, s)
}

/// A light vertical line at each labelled period, its tick mark and its label under the axis.
fn draw_period_ticks<'a, C: ToPixel>(
    root: &Area<'a>,
    chart: &C,
    (ticks, periods): (&[f64], &[String]),
    y_low: f64,
    s: f64,
) -> DrawResult<'a> {
    let px = |v: f64| (v * s).round() as i32;
    let style = (FONT, (14.0 * s).max(1.0)).into_font().color(&BLACK);
    for x in ticks {
        let Some(label) = periods.get(*x as usize) else {
            continue;
        };
        let (tx, ty) = chart.to_pixel(*x, y_low);
        let (tx, ty) = (tx.round() as i32, ty.round() as i32);
        root.draw(&PathElement::new(
            vec![(tx, ty), (tx, ty + px(5.0))],
            ShapeStyle::from(&BLACK).stroke_width(1),
        ))?;
        root.draw_text(
            label,
            &style.pos(Pos::new(HPos::Center, VPos::Top)),
            (tx, ty + px(8.0)),
        )?;
    }
    Ok(())
}

/// A unit's share: its line through every run of periods, then a marker at each period.
fn draw_series_line<'a, C>(
    root: &Area<'a>,
    chart: &C,
    series: &ChartSeries,
    plot: &PixelRect,
    s: f64,
) -> DrawResult<'a>
where
    C: ToPixel,
{
    let radius = (3.0 * s).round().max(2.0) as i32;
    for run in runs(&series.points) {
        let pixels: Vec<(f64, f64)> = run
            .iter()
            .map(|(x, p)| chart.to_pixel(*x, p.share))
            .collect();
        if pixels.len() > 1 {
            draw_styled(root, plot, &pixels, series.style, s)?;
        }
        for (x, y) in pixels {
            let at = (x.round() as i32, y.round() as i32);
            root.draw(&Circle::new(at, radius + 1, WHITE.filled()))?;
            root.draw(&Circle::new(at, radius, rgb(series.style.colour).filled()))?;
        }
    }
    Ok(())
}

/// Chart coordinates to page pixels.
trait ToPixel {
    fn to_pixel(&self, x: f64, y: f64) -> (f64, f64);
}

impl<DB, X, Y> ToPixel for ChartContext<'_, DB, Cartesian2d<X, Y>>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    fn to_pixel(&self, x: f64, y: f64) -> (f64, f64) {
        let (px, py) = self.backend_coord(&(x, y));
        (f64::from(px), f64::from(py))
    }
}

/// The legend: one line sample per unit, then what the shaded band is.
fn draw_chart_legend<'a>(
    root: &Area<'a>,
    page: &ChartPage,
    panel: &PixelRect,
    s: f64,
) -> DrawResult<'a> {
    let px = |v: f64| (v * s).round() as i32;
    let small = (FONT, (15.0 * s).max(1.0)).into_font().color(&BLACK);
    let heading = (FONT, (16.0 * s).max(1.0)).into_font().color(&BLACK);
    let left = panel.left + px(8.0);
    let mut y = panel.top;
    root.draw_text(
        "units",
        &heading.pos(Pos::new(HPos::Left, VPos::Top)),
        (left, y),
    )?;
    y += px(28.0);
    for series in &page.model.series {
        if y + px(20.0) > panel.bottom {
            break;
        }
        let mid = y + px(9.0);
        let sample = [
            (f64::from(left), f64::from(mid)),
            (f64::from(left + px(26.0)), f64::from(mid)),
        ];
        draw_styled(root, panel, &sample, series.style, s)?;
        root.draw_text(
            &series.label,
            &small.pos(Pos::new(HPos::Left, VPos::Center)),
            (left + px(34.0), mid),
        )?;
        y += px(24.0);
    }
    y += px(10.0);
    root.draw(&Rectangle::new(
        [(left, y), (left + px(26.0), y + px(18.0))],
        BLACK.mix(BAND_OPACITY).filled(),
    ))?;
    for (k, line) in wrap(&page.band_label, 20).iter().enumerate() {
        root.draw_text(
            line,
            &small.pos(Pos::new(HPos::Left, VPos::Top)),
            (left + px(34.0), y + k as i32 * px(18.0)),
        )?;
    }
    if !page.model.left_out.is_empty() {
        y += px(52.0);
        let note = format!("{} more clusters not drawn", page.model.left_out.len());
        for (k, line) in wrap(&note, 24).iter().enumerate() {
            root.draw_text(
                line,
                &small.pos(Pos::new(HPos::Left, VPos::Top)),
                (left, y + k as i32 * px(18.0)),
            )?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn runs_break_at_missing_shares_and_ticks_thin_out() {
        let p = |v| {
            Some(SharePoint {
                share: v,
                low: v,
                high: v,
            })
        };
        let points = [p(1.0), p(2.0), None, p(3.0), None, None];
        let r = runs(&points);
        assert_eq!(r.len(), 2);
        assert_eq!(r[0].len(), 2);
        assert_eq!(r[1][0].0, 3.0);
        assert_eq!(x_ticks(12, 20), (0..12).map(f64::from).collect::<Vec<_>>());
        assert_eq!(x_ticks(12, 5), [0.0, 3.0, 6.0, 9.0]);
        assert_eq!(x_ticks(1, 0), [0.0]);
    }
}
