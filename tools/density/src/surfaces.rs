//! The surfaces of one time slice: each class's kernel estimate, the comparisons of the two
//! compared classes, and the tolerance of their log ratio by random relabelling.

use std::collections::BTreeMap;
use std::time::Instant;

use geo_types::Polygon;
use stance_core::error::{Error, Result};
use stance_core::host::shard::TileRun;
use stance_core::host::Run;
use stance_core::montecarlo::replicate_seed;
use stance_core::stance::Stance;

use crate::binning::Points;
use crate::compare::{self, Pair};
use crate::contour;
use crate::input::Records;
use crate::output::{self, Contours, Quantity, SliceSummary, Target, ToleranceSummary};
use crate::params::{Config, Scale};
use crate::plan::Plan;
use crate::shards::Shards;
use crate::tolerance::{self, PValues, Relabelling};
use crate::types::{self, TypesPlan};

/// Slices with fewer points than this in a compared class get a warning.
pub const FEW_POINTS: usize = 50;

/// What every slice shares.
#[derive(Debug)]
pub struct Context<'a> {
    /// The checked parameters.
    pub config: &'a Config,
    /// The records.
    pub records: &'a Records,
    /// Bandwidth, grid and estimator.
    pub plan: &'a Plan,
    /// Number of slices (for the progress).
    pub slices: usize,
    /// The type-probability estimator (`--type-probabilities`).
    pub types: Option<&'a TypesPlan>,
    /// This run's share of the relabellings.
    pub shards: &'a Shards,
    /// The merged tiles of a `--merge-tiles` run (their sums replace the estimator's).
    pub tiles: &'a TileRun,
}

impl Context<'_> {
    /// Fraction of the run done at `within` (0..=1) of slice `index`: the first tenth is
    /// reading and planning, the rest is shared equally by the slices.
    pub fn fraction(&self, index: usize, within: f64) -> f64 {
        0.1 + 0.9 * (index as f64 + within) / self.slices as f64
    }

    /// Where surfaces go.
    pub fn target(&self) -> Target<'_> {
        Target {
            grid: &self.plan.grid,
            srs: &self.records.srs,
            publish: self.shards.publishing(),
        }
    }

    /// Names the phase and shows it at `within` of slice `index`.
    pub fn enter(&self, run: &Run, phase: &str, index: usize, within: f64) {
        run.progress.phase(phase);
        run.progress.set(self.fraction(index, within));
    }
}

/// One slice: its key (empty for all records), its position and its records.
#[derive(Debug, Clone, Copy)]
pub struct SliceRef<'a> {
    /// Layer-name suffix (empty for all records).
    pub key: &'a str,
    /// Position among the slices.
    pub index: usize,
    /// Indices of its records.
    pub members: &'a [usize],
}

impl SliceRef<'_> {
    /// `base` with the slice's key appended (`diff_2026_03`).
    pub fn suffix(&self, base: &str) -> String {
        if self.key.is_empty() {
            base.to_owned()
        } else {
            format!("{base}_{}", self.key)
        }
    }
}

/// Computes and writes every surface of `slice`; returns its summary and the seconds spent in
/// the class estimates alone.
///
/// # Errors
/// Writing failed, or the run was interrupted.
pub fn slice_surfaces(
    context: &Context<'_>,
    run: &mut Run,
    slice: SliceRef<'_>,
) -> Result<(SliceSummary, f64)> {
    run.check_interrupted()?;
    context.enter(run, "surfaces", slice.index, 0.0);
    let (config, records) = (context.config, context.records);
    let target = context.target();
    let mut class_idx: BTreeMap<Stance, Vec<usize>> = BTreeMap::new();
    for &i in slice.members {
        class_idx.entry(records.class_of[i]).or_default().push(i);
    }
    let mut summary = SliceSummary {
        key: slice.key.to_owned(),
        counts: Vec::new(),
        maxima: Vec::new(),
        log_ratio_floor: None,
        tolerance: None,
        segregation: None,
    };
    let points = records.points();
    let mut sums: BTreeMap<Stance, Vec<f64>> = BTreeMap::new();
    let mut compute_s = 0.0;
    for class in Stance::ALL {
        let Some(idx) = class_idx.get(&class) else {
            summary.counts.push((class, 0));
            continue;
        };
        summary.counts.push((class, idx.len()));
        let clock = Instant::now();
        let sum = match crate::tiles::merged_sum(context.tiles, slice.index, class)? {
            Some(merged) => merged,
            None => context.plan.estimator.sum(&points, idx),
        };
        compute_s += clock.elapsed().as_secs_f64();
        let factor = per_km2(config.scale, points.total_weight(idx));
        let scaled: Vec<f64> = sum.iter().map(|v| v * factor).collect();
        let name = run.layer_name(&slice.suffix(class.label()));
        let quantity = Quantity::class(config.scale, class);
        let max = output::write_surface(run, target, &name, &scaled, &quantity)?;
        summary.maxima.push((class, max));
        sums.insert(class, sum);
    }
    if let Some(plan) = context.types {
        summary.segregation = Some(types::slice_types(context, run, slice, plan, &class_idx)?);
    }
    let (a, b) = (config.class_a, config.class_b);
    for class in [a, b] {
        let count = class_idx.get(&class).map_or(0, Vec::len);
        if count < FEW_POINTS {
            run.log(format!(
                "warning: slice '{}' has only {count} {class} points; its surfaces are unreliable",
                summary.label()
            ));
        }
    }
    let (Some(sum_a), Some(sum_b)) = (sums.get(&a), sums.get(&b)) else {
        run.log(format!(
            "warning: slice '{}' lacks {a} or {b} points; no comparison surfaces for it",
            summary.label()
        ));
        return Ok((summary, compute_s));
    };
    let compared = Compared {
        a: &class_idx[&a],
        b: &class_idx[&b],
        sum_a,
        sum_b,
    };
    let (rho, floor) = write_comparisons(context, run, slice, &compared)?;
    summary.log_ratio_floor = Some(floor);
    if config.permutations > 0 {
        summary.tolerance = Some(tolerance_outputs(
            context, run, slice, &compared, &rho, floor,
        )?);
    }
    Ok((summary, compute_s))
}

/// The two compared classes of a slice: their records and kernel sums.
struct Compared<'a> {
    a: &'a [usize],
    b: &'a [usize],
    sum_a: &'a [f64],
    sum_b: &'a [f64],
}

impl Compared<'_> {
    fn pair<'p>(&'p self, points: &Points<'_>) -> Pair<'p> {
        Pair {
            a: self.sum_a,
            b: self.sum_b,
            weight_a: points.total_weight(self.a),
            weight_b: points.total_weight(self.b),
        }
    }
}

/// The factor from Σ w K (per m²) to the unit of `scale` for a class of total weight `weight`.
fn per_km2(scale: Scale, weight: f64) -> f64 {
    match scale {
        Scale::Intensity => 1e6,
        Scale::Density => 1e6 / weight,
    }
}

/// Writes diff, sqrtdiff, share and the log ratio; returns the log ratio and its floor.
fn write_comparisons(
    context: &Context<'_>,
    run: &mut Run,
    slice: SliceRef<'_>,
    compared: &Compared<'_>,
) -> Result<(Vec<f64>, f64)> {
    let (config, target) = (context.config, context.target());
    let (class_a, class_b, scale) = (config.class_a, config.class_b, config.scale);
    let pair = compared.pair(&context.records.points());
    let a: Vec<f64> = pair
        .a
        .iter()
        .map(|v| v * per_km2(scale, pair.weight_a))
        .collect();
    let b: Vec<f64> = pair
        .b
        .iter()
        .map(|v| v * per_km2(scale, pair.weight_b))
        .collect();
    let mut write = |suffix: &str, values: Vec<f64>, quantity: Quantity| -> Result<f64> {
        let name = run.layer_name(&slice.suffix(suffix));
        output::write_surface(run, target, &name, &values, &quantity)
    };
    let diff = Quantity::diff(scale, class_a, class_b);
    write(output::DIFF, compare::diff(&a, &b), diff)?;
    let sqrt_diff = Quantity::sqrt_diff(scale, class_a, class_b);
    write(output::SQRT_DIFF, compare::sqrt_diff(&a, &b), sqrt_diff)?;
    let share = Quantity::share(class_a, class_b);
    write(output::SHARE, compare::share(pair.a, pair.b), share)?;
    let (rho, floor) = tolerance::observed_log_ratio(&pair);
    let name = run.layer_name(&slice.suffix(output::LOG_RATIO));
    let quantity = Quantity::log_ratio(class_a, class_b);
    output::write_surface(run, target, &name, &rho, &quantity)?;
    Ok((rho, floor))
}

/// Runs the relabellings, writes both p-value surfaces and the tolerance contours.
fn tolerance_outputs(
    context: &Context<'_>,
    run: &mut Run,
    slice: SliceRef<'_>,
    compared: &Compared<'_>,
    observed: &[f64],
    floor: f64,
) -> Result<ToleranceSummary> {
    let config = context.config;
    let (class_a, class_b, alpha) = (config.class_a, config.class_b, config.alpha);
    let p = relabel(context, run, slice, compared, observed, floor)?;
    let tested = p.upper.iter().filter(|v| v.is_finite()).count().max(1) as f64;
    let flagged = |p: &[f64]| p.iter().filter(|v| **v <= alpha).count() as f64 / tested;
    let clock = Instant::now();
    let grid = &context.plan.grid;
    let polygons_a: Vec<Polygon<f64>> = contour::polygons_at_or_below(grid, &p.upper, alpha, 1.0);
    let polygons_b: Vec<Polygon<f64>> = contour::polygons_at_or_below(grid, &p.lower, alpha, 1.0);
    run.debug(format!(
        "tolerance contours: {:.4} s",
        clock.elapsed().as_secs_f64()
    ));

    context.enter(run, "writing", slice.index, 1.0);
    let target = context.target();
    let permutations = config.permutations;
    let upper = Quantity::p_upper(class_a, permutations);
    let lower = Quantity::p_lower(class_b, permutations);
    let name = run.layer_name(&slice.suffix(output::LOG_RATIO_P_UPPER));
    output::write_surface(run, target, &name, &p.upper, &upper)?;
    let name = run.layer_name(&slice.suffix(output::LOG_RATIO_P_LOWER));
    output::write_surface(run, target, &name, &p.lower, &lower)?;
    let contours = Contours {
        alpha,
        permutations,
        sides: &[(class_a, &polygons_a), (class_b, &polygons_b)],
    };
    let name = run.layer_name(&slice.suffix(output::TOLERANCE));
    output::write_tolerance(run, target, &name, &contours)?;
    Ok(ToleranceSummary {
        permutations,
        alpha,
        cells_tested: tested as u64,
        share_flagged: [(class_a, flagged(&p.upper)), (class_b, flagged(&p.lower))],
        polygons: [(class_a, polygons_a.len()), (class_b, polygons_b.len())],
    })
}

/// The per-cell p-values by random relabelling, reporting the relabellings done.
fn relabel(
    context: &Context<'_>,
    run: &Run,
    slice: SliceRef<'_>,
    compared: &Compared<'_>,
    observed: &[f64],
    floor: f64,
) -> Result<PValues> {
    context.enter(run, "tolerance", slice.index, 0.0);
    let points = context.records.points();
    let pooled_sum: Vec<f64> = compared
        .sum_a
        .iter()
        .zip(compared.sum_b)
        .map(|(x, y)| x + y)
        .collect();
    let permutations = context.config.permutations;
    let job = Relabelling {
        estimator: &context.plan.estimator,
        points: &points,
        a: compared.a,
        b: compared.b,
        pooled_sum: &pooled_sum,
        observed,
        floor,
        permutations,
        seed: replicate_seed(run.common.seed, slice.index as u64),
    };
    let progress = &run.progress;
    let (start, end) = (
        context.fraction(slice.index, 0.0),
        context.fraction(slice.index, 1.0),
    );
    let done = |n: usize| {
        let fraction = start + (end - start) * n as f64 / permutations as f64;
        progress.set_counted(fraction, n as u64, permutations as u64);
    };
    let counts = context.shards.tolerance(slice.index, |drawn| {
        tolerance::relabelling_counts(&job, drawn, run.interrupt().flag(), &done)
            .ok_or(Error::Interrupted)
    })?;
    Ok(tolerance::p_values(&job, &counts))
}
