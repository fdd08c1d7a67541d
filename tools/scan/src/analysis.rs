//! Whole scans from plain arrays: records (Bernoulli, ordinal or multinomial) or areas (Poisson),
//! circles or, with times, cylinders (Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005), Monte Carlo inference and cluster selection (Kulldorff 1997; Jung, Kulldorff & Klassen 2007;
//! Jung, Kulldorff & Richard 2010).

use std::ops::Range;
use std::sync::atomic::AtomicBool;

use crate::clusters::{select, select_cylinders, Cluster, Selection};
use crate::cylinders::{
    scan_cylinders, CylinderOutcome, CylinderSetup, Sizing, TimePermutation, TimedLabels,
};
use crate::engine::{scan, AreaCases, PointLabels, ScanSetup, Stopped};
use crate::models::{
    Bernoulli, Direction, Multinomial, Ordinal, Poisson, SpaceTimePermutation, ORDINAL_CLASSES,
};
use crate::windows::{grid_centres, merge_locations, WindowLimits};

/// Memory for the counts of one block of labellings; more replicates run in several passes.
pub const BLOCK_BYTES: usize = 256 << 20;

/// Settings shared by every model.
#[derive(Debug, Clone)]
pub struct ScanConfig {
    /// Sides to look for.
    pub direction: Direction,
    /// Largest window as a share of all records (or of the population), in (0, 0.5].
    pub max_share: f64,
    /// Largest window radius (m), if any.
    pub max_radius_m: Option<f64>,
    /// Regular grid of centres with this cell (m) instead of one centre per location.
    pub centres_cell_m: Option<f64>,
    /// Most clusters to report.
    pub max_clusters: usize,
    /// Report only clusters with p ≤ this.
    pub report_p: f64,
    /// Random labellings in all.
    pub replicates: usize,
    /// The replicates (from 0) this run draws: `0..replicates`, or one shard's block.
    pub drawn: Range<usize>,
    /// The maximum ratio of every replicate, gathered from the shards by a merging run (which
    /// draws none itself).
    pub given_max: Option<Vec<f64>>,
    /// Whether the observed data are scanned (not in a shard, which only draws replicates).
    pub observed: bool,
    /// Run seed.
    pub seed: u64,
}

impl ScanConfig {
    /// The maxima the p-values rest on: those gathered from the shards, or those drawn.
    fn maxima(&self, drawn: Vec<f64>) -> Vec<f64> {
        self.given_max.clone().unwrap_or(drawn)
    }
}

/// The point models.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PointModel {
    /// Labels 1 = case, 0 = control.
    Bernoulli,
    /// Labels 0 < 1 < 2 (oppose < neutral < support).
    Ordinal,
    /// Labels 0, 1, 2 (oppose, neutral, support), unordered.
    Multinomial,
}

/// A finished scan.
#[derive(Debug, Clone)]
pub struct ScanResult {
    /// Location eastings (m).
    pub x: Vec<f64>,
    /// Location northings (m).
    pub y: Vec<f64>,
    /// Per record (or area): its location.
    pub of_point: Vec<u32>,
    /// Size of each location (records, or expected cases).
    pub weight: Vec<f64>,
    /// Window centres (m).
    pub centres: Vec<(f64, f64)>,
    /// Selected clusters.
    pub clusters: Vec<Cluster>,
    /// Maximum ratio of each random labelling.
    pub replicate_max: Vec<f64>,
    /// Windows per labelling.
    pub windows: u64,
    /// Records (Poisson: cases) per class: Bernoulli [controls, cases]; ordinal 3 classes;
    /// Poisson [cases].
    pub class_totals: Vec<u64>,
    /// Total weight (records, or expected cases).
    pub total_weight: f64,
}

fn limits(config: &ScanConfig, total_weight: f64) -> WindowLimits {
    WindowLimits {
        max_weight: config.max_share * total_weight,
        max_radius_m: config.max_radius_m.unwrap_or(f64::INFINITY),
    }
}

fn centres_for(config: &ScanConfig, x: &[f64], y: &[f64]) -> Vec<(f64, f64)> {
    match config.centres_cell_m {
        Some(cell) => grid_centres(x, y, cell),
        None => x.iter().copied().zip(y.iter().copied()).collect(),
    }
}

/// Scans records at (`x`, `y`) (m) with class `labels` (Bernoulli, ordinal or multinomial).
///
/// # Errors
/// [`Stopped`] once `stop` is set.
pub fn scan_points(
    x: &[f64],
    y: &[f64],
    labels: &[u8],
    model: PointModel,
    config: &ScanConfig,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
) -> Result<ScanResult, Stopped> {
    let locations = merge_locations(x, y);
    let mut weight = vec![0.0; locations.x.len()];
    for &l in &locations.of_point {
        weight[l as usize] += 1.0;
    }
    let total = labels.len() as u64;
    let centres = centres_for(config, &locations.x, &locations.y);
    let setup = ScanSetup {
        x: &locations.x,
        y: &locations.y,
        weight: &weight,
        centres: &centres,
        limits: limits(config, total as f64),
        drawn: config.drawn.clone(),
        observed: config.observed,
        block_bytes: BLOCK_BYTES,
    };
    let (outcome, class_totals) = match model {
        PointModel::Bernoulli => {
            let cases = labels.iter().filter(|&&l| l == 1).count() as u64;
            let m = Bernoulli::new(total, cases, config.direction);
            let l = PointLabels {
                of_point: &locations.of_point,
                labels,
                width: 1,
                seed: config.seed,
            };
            (
                scan(&setup, &m, &l, progress, stop)?,
                vec![total - cases, cases],
            )
        }
        PointModel::Ordinal | PointModel::Multinomial => {
            let mut totals = [0u64; ORDINAL_CLASSES];
            for &l in labels {
                totals[usize::from(l).min(ORDINAL_CLASSES - 1)] += 1;
            }
            let l = PointLabels {
                of_point: &locations.of_point,
                labels,
                width: ORDINAL_CLASSES,
                seed: config.seed,
            };
            let outcome = if model == PointModel::Ordinal {
                scan(
                    &setup,
                    &Ordinal::new(totals, config.direction),
                    &l,
                    progress,
                    stop,
                )?
            } else {
                scan(&setup, &Multinomial::new(totals), &l, progress, stop)?
            };
            (outcome, totals.to_vec())
        }
    };
    let replicate_max = config.maxima(outcome.replicate_max);
    let clusters = select(
        &Selection {
            x: &locations.x,
            y: &locations.y,
            weight: &weight,
            centres: &centres,
            limits: setup.limits,
            max_clusters: config.max_clusters,
            report_p: config.report_p,
        },
        &outcome.best,
        &replicate_max,
    );
    Ok(ScanResult {
        x: locations.x,
        y: locations.y,
        of_point: locations.of_point,
        weight,
        centres,
        clusters,
        replicate_max,
        windows: outcome.windows,
        class_totals,
        total_weight: total as f64,
    })
}

/// Scans areas with centroids (`x`, `y`) (m), observed `cases` and `expected` cases (already
/// scaled so that they sum to the observed total).
///
/// # Errors
/// [`Stopped`] once `stop` is set.
pub fn scan_areas(
    x: &[f64],
    y: &[f64],
    cases: &[u32],
    expected: &[f64],
    config: &ScanConfig,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
) -> Result<ScanResult, Stopped> {
    let total_cases: u64 = cases.iter().map(|&c| u64::from(c)).sum();
    let total_expected: f64 = expected.iter().sum();
    let centres = centres_for(config, x, y);
    let cumulative: Vec<f64> = expected
        .iter()
        .scan(0.0, |s, e| {
            *s += e;
            Some(*s)
        })
        .collect();
    let setup = ScanSetup {
        x,
        y,
        weight: expected,
        centres: &centres,
        limits: limits(config, total_expected),
        drawn: config.drawn.clone(),
        observed: config.observed,
        block_bytes: BLOCK_BYTES,
    };
    let model = Poisson::new(total_cases, config.direction);
    let labelling = AreaCases {
        cases,
        cumulative_expected: &cumulative,
        seed: config.seed,
    };
    let outcome = scan(&setup, &model, &labelling, progress, stop)?;
    let replicate_max = config.maxima(outcome.replicate_max);
    let clusters = select(
        &Selection {
            x,
            y,
            weight: expected,
            centres: &centres,
            limits: setup.limits,
            max_clusters: config.max_clusters,
            report_p: config.report_p,
        },
        &outcome.best,
        &replicate_max,
    );
    Ok(ScanResult {
        x: x.to_vec(),
        y: y.to_vec(),
        of_point: (0..x.len() as u32).collect(),
        weight: expected.to_vec(),
        centres,
        clusters,
        replicate_max,
        windows: outcome.windows,
        class_totals: vec![total_cases],
        total_weight: total_expected,
    })
}

/// The models of a space-time scan.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimedModel {
    /// Space-time permutation: the records alone (Kulldorff et al. 2005).
    Permutation,
    /// A case/control or class model on records, inside cylinders.
    Labels(PointModel),
}

/// The records of a space-time scan: positions (m), periods (0…periods−1) and labels (as for
/// [`scan_points`]; unused by the permutation model).
#[derive(Debug, Clone, Copy)]
pub struct TimedRecords<'a> {
    /// Eastings (m).
    pub x: &'a [f64],
    /// Northings (m).
    pub y: &'a [f64],
    /// Period of each record, 0…periods−1.
    pub period: &'a [u32],
    /// Periods studied.
    pub periods: usize,
    /// Label of each record.
    pub labels: &'a [u8],
}

/// Scans cylinders (circles × runs of at most `max_duration` periods) over timed records.
///
/// # Errors
/// [`Stopped`] once `stop` is set.
pub fn scan_space_time(
    records: &TimedRecords<'_>,
    model: TimedModel,
    max_duration: usize,
    config: &ScanConfig,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
) -> Result<ScanResult, Stopped> {
    let locations = merge_locations(records.x, records.y);
    let t = records.periods;
    let mut weight = vec![0.0; locations.x.len()];
    let mut per_cell = vec![0u32; locations.x.len() * t];
    for (&l, &p) in locations.of_point.iter().zip(records.period) {
        weight[l as usize] += 1.0;
        per_cell[l as usize * t + p as usize] += 1;
    }
    let total = records.period.len() as u64;
    let centres = centres_for(config, &locations.x, &locations.y);
    let setup = CylinderSetup {
        x: &locations.x,
        y: &locations.y,
        weight: &weight,
        records: &per_cell,
        periods: t,
        max_duration: max_duration.clamp(1, t.max(1)),
        centres: &centres,
        limits: limits(config, total as f64),
        drawn: config.drawn.clone(),
        observed: config.observed,
        sizing: if model == TimedModel::Permutation {
            Sizing::Expected
        } else {
            Sizing::Records
        },
    };
    let (outcome, class_totals) = scan_model(
        &setup,
        model,
        &locations.of_point,
        records,
        config,
        (progress, stop),
    )?;
    let replicate_max = config.maxima(outcome.replicate_max);
    let clusters = select_cylinders(
        &Selection {
            x: &locations.x,
            y: &locations.y,
            weight: &weight,
            centres: &centres,
            limits: setup.limits,
            max_clusters: config.max_clusters,
            report_p: config.report_p,
        },
        &outcome.best,
        &replicate_max,
        model == TimedModel::Permutation,
    );
    Ok(ScanResult {
        x: locations.x,
        y: locations.y,
        of_point: locations.of_point,
        weight,
        centres,
        clusters,
        replicate_max,
        windows: outcome.windows,
        class_totals,
        total_weight: total as f64,
    })
}

/// Runs the cylinder scan of `model`: the outcome and the records per class (Bernoulli
/// [controls, cases]; ordinal and multinomial 3 classes; permutation [records]).
fn scan_model(
    setup: &CylinderSetup<'_>,
    model: TimedModel,
    of_point: &[u32],
    records: &TimedRecords<'_>,
    config: &ScanConfig,
    (progress, stop): (&(dyn Fn(f64) + Sync), &AtomicBool),
) -> Result<(CylinderOutcome, Vec<u64>), Stopped> {
    let t = records.periods;
    let total = records.period.len() as u64;
    let (direction, seed) = (config.direction, config.seed);
    let labels = |width| TimedLabels {
        location: of_point,
        period: records.period,
        labels: records.labels,
        width,
        periods: t,
        seed,
    };
    let mut totals = [0u64; ORDINAL_CLASSES];
    for &l in records.labels {
        totals[usize::from(l).min(ORDINAL_CLASSES - 1)] += 1;
    }
    Ok(match model {
        TimedModel::Permutation => {
            let permutation = TimePermutation {
                location: of_point,
                period: records.period,
                periods: t,
                seed,
            };
            let m = SpaceTimePermutation::new(total);
            let outcome = scan_cylinders(setup, &m, &permutation, progress, stop)?;
            (outcome, vec![total])
        }
        TimedModel::Labels(PointModel::Bernoulli) => {
            let cases = totals[1];
            let m = Bernoulli::new(total, cases, direction);
            let outcome = scan_cylinders(setup, &m, &labels(1), progress, stop)?;
            (outcome, vec![total - cases, cases])
        }
        TimedModel::Labels(PointModel::Ordinal) => {
            let m = Ordinal::new(totals, direction);
            let outcome = scan_cylinders(setup, &m, &labels(ORDINAL_CLASSES), progress, stop)?;
            (outcome, totals.to_vec())
        }
        TimedModel::Labels(PointModel::Multinomial) => {
            let m = Multinomial::new(totals);
            let outcome = scan_cylinders(setup, &m, &labels(ORDINAL_CLASSES), progress, stop)?;
            (outcome, totals.to_vec())
        }
    })
}
