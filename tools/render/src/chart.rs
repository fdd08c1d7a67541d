//! The chart of share over periods: which units get a line, their shares and intervals in
//! per cent on one period axis, and a y range that holds every interval.

use serde_json::{json, Value};

use crate::classes::format_number;
use crate::frame::nice_step;
use crate::palette::{chart_line, LineStyle};
use crate::params::{UnitChoice, UnitKind, MAX_UNITS};
use crate::periods::PeriodRow;

/// A share and its interval, per cent.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SharePoint {
    /// The share.
    pub share: f64,
    /// Low end of the interval.
    pub low: f64,
    /// High end of the interval.
    pub high: f64,
}

/// One unit's line.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartSeries {
    /// Legend label ("whole study area", "cluster 3", "area D017").
    pub label: String,
    /// The unit's kind.
    pub kind: UnitKind,
    /// The unit.
    pub unit: String,
    /// One point per period of the axis; `None` where the share is NULL or the unit has no row.
    pub points: Vec<Option<SharePoint>>,
    /// How its line looks.
    pub style: LineStyle,
}

/// What the chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartModel {
    /// The periods of the x axis, in time order.
    pub periods: Vec<String>,
    /// The lines, the whole study area first.
    pub series: Vec<ChartSeries>,
    /// Low end of the y axis (per cent).
    pub y_low: f64,
    /// High end of the y axis (per cent).
    pub y_high: f64,
    /// Clusters left out past [`MAX_UNITS`] (default choice only).
    pub left_out: Vec<String>,
}

/// A chart page: its size, title, axis labels and what it shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartPage {
    /// Page width (px).
    pub width: u32,
    /// Page height (px).
    pub height: u32,
    /// Scale of text and margins: 1 at 1000 px wide, never below 0.85.
    pub scale: f64,
    /// Title line.
    pub title: String,
    /// The x axis label.
    pub x_label: String,
    /// The y axis label.
    pub y_label: String,
    /// Lines, bands and axis ranges.
    pub model: ChartModel,
    /// The legend's words for the shaded band.
    pub band_label: String,
}

impl ChartPage {
    /// The page for `model`, `width` px wide and 0.6 times as high.
    pub fn new(width: u32, title: String, y_label: String, model: ChartModel) -> ChartPage {
        let word = model.periods.first().map_or("month", |p| period_word(p));
        ChartPage {
            width,
            height: (f64::from(width) * 0.6).round() as u32,
            scale: (f64::from(width) / 1000.0).max(0.85),
            title,
            x_label: format!("period ({word})"),
            y_label,
            model,
            band_label: "shaded: interval of each share".to_owned(),
        }
    }
}

/// The periods in time order (rows are ordered by period start).
fn period_axis(rows: &[PeriodRow]) -> Vec<String> {
    let mut periods: Vec<(&str, &str)> = rows
        .iter()
        .map(|r| (r.start.as_str(), r.period.as_str()))
        .collect();
    periods.sort_unstable();
    periods.dedup();
    periods.into_iter().map(|(_, p)| p.to_owned()).collect()
}

/// Cluster numbers in numeric order (text after numbers).
fn cluster_order(a: &str, b: &str) -> std::cmp::Ordering {
    match (a.parse::<f64>(), b.parse::<f64>()) {
        (Ok(x), Ok(y)) => x.total_cmp(&y),
        (Ok(_), Err(_)) => std::cmp::Ordering::Less,
        (Err(_), Ok(_)) => std::cmp::Ordering::Greater,
        (Err(_), Err(_)) => a.cmp(b),
    }
}

/// A unit: its kind and its `unit` value.
type Unit = (UnitKind, String);

/// The units drawn beside the whole study area: the chosen ones, or every cluster (the first
/// [`MAX_UNITS`] by number; the rest returned as left out).
///
/// # Errors
/// A message when a chosen unit is missing or names both an area and a cluster.
fn chosen_units(
    rows: &[PeriodRow],
    choices: &[UnitChoice],
) -> Result<(Vec<Unit>, Vec<String>), String> {
    let mut present: Vec<(UnitKind, &str)> = rows
        .iter()
        .filter(|r| r.kind != UnitKind::StudyArea)
        .map(|r| (r.kind, r.unit.as_str()))
        .collect();
    present.sort_by(|a, b| a.0.as_str().cmp(b.0.as_str()).then(cluster_order(a.1, b.1)));
    present.dedup();
    if choices.is_empty() {
        let clusters: Vec<String> = present
            .iter()
            .filter(|(k, _)| *k == UnitKind::Cluster)
            .map(|(_, u)| (*u).to_owned())
            .collect();
        let left_out = clusters.iter().skip(MAX_UNITS).cloned().collect();
        let kept = clusters
            .into_iter()
            .take(MAX_UNITS)
            .map(|u| (UnitKind::Cluster, u))
            .collect();
        return Ok((kept, left_out));
    }
    let mut units = Vec::with_capacity(choices.len());
    for choice in choices {
        let matches: Vec<&(UnitKind, &str)> = present
            .iter()
            .filter(|(k, u)| *u == choice.unit && choice.kind.is_none_or(|c| c == *k))
            .collect();
        match matches.as_slice() {
            [(kind, unit)] => units.push((*kind, (*unit).to_owned())),
            [] => {
                let examples: Vec<String> = present
                    .iter()
                    .take(8)
                    .map(|(k, u)| format!("{}:{u}", k.as_str()))
                    .collect();
                return Err(format!(
                    "has no unit '{}' (units present include: {})",
                    choice.unit,
                    if examples.is_empty() {
                        "none besides the whole study area".to_owned()
                    } else {
                        examples.join(", ")
                    }
                ));
            }
            _ => {
                return Err(format!(
                    "'{0}' is both an area and a cluster; write area:{0} or cluster:{0}",
                    choice.unit
                ))
            }
        }
    }
    Ok((units, Vec::new()))
}

/// A unit's points along `periods`, in per cent.
fn points_of(
    rows: &[PeriodRow],
    kind: UnitKind,
    unit: &str,
    periods: &[String],
) -> Vec<Option<SharePoint>> {
    periods
        .iter()
        .map(|period| {
            let row = rows
                .iter()
                .find(|r| r.kind == kind && r.unit == unit && &r.period == period)?;
            let share = row.share.filter(|v| v.is_finite())?;
            Some(SharePoint {
                share: 100.0 * share,
                low: 100.0 * row.low.filter(|v| v.is_finite()).unwrap_or(share),
                high: 100.0 * row.high.filter(|v| v.is_finite()).unwrap_or(share),
            })
        })
        .collect()
}

/// The y axis: from a nice number at or below every interval's low end to one at or above
/// every high end (steps 1, 2 or 5 × 10ᵏ, about five of them), kept within 0–100 % when the
/// values are.
pub fn y_range(points: impl Iterator<Item = SharePoint>) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in points {
        lo = lo.min(p.low.min(p.share));
        hi = hi.max(p.high.max(p.share));
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return None;
    }
    let step = nice_step(((hi - lo) / 5.0).max(0.2))?;
    let (mut low, mut high) = ((lo / step).floor() * step, (hi / step).ceil() * step);
    if high <= low {
        high = low + step;
    }
    if lo >= 0.0 {
        low = low.max(0.0);
    }
    if hi <= 100.0 {
        high = high.min(100.0);
    }
    Some((low, high))
}

/// The chart of `rows`: the whole study area and the chosen units (or every cluster).
///
/// # Errors
/// A message (completed by the caller with the file and table) when a unit is missing, no
/// line is left, or every share is NULL.
pub fn chart_model(rows: &[PeriodRow], choices: &[UnitChoice]) -> Result<ChartModel, String> {
    let periods = period_axis(rows);
    let (units, left_out) = chosen_units(rows, choices)?;
    let mut lines: Vec<(UnitKind, String, String)> = Vec::new();
    if rows.iter().any(|r| r.kind == UnitKind::StudyArea) {
        let all = rows
            .iter()
            .find(|r| r.kind == UnitKind::StudyArea)
            .map(|r| r.unit.clone())
            .unwrap_or_default();
        lines.push((UnitKind::StudyArea, all, "whole study area".into()));
    }
    for (kind, unit) in units {
        let label = format!("{} {unit}", kind.as_str());
        lines.push((kind, unit, label));
    }
    if lines.is_empty() {
        return Err(
            "has no rows for the whole study area nor any cluster; name units with --unit".into(),
        );
    }
    let series: Vec<ChartSeries> = lines
        .into_iter()
        .enumerate()
        .map(|(k, (kind, unit, label))| ChartSeries {
            points: points_of(rows, kind, &unit, &periods),
            label,
            kind,
            unit,
            style: chart_line(if kind == UnitKind::StudyArea {
                0
            } else {
                k.max(1)
            }),
        })
        .collect();
    let (y_low, y_high) = y_range(
        series
            .iter()
            .flat_map(|s| s.points.iter().flatten().copied()),
    )
    .ok_or("field 'share' is NULL in every period of the units drawn; nothing to draw")?;
    Ok(ChartModel {
        periods,
        series,
        y_low,
        y_high,
        left_out,
    })
}

/// The kind of period a label is written in (`Period::label`): day, week, month or quarter.
pub fn period_word(label: &str) -> &'static str {
    if label.contains("-W") {
        "week"
    } else if label.contains("-Q") {
        "quarter"
    } else if label.len() == 10 {
        "day"
    } else {
        "month"
    }
}

/// The chart's part of the summary.
pub fn chart_summary(page: &ChartPage, table: &str) -> Value {
    let model = &page.model;
    json!({
        "width_px": page.width,
        "height_px": page.height,
        "periods_table": table,
        "periods": model.periods,
        "series": model.series.iter().map(|s| json!({
            "label": s.label,
            "unit_kind": s.kind.as_str(),
            "unit": s.unit,
            "colour": s.style.colour.hex(),
            "line": s.style.dash,
            "periods_with_share": s.points.iter().flatten().count(),
        })).collect::<Vec<_>>(),
        "y_axis": { "label": page.y_label, "low": model.y_low, "high": model.y_high },
        "x_axis": { "label": page.x_label },
        "units_left_out": model.left_out,
        "y_ticks": crate::frame::nice_ticks(model.y_low, model.y_high, 6)
            .iter().map(|t| format_number(*t)).collect::<Vec<_>>(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(kind: UnitKind, unit: &str, month: u32, share: Option<f64>) -> PeriodRow {
        PeriodRow {
            kind,
            unit: unit.into(),
            period: format!("2026-{month:02}"),
            start: format!("2026-{month:02}-01T00:00:00Z"),
            share,
            low: share.map(|s| s - 0.05),
            high: share.map(|s| s + 0.1),
        }
    }

    #[test]
    fn y_range_holds_every_interval_on_nice_numbers() {
        let p = |share, low, high| SharePoint { share, low, high };
        // 12–47 %: step ⌈35/5⌉ → 10, so 10 to 50.
        assert_eq!(
            y_range([p(20.0, 12.0, 30.0), p(40.0, 33.0, 47.0)].into_iter()),
            Some((10.0, 50.0))
        );
        // Near the ends: kept within 0–100.
        assert_eq!(y_range([p(2.0, 0.0, 99.0)].into_iter()), Some((0.0, 100.0)));
        // One value: widened by a step.
        let (low, high) = y_range([p(30.0, 30.0, 30.0)].into_iter()).expect("range");
        assert!(
            low <= 30.0 && high > 30.0 && high - low <= 1.0,
            "{low} {high}"
        );
        assert_eq!(y_range(std::iter::empty()), None);
    }

    #[test]
    fn default_units_are_the_whole_area_and_the_clusters_in_number_order() {
        let mut rows = Vec::new();
        for month in 1..=3 {
            rows.push(row(UnitKind::StudyArea, "all", month, Some(0.3)));
            for c in ["10", "2", "1"] {
                rows.push(row(
                    UnitKind::Cluster,
                    c,
                    month,
                    if month == 2 { None } else { Some(0.5) },
                ));
            }
            rows.push(row(UnitKind::Area, "D1", month, Some(0.2)));
        }
        let model = chart_model(&rows, &[]).expect("model");
        let labels: Vec<&str> = model.series.iter().map(|s| s.label.as_str()).collect();
        assert_eq!(
            labels,
            ["whole study area", "cluster 1", "cluster 2", "cluster 10"]
        );
        assert_eq!(model.periods, ["2026-01", "2026-02", "2026-03"]);
        assert!(model.series[1].points[1].is_none());
        assert_eq!(model.series[0].points[0].map(|p| p.share), Some(30.0));
        // 25 % to 60 %: every interval inside.
        assert!(model.y_low <= 25.0 && model.y_high >= 60.0);
        let chosen = chart_model(
            &rows,
            &[UnitChoice {
                kind: None,
                unit: "D1".into(),
            }],
        )
        .expect("model");
        assert_eq!(chosen.series[1].label, "area D1");
        let missing = chart_model(
            &rows,
            &[UnitChoice {
                kind: Some(UnitKind::Area),
                unit: "1".into(),
            }],
        );
        assert!(missing.expect_err("missing").contains("no unit '1'"));
    }
}
