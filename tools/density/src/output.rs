//! What stance-density writes: the layers' names, field names, units and descriptions, the
//! surfaces and the tolerance polygons, and the JSON summary.

use gdal::spatial_ref::SpatialRef;
use geo_types::Polygon;
use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::gpkg::crs;
use stance_core::gpkg::raster::Surface;
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::grid::Grid;
use stance_core::host::Run;
use stance_core::stance::Stance;

use crate::contour;
use crate::estimate::Method;
use crate::input::Records;
use crate::params::{Config, Scale};
use crate::plan::Plan;

/// Layer suffix of A − B.
pub const DIFF: &str = "diff";
/// Layer suffix of √A − √B.
pub const SQRT_DIFF: &str = "sqrtdiff";
/// Layer suffix of A/(A + B).
pub const SHARE: &str = "share";
/// Layer suffix of the log ratio of the normalised densities, ln(f_A/f_B).
pub const LOG_RATIO: &str = "log_ratio";
/// Layer suffix of the upper-tail p-values of the log ratio (A elevated).
pub const LOG_RATIO_P_UPPER: &str = "log_ratio_p_upper";
/// Layer suffix of the lower-tail p-values of the log ratio (B elevated).
pub const LOG_RATIO_P_LOWER: &str = "log_ratio_p_lower";
/// Layer suffix of the tolerance contour polygons.
pub const TOLERANCE: &str = "tolerance";
/// Layer prefix of the type probabilities (`prob_<class>`, `prob_<class>_p`, `prob_tolerance`).
pub const PROB: &str = "prob";

/// Where surfaces go: the grid and the working CRS.
#[derive(Debug, Clone, Copy)]
pub struct Target<'a> {
    /// The grid of every surface.
    pub grid: &'a Grid,
    /// The working CRS.
    pub srs: &'a SpatialRef,
    /// Whether layers are written (not in a shard's run, which writes only its partial result).
    pub publish: bool,
}

/// The value a surface holds: its field name, unit and description.
#[derive(Debug, Clone)]
pub struct Quantity {
    /// Field name of the coverage.
    pub field_name: String,
    /// Unit of measure.
    pub unit: String,
    /// What the values are.
    pub description: String,
}

impl Quantity {
    fn new(field_name: impl Into<String>, unit: impl Into<String>, description: String) -> Self {
        Quantity {
            field_name: field_name.into(),
            unit: unit.into(),
            description,
        }
    }

    /// A class surface on `scale`.
    pub fn class(scale: Scale, class: Stance) -> Self {
        match scale {
            Scale::Intensity => Quantity::new(
                format!("intensity_per_km2_{class}"),
                "points per km2",
                format!("kernel intensity of {class} records"),
            ),
            Scale::Density => Quantity::new(
                format!("density_per_km2_{class}"),
                "per km2",
                format!("kernel probability density of {class} records"),
            ),
        }
    }

    /// A − B.
    pub fn diff(scale: Scale, a: Stance, b: Stance) -> Self {
        let description = format!("{a} − {b}, kernel surfaces");
        Quantity::new("difference", unit(scale), description)
    }

    /// √A − √B.
    pub fn sqrt_diff(scale: Scale, a: Stance, b: Stance) -> Self {
        let description = format!("square root of {a} minus square root of {b}");
        Quantity::new(
            "sqrt_difference",
            format!("sqrt({})", unit(scale)),
            description,
        )
    }

    /// A/(A + B).
    pub fn share(a: Stance, b: Stance) -> Self {
        let description =
            format!("{a} / ({a} + {b}) of the weighted intensities; nodata below 1e-3 of the peak");
        Quantity::new(format!("share_{a}"), "fraction", description)
    }

    /// ln(f_A/f_B) (Kelsall & Diggle 1995).
    pub fn log_ratio(a: Stance, b: Stance) -> Self {
        let description = format!(
            "ln of the ratio of the normalised {a} and {b} densities, each floored by 1e-4 of \
             the peak pooled density"
        );
        Quantity::new("log_relative_risk", "1", description)
    }

    /// Upper-tail p-values (A elevated).
    pub fn p_upper(a: Stance, permutations: usize) -> Self {
        let description = format!(
            "Monte Carlo p-value that {a} is elevated (upper tail of the log relative risk, \
             {permutations} random relabellings); nodata where untested"
        );
        Quantity::new("p_value_upper", "probability", description)
    }

    /// The type probability of `class` (Diggle, Zheng & Durr 2005).
    pub fn probability(class: Stance, h_m: f64) -> Self {
        let description = format!(
            "kernel estimate of the probability that a record here is {class}, \
             lambda_{class} / sum of the class intensities (one bandwidth, {h_m:.0} m)"
        );
        Quantity::new(format!("probability_{class}"), "probability", description)
    }

    /// Pointwise p-values that `class` is more likely than under constant type probabilities.
    pub fn p_probability(class: Stance, permutations: usize) -> Self {
        let description = format!(
            "Monte Carlo p-value that the probability of {class} here exceeds what random \
             relabelling gives ({permutations} relabellings); nodata outside the data's region"
        );
        Quantity::new(format!("p_value_{class}"), "probability", description)
    }

    /// Lower-tail p-values (B elevated).
    pub fn p_lower(b: Stance, permutations: usize) -> Self {
        let description = format!(
            "Monte Carlo p-value that {b} is elevated (lower tail of the log relative risk, \
             {permutations} random relabellings); nodata where untested"
        );
        Quantity::new("p_value_lower", "probability", description)
    }
}

/// The unit of class surfaces and their difference.
fn unit(scale: Scale) -> &'static str {
    match scale {
        Scale::Intensity => "points per km2",
        Scale::Density => "per km2",
    }
}

/// Writes a Float32 surface `name` and returns its maximum (finite values; 0 if none).
///
/// # Errors
/// Writing failed, or the run was interrupted.
pub fn write_surface(
    run: &mut Run,
    target: Target<'_>,
    name: &str,
    values: &[f64],
    quantity: &Quantity,
) -> Result<f64> {
    let data: Vec<f32> = values.iter().map(|v| *v as f32).collect();
    let max = values
        .iter()
        .cloned()
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    if !target.publish {
        return Ok(if max.is_finite() { max } else { 0.0 });
    }
    run.output().write_surface(
        name,
        &Surface {
            grid: target.grid,
            values: &data,
            srs: target.srs,
            field_name: &quantity.field_name,
            unit: &quantity.unit,
            quantity: &quantity.description,
        },
    )?;
    run.debug(format!("wrote surface '{name}'"));
    run.check_interrupted()?;
    Ok(if max.is_finite() { max } else { 0.0 })
}

/// The tolerance contours of one run: polygons where each class is elevated at `alpha`.
#[derive(Debug)]
pub struct Contours<'a> {
    /// Level of the contours.
    pub alpha: f64,
    /// Relabellings behind the p-values.
    pub permutations: usize,
    /// Each class with the polygons where it is elevated.
    pub sides: &'a [(Stance, &'a [Polygon<f64>])],
}

/// Writes the polygon layer `name` with fields elevated, alpha, permutations, area_km2.
///
/// # Errors
/// Writing failed.
pub fn write_tolerance(
    run: &mut Run,
    target: Target<'_>,
    name: &str,
    contours: &Contours<'_>,
) -> Result<()> {
    if !target.publish {
        return Ok(());
    }
    let srs = target.srs;
    let fields = [
        FieldDef::new("elevated", FieldKind::Text),
        FieldDef::new("alpha", FieldKind::Real),
        FieldDef::new("permutations", FieldKind::Integer),
        FieldDef::new("area_km2", FieldKind::Real),
    ];
    let (staging, _, _) = run.writing();
    let mut writer = staging.create_vector(name, GeometryKind::MultiPolygon, Some(srs), &fields)?;
    for &(class, polygons) in contours.sides {
        for polygon in polygons {
            writer.add(
                Shape::Polygon(polygon),
                &[
                    FieldData::Text(class.label()),
                    FieldData::Real(contours.alpha),
                    FieldData::Integer(contours.permutations as i64),
                    FieldData::Real(contour::area_m2(polygon) / 1e6),
                ],
            )?;
        }
    }
    writer.finish()?;
    Ok(())
}

/// What one time slice gave, for the summary.
#[derive(Debug, Clone)]
pub struct SliceSummary {
    /// The slice's key (empty for all records).
    pub key: String,
    /// Records per class.
    pub counts: Vec<(Stance, usize)>,
    /// Maximum of each class surface that was written.
    pub maxima: Vec<(Stance, f64)>,
    /// The floor of the log ratio (per m²), when the pair was compared.
    pub log_ratio_floor: Option<f64>,
    /// The tolerance figures, when computed.
    pub tolerance: Option<ToleranceSummary>,
    /// Type probabilities and the segregation test (`--type-probabilities`).
    pub segregation: Option<Value>,
}

/// Tolerance figures of one slice.
#[derive(Debug, Clone)]
pub struct ToleranceSummary {
    /// Relabellings.
    pub permutations: usize,
    /// Level of the contours.
    pub alpha: f64,
    /// Cells with a p-value.
    pub cells_tested: u64,
    /// Share of the tested cells at or below alpha, A then B.
    pub share_flagged: [(Stance, f64); 2],
    /// Number of polygons, A then B.
    pub polygons: [(Stance, usize); 2],
}

impl SliceSummary {
    /// The slice's name in messages and the summary: its key, or "all".
    pub fn label(&self) -> &str {
        slice_label(&self.key)
    }
}

/// A slice key's name in messages and the summary: the key, or "all" for the empty key.
pub fn slice_label(key: &str) -> &str {
    if key.is_empty() {
        "all"
    } else {
        key
    }
}

fn slice_json(slice: &SliceSummary) -> Value {
    let labelled = |pairs: &[(Stance, Value)]| -> serde_json::Map<String, Value> {
        pairs
            .iter()
            .map(|(s, v)| (s.label().to_owned(), v.clone()))
            .collect()
    };
    let counts: Vec<(Stance, Value)> = slice.counts.iter().map(|(s, c)| (*s, json!(c))).collect();
    let maxima: Vec<(Stance, Value)> = slice.maxima.iter().map(|(s, m)| (*s, json!(m))).collect();
    let mut result = json!({
        "slice": slice.label(),
        "counts": labelled(&counts),
        "max": labelled(&maxima),
    });
    if let Some(floor) = slice.log_ratio_floor {
        result["log_ratio_floor_per_km2"] = json!(floor * 1e6);
    }
    if let Some(t) = &slice.tolerance {
        let [(a, flagged_a), (b, flagged_b)] = t.share_flagged;
        let [(_, polygons_a), (_, polygons_b)] = t.polygons;
        result["tolerance"] = json!({
            "permutations": t.permutations,
            "alpha": t.alpha,
            "cells_tested": t.cells_tested,
            "share_of_cells_flagged": { a.label(): flagged_a, b.label(): flagged_b },
            "polygons": { a.label(): polygons_a, b.label(): polygons_b },
        });
    }
    if let Some(segregation) = &slice.segregation {
        result["segregation"] = segregation.clone();
    }
    result
}

/// The JSON summary of a run.
pub fn summary(config: &Config, records: &Records, plan: &Plan, slices: &[SliceSummary]) -> Value {
    let bandwidth = &plan.bandwidth;
    let adaptive = plan.pilot_geometric_mean.map(|g| {
        json!({
            "law": "Abramson (1982) square-root, trimmed at 5",
            "levels_m": plan.estimator.bandwidths().levels_m,
            "pilot_geometric_mean_per_km2": g * 1e6,
        })
    });
    let method = match plan.method {
        Method::Fft => "linear binning + FFT",
        Method::Direct => "direct exact sums",
    };
    let grid = &plan.grid;
    json!({
        "bandwidth_m": bandwidth.h,
        "bandwidth_selected_m": bandwidth.selected,
        "bandwidth_scale": config.bandwidth_scale,
        "bandwidth_chosen_by": bandwidth.how,
        "rule_bandwidth_m": bandwidth.rule_h,
        "cv_scores": bandwidth.cv_scores,
        "kernel": config.kernel.label(),
        "adaptive": adaptive,
        "method": method,
        "crs": crs::label(&records.srs),
        "grid": {
            "cols": grid.cols, "rows": grid.rows, "cell_m": grid.cell_m,
            "x_min": grid.x_min, "y_min": grid.y_min,
        },
        "compare": [config.class_a.label(), config.class_b.label()],
        "weighted": records.weights.is_some(),
        "points_outside_mask": plan.dropped_outside_mask,
        "slices": slices.iter().map(slice_json).collect::<Vec<_>>(),
    })
}
