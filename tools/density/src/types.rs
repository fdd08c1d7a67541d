//! `--type-probabilities`: the bandwidth of the type probabilities, and per slice their
//! surfaces, the segregation test and the pointwise p-value surfaces with tolerance contours
//! (Diggle, Zheng & Durr 2005; the maths is in [`crate::segregation`]).

use std::collections::BTreeMap;

use geo_types::Polygon;
use serde_json::{json, Value};
use stance_core::error::{Error, Result};
use stance_core::host::Run;
use stance_core::montecarlo::replicate_seed;
use stance_core::stance::Stance;

use crate::bandwidth::{self, CvScore};
use crate::contour;
use crate::estimate::{Bandwidths, Estimator};
use crate::input::Records;
use crate::output::{self, Contours, Quantity};
use crate::params::{Config, MethodChoice};
use crate::plan::Plan;
use crate::segregation::{self, Relabelling};
use crate::surfaces::{Context, SliceRef};

/// Candidates of the cross-validation: this many, geometric from 1/4 to 2 × the rule bandwidth.
const CV_CANDIDATES: usize = 15;

/// Offset of the relabelling streams of the segregation test from those of the tolerance.
const SEED_STREAM: u64 = 1 << 40;

/// The estimator of the type probabilities and how its bandwidth was chosen.
#[derive(Debug)]
pub struct TypesPlan {
    /// One fixed bandwidth for every class, no edge correction (it cancels in the ratio).
    pub estimator: Estimator,
    /// The bandwidth (m).
    pub h: f64,
    /// How it was chosen.
    pub how: String,
    /// Scores of the cross-validation candidates (empty when given).
    pub cv_scores: Vec<CvScore>,
}

impl TypesPlan {
    /// The run-level summary entry.
    pub fn summary(&self) -> Value {
        json!({
            "bandwidth_m": self.h,
            "bandwidth_chosen_by": self.how,
            "cv_scores": self.cv_scores,
            "statistic_definition": "T = sum over the cells of the region and the classes of (p_k(x) - mean p_k)^2",
            "probabilities_written_where": "the pooled kernel sum is at least 5 times the kernel's peak (as if 5 records sat on the cell centre)",
        })
    }
}

/// Chooses the bandwidth (given, or likelihood cross-validation of the type labels on the
/// surfaces' grid) and builds the estimator on the same grid and mask.
///
/// # Errors
/// No candidate bandwidth reaches two cells, or every candidate leaves a point without a
/// neighbour of its class.
pub fn plan(config: &Config, run: &Run, records: &Records, plan: &Plan) -> Result<TypesPlan> {
    let grid = plan.grid;
    let (h, how, cv_scores) = match config.bandwidth_m {
        Some(h) => (
            h * config.bandwidth_scale,
            "given (--bandwidth-m)".to_owned(),
            Vec::new(),
        ),
        None => {
            let (h, scores) = cross_validate(config, run, records, plan)?;
            let how = "likelihood cross-validation of the type labels (Diggle, Zheng & Durr 2005)";
            (h * config.bandwidth_scale, how.to_owned(), scores)
        }
    };
    let n = records.len();
    let method = match config.method {
        MethodChoice::Fft => crate::estimate::Method::Fft,
        MethodChoice::Direct => crate::estimate::Method::Direct,
        MethodChoice::Auto => Estimator::cheaper_method(&grid, config.kernel, h, 1, n),
    };
    let mask = plan.estimator.mask().map(<[bool]>::to_vec);
    let estimator = Estimator::new(
        grid,
        config.kernel,
        Bandwidths::fixed(h),
        method,
        mask,
        false,
    );
    run.log(format!("type probabilities: bandwidth {h:.1} m ({how})"));
    Ok(TypesPlan {
        estimator,
        h,
        how,
        cv_scores,
    })
}

fn cross_validate(
    config: &Config,
    run: &Run,
    records: &Records,
    plan: &Plan,
) -> Result<(f64, Vec<CvScore>)> {
    let grid = plan.grid;
    let h_rule = plan.bandwidth.rule_h.unwrap_or(plan.bandwidth.h);
    let candidates: Vec<f64> =
        bandwidth::geometric_candidates(h_rule / 4.0, h_rule * 2.0, CV_CANDIDATES)
            .into_iter()
            .filter(|h| config.kernel.support_m(*h) >= 2.0 * grid.cell_m)
            .collect();
    if candidates.is_empty() {
        return Err(Error::argument(
            "--cell-m",
            format!(
                "{} m is too coarse to cross-validate the type probabilities around {h_rule:.0} m; \
                 use a smaller cell or give --bandwidth-m",
                grid.cell_m
            ),
        ));
    }
    let mut by_class: Vec<Vec<usize>> = vec![Vec::new(); segregation::CLASSES];
    for (i, class) in records.class_of.iter().enumerate() {
        by_class[class_index(*class)].push(i);
    }
    let scores = segregation::type_cv(
        &grid,
        config.kernel,
        &records.points(),
        &by_class,
        &candidates,
    );
    let best = scores
        .iter()
        .filter(|s| s.log_likelihood.is_finite())
        .max_by(|a, b| a.log_likelihood.total_cmp(&b.log_likelihood))
        .copied()
        .ok_or_else(|| {
            Error::argument(
                "--type-probabilities",
                "cross-validation: every candidate bandwidth leaves some record with no other \
                 record of its class within reach; give --bandwidth-m",
            )
        })?;
    let (first, last) = (candidates[0], candidates[candidates.len() - 1]);
    if best.bandwidth_m == first || best.bandwidth_m == last {
        run.log(format!(
            "warning: the type-probability bandwidth {:.0} m is at the end of the candidates",
            best.bandwidth_m
        ));
    }
    Ok((best.bandwidth_m, scores))
}

/// Position of a class in oppose, neutral, support.
fn class_index(class: Stance) -> usize {
    (class.value() + 1) as usize
}

/// Computes and writes the type probabilities of one slice, runs the test and writes the
/// pointwise p-values and contours; returns the slice's summary entry.
///
/// # Errors
/// Writing failed, or the run was interrupted.
pub fn slice_types(
    context: &Context<'_>,
    run: &mut Run,
    slice: SliceRef<'_>,
    plan: &TypesPlan,
    class_idx: &BTreeMap<Stance, Vec<usize>>,
) -> Result<Value> {
    context.enter(run, "type probabilities", slice.index, 0.5);
    let points = context.records.points();
    let empty = Vec::new();
    let groups: Vec<&Vec<usize>> = Stance::ALL
        .iter()
        .map(|c| class_idx.get(c).unwrap_or(&empty))
        .collect();
    let sums: Vec<Vec<f64>> = groups
        .iter()
        .map(|g| plan.estimator.sum(&points, g))
        .collect();
    let probabilities = segregation::probabilities(&sums);
    let pooled: Vec<f64> = (0..sums[0].len())
        .map(|c| sums.iter().map(|s| s[c]).sum())
        .collect();
    let region = segregation::region(&pooled);
    let peak = context.config.kernel.value(0.0, plan.h);
    let supported = segregation::supported(&pooled, peak);
    let weights: Vec<f64> = groups.iter().map(|g| points.total_weight(g)).collect();
    let total: f64 = weights.iter().sum();
    let mean: Vec<f64> = weights
        .iter()
        .map(|w| w / total.max(f64::MIN_POSITIVE))
        .collect();
    let observed = segregation::statistic(&probabilities, &mean, &region);
    let target = context.target();
    for (class, p) in Stance::ALL.iter().zip(&probabilities) {
        let name = run.layer_name(&slice.suffix(&format!("{}_{class}", output::PROB)));
        // Written only where the estimate rests on some records: beyond, a ratio of kernel
        // sums rests on one or two far points and reads 0 or 1.
        let inside: Vec<f64> = p
            .iter()
            .zip(&supported)
            .map(|(v, r)| if *r { *v } else { f64::NAN })
            .collect();
        output::write_surface(
            run,
            target,
            &name,
            &inside,
            &Quantity::probability(*class, plan.h),
        )?;
    }
    let mut summary = json!({
        "bandwidth_m": plan.h,
        "statistic_t": observed,
        "cells_in_region": region.iter().filter(|r| **r).count(),
        "class_shares": Stance::ALL.iter().zip(&mean)
            .map(|(c, m)| (c.label().to_owned(), json!(m)))
            .collect::<serde_json::Map<_, _>>(),
    });
    let permutations = context.config.permutations;
    if permutations == 0 {
        return Ok(summary);
    }
    let members: Vec<usize> = groups.iter().flat_map(|g| g.iter().copied()).collect();
    let labels: Vec<u8> = groups
        .iter()
        .enumerate()
        .flat_map(|(k, g)| std::iter::repeat_n(k as u8, g.len()))
        .collect();
    let job = Relabelling {
        estimator: &plan.estimator,
        points: &points,
        members: &members,
        labels: &labels,
        pooled_sum: &pooled,
        region: &region,
        observed: &probabilities,
        mean: &mean,
        permutations,
        seed: replicate_seed(run.common.seed, SEED_STREAM + slice.index as u64),
    };
    let outcome = relabel(context, run, slice, &job)?;
    let p_value = segregation::p_value(observed, &outcome.replicates);
    summary["p_value"] = json!(p_value);
    summary["permutations"] = json!(permutations);
    let contours = write_pointwise(context, run, slice, &outcome.pointwise)?;
    summary["alpha"] = json!(context.config.alpha);
    summary["polygons"] = contours;
    Ok(summary)
}

/// The relabellings, reporting their progress.
fn relabel(
    context: &Context<'_>,
    run: &Run,
    slice: SliceRef<'_>,
    job: &Relabelling<'_>,
) -> Result<segregation::TestOutcome> {
    context.enter(run, "segregation test", slice.index, 0.5);
    let progress = &run.progress;
    let (start, end) = (
        context.fraction(slice.index, 0.5),
        context.fraction(slice.index, 1.0),
    );
    let total = job.permutations;
    let done = |n: usize| {
        let fraction = start + (end - start) * n as f64 / total as f64;
        progress.set_counted(fraction, n as u64, total as u64);
    };
    let mc = context.shards.types(slice.index, |drawn| {
        segregation::monte_carlo_counts(job, drawn, run.interrupt().flag(), &done)
            .ok_or(Error::Interrupted)
    })?;
    Ok(segregation::outcome(job, &mc))
}

/// Writes `prob_<class>_p` surfaces and the `prob_tolerance` polygons (field `elevated`: the
/// class whose probability is significantly high at `--alpha`); returns polygons per class.
fn write_pointwise(
    context: &Context<'_>,
    run: &mut Run,
    slice: SliceRef<'_>,
    pointwise: &[Vec<f64>],
) -> Result<Value> {
    let (config, grid) = (context.config, &context.plan.grid);
    let target = context.target();
    let mut polygons: Vec<Vec<Polygon<f64>>> = Vec::new();
    for (class, p) in Stance::ALL.iter().zip(pointwise) {
        let name = run.layer_name(&slice.suffix(&format!("{}_{class}_p", output::PROB)));
        let quantity = Quantity::p_probability(*class, config.permutations);
        output::write_surface(run, target, &name, p, &quantity)?;
        polygons.push(contour::polygons_at_or_below(grid, p, config.alpha, 1.0));
    }
    let sides: Vec<(Stance, &[Polygon<f64>])> = Stance::ALL
        .iter()
        .copied()
        .zip(polygons.iter().map(Vec::as_slice))
        .collect();
    let contours = Contours {
        alpha: config.alpha,
        permutations: config.permutations,
        sides: &sides,
    };
    let name = run.layer_name(&slice.suffix(&format!("{}_{}", output::PROB, output::TOLERANCE)));
    output::write_tolerance(run, target, &name, &contours)?;
    Ok(Stance::ALL
        .iter()
        .zip(&polygons)
        .map(|(c, p)| (c.label().to_owned(), json!(p.len())))
        .collect::<serde_json::Map<_, _>>()
        .into())
}
