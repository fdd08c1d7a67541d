//! stance-density: kernel density surfaces of stance classes and their log relative risk with
//! tolerance contours (Diggle 2013, *Statistical Analysis of Spatial and Spatio-Temporal Point
//! Patterns*, 3rd ed., ch. 5; Kelsall & Diggle 1995).

pub mod bandwidth;
pub mod binning;
pub mod compare;
pub mod contour;
pub mod convolve;
pub mod estimate;
pub mod kernel;
pub mod mask;
pub mod slice;
pub mod tolerance;

use std::collections::BTreeMap;

use gdal::spatial_ref::SpatialRef;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::gpkg::raster::Surface;
use stance_core::gpkg::read::{self, Column, FieldWant};
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::gpkg::{self, crs};
use stance_core::grid::Grid;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::stance::{ClassMap, Stance};

use binning::Points;
use estimate::{Bandwidths, Estimator, Method};
use kernel::Kernel;
use slice::Slice;

/// Slices with fewer points than this in a compared class get a warning.
pub const FEW_POINTS: usize = 50;

/// How the bandwidth is chosen when `--bandwidth-m` is not given.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum BandwidthRule {
    /// 2-D normal-reference rule on the pooled projected coordinates.
    Rule,
    /// Likelihood cross-validation over 15 candidates from 1/4 to 2 × the rule, on binned data.
    Cv,
}

/// Unit of the per-class surfaces.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Scale {
    /// Expected (weighted) points per km².
    Intensity,
    /// Probability density per km² (each class integrates to 1).
    Density,
}

/// How the kernel sums are computed.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum MethodChoice {
    /// Whichever is estimated faster.
    Auto,
    /// Linear binning and FFT convolution.
    Fft,
    /// Exact sums at every cell centre.
    Direct,
}

fn default_stance_field() -> String {
    "stance".into()
}
fn default_kernel() -> Kernel {
    Kernel::Quartic
}
fn default_rule() -> BandwidthRule {
    BandwidthRule::Rule
}
fn default_one() -> f64 {
    1.0
}
fn default_max_cells() -> u64 {
    50_000_000
}
fn default_scale() -> Scale {
    Scale::Intensity
}
fn default_compare() -> String {
    "support,oppose".into()
}
fn default_permutations() -> usize {
    199
}
fn default_alpha() -> f64 {
    0.05
}
fn default_slice() -> Slice {
    Slice::All
}
fn default_method() -> MethodChoice {
    MethodChoice::Auto
}

/// Parameters of stance-density.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct DensityParams {
    /// Field holding the stance label.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    #[serde(default = "default_stance_field")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Numeric field weighting each record (non-negative; e.g. its reach).
    #[arg(long, value_name = "FIELD")]
    pub weight_field: Option<String>,

    /// Date-time field for time slices.
    #[arg(long, value_name = "FIELD")]
    pub time_field: Option<String>,

    /// Time slices (needs --time-field unless all): one set of surfaces per slice.
    #[arg(long, value_enum, value_name = "SLICE", default_value_t = Slice::All)]
    #[serde(default = "default_slice")]
    pub slice: Slice,

    /// Kernel; the bandwidth is the support radius (quartic, epanechnikov) or sigma (gaussian).
    #[arg(long, value_enum, value_name = "KERNEL", default_value_t = Kernel::Quartic)]
    #[serde(default = "default_kernel")]
    pub kernel: Kernel,

    /// Fixed bandwidth in metres (overrides --bandwidth).
    #[arg(long, value_name = "METRES")]
    pub bandwidth_m: Option<f64>,

    /// Bandwidth selection when --bandwidth-m is not given.
    #[arg(long, value_enum, value_name = "RULE", default_value_t = BandwidthRule::Rule)]
    #[serde(default = "default_rule")]
    pub bandwidth: BandwidthRule,

    /// Multiplier applied to the selected or given bandwidth.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.0)]
    #[serde(default = "default_one")]
    pub bandwidth_scale: f64,

    /// Adaptive bandwidths by Abramson's square-root law from a pilot estimate.
    #[arg(long)]
    pub adaptive: bool,

    /// Cell size in metres (default: the longer side of the data's extent / 500, 2 digits).
    #[arg(long, value_name = "METRES")]
    pub cell_m: Option<f64>,

    /// Polygon layer of the input bounding the study area; cells outside are nodata.
    #[arg(long, value_name = "LAYER")]
    pub mask_layer: Option<String>,

    /// Divide by the kernel mass inside the mask (needs --mask-layer).
    #[arg(long)]
    pub edge_correct: bool,

    /// Largest grid accepted (cells).
    #[arg(long, value_name = "CELLS", default_value_t = 50_000_000)]
    #[serde(default = "default_max_cells")]
    pub max_cells: u64,

    /// Unit of the class surfaces: intensity (points per km²) or density (per km², integrates to 1).
    #[arg(long, value_enum, value_name = "SCALE", default_value_t = Scale::Intensity)]
    #[serde(default = "default_scale")]
    pub scale: Scale,

    /// The two classes compared, "A,B" (diff = A − B, logrr = ln f_A/f_B).
    #[arg(long, value_name = "A,B", default_value = "support,oppose")]
    #[serde(default = "default_compare")]
    pub compare: String,

    /// Random relabellings for the tolerance p-values (0 skips the tolerance outputs).
    #[arg(long, value_name = "N", default_value_t = 199)]
    #[serde(default = "default_permutations")]
    pub permutations: usize,

    /// Significance level of the tolerance contours (one-sided, each direction).
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    #[serde(default = "default_alpha")]
    pub alpha: f64,

    /// How kernel sums are computed.
    #[arg(long, value_enum, value_name = "METHOD", default_value_t = MethodChoice::Auto)]
    #[serde(default = "default_method")]
    pub method: MethodChoice,
}

/// The density tool.
#[derive(Debug)]
pub struct Density;

impl Tool for Density {
    type Params = DensityParams;
    const ID: &'static str = "density";
    const TITLE: &'static str =
        "Kernel density surfaces per stance class, their difference and log relative risk with tolerance contours";
    const DESCRIPTION: &'static str = "Estimates a kernel intensity surface for each stance class on one grid and \
        one bandwidth (normal-reference rule, likelihood cross-validation or given; optionally Abramson-adaptive), \
        by linear binning and FFT convolution or exact sums, with optional mask and edge correction. Writes the \
        difference and square-root difference of two classes, their share, and the log relative risk of their \
        normalised densities (Kelsall & Diggle 1995) with per-cell Monte Carlo p-values from random relabelling and \
        tolerance contours where either class is significantly elevated. Optional weights and time slices.";
    const DEFAULT_NAME: &'static str = "density";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "class_surfaces",
                title: "Per-class surfaces",
                description: "Float32 rasters <name>_<class> (oppose, neutral, support): points per km², or probability density per km² with --scale density.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "comparisons",
                title: "Comparison surfaces",
                description: "Float32 rasters <name>_diff (A − B), <name>_sqrtdiff (√A − √B), <name>_share (A/(A+B)), <name>_logrr (ln f_A/f_B).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "tolerance",
                title: "Tolerance p-values and contours",
                description: "Float32 rasters <name>_logrr_p (upper tail, A elevated) and <name>_logrr_p_lower (B elevated); polygon layer <name>_tolerance with field elevated. Time slices add a suffix such as _2026_03.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &DensityParams, run: &mut Run) -> Result<Value> {
        let checked = check_params(params)?;
        let input = run.input()?.to_owned();
        let layer_arg = run.common.layer.clone();
        let crs_arg = run.common.crs.clone();

        // Read.
        let mut wants: Vec<(&str, FieldWant)> =
            vec![(params.stance_field.as_str(), FieldWant::Text)];
        if let Some(w) = &params.weight_field {
            wants.push((w.as_str(), FieldWant::Real));
        }
        if let Some(t) = &params.time_field {
            wants.push((t.as_str(), FieldWant::DateTime));
        }
        let layer = read::read_points(&input, layer_arg.as_deref(), &wants, crs_arg.as_deref())?;
        run.note_input_layer(&layer.layer);
        run.debug(format!("read {} points", layer.x.len()));
        let bad_field = |field: &str, message: String| Error::BadField {
            path: input.clone(),
            layer: layer.layer.clone(),
            field: field.to_owned(),
            message,
        };
        let n = layer.x.len();
        let mut class_of: Vec<Stance> = Vec::with_capacity(n);
        {
            let Some(Column::Text(column)) = layer.columns.first() else {
                return Err(bad_field(
                    &params.stance_field,
                    "is not readable as text".into(),
                ));
            };
            let mut unknown: BTreeMap<String, usize> = BTreeMap::new();
            let mapped: Vec<Option<Stance>> = column
                .values
                .iter()
                .map(|v| checked.classes.classify(v))
                .collect();
            for (i, code) in column.codes.iter().enumerate() {
                match mapped.get(*code as usize).copied().flatten() {
                    Some(s) => class_of.push(s),
                    None => {
                        *unknown
                            .entry(column.get(i).unwrap_or("NULL").to_owned())
                            .or_default() += 1;
                        class_of.push(Stance::Neutral);
                    }
                }
            }
            if !unknown.is_empty() {
                let list: Vec<String> = unknown
                    .iter()
                    .take(10)
                    .map(|(v, c)| format!("'{v}' ×{c}"))
                    .collect();
                return Err(bad_field(
                    &params.stance_field,
                    format!(
                        "unknown stance values {}; expected {}",
                        list.join(", "),
                        checked.classes.describe()
                    ),
                ));
            }
        }
        let weights: Option<Vec<f64>> = match &params.weight_field {
            None => None,
            Some(field) => {
                let Some(Column::Real(values)) = layer.columns.get(1) else {
                    return Err(bad_field(field, "is not numeric".into()));
                };
                let mut out = Vec::with_capacity(n);
                for (i, v) in values.iter().enumerate() {
                    match v {
                        None => {
                            return Err(bad_field(
                                field,
                                format!(
                                    "is NULL at feature {}; expected a non-negative number",
                                    layer.fids[i]
                                ),
                            ))
                        }
                        Some(w) if !(w.is_finite() && *w >= 0.0) => {
                            return Err(bad_field(
                                field,
                                format!(
                                    "has value {w} at feature {}; expected a non-negative number",
                                    layer.fids[i]
                                ),
                            ))
                        }
                        Some(w) => out.push(*w),
                    }
                }
                Some(out)
            }
        };
        let times: Option<Vec<Option<i64>>> = match &params.time_field {
            None => None,
            Some(field) => {
                let index = 1 + usize::from(params.weight_field.is_some());
                let Some(Column::DateTime(values)) = layer.columns.get(index) else {
                    return Err(bad_field(field, "is not readable as date-times".into()));
                };
                Some(values.clone())
            }
        };
        let points = Points {
            x: &layer.x,
            y: &layer.y,
            weight: weights.as_deref(),
        };
        let srs = layer.srs.clone();

        // Classes and the compared pair.
        let mut by_class: BTreeMap<Stance, Vec<usize>> = BTreeMap::new();
        for (i, s) in class_of.iter().enumerate() {
            by_class.entry(*s).or_default().push(i);
        }
        let (class_a, class_b) = checked.compare;
        for class in [class_a, class_b] {
            let count = by_class.get(&class).map_or(0, Vec::len);
            if count == 0 {
                return Err(Error::argument(
                    "--compare",
                    format!(
                        "class '{class}' has no points in layer '{}' (field '{}')",
                        layer.layer, params.stance_field
                    ),
                ));
            }
            let weight = points.total_weight(&by_class[&class]);
            if weight <= 0.0 {
                return Err(Error::argument(
                    "--compare",
                    format!("class '{class}' has zero total weight"),
                ));
            }
        }
        let pooled: Vec<usize> = (0..n).collect();

        // Mask.
        let mask_polygons = match &params.mask_layer {
            None => None,
            Some(mask_layer) => {
                let polygons = read::read_polygons(&input, Some(mask_layer), &[])?;
                run.note_input_layer(mask_layer);
                run.warn_invalid_polygons(&polygons, "mask polygons");
                Some(project_polygons(&polygons.polygons, &polygons.srs, &srs)?)
            }
        };

        // Bandwidth on the pooled points.
        let rule_sigma = bandwidth::normal_reference_sigma(&points, &pooled);
        let rule_h = rule_sigma.map(|s| bandwidth::bandwidth_for_sigma(params.kernel, s));
        let extent = data_extent(&points, &pooled, mask_polygons.as_deref());
        let cell_m = params
            .cell_m
            .unwrap_or_else(|| nice(extent.2.max(extent.3) / 500.0));
        let mut cv_scores = Vec::new();
        let (h_selected, how) = match (params.bandwidth_m, params.bandwidth) {
            (Some(h), _) => (h, "given (--bandwidth-m)".to_owned()),
            (None, rule) => {
                let Some(h_rule) = rule_h else {
                    return Err(Error::argument("--bandwidth", "the points have no spread (fewer than two distinct locations); give --bandwidth-m"));
                };
                match rule {
                    BandwidthRule::Rule => (h_rule, "2-D normal-reference rule (Bowman & Azzalini 1997, eq. 2.4), matched by kernel variance".to_owned()),
                    BandwidthRule::Cv => {
                        let candidates: Vec<f64> = bandwidth::geometric_candidates(h_rule / 4.0, h_rule * 2.0, 15)
                            .into_iter()
                            .filter(|h| params.kernel.support_m(*h) >= 2.0 * cell_m)
                            .collect();
                        if candidates.is_empty() {
                            return Err(Error::argument("--cell-m", format!("{cell_m} m is too coarse for cross-validation around the rule bandwidth {h_rule:.0} m; use a smaller cell")));
                        }
                        let margin = params.kernel.support_m(candidates[candidates.len() - 1]);
                        let cv_grid = make_grid(extent, margin, cell_m, params.max_cells)?;
                        run.log(format!("cross-validating {} bandwidths on a {}×{} grid", candidates.len(), cv_grid.cols, cv_grid.rows));
                        cv_scores = bandwidth::likelihood_cv(&cv_grid, params.kernel, &points, &pooled, &candidates);
                        let best = cv_scores
                            .iter()
                            .filter(|s| s.log_likelihood.is_finite())
                            .max_by(|a, b| a.log_likelihood.total_cmp(&b.log_likelihood))
                            .copied();
                        let Some(best) = best else {
                            return Err(Error::argument("--bandwidth", "cv: every candidate leaves some point with no neighbour; give --bandwidth-m"));
                        };
                        if best.bandwidth_m == candidates[0] || best.bandwidth_m == candidates[candidates.len() - 1] {
                            run.log(format!("warning: the cross-validated bandwidth {:.0} m is at the end of the candidates (tied locations favour the smallest)", best.bandwidth_m));
                        }
                        (best.bandwidth_m, "likelihood cross-validation on binned data".to_owned())
                    }
                }
            }
        };
        let h = h_selected * params.bandwidth_scale;
        if !(h.is_finite() && h > 0.0) {
            return Err(Error::argument(
                "--bandwidth-scale",
                format!("gives bandwidth {h} m; expected a positive bandwidth"),
            ));
        }
        let margin = params.kernel.support_m(h);
        let grid = make_grid(
            extent,
            if mask_polygons.is_some() { 0.0 } else { margin },
            cell_m,
            params.max_cells,
        )?;
        let padded = (grid.rows as f64 + margin / cell_m) * (grid.cols as f64 + margin / cell_m);
        if padded > 4.0 * params.max_cells as f64 {
            return Err(Error::argument(
                "--bandwidth-m",
                format!(
                    "{h:.0} m spans {:.0} cells; the padded FFT grid would exceed 4 × --max-cells",
                    margin / cell_m
                ),
            ));
        }
        // Memory: the output and per-class surfaces (f64 while computed, f32 when written), and
        // the zero-padded FFT buffers (complex f64) per bandwidth level and per worker thread.
        let surfaces =
            (stance_core::stance::Stance::ALL.len() + 8) as f64 * grid.len() as f64 * 12.0;
        let fft = padded * 16.0 * (2.0 + 2.0 * rayon::current_num_threads() as f64);
        run.guard_memory(
            (surfaces + fft) as u64,
            &format!("a {}×{} grid", grid.cols, grid.rows),
            "use a larger --cell-m or a --mask-layer",
        )?;
        if margin < 2.0 * cell_m {
            run.log(format!("warning: the kernel reaches {margin:.0} m, under two cells of {cell_m} m; the surfaces will be spiky"));
        }
        run.log(format!(
            "bandwidth {h:.1} m ({how}), grid {}×{} cells of {cell_m} m",
            grid.cols, grid.rows
        ));
        let mask = mask_polygons.as_ref().map(|m| mask::rasterise(&grid, m));
        let dropped_outside_mask = match &mask {
            Some(m) => pooled
                .iter()
                .filter(|&&i| {
                    binning::cell_of(&grid, points.x[i], points.y[i]).is_none_or(|k| !m[k])
                })
                .count(),
            None => 0,
        };
        if dropped_outside_mask > 0 {
            run.log(format!(
                "warning: {dropped_outside_mask} points lie outside the mask and add nothing"
            ));
        }

        // Estimator (with the Abramson pilot if asked).
        let mut pilot_geometric_mean = None;
        let bandwidths = if params.adaptive {
            let method = choose(params.method, &grid, params.kernel, h, 1, n);
            let pilot = Estimator::new(
                grid,
                params.kernel,
                Bandwidths::fixed(h),
                method,
                None,
                false,
            );
            let pilot_sum = pilot.sum(&points, &pooled);
            let (b, g) = estimate::abramson(&grid, &pilot_sum, &points, h);
            pilot_geometric_mean = Some(g);
            b
        } else {
            Bandwidths::fixed(h)
        };
        let h_max = bandwidths.levels_m.iter().cloned().fold(0.0, f64::max);
        let method = choose(
            params.method,
            &grid,
            params.kernel,
            h_max,
            bandwidths.levels_m.len(),
            n,
        );
        let estimator = Estimator::new(
            grid,
            params.kernel,
            bandwidths,
            method,
            mask,
            params.edge_correct,
        );
        run.progress.set(0.1);

        // Slices.
        let slices: Vec<(String, Vec<usize>)> = match (&times, params.slice) {
            (_, Slice::All) | (None, _) => vec![(String::new(), pooled.clone())],
            (Some(times), s) => {
                let mut map: BTreeMap<String, Vec<usize>> = BTreeMap::new();
                let mut missing = 0usize;
                for (i, t) in times.iter().enumerate() {
                    match t.and_then(|t| slice::key(s, t)) {
                        Some(k) => map.entry(k).or_default().push(i),
                        None => missing += 1,
                    }
                }
                if missing > 0 {
                    run.log(format!("warning: {missing} records have no usable time and are left out of the slices"));
                }
                map.into_iter().collect()
            }
        };

        let mut slice_results = Vec::new();
        // Time spent in the class estimates alone (for benchmarks; logged with -v).
        let mut compute_s = 0.0;
        let n_slices = slices.len();
        for (s_index, (key, members)) in slices.iter().enumerate() {
            run.check_interrupted()?;
            let suffix = |base: &str| -> String {
                if key.is_empty() {
                    base.to_owned()
                } else {
                    format!("{base}_{key}")
                }
            };
            let mut class_idx: BTreeMap<Stance, Vec<usize>> = BTreeMap::new();
            for &i in members {
                class_idx.entry(class_of[i]).or_default().push(i);
            }
            let mut counts = serde_json::Map::new();
            let mut maxima = serde_json::Map::new();
            let mut sums: BTreeMap<Stance, Vec<f64>> = BTreeMap::new();
            for class in Stance::ALL {
                let Some(idx) = class_idx.get(&class) else {
                    counts.insert(class.label().into(), json!(0));
                    continue;
                };
                counts.insert(class.label().into(), json!(idx.len()));
                let clock = std::time::Instant::now();
                let sum = estimator.sum(&points, idx);
                compute_s += clock.elapsed().as_secs_f64();
                let weight = points.total_weight(idx);
                let factor = match params.scale {
                    Scale::Intensity => 1e6,
                    Scale::Density => 1e6 / weight,
                };
                let scaled: Vec<f64> = sum.iter().map(|v| v * factor).collect();
                let name = run.layer_name(&suffix(class.label()));
                let (unit, quantity) = match params.scale {
                    Scale::Intensity => (
                        "points per km2",
                        format!("kernel intensity of {class} records"),
                    ),
                    Scale::Density => (
                        "per km2",
                        format!("kernel probability density of {class} records"),
                    ),
                };
                let max = write(
                    run,
                    &name,
                    &grid,
                    &srs,
                    &scaled,
                    &format!("{}_{class}", field_prefix(params.scale)),
                    unit,
                    &quantity,
                )?;
                maxima.insert(class.label().into(), json!(max));
                sums.insert(class, sum);
            }
            let (n_a, n_b) = (
                class_idx.get(&class_a).map_or(0, Vec::len),
                class_idx.get(&class_b).map_or(0, Vec::len),
            );
            for (class, count) in [(class_a, n_a), (class_b, n_b)] {
                if count < FEW_POINTS {
                    run.log(format!("warning: slice '{}' has only {count} {class} points; its surfaces are unreliable", if key.is_empty() { "all" } else { key }));
                }
            }
            let mut result = json!({ "slice": if key.is_empty() { "all" } else { key.as_str() }, "counts": counts, "max": maxima });
            if let (Some(sa), Some(sb)) = (sums.get(&class_a), sums.get(&class_b)) {
                let ia = &class_idx[&class_a];
                let ib = &class_idx[&class_b];
                let (wa, wb) = (points.total_weight(ia), points.total_weight(ib));
                let factor = |w: f64| match params.scale {
                    Scale::Intensity => 1e6,
                    Scale::Density => 1e6 / w,
                };
                let a: Vec<f64> = sa.iter().map(|v| v * factor(wa)).collect();
                let b: Vec<f64> = sb.iter().map(|v| v * factor(wb)).collect();
                let pair_label = format!("{class_a} − {class_b}");
                let unit = match params.scale {
                    Scale::Intensity => "points per km2",
                    Scale::Density => "per km2",
                };
                write(
                    run,
                    &run.layer_name(&suffix("diff")),
                    &grid,
                    &srs,
                    &compare::diff(&a, &b),
                    "difference",
                    unit,
                    &format!("{pair_label}, kernel surfaces"),
                )?;
                write(
                    run,
                    &run.layer_name(&suffix("sqrtdiff")),
                    &grid,
                    &srs,
                    &compare::sqrt_diff(&a, &b),
                    "sqrt_difference",
                    &format!("sqrt({unit})"),
                    &format!("square root of {class_a} minus square root of {class_b}"),
                )?;
                let share = compare::share(sa, sb);
                write(run, &run.layer_name(&suffix("share")), &grid, &srs, &share, &format!("share_{class_a}"), "fraction", &format!("{class_a} / ({class_a} + {class_b}) of the weighted intensities; nodata below 1e-3 of the peak"))?;
                let pair = compare::Pair {
                    a: sa,
                    b: sb,
                    weight_a: wa,
                    weight_b: wb,
                };
                let (rho, floor) = tolerance::observed_logrr(&pair);
                write(run, &run.layer_name(&suffix("logrr")), &grid, &srs, &rho, "log_relative_risk", "1", &format!("ln of the ratio of the normalised {class_a} and {class_b} densities, each floored by 1e-4 of the peak pooled density"))?;
                result["logrr_floor_per_km2"] = json!(floor * 1e6);
                if params.permutations > 0 && n_a > 0 && n_b > 0 {
                    let pooled_sum: Vec<f64> = sa.iter().zip(sb).map(|(x, y)| x + y).collect();
                    let job = tolerance::Relabelling {
                        estimator: &estimator,
                        points: &points,
                        a: ia,
                        b: ib,
                        pooled_sum: &pooled_sum,
                        observed: &rho,
                        floor,
                        permutations: params.permutations,
                        seed: stance_core::montecarlo::replicate_seed(
                            run.common.seed,
                            s_index as u64,
                        ),
                    };
                    let base = 0.1 + 0.9 * s_index as f64 / n_slices as f64;
                    let span = 0.9 / n_slices as f64;
                    let p = {
                        let progress = &run.progress;
                        let done = |f: f64| progress.set(base + span * f);
                        tolerance::relabelling_p_values(&job, run.interrupt().flag(), &done)
                    };
                    let Some(p) = p else {
                        return Err(Error::Interrupted);
                    };
                    write(run, &run.layer_name(&suffix("logrr_p")), &grid, &srs, &p.upper, "p_value_upper", "probability", &format!("Monte Carlo p-value that {class_a} is elevated (upper tail of the log relative risk, {} random relabellings); nodata where untested", params.permutations))?;
                    write(run, &run.layer_name(&suffix("logrr_p_lower")), &grid, &srs, &p.lower, "p_value_lower", "probability", &format!("Monte Carlo p-value that {class_b} is elevated (lower tail of the log relative risk, {} random relabellings); nodata where untested", params.permutations))?;
                    let tested = p.upper.iter().filter(|v| v.is_finite()).count().max(1) as f64;
                    let flagged_a =
                        p.upper.iter().filter(|v| **v <= params.alpha).count() as f64 / tested;
                    let flagged_b =
                        p.lower.iter().filter(|v| **v <= params.alpha).count() as f64 / tested;
                    let polygons_a =
                        contour::polygons_at_or_below(&grid, &p.upper, params.alpha, 1.0);
                    let polygons_b =
                        contour::polygons_at_or_below(&grid, &p.lower, params.alpha, 1.0);
                    let fields = [
                        FieldDef::new("elevated", FieldKind::Text),
                        FieldDef::new("alpha", FieldKind::Real),
                        FieldDef::new("permutations", FieldKind::Integer),
                        FieldDef::new("area_km2", FieldKind::Real),
                    ];
                    let name = run.layer_name(&suffix("tolerance"));
                    let (staging, _, _) = run.writing();
                    let mut writer = staging.create_vector(
                        &name,
                        GeometryKind::MultiPolygon,
                        Some(&srs),
                        &fields,
                    )?;
                    for (class, polygons) in [(class_a, &polygons_a), (class_b, &polygons_b)] {
                        for polygon in polygons {
                            writer.add(
                                Shape::Polygon(polygon),
                                &[
                                    FieldData::Text(class.label()),
                                    FieldData::Real(params.alpha),
                                    FieldData::Integer(params.permutations as i64),
                                    FieldData::Real(contour::area_m2(polygon) / 1e6),
                                ],
                            )?;
                        }
                    }
                    writer.finish()?;
                    result["tolerance"] = json!({
                        "permutations": params.permutations,
                        "alpha": params.alpha,
                        "cells_tested": tested as u64,
                        "share_of_cells_flagged": { class_a.label(): flagged_a, class_b.label(): flagged_b },
                        "polygons": { class_a.label(): polygons_a.len(), class_b.label(): polygons_b.len() },
                    });
                }
            } else {
                run.log(format!("warning: slice '{key}' lacks {class_a} or {class_b} points; no comparison surfaces for it"));
            }
            slice_results.push(result);
            run.progress
                .set(0.1 + 0.9 * (s_index + 1) as f64 / n_slices as f64);
        }

        run.debug(format!("class estimates compute_s: {compute_s:.3}"));
        let adaptive = pilot_geometric_mean.map(|g| {
            json!({
                "law": "Abramson (1982) square-root, trimmed at 5",
                "levels_m": estimator.bandwidths().levels_m,
                "pilot_geometric_mean_per_km2": g * 1e6,
            })
        });
        Ok(json!({
            "bandwidth_m": h,
            "bandwidth_selected_m": h_selected,
            "bandwidth_scale": params.bandwidth_scale,
            "bandwidth_chosen_by": how,
            "rule_bandwidth_m": rule_h,
            "cv_scores": cv_scores,
            "kernel": params.kernel.label(),
            "adaptive": adaptive,
            "method": match estimator.method() { Method::Fft => "linear binning + FFT", Method::Direct => "direct exact sums" },
            "crs": crs::label(&srs),
            "grid": {
                "cols": grid.cols, "rows": grid.rows, "cell_m": grid.cell_m,
                "x_min": grid.x_min, "y_min": grid.y_min,
            },
            "compare": [class_a.label(), class_b.label()],
            "weighted": params.weight_field.is_some(),
            "points_outside_mask": dropped_outside_mask,
            "slices": slice_results,
        }))
    }
}

/// Parameters checked at the border.
#[derive(Debug)]
struct Checked {
    classes: ClassMap,
    compare: (Stance, Stance),
}

fn check_params(params: &DensityParams) -> Result<Checked> {
    let positive = |option: &str, value: Option<f64>| -> Result<()> {
        match value {
            Some(v) if !(v.is_finite() && v > 0.0) => Err(Error::argument(
                option,
                format!("is {v}; expected a positive number of metres"),
            )),
            _ => Ok(()),
        }
    };
    positive("--bandwidth-m", params.bandwidth_m)?;
    positive("--cell-m", params.cell_m)?;
    if !(params.bandwidth_scale.is_finite() && params.bandwidth_scale > 0.0) {
        return Err(Error::argument(
            "--bandwidth-scale",
            format!("is {}; expected a positive factor", params.bandwidth_scale),
        ));
    }
    if !(params.alpha > 0.0 && params.alpha < 1.0) {
        return Err(Error::argument(
            "--alpha",
            format!("is {}; expected a level between 0 and 1", params.alpha),
        ));
    }
    if params.max_cells == 0 {
        return Err(Error::argument("--max-cells", "is 0; expected at least 1"));
    }
    if params.edge_correct && params.mask_layer.is_none() {
        return Err(Error::argument("--edge-correct", "needs --mask-layer"));
    }
    if params.slice != Slice::All && params.time_field.is_none() {
        return Err(Error::argument("--slice", "needs --time-field"));
    }
    if let Some(mask) = &params.mask_layer {
        gpkg::check_layer_name(mask, "--mask-layer")?;
    }
    let classes = match &params.classes {
        Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
        None => ClassMap::default(),
    };
    let parts: Vec<&str> = params.compare.split(',').map(str::trim).collect();
    let parse = |label: &str| {
        Stance::from_canonical(label).ok_or_else(|| {
            Error::argument(
                "--compare",
                format!("unknown class '{label}'; expected two of oppose, neutral, support as A,B"),
            )
        })
    };
    if parts.len() != 2 {
        return Err(Error::argument(
            "--compare",
            format!(
                "'{}' is not A,B; expected e.g. support,oppose",
                params.compare
            ),
        ));
    }
    let (a, b) = (parse(parts[0])?, parse(parts[1])?);
    if a == b {
        return Err(Error::argument(
            "--compare",
            format!("compares '{a}' with itself; expected two different classes"),
        ));
    }
    Ok(Checked {
        classes,
        compare: (a, b),
    })
}

fn choose(
    choice: MethodChoice,
    grid: &Grid,
    kernel: Kernel,
    h_max: f64,
    levels: usize,
    n: usize,
) -> Method {
    match choice {
        MethodChoice::Fft => Method::Fft,
        MethodChoice::Direct => Method::Direct,
        MethodChoice::Auto => Estimator::cheaper_method(grid, kernel, h_max, levels, n),
    }
}

fn field_prefix(scale: Scale) -> &'static str {
    match scale {
        Scale::Intensity => "intensity_per_km2",
        Scale::Density => "density_per_km2",
    }
}

/// (x_min, y_min, width, height) of the points, or of the mask polygons when given.
fn data_extent(
    points: &Points<'_>,
    indices: &[usize],
    mask: Option<&[geo_types::MultiPolygon<f64>]>,
) -> (f64, f64, f64, f64) {
    let (mut x0, mut y0, mut x1, mut y1) = (
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    );
    let mut take = |x: f64, y: f64| {
        x0 = x0.min(x);
        y0 = y0.min(y);
        x1 = x1.max(x);
        y1 = y1.max(y);
    };
    match mask {
        Some(polygons) => {
            for m in polygons {
                for p in &m.0 {
                    for c in p.exterior().0.iter() {
                        take(c.x, c.y);
                    }
                }
            }
        }
        None => {
            for &i in indices {
                take(points.x[i], points.y[i]);
            }
        }
    }
    (x0, y0, (x1 - x0).max(0.0), (y1 - y0).max(0.0))
}

/// `v` rounded up to two significant digits (a readable default cell size); 1 m at least.
fn nice(v: f64) -> f64 {
    if !(v.is_finite() && v > 1.0) {
        return 1.0;
    }
    let magnitude = 10f64.powf(v.log10().floor() - 1.0);
    (v / magnitude).ceil() * magnitude
}

/// The grid covering `extent` plus `margin` on every side, snapped to multiples of the cell.
///
/// # Errors
/// [`Error::BadArgument`] when it exceeds `max_cells`, suggesting a cell size that fits.
fn make_grid(
    extent: (f64, f64, f64, f64),
    margin: f64,
    cell_m: f64,
    max_cells: u64,
) -> Result<Grid> {
    let (x, y, w, h) = extent;
    let x_min = ((x - margin) / cell_m).floor() * cell_m;
    let y_min = ((y - margin) / cell_m).floor() * cell_m;
    let cols_f = ((x + w + margin - x_min) / cell_m).ceil().max(1.0);
    let rows_f = ((y + h + margin - y_min) / cell_m).ceil().max(1.0);
    let cells = cols_f * rows_f;
    if cells > max_cells as f64 {
        let mut suggested = nice(cell_m * (cells / max_cells as f64).sqrt());
        while ((w + 2.0 * margin) / suggested + 2.0) * ((h + 2.0 * margin) / suggested + 2.0)
            > max_cells as f64
        {
            suggested = nice(suggested * 1.01);
        }
        return Err(Error::argument(
            "--cell-m",
            format!("{cell_m} m gives {cells:.0} cells, more than --max-cells {max_cells}; use --cell-m {suggested} or larger"),
        ));
    }
    Ok(Grid {
        x_min,
        y_min,
        cell_m,
        cols: cols_f as usize,
        rows: rows_f as usize,
    })
}

fn project_polygons(
    polygons: &[geo_types::MultiPolygon<f64>],
    from: &SpatialRef,
    to: &SpatialRef,
) -> Result<Vec<geo_types::MultiPolygon<f64>>> {
    use geo_types::{Coord, LineString, MultiPolygon, Polygon};
    let project_ring = |ring: &LineString<f64>| -> Result<LineString<f64>> {
        let mut xs: Vec<f64> = ring.0.iter().map(|c| c.x).collect();
        let mut ys: Vec<f64> = ring.0.iter().map(|c| c.y).collect();
        crs::transform(from, to, &mut xs, &mut ys)?;
        Ok(LineString(
            xs.into_iter()
                .zip(ys)
                .map(|(x, y)| Coord { x, y })
                .collect(),
        ))
    };
    polygons
        .iter()
        .map(|m| {
            m.0.iter()
                .map(|p| {
                    let exterior = project_ring(p.exterior())?;
                    let interiors = p
                        .interiors()
                        .iter()
                        .map(&project_ring)
                        .collect::<Result<Vec<_>>>()?;
                    Ok(Polygon::new(exterior, interiors))
                })
                .collect::<Result<Vec<_>>>()
                .map(MultiPolygon)
        })
        .collect()
}

/// Writes a Float32 surface and returns its maximum (finite values).
#[allow(clippy::too_many_arguments)]
fn write(
    run: &mut Run,
    name: &str,
    grid: &Grid,
    srs: &SpatialRef,
    values: &[f64],
    field_name: &str,
    unit: &str,
    quantity: &str,
) -> Result<f64> {
    let data: Vec<f32> = values.iter().map(|v| *v as f32).collect();
    let max = values
        .iter()
        .cloned()
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    run.output().write_surface(
        name,
        &Surface {
            grid,
            values: &data,
            srs,
            field_name,
            unit,
            quantity,
        },
    )?;
    run.debug(format!("wrote surface '{name}'"));
    run.check_interrupted()?;
    Ok(if max.is_finite() { max } else { 0.0 })
}
