//! Engine tests: pruned scans against brute force, thread determinism.

use super::kernels::tests::kernel_sets;
use super::*;
use crate::models::{Bernoulli, Direction, Multinomial, Ordinal, Poisson};

fn sites<'a>(setup: &ScanSetup<'a>, index: &'a GridIndex) -> Sites<'a> {
    Sites {
        index,
        x: setup.x,
        y: setup.y,
        weight: setup.weight,
    }
}

/// Every window of every centre, evaluated without pruning, for one labelling.
fn brute_max<M: WindowModel>(setup: &ScanSetup<'_>, model: &M, counts: &[u32]) -> f64 {
    let index = GridIndex::new(setup.x, setup.y);
    let mut hood = Neighbourhood::default();
    let mut best = 0.0f64;
    for &(cx, cy) in setup.centres {
        hood.fill(&sites(setup, &index), (cx, cy), setup.limits);
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
            drawn: 0..19,
            observed: true,
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
        drawn: 0..9,
        observed: true,
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

/// The scan done the plain way: labelling by labelling, centres in input order, counts as
/// u32 in input numbering, every window scored.
fn straightforward<M: WindowModel, L: Labelling>(
    setup: &ScanSetup<'_>,
    model: &M,
    labelling: &L,
) -> ScanOutcome {
    let width = M::WIDTH;
    let index = GridIndex::new(setup.x, setup.y);
    let mut hood = Neighbourhood::default();
    let mut out = ScanOutcome {
        best: vec![None; setup.centres.len()],
        replicate_max: vec![0.0; setup.drawn.len()],
        windows: 0,
    };
    for r in std::iter::once(0).chain(setup.drawn.clone().map(|r| r + 1)) {
        let mut counts = vec![0u32; setup.x.len() * width];
        labelling.fill(r, &mut counts);
        for (centre, &(cx, cy)) in setup.centres.iter().enumerate() {
            hood.fill(&sites(setup, &index), (cx, cy), setup.limits);
            let mut inside = [0u32; ORDINAL_CLASSES];
            let mut size = 0.0;
            for (step, &l) in hood.order.iter().enumerate() {
                for k in 0..width {
                    inside[k] += counts[l as usize * width + k];
                }
                size += setup.weight[l as usize];
                if !hood.closes_window[step] {
                    continue;
                }
                let (llr, side) = model.llr(&model.window(size), &inside[..width]);
                if r > 0 {
                    let at = r - 1 - setup.drawn.start;
                    out.replicate_max[at] = out.replicate_max[at].max(llr);
                    continue;
                }
                out.windows += 1;
                if llr > 0.0 && out.best[centre].is_none_or(|b| llr > b.llr) {
                    out.best[centre] = Some(CentreBest {
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
        }
    }
    out
}

/// Runs [`scan_with`] with every kernel set and on one and two threads, and checks each
/// against [`straightforward`], exactly.
fn assert_same_as_straightforward<M: WindowModel, L: Labelling>(
    setup: &ScanSetup<'_>,
    model: &M,
    labelling: &L,
) {
    let expected = straightforward(setup, model, labelling);
    assert!(expected.best.iter().any(Option::is_some));
    let stop = AtomicBool::new(false);
    for kernels in kernel_sets() {
        for threads in [1, 2] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("pool");
            let got = pool
                .install(|| scan_with(setup, model, labelling, &|_| {}, &stop, kernels))
                .expect("scan");
            assert_eq!(got.replicate_max, expected.replicate_max, "{kernels:?}");
            assert_eq!(got.best, expected.best, "{kernels:?}");
            assert_eq!(got.windows, expected.windows);
        }
    }
    // A shard's block of the replicates (as `--shard` draws it): the same maxima as the
    // whole run's, and the same observed windows.
    let total = setup.drawn.len();
    for (index, count) in [(1, 3), (2, 3), (3, 3)] {
        let block = stance_core::host::shard::block(index, count, total);
        let part = ScanSetup {
            drawn: setup.drawn.start + block.start..setup.drawn.start + block.end,
            ..setup.clone()
        };
        let got =
            scan_with(&part, model, labelling, &|_| {}, &stop, Kernels::detect()).expect("scan");
        assert_eq!(got.replicate_max, expected.replicate_max[block.clone()]);
        assert_eq!(got.best, expected.best);
    }
}

/// Locations on a 16 × 16 grid of integer coordinates (so many share a place or a distance),
/// 1–5 records each, and 300 records on location 7 and 256 on location 30: more than a byte
/// holds, so those two get wide rows.
fn crowded(seed: u64) -> (Vec<f64>, Vec<f64>, Vec<u32>) {
    use rand::SeedableRng;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let n = 260;
    let x: Vec<f64> = (0..n)
        .map(|_| f64::from(rng.random_range(0..16u32)))
        .collect();
    let y: Vec<f64> = (0..n)
        .map(|_| f64::from(rng.random_range(0..16u32)))
        .collect();
    let mut of_point = Vec::new();
    for location in 0..n as u32 {
        let records = match location {
            7 => 300,
            30 => 256,
            _ => rng.random_range(1..6),
        };
        of_point.extend(std::iter::repeat_n(location, records));
    }
    (x, y, of_point)
}

#[test]
fn curve_order_and_narrow_rows_give_the_straightforward_results() {
    use rand::SeedableRng;
    let (x, y, of_point) = crowded(21);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(22);
    let binary: Vec<u8> = of_point
        .iter()
        .map(|_| u8::from(rng.random::<f64>() < 0.3))
        .collect();
    let classes: Vec<u8> = of_point.iter().map(|_| rng.random_range(0..3u8)).collect();
    let mut weight = vec![0.0; x.len()];
    for &l in &of_point {
        weight[l as usize] += 1.0;
    }
    let total = of_point.len() as f64;
    // Centres on the locations and off them.
    let mut centres: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
    centres.extend((0..40).map(|i| (f64::from(i % 8) * 2.1, f64::from(i / 8) * 3.3)));
    let labels = PointLabels {
        of_point: &of_point,
        labels: &binary,
        width: 1,
        seed: 5,
    };
    let layout = Layout::new(&x, &y, &labels.count_bounds(x.len()));
    assert_eq!(layout.wide_at.len(), 2, "locations 7 and 30 need wide rows");
    let cases = binary.iter().filter(|&&b| b == 1).count() as u64;
    for (direction, share, max_radius_m, block_bytes) in [
        (Direction::High, 0.1, f64::INFINITY, 1 << 20),
        // Small blocks: several passes, the observed data in the first only.
        (Direction::Both, 0.3, f64::INFINITY, 300 * 5),
        (Direction::Low, 0.2, 4.5, 1 << 20),
    ] {
        let setup = ScanSetup {
            x: &x,
            y: &y,
            weight: &weight,
            centres: &centres,
            limits: WindowLimits {
                max_weight: share * total,
                max_radius_m,
            },
            drawn: 0..15,
            observed: true,
            block_bytes,
        };
        let model = Bernoulli::new(of_point.len() as u64, cases, direction);
        assert_same_as_straightforward(&setup, &model, &labels);
    }
    // Ordinal: three counts a location, no band.
    let setup = ScanSetup {
        x: &x,
        y: &y,
        weight: &weight,
        centres: &centres,
        limits: WindowLimits {
            max_weight: 0.25 * total,
            max_radius_m: f64::INFINITY,
        },
        drawn: 0..7,
        observed: true,
        block_bytes: 1 << 20,
    };
    let mut totals = [0u64; 3];
    for &c in &classes {
        totals[c as usize] += 1;
    }
    let labels = PointLabels {
        of_point: &of_point,
        labels: &classes,
        width: 3,
        seed: 6,
    };
    assert_same_as_straightforward(&setup, &Ordinal::new(totals, Direction::Both), &labels);
    // Multinomial: the same counts, the unrestricted ratio.
    assert_same_as_straightforward(&setup, &Multinomial::new(totals), &labels);
}

#[test]
fn poisson_areas_give_the_straightforward_results_with_any_row_width() {
    use rand::SeedableRng;
    let (x, y, _) = crowded(31);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(32);
    let population: Vec<f64> = x.iter().map(|_| rng.random_range(5.0..500.0)).collect();
    let centres: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
    // A random relabelling may put every case on one area, so the total decides the rows:
    // at most 255 cases (bytes), a few hundred (u16) and over 65,535 (u32).
    for (share_with_case, most, rows) in [(0.4, 1u32, 1usize), (1.0, 4, 2), (1.0, 600, 4)] {
        let cases: Vec<u32> = x
            .iter()
            .map(|_| {
                if rng.random::<f64>() < share_with_case {
                    rng.random_range(1..=most)
                } else {
                    0
                }
            })
            .collect();
        let total_cases: u64 = cases.iter().map(|&c| u64::from(c)).sum();
        let row_bytes = match total_cases {
            0..=255 => 1,
            256..=65_535 => 2,
            _ => 4,
        };
        assert_eq!(row_bytes, rows, "{total_cases} cases");
        let total_population: f64 = population.iter().sum();
        // Real-valued expected counts: the window sizes are sums in neighbour order.
        let expected: Vec<f64> = population
            .iter()
            .map(|p| p * total_cases as f64 / total_population)
            .collect();
        let cumulative: Vec<f64> = expected
            .iter()
            .scan(0.0, |s, e| {
                *s += e;
                Some(*s)
            })
            .collect();
        let labelling = AreaCases {
            cases: &cases,
            cumulative_expected: &cumulative,
            seed: 8,
        };
        let setup = ScanSetup {
            x: &x,
            y: &y,
            weight: &expected,
            centres: &centres,
            limits: WindowLimits {
                max_weight: 0.2 * total_cases as f64,
                max_radius_m: f64::INFINITY,
            },
            drawn: 0..5,
            observed: true,
            block_bytes: 1 << 20,
        };
        let model = Poisson::new(total_cases, Direction::Both);
        assert_same_as_straightforward(&setup, &model, &labelling);
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
