//! The exact circular scan over all labellings at once: per centre the neighbours are sorted
//! once, the counts of the observed and of every random labelling are accumulated together, and
//! each labelling keeps its maximum ratio (Kulldorff 1997; Monte Carlo: Dwass 1957).
//!
//! Work is parallel over centres (rayon); each labelling draws from its own seed, and the
//! maximum is exact and order-free, so results do not depend on the number of threads.
//!
//! The counts matrix (`[location][labelling]`) is far larger than the caches, so centres are
//! visited along a Hilbert curve and the matrix rows are stored in the same order: neighbouring
//! centres share most of their neighbours, whose rows are then still cached. A location's row
//! holds bytes when none of its counts can exceed 255, else u16 or u32. Neither changes a
//! result: neighbourhoods, their ties and the sums along them are those of the input order.

use std::ops::Range;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::seq::SliceRandom;
use rand::Rng;
use rayon::prelude::*;
use stance_core::montecarlo::replicate_rng;

use crate::models::{Side, WindowModel, ORDINAL_CLASSES};
use crate::windows::{hilbert_order, GridIndex, Neighbourhood, Sites, WindowLimits};

mod kernels;

use kernels::{prefetch, Count, Kernels, Row};

/// The counts of one labelling (0 = the observed data, 1… = random relabellings).
pub trait Labelling: Sync {
    /// Adds the counts of labelling `replicate` to `out` (location-major, `width` per location).
    fn fill(&self, replicate: usize, out: &mut [u32]);
    /// Per location (of `locations`), an upper bound on any one count that
    /// [`Labelling::fill`] adds there.
    fn count_bounds(&self, locations: usize) -> Vec<u64>;
}

/// Records on locations, each with a class label; relabelling shuffles the labels among the
/// records (the totals of every class stay fixed).
#[derive(Debug, Clone)]
pub struct PointLabels<'a> {
    /// Location of each record.
    pub of_point: &'a [u32],
    /// Class of each record: with `width` 1, 1 = case and 0 = control; otherwise 0…width−1.
    pub labels: &'a [u8],
    /// Count components per location.
    pub width: usize,
    /// Run seed.
    pub seed: u64,
}

impl Labelling for PointLabels<'_> {
    fn count_bounds(&self, locations: usize) -> Vec<u64> {
        // A location never holds more of one class than it holds records.
        let mut records = vec![0u64; locations];
        for &location in self.of_point {
            records[location as usize] += 1;
        }
        records
    }

    fn fill(&self, replicate: usize, out: &mut [u32]) {
        let add = |out: &mut [u32], location: u32, label: u8| {
            if self.width == 1 {
                out[location as usize] += u32::from(label == 1);
            } else {
                out[location as usize * self.width + label as usize] += 1;
            }
        };
        if replicate == 0 {
            for (&location, &label) in self.of_point.iter().zip(self.labels) {
                add(out, location, label);
            }
        } else {
            let mut rng = replicate_rng(self.seed, replicate as u64);
            let mut shuffled = self.labels.to_vec();
            shuffled.shuffle(&mut rng);
            for (&location, &label) in self.of_point.iter().zip(&shuffled) {
                add(out, location, label);
            }
        }
    }
}

/// Observed cases on areas; relabelling spreads the same total over the areas as a multinomial
/// with probabilities proportional to their expected cases.
#[derive(Debug, Clone)]
pub struct AreaCases<'a> {
    /// Observed cases per area.
    pub cases: &'a [u32],
    /// Running sum of expected cases (length areas), ending at the total.
    pub cumulative_expected: &'a [f64],
    /// Run seed.
    pub seed: u64,
}

impl Labelling for AreaCases<'_> {
    fn count_bounds(&self, locations: usize) -> Vec<u64> {
        // A multinomial draw may put every case on one area.
        vec![self.cases.iter().map(|c| u64::from(*c)).sum(); locations]
    }

    fn fill(&self, replicate: usize, out: &mut [u32]) {
        if replicate == 0 {
            for (o, c) in out.iter_mut().zip(self.cases) {
                *o += c;
            }
            return;
        }
        let total_cases: u64 = self.cases.iter().map(|c| u64::from(*c)).sum();
        let total = self.cumulative_expected.last().copied().unwrap_or(0.0);
        let mut rng = replicate_rng(self.seed, replicate as u64);
        for _ in 0..total_cases {
            let u = rng.random::<f64>() * total;
            let area = self
                .cumulative_expected
                .partition_point(|&c| c <= u)
                .min(out.len() - 1);
            out[area] += 1;
        }
    }
}

/// What the scan works on.
#[derive(Debug, Clone)]
pub struct ScanSetup<'a> {
    /// Location eastings (m).
    pub x: &'a [f64],
    /// Location northings (m).
    pub y: &'a [f64],
    /// Size of each location: records, or expected cases for the Poisson model; also what
    /// the window cap counts.
    pub weight: &'a [f64],
    /// Window centres (m).
    pub centres: &'a [(f64, f64)],
    /// Window limits.
    pub limits: WindowLimits,
    /// The random labellings (replicates, from 0) this run draws: all of them, or one shard's
    /// block. Replicate r is labelling r + 1 and draws from its own seed.
    pub drawn: Range<usize>,
    /// Whether the observed data are scanned too (not in a shard, which only draws).
    pub observed: bool,
    /// Memory for the counts of one block of labellings (bytes).
    pub block_bytes: usize,
}

/// The best window of one centre in the observed data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CentreBest {
    /// Log-likelihood ratio.
    pub llr: f64,
    /// Side.
    pub side: Side,
    /// Locations inside (the nearest ones).
    pub locations: usize,
    /// Size inside (records or expected cases).
    pub size: f64,
    /// Distance of the farthest location inside (m).
    pub radius_m: f64,
    /// Distance of the nearest location outside (m; infinity when none).
    pub next_distance_m: f64,
    /// Counts inside (first `WIDTH` used).
    pub inside: [u32; ORDINAL_CLASSES],
}

/// The result of a scan.
#[derive(Debug, Clone)]
pub struct ScanOutcome {
    /// Per centre, its best observed window (None when no window departs in the direction).
    pub best: Vec<Option<CentreBest>>,
    /// Per random labelling drawn (`ScanSetup::drawn`, in order), the maximum ratio over all
    /// windows.
    pub replicate_max: Vec<f64>,
    /// Windows per labelling.
    pub windows: u64,
}

/// The scan was stopped by the interrupt flag.
#[derive(Debug, Clone, Copy, thiserror::Error)]
#[error("interrupted")]
pub struct Stopped;

/// How many neighbours ahead a row is prefetched: enough to cover a miss to memory while the
/// rows in between are added.
const PREFETCH_AHEAD: usize = 4;

/// Marks a wide row in [`Layout::row_of`].
const WIDE_ROW: u32 = 1 << 31;

/// Where each location's counts live: narrow rows for the locations whose counts fit in a byte,
/// wide rows for the rest, each kind in the order of a Hilbert curve through the locations.
struct Layout {
    /// Per location: its row, with [`WIDE_ROW`] set for a wide one.
    row_of: Vec<u32>,
    /// Locations of the narrow rows, in row order.
    narrow_at: Vec<u32>,
    /// Locations of the wide rows, in row order.
    wide_at: Vec<u32>,
}

impl Layout {
    fn new(x: &[f64], y: &[f64], bounds: &[u64]) -> Self {
        let points: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
        let mut layout = Layout {
            row_of: vec![0; x.len()],
            narrow_at: Vec::new(),
            wide_at: Vec::new(),
        };
        for location in hilbert_order(&points) {
            let i = location as usize;
            if bounds[i] <= u8::LARGEST {
                layout.row_of[i] = layout.narrow_at.len() as u32;
                layout.narrow_at.push(location);
            } else {
                layout.row_of[i] = layout.wide_at.len() as u32 | WIDE_ROW;
                layout.wide_at.push(location);
            }
        }
        layout
    }
}

struct Worker {
    acc: Vec<u32>,
    max: Vec<f64>,
    band_cache: Vec<(u64, u32, u32)>,
    generation: u64,
    floor: f64,
    hood: Neighbourhood,
    rows: Vec<u32>,
    outside: Vec<u32>,
    best: Vec<(usize, CentreBest)>,
    windows: u64,
}

/// Runs the scan: the best observed window per centre and the maximum of every replicate.
///
/// # Errors
/// [`Stopped`] once `stop` is set.
pub fn scan<M: WindowModel, L: Labelling>(
    setup: &ScanSetup<'_>,
    model: &M,
    labelling: &L,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
) -> Result<ScanOutcome, Stopped> {
    scan_with(setup, model, labelling, progress, stop, Kernels::detect())
}

/// [`scan`] with the row kernels given.
fn scan_with<M: WindowModel, L: Labelling>(
    setup: &ScanSetup<'_>,
    model: &M,
    labelling: &L,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
    kernels: Kernels,
) -> Result<ScanOutcome, Stopped> {
    let bounds = labelling.count_bounds(setup.x.len());
    let layout = Layout::new(setup.x, setup.y, &bounds);
    let widest = layout
        .wide_at
        .iter()
        .map(|&l| bounds[l as usize])
        .max()
        .unwrap_or(0);
    if widest <= u16::LARGEST {
        scan_stored::<M, L, u16>(setup, model, labelling, &layout, progress, stop, kernels)
    } else {
        scan_stored::<M, L, u32>(setup, model, labelling, &layout, progress, stop, kernels)
    }
}

/// The scan with wide rows stored as `W`.
fn scan_stored<M: WindowModel, L: Labelling, W: Count>(
    setup: &ScanSetup<'_>,
    model: &M,
    labelling: &L,
    layout: &Layout,
    progress: &(dyn Fn(f64) + Sync),
    stop: &AtomicBool,
    kernels: Kernels,
) -> Result<ScanOutcome, Stopped> {
    let width = M::WIDTH;
    // The observed data first (when asked), then the random labellings drawn.
    let observed = usize::from(setup.observed);
    let scanned: Vec<usize> = (1 - observed..1)
        .chain(setup.drawn.clone().map(|r| r + 1))
        .collect();
    let labellings = scanned.len();
    let per_labelling =
        ((layout.narrow_at.len() + layout.wide_at.len() * std::mem::size_of::<W>()) * width).max(1);
    let block = (setup.block_bytes / per_labelling).clamp(1, labellings);
    let index = GridIndex::new(setup.x, setup.y);
    let centre_order = hilbert_order(setup.centres);
    let mut outcome = ScanOutcome {
        best: vec![None; setup.centres.len()],
        replicate_max: vec![0.0; labellings - observed],
        windows: 0,
    };
    let blocks = labellings.div_ceil(block);
    let done = AtomicUsize::new(0);
    let work = blocks * setup.centres.len();
    for b in 0..blocks {
        let first = b * block;
        let used = block.min(labellings - first);
        let (narrow, wide) =
            block_counts::<L, W>(labelling, layout, width, &scanned[first..first + used]);
        if stop.load(Ordering::Relaxed) {
            return Err(Stopped);
        }
        let table = Table {
            narrow: &narrow,
            wide: &wide,
            row_of: &layout.row_of,
            used,
            has_observed: first == 0 && setup.observed,
            kernels,
        };
        let merged = centre_order
            .par_chunks(8)
            .fold(
                || Worker {
                    acc: vec![0; used * width],
                    max: vec![0.0; used],
                    band_cache: Vec::new(),
                    generation: 0,
                    floor: f64::NAN,
                    hood: Neighbourhood::default(),
                    rows: Vec::new(),
                    outside: Vec::new(),
                    best: Vec::new(),
                    windows: 0,
                },
                |mut worker, chunk| {
                    if stop.load(Ordering::Relaxed) {
                        return worker;
                    }
                    for &centre in chunk {
                        scan_centre(setup, model, &index, &table, centre as usize, &mut worker);
                    }
                    let finished = done.fetch_add(chunk.len(), Ordering::Relaxed) + chunk.len();
                    progress(finished as f64 / work as f64);
                    worker
                },
            )
            .map(|w| (w.max, w.best, w.windows))
            .reduce(
                || (vec![0.0; used], Vec::new(), 0),
                |(mut max_a, mut best_a, win_a), (max_b, best_b, win_b)| {
                    for (a, b) in max_a.iter_mut().zip(max_b) {
                        *a = a.max(b);
                    }
                    best_a.extend(best_b);
                    (max_a, best_a, win_a + win_b)
                },
            );
        if stop.load(Ordering::Relaxed) {
            return Err(Stopped);
        }
        let (max, best, windows) = merged;
        for (r, value) in max.into_iter().enumerate() {
            let position = first + r;
            if position >= observed {
                outcome.replicate_max[position - observed] = value;
            }
        }
        if first == 0 && setup.observed {
            outcome.windows = windows;
            for (centre, found) in best {
                outcome.best[centre] = Some(found);
            }
        }
    }
    Ok(outcome)
}

/// The counts of one block of labellings and how to find a location's row.
struct Table<'a, W> {
    /// Narrow rows `[row][labelling][k]`.
    narrow: &'a [u8],
    /// Wide rows `[row][labelling][k]`.
    wide: &'a [W],
    /// Row of each location ([`Layout::row_of`]).
    row_of: &'a [u32],
    /// Labellings in the block.
    used: usize,
    /// Whether labelling 0 (the observed data) is the block's first.
    has_observed: bool,
    kernels: Kernels,
}

impl<W> Table<'_, W> {
    /// The row numbered `row` (as in [`Layout::row_of`]).
    #[inline(always)]
    fn row(&self, row: u32, stride: usize) -> Row<'_, W> {
        if row & WIDE_ROW == 0 {
            let at = row as usize * stride;
            Row::Narrow(&self.narrow[at..at + stride])
        } else {
            let at = (row & !WIDE_ROW) as usize * stride;
            Row::Wide(&self.wide[at..at + stride])
        }
    }
}

/// Counts of the labellings `block` (labelling numbers), as narrow and wide rows
/// (`[row][labelling][k]`).
fn block_counts<L: Labelling, W: Count>(
    labelling: &L,
    layout: &Layout,
    width: usize,
    block: &[usize],
) -> (Vec<u8>, Vec<W>) {
    let used = block.len();
    let locations = layout.row_of.len();
    let stride = used * width;
    let mut narrow = vec![0u8; layout.narrow_at.len() * stride];
    let mut wide = vec![W::default(); layout.wide_at.len() * stride];
    // A few labellings at a time in parallel, then scattered into place in parallel.
    let batch = rayon::current_num_threads().max(1) * 4;
    let mut start = 0;
    while start < used {
        let end = (start + batch).min(used);
        let columns: Vec<Vec<u32>> = (start..end)
            .into_par_iter()
            .map(|r| {
                let mut column = vec![0u32; locations * width];
                labelling.fill(block[r], &mut column);
                column
            })
            .collect();
        scatter(
            &columns,
            &layout.narrow_at,
            width,
            start,
            stride,
            &mut narrow,
        );
        scatter(&columns, &layout.wide_at, width, start, stride, &mut wide);
        start = end;
    }
    (narrow, wide)
}

/// Copies labellings `start…` (one column each, location-major) into the rows of the locations
/// `at`.
fn scatter<T: Count>(
    columns: &[Vec<u32>],
    at: &[u32],
    width: usize,
    start: usize,
    stride: usize,
    rows: &mut [T],
) {
    rows.par_chunks_mut(stride.max(1))
        .zip(at.par_iter())
        .for_each(|(row, &location)| {
            let from = location as usize * width;
            for (j, column) in columns.iter().enumerate() {
                let r = start + j;
                for (cell, &value) in row[r * width..(r + 1) * width]
                    .iter_mut()
                    .zip(&column[from..from + width])
                {
                    *cell = T::narrow(value);
                }
            }
        });
}

/// Scores every window around centre number `centre` for every labelling of the block: the
/// observed data's best window and each random labelling's running maximum go into `worker`.
#[inline(never)]
fn scan_centre<M: WindowModel, W: Count>(
    setup: &ScanSetup<'_>,
    model: &M,
    index: &GridIndex,
    table: &Table<'_, W>,
    centre: usize,
    worker: &mut Worker,
) {
    let (cx, cy) = setup.centres[centre];
    let width = M::WIDTH;
    let used = table.used;
    let has_observed = table.has_observed;
    let kernels = table.kernels;
    let stride = used * width;
    let sites = Sites {
        index,
        x: setup.x,
        y: setup.y,
        weight: setup.weight,
    };
    worker.hood.fill(&sites, (cx, cy), setup.limits);
    if worker.hood.order.is_empty() {
        return;
    }
    let first_random = usize::from(has_observed);
    // A window whose ratio is ≤ the smallest maximum so far cannot raise any maximum.
    let floor = worker.max[first_random..]
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min);
    let floor = if floor.is_finite() { floor } else { 0.0 };
    if floor != worker.floor {
        worker.floor = floor;
        worker.generation += 1;
    }
    worker.acc.iter_mut().for_each(|a| *a = 0);
    let mut size = 0.0;
    let mut best: Option<CentreBest> = None;
    let Worker {
        acc,
        max,
        band_cache,
        generation,
        hood,
        rows,
        outside,
        windows,
        ..
    } = worker;
    rows.clear();
    rows.extend(hood.order.iter().map(|&l| table.row_of[l as usize]));
    let row_at = |row: u32| table.row(row, stride);
    for &row in rows.iter().take(PREFETCH_AHEAD) {
        prefetch(row_at(row));
    }
    // Labellings 0…split−1 are never skipped (the observed data, in the first block).
    let split = first_random.min(used);
    for (step, &location) in hood.order.iter().enumerate() {
        if let Some(&ahead) = rows.get(step + PREFETCH_AHEAD) {
            prefetch(row_at(ahead));
        }
        let row = row_at(rows[step]);
        size += setup.weight[location as usize];
        if !hood.closes_window[step] {
            kernels.add(acc, row);
            continue;
        }
        *windows += 1;
        let window = model.window(size);
        let band = if width == 1 {
            match model.band_key(&window) {
                Some(key) => {
                    if key >= band_cache.len() {
                        band_cache.resize(key + 1, (0, 1, 0));
                    }
                    let cached = band_cache[key];
                    if cached.0 == *generation {
                        Some((cached.1, cached.2))
                    } else {
                        let fresh = model.band(&window, floor);
                        if let Some((lo, hi)) = fresh {
                            band_cache[key] = (*generation, lo, hi);
                        }
                        fresh
                    }
                }
                None => model.band(&window, floor),
            }
        } else {
            None
        };
        // With a band, the pass that adds the row also picks out the random labellings whose
        // count leaves it; those inside cannot raise their maximum and are skipped.
        let nonempty_band = band.filter(|(lo, hi)| lo <= hi);
        match nonempty_band {
            Some((lo, hi)) => {
                let (observed, random) = row.split_at(split);
                kernels.add(&mut acc[..split], observed);
                outside.clear();
                kernels.add_outside(&mut acc[split..], random, (lo, hi), outside);
            }
            None => kernels.add(acc, row),
        }
        if has_observed {
            let (llr, side) = model.llr(&window, &acc[..width]);
            if llr > 0.0 && best.is_none_or(|b| llr > b.llr) {
                let mut inside = [0u32; ORDINAL_CLASSES];
                inside[..width].copy_from_slice(&acc[..width]);
                best = Some(CentreBest {
                    llr,
                    side,
                    locations: step + 1,
                    size,
                    radius_m: hood.distance_m[step],
                    next_distance_m: hood
                        .distance_m
                        .get(step + 1)
                        .copied()
                        .unwrap_or(hood.next_distance_m),
                    inside,
                });
            }
        }
        match (band, nonempty_band) {
            (_, Some(_)) => {
                for &offset in outside.iter() {
                    let r = split + offset as usize;
                    let (llr, _) = model.llr(&window, &acc[r..r + 1]);
                    if llr > max[r] {
                        max[r] = llr;
                    }
                }
            }
            (Some(_), None) => {
                // An empty band: every labelling may beat the floor.
                for r in first_random..used {
                    let (llr, _) = model.llr(&window, &acc[r..r + 1]);
                    if llr > max[r] {
                        max[r] = llr;
                    }
                }
            }
            (None, _) => {
                for r in first_random..used {
                    let (llr, _) = model.llr(&window, &acc[r * width..(r + 1) * width]);
                    if llr > max[r] {
                        max[r] = llr;
                    }
                }
            }
        }
    }
    if let Some(found) = best {
        worker.best.push((centre, found));
    }
}

#[cfg(test)]
mod tests;
