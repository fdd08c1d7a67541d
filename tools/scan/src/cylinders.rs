//! The exact space-time scan: every cylinder is a circle of the spatial scan (grown through the
//! nearest locations up to the size cap) × a run of 1…`max_duration` consecutive periods
//! (Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005, PLoS Med. 2(3): e59). Each
//! labelling (0 = the observed data, 1… = random ones) is scanned on its own: the counts of
//! every location and period, then per centre the per-period counts of the growing circle and
//! every run of periods summed from them. Monte Carlo: Dwass 1957.
//!
//! Work is parallel over labellings (rayon); each draws from its own seed and keeps an exact
//! maximum, so results do not depend on the number of threads.

use std::ops::Range;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::seq::SliceRandom;
use rayon::prelude::*;
use stance_core::montecarlo::replicate_rng;

use crate::engine::Stopped;
use crate::models::{Side, WindowModel, ORDINAL_CLASSES};
use crate::windows::{hilbert_order, GridIndex, Neighbourhood, Sites, WindowLimits};

/// The counts of one labelling per location and period.
pub trait CylinderLabelling: Sync {
    /// Adds the counts of labelling `replicate` to `out`, `[location][period][k]` with `width`
    /// numbers per cell.
    fn fill(&self, replicate: usize, out: &mut [u32]);
}

/// Records at a location and period; the space-time permutation relabelling shuffles the
/// records' periods among the records (every location total and period total stays fixed).
#[derive(Debug, Clone)]
pub struct TimePermutation<'a> {
    /// Location of each record.
    pub location: &'a [u32],
    /// Period of each record (0…periods−1).
    pub period: &'a [u32],
    /// Periods studied.
    pub periods: usize,
    /// Run seed.
    pub seed: u64,
}

impl CylinderLabelling for TimePermutation<'_> {
    fn fill(&self, replicate: usize, out: &mut [u32]) {
        let mut add = |periods: &[u32]| {
            for (&l, &t) in self.location.iter().zip(periods) {
                out[l as usize * self.periods + t as usize] += 1;
            }
        };
        if replicate == 0 {
            add(self.period);
        } else {
            let mut rng = replicate_rng(self.seed, replicate as u64);
            let mut shuffled = self.period.to_vec();
            shuffled.shuffle(&mut rng);
            add(&shuffled);
        }
    }
}

/// Records with a class label at a location and period; relabelling shuffles the labels among
/// the records (locations and periods stay, every class total stays fixed).
#[derive(Debug, Clone)]
pub struct TimedLabels<'a> {
    /// Location of each record.
    pub location: &'a [u32],
    /// Period of each record (0…periods−1).
    pub period: &'a [u32],
    /// Class of each record: with `width` 1, 1 = case and 0 = control; otherwise 0…width−1.
    pub labels: &'a [u8],
    /// Count components per cell.
    pub width: usize,
    /// Periods studied.
    pub periods: usize,
    /// Run seed.
    pub seed: u64,
}

impl CylinderLabelling for TimedLabels<'_> {
    fn fill(&self, replicate: usize, out: &mut [u32]) {
        let mut add = |labels: &[u8]| {
            for ((&l, &t), &label) in self.location.iter().zip(self.period).zip(labels) {
                let cell = l as usize * self.periods + t as usize;
                if self.width == 1 {
                    out[cell] += u32::from(label == 1);
                } else {
                    out[cell * self.width + label as usize] += 1;
                }
            }
        };
        if replicate == 0 {
            add(self.labels);
        } else {
            let mut rng = replicate_rng(self.seed, replicate as u64);
            let mut shuffled = self.labels.to_vec();
            shuffled.shuffle(&mut rng);
            add(&shuffled);
        }
    }
}

/// What a model is given as a cylinder's size.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sizing {
    /// The records inside the cylinder (case/control models).
    Records,
    /// The records expected inside from the margins, c(circle)·c(periods)/C (space-time
    /// permutation).
    Expected,
}

/// What the space-time scan works on.
#[derive(Debug, Clone)]
pub struct CylinderSetup<'a> {
    /// Location eastings (m).
    pub x: &'a [f64],
    /// Location northings (m).
    pub y: &'a [f64],
    /// Records of each location over all periods (what the circle cap counts).
    pub weight: &'a [f64],
    /// Records per location and period, `[location][period]`.
    pub records: &'a [u32],
    /// Periods studied.
    pub periods: usize,
    /// Longest run of periods.
    pub max_duration: usize,
    /// Window centres (m).
    pub centres: &'a [(f64, f64)],
    /// Circle limits.
    pub limits: WindowLimits,
    /// The random labellings (replicates, from 0) this run draws: all of them, or one shard's
    /// block. Replicate r is labelling r + 1 and draws from its own seed.
    pub drawn: Range<usize>,
    /// Whether the observed data are scanned too (not in a shard, which only draws).
    pub observed: bool,
    /// What the model is given as size.
    pub sizing: Sizing,
}

/// The best cylinder of one centre in the observed data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CylinderBest {
    /// Log-likelihood ratio.
    pub llr: f64,
    /// Side.
    pub side: Side,
    /// Locations inside the circle (the nearest ones).
    pub locations: usize,
    /// Distance of the farthest location inside (m).
    pub radius_m: f64,
    /// Distance of the nearest location outside (m; infinity when none).
    pub next_distance_m: f64,
    /// First period of the run (0…periods−1).
    pub first_period: usize,
    /// Periods in the run.
    pub periods: usize,
    /// Records inside the cylinder.
    pub records: u64,
    /// Records expected inside from the margins (space-time permutation), else records.
    pub size: f64,
    /// Counts inside (first `WIDTH` used).
    pub inside: [u32; ORDINAL_CLASSES],
}

/// The result of a space-time scan.
#[derive(Debug, Clone)]
pub struct CylinderOutcome {
    /// Per centre, its best observed cylinder.
    pub best: Vec<Option<CylinderBest>>,
    /// Per random labelling, the maximum ratio over all cylinders.
    pub replicate_max: Vec<f64>,
    /// Cylinders per labelling.
    pub windows: u64,
}

/// One centre's circles: locations nearest first and where a circle closes.
#[derive(Debug, Clone)]
struct Circles {
    order: Vec<u32>,
    distance_m: Vec<f64>,
    closes: Vec<bool>,
    next_distance_m: f64,
}

/// The circles of every centre, found once.
fn circles(setup: &CylinderSetup<'_>) -> Vec<Circles> {
    let index = GridIndex::new(setup.x, setup.y);
    let sites = Sites {
        index: &index,
        x: setup.x,
        y: setup.y,
        weight: setup.weight,
    };
    setup
        .centres
        .par_iter()
        .map_init(Neighbourhood::default, |hood, &(cx, cy)| {
            hood.fill(&sites, (cx, cy), setup.limits);
            Circles {
                order: hood.order.clone(),
                distance_m: hood.distance_m.clone(),
                closes: hood.closes_window.clone(),
                next_distance_m: hood.next_distance_m,
            }
        })
        .collect()
}

/// Runs the space-time scan.
///
/// # Errors
/// [`Stopped`] once `stop` is set.
pub fn scan_cylinders<M: WindowModel, L: CylinderLabelling>(
    setup: &CylinderSetup<'_>,
    model: &M,
    labelling: &L,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
) -> Result<CylinderOutcome, Stopped> {
    let circles = circles(setup);
    let t = setup.periods;
    let mut period_total = vec![0u64; t];
    for row in setup.records.chunks(t.max(1)) {
        for (total, &r) in period_total.iter_mut().zip(row) {
            *total += u64::from(r);
        }
    }
    let scanner = Scanner {
        setup,
        model,
        circles: &circles,
        visit: hilbert_order(setup.centres),
        period_total: &period_total,
        period_prefix: std::iter::once(0.0)
            .chain(period_total.iter().scan(0u64, |sum, &v| {
                *sum += v;
                Some(*sum as f64)
            }))
            .collect(),
        all_records: period_total.iter().sum::<u64>() as f64,
        runs_per_circle: (0..t)
            .map(|first| setup.max_duration.min(t - first) as u64)
            .sum(),
    };
    // The observed data first (when asked), then the random labellings drawn.
    let scanned: Vec<usize> = (usize::from(!setup.observed)..1)
        .chain(setup.drawn.clone().map(|r| r + 1))
        .collect();
    let labellings = scanned.len();
    let done = AtomicUsize::new(0);
    let cells = setup.x.len() * t * M::WIDTH;
    let results: Vec<Option<Scanned>> = scanned
        .par_iter()
        .map_init(
            || vec![0u32; cells],
            |counts, &r| {
                if stop.load(Ordering::Relaxed) {
                    return None;
                }
                counts.iter_mut().for_each(|c| *c = 0);
                labelling.fill(r, counts);
                let scanned = scanner.labelling(counts, r == 0);
                let finished = done.fetch_add(1, Ordering::Relaxed) + 1;
                progress(finished as f64 / labellings as f64);
                Some(scanned)
            },
        )
        .collect();
    if stop.load(Ordering::Relaxed) {
        return Err(Stopped);
    }
    let mut outcome = CylinderOutcome {
        best: Vec::new(),
        replicate_max: Vec::with_capacity(labellings),
        windows: 0,
    };
    for (&r, result) in scanned.iter().zip(results) {
        let (max, best, windows) = result.ok_or(Stopped)?;
        if r == 0 {
            outcome.best = best;
            outcome.windows = windows;
        } else {
            outcome.replicate_max.push(max);
        }
    }
    Ok(outcome)
}

/// One labelling scanned: its maximum ratio, the best cylinder of each centre (observed data
/// only) and the number of cylinders.
type Scanned = (f64, Vec<Option<CylinderBest>>, u64);

/// Scans one labelling's counts.
struct Scanner<'a, M> {
    setup: &'a CylinderSetup<'a>,
    model: &'a M,
    circles: &'a [Circles],
    /// The order the centres are visited in.
    visit: Vec<u32>,
    period_total: &'a [u64],
    /// Records of periods 0…k−1, for k = 0…periods (exact: whole numbers below 2^53).
    period_prefix: Vec<f64>,
    all_records: f64,
    /// Cylinders per circle.
    runs_per_circle: u64,
}

/// Room for [`Scanner::expected_runs`]'s screening of one circle: the circle's records of
/// periods 0…k−1 (as f64, exact) and, per run length and first period, whether the run passes
/// the bound.
#[derive(Default)]
struct Screen {
    prefix: Vec<f64>,
    passes: Vec<bool>,
}

impl<M: WindowModel> Scanner<'_, M> {
    /// The maximum ratio over all cylinders, the best cylinder of each centre (when
    /// `observed`) and the number of cylinders.
    fn labelling(&self, counts: &[u32], observed: bool) -> Scanned {
        let t = self.setup.periods;
        let width = M::WIDTH;
        let mut acc = vec![0u32; t * width];
        let mut records = vec![0u32; t];
        let mut screen = Screen::default();
        let mut max = 0.0f64;
        let mut best = if observed {
            vec![None; self.circles.len()]
        } else {
            Vec::new()
        };
        let mut windows = 0u64;
        // Centres along a Hilbert curve: the next centre's circles mostly hold the places whose
        // counts were just read, still in cache. The maxima do not depend on the order.
        for &centre in &self.visit {
            let circles = &self.circles[centre as usize];
            acc.iter_mut().for_each(|a| *a = 0);
            records.iter_mut().for_each(|a| *a = 0);
            let mut circle_records = 0.0;
            let mut centre_best: Option<CylinderBest> = None;
            for (step, &location) in circles.order.iter().enumerate() {
                let l = location as usize;
                for (a, &c) in acc
                    .iter_mut()
                    .zip(&counts[l * t * width..(l + 1) * t * width])
                {
                    *a += c;
                }
                // The permutation model reads the records per period only for the observed
                // data's best cylinders.
                if observed || self.setup.sizing == Sizing::Records {
                    for (a, &c) in records
                        .iter_mut()
                        .zip(&self.setup.records[l * t..(l + 1) * t])
                    {
                        *a += c;
                    }
                }
                circle_records += self.setup.weight[l];
                if !circles.closes[step] {
                    continue;
                }
                let circle = Circle {
                    acc: &acc,
                    records: &records,
                    circle_records,
                };
                let floor = centre_best.map_or(0.0, |b| b.llr);
                let found = match self.setup.sizing {
                    Sizing::Records => self.runs(&circle, observed, floor, &mut max, &mut windows),
                    Sizing::Expected => {
                        windows += self.runs_per_circle;
                        self.expected_runs(&circle, observed, floor, &mut max, &mut screen)
                    }
                };
                if let Some(mut found) = found {
                    if centre_best.is_none_or(|b| found.llr > b.llr) {
                        found.locations = step + 1;
                        found.radius_m = circles.distance_m[step];
                        found.next_distance_m = circles
                            .distance_m
                            .get(step + 1)
                            .copied()
                            .unwrap_or(circles.next_distance_m);
                        centre_best = Some(found);
                    }
                }
            }
            if observed {
                best[centre as usize] = centre_best;
            }
        }
        (max, best, windows)
    }

    /// [`Scanner::runs`] for the space-time permutation model, with most cylinders ruled out by
    /// an upper bound on the ratio (ln y ≤ y − 1 on both terms) written without a division: with P = c(circle)·c(periods) (so
    /// μ = P/C), c > μ ⇔ cC − P > 0 and the bound (c − μ)²·C/(μ(C − μ)) ≤ floor ⇔
    /// (cC − P)²·C ≤ floor·P·(C² − P). Widened by 1e-9 relative so rounding never hides a
    /// cylinder that beats the floor.
    fn expected_runs(
        &self,
        circle: &Circle<'_>,
        observed: bool,
        centre_floor: f64,
        max: &mut f64,
        screen: &mut Screen,
    ) -> Option<CylinderBest> {
        let t = self.setup.periods;
        let total = self.all_records;
        let total2 = total * total;
        let floor_at_start = if observed { centre_floor } else { *max };
        if !self.screen(circle, floor_at_start, screen) {
            return None;
        }
        let mut best: Option<CylinderBest> = None;
        let mut floor = if observed { centre_floor } else { *max };
        for first in 0..t {
            let (mut c, mut n, mut in_periods) = (0u32, 0u32, 0u64);
            for last in first..t.min(first + self.setup.max_duration) {
                c += circle.acc[last];
                n += circle.records[last];
                in_periods += self.period_total[last];
                if !screen.passes[(last - first) * t + first] {
                    continue;
                }
                let p = circle.circle_records * in_periods as f64;
                let excess = f64::from(c) * total - p;
                if excess <= 0.0
                    || excess * excess * total * (1.0 + 1e-9) <= floor * p * (total2 - p)
                {
                    continue;
                }
                let size = circle.circle_records * in_periods as f64 / total;
                let (llr, side) = self.model.llr(&self.model.window(size), &[c]);
                if llr <= floor {
                    continue;
                }
                floor = llr;
                if observed {
                    let mut inside = [0u32; ORDINAL_CLASSES];
                    inside[0] = c;
                    best = Some(CylinderBest {
                        llr,
                        side,
                        locations: 0,
                        radius_m: 0.0,
                        next_distance_m: f64::INFINITY,
                        first_period: first,
                        periods: last - first + 1,
                        records: u64::from(n),
                        size,
                        inside,
                    });
                } else {
                    *max = llr;
                }
            }
        }
        best
    }

    /// Marks in `screen.passes` the runs of periods (by length − 1, then first period) of one
    /// circle that pass [`Scanner::expected_runs`]'s bound at `floor`, and says whether any does.
    /// The test is the same arithmetic on the same numbers as `expected_runs` (counts and
    /// period totals are whole numbers below 2^53, so differences of their running sums are
    /// exact), done for all first periods of one length at once; as the floor only rises,
    /// every run `expected_runs` would score is marked.
    fn screen(&self, circle: &Circle<'_>, floor: f64, screen: &mut Screen) -> bool {
        let t = self.setup.periods;
        let total = self.all_records;
        let total2 = total * total;
        screen.prefix.clear();
        screen.prefix.push(0.0);
        let mut sum = 0u32;
        for &c in &circle.acc[..t] {
            sum += c;
            screen.prefix.push(f64::from(sum));
        }
        let lengths = self.setup.max_duration.min(t);
        if screen.passes.len() < lengths * t {
            screen.passes.resize(lengths * t, false);
        }
        let bound = Bound {
            circle_records: circle.circle_records,
            total,
            total2,
            floor,
        };
        screen_rows(
            &screen.prefix,
            &self.period_prefix,
            lengths,
            bound,
            &mut screen.passes,
        )
    }

    /// Scores every run of periods of one circle for the case/control models (the size is the
    /// records inside): raises `max`, counts the cylinders and, when `observed`, returns the
    /// circle's best cylinder above `centre_floor` (the centre's best
    /// so far; earliest, then shortest, on ties).
    fn runs(
        &self,
        circle: &Circle<'_>,
        observed: bool,
        centre_floor: f64,
        max: &mut f64,
        windows: &mut u64,
    ) -> Option<CylinderBest> {
        let t = self.setup.periods;
        let width = M::WIDTH;
        let mut best: Option<CylinderBest> = None;
        for first in 0..t {
            let mut inside = [0u32; ORDINAL_CLASSES];
            let mut n = 0u64;
            for last in first..t.min(first + self.setup.max_duration) {
                for (k, value) in inside.iter_mut().take(width).enumerate() {
                    *value += circle.acc[last * width + k];
                }
                n += u64::from(circle.records[last]);
                *windows += 1;
                if n == 0 {
                    continue;
                }
                let size = n as f64;
                let (llr, side) = self.model.llr(&self.model.window(size), &inside[..width]);
                if llr > *max {
                    *max = llr;
                }
                if observed && llr > centre_floor && best.is_none_or(|b| llr > b.llr) {
                    best = Some(CylinderBest {
                        llr,
                        side,
                        locations: 0,
                        radius_m: 0.0,
                        next_distance_m: f64::INFINITY,
                        first_period: first,
                        periods: last - first + 1,
                        records: n,
                        size,
                        inside,
                    });
                }
            }
        }
        best
    }
}

#[cfg(test)]
/// An upper bound on the space-time permutation ratio of a cylinder with `c` records where `mu`
/// are expected, out of `total`, that needs no logarithm (0 when c ≤ μ: high clusters only).
/// From ln y ≤ y − 1 on both terms: ln Λ ≤ (c − μ)·(c/μ − (C − c)/(C − μ)). Widened by 1e-9
/// relative so rounding never hides a cylinder that beats the floor.
#[inline(always)]
fn permutation_bound(c: f64, mu: f64, total: f64) -> f64 {
    if c <= mu || mu <= 0.0 {
        return 0.0;
    }
    let bound = (c - mu) * (c / mu - (total - c) / (total - mu));
    bound * (1.0 + 1e-9) + 1e-12
}

/// The constants of [`Scanner::expected_runs`]'s bound for one circle.
#[derive(Clone, Copy)]
struct Bound {
    circle_records: f64,
    total: f64,
    total2: f64,
    floor: f64,
}

/// One run length's screening: whether any run passes the bound and, with `MARK`, `out[f]`
/// whether the run from period f does, given the running sums of the circle's records and of
/// every period's records at the run's start (`lo`) and one past its end (`hi`). Branch-free, so
/// that it runs on vectors; the arithmetic is [`Scanner::expected_runs`]'s, operation for
/// operation.
#[inline(always)]
fn screen_row_body<const MARK: bool>(
    (counts_lo, counts_hi): (&[f64], &[f64]),
    (periods_lo, periods_hi): (&[f64], &[f64]),
    b: Bound,
    out: &mut [bool],
) -> bool {
    let mut any = false;
    for (f, (((&c0, &c1), &p0), &p1)) in counts_lo
        .iter()
        .zip(counts_hi)
        .zip(periods_lo)
        .zip(periods_hi)
        .enumerate()
    {
        let c = c1 - c0;
        let p = b.circle_records * (p1 - p0);
        let excess = c * b.total - p;
        let passes = (excess > 0.0)
            & (excess * excess * b.total * (1.0 + 1e-9) > b.floor * p * (b.total2 - p));
        if MARK {
            out[f] = passes;
        }
        any |= passes;
    }
    any
}

/// Every run length's screening (`passes[d·t + f]` for runs of d + 1 periods from period f,
/// t = `counts.len()` − 1) in one call, so that the loops compile together: first whether any
/// run passes, then, only if one does, which.
#[inline(always)]
fn screen_rows_body(
    counts: &[f64],
    periods: &[f64],
    lengths: usize,
    b: Bound,
    passes: &mut [bool],
) -> bool {
    let t = counts.len() - 1;
    let mut any = false;
    for d in 0..lengths {
        let starts = t - d;
        any |= screen_row_body::<false>(
            (&counts[..starts], &counts[d + 1..d + 1 + starts]),
            (&periods[..starts], &periods[d + 1..d + 1 + starts]),
            b,
            &mut [],
        );
    }
    if !any {
        return false;
    }
    for d in 0..lengths {
        let starts = t - d;
        any |= screen_row_body::<true>(
            (&counts[..starts], &counts[d + 1..d + 1 + starts]),
            (&periods[..starts], &periods[d + 1..d + 1 + starts]),
            b,
            &mut passes[d * t..d * t + starts],
        );
    }
    any
}

/// [`screen_rows_body`] compiled for AVX2.
///
/// # Safety
/// Only on a processor with AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn screen_rows_avx2(
    counts: &[f64],
    periods: &[f64],
    lengths: usize,
    b: Bound,
    passes: &mut [bool],
) -> bool {
    screen_rows_body(counts, periods, lengths, b, passes)
}

/// [`screen_rows_body`] on the widest vectors the processor has (the same results on any).
fn screen_rows(
    counts: &[f64],
    periods: &[f64],
    lengths: usize,
    b: Bound,
    passes: &mut [bool],
) -> bool {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: AVX2 is present.
        return unsafe { screen_rows_avx2(counts, periods, lengths, b, passes) };
    }
    screen_rows_body(counts, periods, lengths, b, passes)
}

/// The per-period counts of one circle.
struct Circle<'a> {
    acc: &'a [u32],
    records: &'a [u32],
    circle_records: f64,
}

#[cfg(test)]
mod tests;
