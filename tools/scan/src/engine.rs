//! The exact circular scan over all labellings at once: per centre the neighbours are sorted
//! once, the counts of the observed and of every random labelling are accumulated together, and
//! each labelling keeps its maximum ratio (Kulldorff 1997; Monte Carlo: Dwass 1957).
//!
//! Work is parallel over centres (rayon); each labelling draws from its own seed, and the
//! maximum is exact and order-free, so results do not depend on the number of threads.

use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::seq::SliceRandom;
use rand::Rng;
use rayon::prelude::*;
use stance_core::montecarlo::replicate_rng;

use crate::models::{Side, WindowModel, ORDINAL_CLASSES};
use crate::windows::{GridIndex, Neighbourhood, WindowLimits};

/// The counts of one labelling (0 = the observed data, 1… = random relabellings).
pub trait Labelling: Sync {
    /// Adds the counts of labelling `replicate` to `out` (location-major, `width` per location).
    fn fill(&self, replicate: usize, out: &mut [u32]);
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
#[derive(Debug, Clone, Copy)]
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
    /// Random labellings (replicates).
    pub replicates: usize,
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
    /// Per random labelling, the maximum ratio over all windows.
    pub replicate_max: Vec<f64>,
    /// Windows per labelling.
    pub windows: u64,
}

/// The scan was stopped by the interrupt flag.
#[derive(Debug, Clone, Copy, thiserror::Error)]
#[error("interrupted")]
pub struct Stopped;

struct Worker {
    acc: Vec<u32>,
    max: Vec<f64>,
    band_cache: Vec<(u64, u32, u32)>,
    generation: u64,
    floor: f64,
    hood: Neighbourhood,
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
    let width = M::WIDTH;
    let locations = setup.x.len();
    let labellings = setup.replicates + 1;
    let per_labelling = (locations * width * 4).max(1);
    let block = (setup.block_bytes / per_labelling).clamp(1, labellings);
    let index = GridIndex::new(setup.x, setup.y);
    let mut outcome = ScanOutcome {
        best: vec![None; setup.centres.len()],
        replicate_max: vec![0.0; setup.replicates],
        windows: 0,
    };
    let blocks = labellings.div_ceil(block);
    let done = AtomicUsize::new(0);
    let work = blocks * setup.centres.len();
    for b in 0..blocks {
        let first = b * block;
        let used = block.min(labellings - first);
        let counts = block_counts(labelling, locations, width, first, used);
        if stop.load(Ordering::Relaxed) {
            return Err(Stopped);
        }
        let merged = setup
            .centres
            .par_chunks(8)
            .enumerate()
            .fold(
                || Worker {
                    acc: vec![0; used * width],
                    max: vec![0.0; used],
                    band_cache: Vec::new(),
                    generation: 0,
                    floor: f64::NAN,
                    hood: Neighbourhood::default(),
                    best: Vec::new(),
                    windows: 0,
                },
                |mut worker, (chunk_index, chunk)| {
                    if stop.load(Ordering::Relaxed) {
                        return worker;
                    }
                    for (offset, &(cx, cy)) in chunk.iter().enumerate() {
                        let centre = chunk_index * 8 + offset;
                        scan_centre(
                            setup,
                            model,
                            &index,
                            &counts,
                            used,
                            first == 0,
                            centre,
                            cx,
                            cy,
                            &mut worker,
                        );
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
            let labelling_index = first + r;
            if labelling_index > 0 {
                outcome.replicate_max[labelling_index - 1] = value;
            }
        }
        if first == 0 {
            outcome.windows = windows;
            for (centre, found) in best {
                outcome.best[centre] = Some(found);
            }
        }
    }
    Ok(outcome)
}

/// Counts of labellings `first…first+used` in location-major layout: `[location][labelling][k]`.
fn block_counts<L: Labelling>(
    labelling: &L,
    locations: usize,
    width: usize,
    first: usize,
    used: usize,
) -> Vec<u32> {
    let stride = used * width;
    let mut counts = vec![0u32; locations * stride];
    // A few labellings at a time in parallel, then scattered into place in parallel.
    let batch = rayon::current_num_threads().max(1) * 4;
    let mut start = 0;
    while start < used {
        let end = (start + batch).min(used);
        let columns: Vec<Vec<u32>> = (start..end)
            .into_par_iter()
            .map(|r| {
                let mut column = vec![0u32; locations * width];
                labelling.fill(first + r, &mut column);
                column
            })
            .collect();
        counts
            .par_chunks_mut(stride.max(1))
            .enumerate()
            .for_each(|(location, row)| {
                for (j, column) in columns.iter().enumerate() {
                    let r = start + j;
                    row[r * width..(r + 1) * width]
                        .copy_from_slice(&column[location * width..(location + 1) * width]);
                }
            });
        start = end;
    }
    counts
}

#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn scan_centre<M: WindowModel>(
    setup: &ScanSetup<'_>,
    model: &M,
    index: &GridIndex,
    counts: &[u32],
    used: usize,
    has_observed: bool,
    centre: usize,
    cx: f64,
    cy: f64,
    worker: &mut Worker,
) {
    let width = M::WIDTH;
    let stride = used * width;
    worker
        .hood
        .fill(index, setup.x, setup.y, setup.weight, cx, cy, setup.limits);
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
        windows,
        ..
    } = worker;
    for (step, &location) in hood.order.iter().enumerate() {
        let row = &counts[location as usize * stride..(location as usize + 1) * stride];
        let closes = hood.closes_window[step];
        // The smallest and largest count over the random labellings, taken in the same pass
        // as the sums (both vectorise): a window whose counts all lie inside the band is
        // skipped for every labelling at once.
        let (mut low_seen, mut high_seen) = (u32::MAX, 0u32);
        if width == 1 && closes {
            let split = first_random.min(used);
            for (a, v) in acc[..split].iter_mut().zip(&row[..split]) {
                *a += *v;
            }
            for (a, v) in acc[split..].iter_mut().zip(&row[split..]) {
                *a += *v;
                low_seen = low_seen.min(*a);
                high_seen = high_seen.max(*a);
            }
        } else {
            for (a, v) in acc.iter_mut().zip(row) {
                *a += *v;
            }
        }
        size += setup.weight[location as usize];
        if !closes {
            continue;
        }
        *windows += 1;
        let window = model.window(size);
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
        match band {
            Some((lo, hi)) if low_seen >= lo && high_seen <= hi => {}
            Some((lo, hi)) => {
                for r in first_random..used {
                    let c = acc[r];
                    if c < lo || c > hi {
                        let (llr, _) = model.llr(&window, &acc[r..r + 1]);
                        if llr > max[r] {
                            max[r] = llr;
                        }
                    }
                }
            }
            None => {
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
mod tests {
    use super::*;
    use crate::models::{Bernoulli, Direction, Ordinal};

    /// Every window of every centre, evaluated without pruning, for one labelling.
    fn brute_max<M: WindowModel>(setup: &ScanSetup<'_>, model: &M, counts: &[u32]) -> f64 {
        let index = GridIndex::new(setup.x, setup.y);
        let mut hood = Neighbourhood::default();
        let mut best = 0.0f64;
        for &(cx, cy) in setup.centres {
            hood.fill(&index, setup.x, setup.y, setup.weight, cx, cy, setup.limits);
            let mut acc = vec![0u32; M::WIDTH];
            let mut size = 0.0;
            for (step, &l) in hood.order.iter().enumerate() {
                for k in 0..M::WIDTH {
                    acc[k] += counts[l as usize * M::WIDTH + k];
                }
                size += setup.weight[l as usize];
                if hood.closes_window[step] {
                    best = best.max(model.llr(&model.window(size), &acc).0);
                }
            }
        }
        best
    }

    type TestData = (Vec<f64>, Vec<f64>, Vec<u32>, Vec<u8>, Vec<u8>);

    fn data(n: usize, seed: u64) -> TestData {
        use rand::SeedableRng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let x: Vec<f64> = (0..n)
            .map(|_| f64::from(rng.random_range(0..30u32)))
            .collect();
        let y: Vec<f64> = (0..n)
            .map(|_| f64::from(rng.random_range(0..30u32)))
            .collect();
        let of_point: Vec<u32> = (0..n as u32).collect();
        let binary: Vec<u8> = (0..n)
            .map(|_| u8::from(rng.random::<f64>() < 0.3))
            .collect();
        let classes: Vec<u8> = (0..n).map(|_| rng.random_range(0..3u8)).collect();
        (x, y, of_point, binary, classes)
    }

    #[test]
    fn pruned_maxima_equal_brute_force_for_every_labelling_and_thread_count() {
        let (x, y, of_point, binary, classes) = data(300, 11);
        let weight = vec![1.0; x.len()];
        let centres: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
        for (direction, share) in [
            (Direction::High, 0.5),
            (Direction::Both, 0.2),
            (Direction::Low, 0.1),
        ] {
            let setup = ScanSetup {
                x: &x,
                y: &y,
                weight: &weight,
                centres: &centres,
                limits: WindowLimits {
                    max_weight: share * 300.0,
                    max_radius_m: f64::INFINITY,
                },
                replicates: 19,
                // Small blocks force several passes.
                block_bytes: 300 * 4 * 6,
            };
            let cases = binary.iter().filter(|&&b| b == 1).count() as u64;
            let model = Bernoulli::new(300, cases, direction);
            let labels = PointLabels {
                of_point: &of_point,
                labels: &binary,
                width: 1,
                seed: 9,
            };
            let stop = AtomicBool::new(false);
            let one = rayon::ThreadPoolBuilder::new()
                .num_threads(1)
                .build()
                .expect("pool");
            let two = rayon::ThreadPoolBuilder::new()
                .num_threads(2)
                .build()
                .expect("pool");
            let a = one
                .install(|| scan(&setup, &model, &labels, &|_| {}, &stop))
                .expect("scan");
            let b = two
                .install(|| scan(&setup, &model, &labels, &|_| {}, &stop))
                .expect("scan");
            assert_eq!(a.replicate_max, b.replicate_max);
            assert_eq!(a.best, b.best);
            for r in 0..=19 {
                let mut column = vec![0u32; x.len()];
                labels.fill(r, &mut column);
                let expected = brute_max(&setup, &model, &column);
                let got = if r == 0 {
                    a.best.iter().flatten().map(|b| b.llr).fold(0.0, f64::max)
                } else {
                    a.replicate_max[r - 1]
                };
                assert_eq!(got, expected, "labelling {r}");
            }
        }
        // Ordinal, no pruning.
        let setup = ScanSetup {
            x: &x,
            y: &y,
            weight: &weight,
            centres: &centres,
            limits: WindowLimits {
                max_weight: 150.0,
                max_radius_m: 8.0,
            },
            replicates: 9,
            block_bytes: 1 << 20,
        };
        let mut totals = [0u64; 3];
        for &c in &classes {
            totals[c as usize] += 1;
        }
        let model = Ordinal::new(totals, Direction::Both);
        let labels = PointLabels {
            of_point: &of_point,
            labels: &classes,
            width: 3,
            seed: 9,
        };
        let out = scan(&setup, &model, &labels, &|_| {}, &AtomicBool::new(false)).expect("scan");
        for r in 1..=9 {
            let mut column = vec![0u32; x.len() * 3];
            labels.fill(r, &mut column);
            assert_eq!(out.replicate_max[r - 1], brute_max(&setup, &model, &column));
        }
    }

    #[test]
    fn relabelling_keeps_the_totals() {
        let of_point = [0u32, 0, 1, 2, 2, 2];
        let labels = [1u8, 0, 1, 0, 0, 1];
        let l = PointLabels {
            of_point: &of_point,
            labels: &labels,
            width: 1,
            seed: 4,
        };
        for r in 0..20 {
            let mut out = vec![0u32; 3];
            l.fill(r, &mut out);
            assert_eq!(out.iter().sum::<u32>(), 3);
        }
        let cases = [3u32, 0, 5];
        let cumulative = [1.0, 3.0, 8.0];
        let a = AreaCases {
            cases: &cases,
            cumulative_expected: &cumulative,
            seed: 4,
        };
        let mut out = vec![0u32; 3];
        a.fill(7, &mut out);
        assert_eq!(out.iter().sum::<u32>(), 8);
    }
}
