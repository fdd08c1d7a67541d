use super::*;
use crate::analysis::{scan_space_time, ScanConfig, TimedModel, TimedRecords};
use crate::models::{Direction, SpaceTimePermutation};

/// Records of a count table `[location][period]` with the locations at `x` (y = 0).
fn records_of(table: &[[u32; 4]], x: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<u32>) {
    let (mut xs, mut ys, mut periods) = (Vec::new(), Vec::new(), Vec::new());
    for (row, &at) in table.iter().zip(x) {
        for (period, &count) in row.iter().enumerate() {
            for _ in 0..count {
                xs.push(at);
                ys.push(0.0);
                periods.push(period as u32);
            }
        }
    }
    (xs, ys, periods)
}

fn config(max_share: f64, replicates: usize) -> ScanConfig {
    ScanConfig {
        direction: Direction::High,
        max_share,
        max_radius_m: None,
        centres_cell_m: None,
        max_clusters: 5,
        report_p: 1.0,
        replicates,
        drawn: 0..replicates,
        given_max: None,
        observed: true,
        seed: 7,
    }
}

#[test]
fn permutation_table_worked_by_hand() {
    // Kulldorff, Heffernan, Hartman, Assunção & Mostashari 2005 (PLoS Med. 2(3): e59),
    // Methods: μ = c(z)·c(d)/C over the cylinder's cells, and
    // ln Λ = c ln(c/μ) + (C−c) ln((C−c)/(C−μ)) for c > μ.
    //
    // Three locations on a line, A at 0 m, B at 1 m, C at 3 m; four periods d1…d4:
    //        d1 d2 d3 d4 | c(z)
    //   A     1  4  1  0 |  6
    //   B     1  3  1  1 |  6
    //   C     2  1  4  5 | 12
    //   c(d)  4  8  6  6 | C = 24
    // Circles hold at most half the records (12): {A}, {B}, {A,B}, {C}. Runs of ≤ 2 periods.
    // By hand (ln to 7 digits):
    //   {A,B}×d2:    c = 7, μ = 12·8/24 = 4:  7 ln(7/4) + 17 ln(17/20)
    //                = 7(0.55961579) + 17(−0.16251893) = 3.9173105 − 2.7628218 = 1.1544887
    //   {A,B}×d1–d2: c = 9, μ = 12·12/24 = 6: 9 ln(1.5) + 15 ln(15/18) = 0.9143626
    //   {A}×d2:      c = 4, μ = 6·8/24 = 2:   4 ln 2 + 20 ln(20/22) = 0.8663851
    //   {C}×d4:      c = 5, μ = 12·6/24 = 3:  5 ln(5/3) + 19 ln(19/21) = 0.6525424
    //   {C}×d3–d4:   c = 9, μ = 6:            0.9143626
    // so the best cylinder is {A,B}×d2 with ln Λ = 1.1544887 (centre A, radius 1 m).
    let table = [[1, 4, 1, 0], [1, 3, 1, 1], [2, 1, 4, 5]];
    let (x, y, period) = records_of(&table, &[0.0, 1.0, 3.0]);
    let records = TimedRecords {
        x: &x,
        y: &y,
        period: &period,
        periods: 4,
        labels: &[],
    };
    let never = AtomicBool::new(false);
    let result = scan_space_time(
        &records,
        TimedModel::Permutation,
        2,
        &config(0.5, 0),
        &|_| {},
        &never,
    )
    .expect("scan");
    let top = &result.clusters[0];
    let by_formula = 7.0 * (7.0f64 / 4.0).ln() + 17.0 * (17.0f64 / 20.0).ln();
    assert!((top.window.llr - by_formula).abs() < 1e-12, "{top:?}");
    assert!((top.window.llr - 1.1544887).abs() < 1e-7);
    assert_eq!(result.centres[top.centre], (0.0, 0.0));
    assert_eq!(top.window.radius_m, 1.0);
    assert_eq!(top.members, vec![0, 1]);
    let time = top.time.expect("a cylinder");
    assert_eq!((time.first_period, time.periods), (1, 1));
    assert!((time.expected.expect("μ") - 4.0).abs() < 1e-12);
    assert_eq!(top.window.inside[0], 7);
    // The model alone, on the other hand-worked cylinders.
    let model = SpaceTimePermutation::new(24);
    let by_hand = [
        (9, 6.0, 0.9143626),
        (4, 2.0, 0.8663851),
        (5, 3.0, 0.6525424),
    ];
    for (c, mu, value) in by_hand {
        let llr = model.ratio(mu, c);
        let exact = c as f64 * (c as f64 / mu).ln()
            + (24.0 - c as f64) * ((24.0 - c as f64) / (24.0 - mu)).ln();
        assert!((llr - exact).abs() < 1e-12, "{c} {mu}");
        assert!((llr - value).abs() < 1e-7, "{c} {mu}");
    }
    // At or below the expectation the high-only ratio is 0.
    assert_eq!(model.ratio(4.0, 4), 0.0);
    assert_eq!(model.ratio(4.0, 2), 0.0);
    // The secondary cluster shares no location in a shared period: {C}×d3–d4 (ln Λ 0.914…).
    let second = &result.clusters[1];
    assert_eq!(second.members, vec![2]);
    let t = second.time.expect("a cylinder");
    assert_eq!((t.first_period, t.periods), (2, 2));
}

#[test]
fn permutations_keep_both_margins_and_do_not_depend_on_threads() {
    let table = [[1, 4, 1, 0], [1, 3, 1, 1], [2, 1, 4, 5]];
    let (x, _, period) = records_of(&table, &[0.0, 1.0, 3.0]);
    let location: Vec<u32> = x.iter().map(|&v| v as u32).map(|v| v.min(2)).collect();
    let labelling = TimePermutation {
        location: &location,
        period: &period,
        periods: 4,
        seed: 11,
    };
    let margins = |counts: &[u32]| {
        let rows: Vec<u32> = counts.chunks(4).map(|r| r.iter().sum()).collect();
        let columns: Vec<u32> = (0..4)
            .map(|t| counts[t..].iter().step_by(4).sum())
            .collect();
        (rows, columns)
    };
    let mut observed = vec![0u32; 12];
    labelling.fill(0, &mut observed);
    let mut shuffled = vec![0u32; 12];
    labelling.fill(3, &mut shuffled);
    assert_ne!(observed, shuffled, "a permutation moves some record");
    assert_eq!(margins(&observed), margins(&shuffled));
    // One thread or two: the same replicate maxima and clusters.
    let (x, y, period) = records_of(&table, &[0.0, 1.0, 3.0]);
    let records = TimedRecords {
        x: &x,
        y: &y,
        period: &period,
        periods: 4,
        labels: &[],
    };
    let never = AtomicBool::new(false);
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool")
            .install(|| {
                scan_space_time(
                    &records,
                    TimedModel::Permutation,
                    2,
                    &config(0.5, 50),
                    &|_| {},
                    &never,
                )
                .expect("scan")
            })
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one.replicate_max, two.replicate_max);
    assert_eq!(one.clusters.len(), two.clusters.len());
    for (a, b) in one.clusters.iter().zip(&two.clusters) {
        assert_eq!(a.window, b.window);
        assert_eq!(a.time, b.time);
        assert_eq!(a.p_value, b.p_value);
    }
}

#[test]
fn permutation_bound_is_never_below_the_ratio() {
    // ln y ≤ y − 1 gives the bound; check it over a grid of counts and expectations.
    for total in [10u64, 24, 400, 100_000] {
        let model = SpaceTimePermutation::new(total);
        for c in 0..=total.min(300) {
            for mu in [0.01, 0.5, 1.0, 2.5, 7.3, 40.0, 299.9] {
                if mu >= total as f64 {
                    continue;
                }
                let llr = model.ratio(mu, c);
                let bound = permutation_bound(c as f64, mu, total as f64);
                assert!(bound >= llr, "{total} {c} {mu}: {bound} < {llr}");
            }
        }
    }
}

#[test]
fn pruned_replicate_maxima_equal_every_cylinder_scored() {
    // The replicate maxima with the bound's pruning against all cylinders scored directly.
    let table = [[1, 4, 1, 0], [1, 3, 1, 1], [2, 1, 4, 5]];
    let (x, y, period) = records_of(&table, &[0.0, 1.0, 3.0]);
    let records = TimedRecords {
        x: &x,
        y: &y,
        period: &period,
        periods: 4,
        labels: &[],
    };
    let never = AtomicBool::new(false);
    let scanned = scan_space_time(
        &records,
        TimedModel::Permutation,
        2,
        &config(0.5, 30),
        &|_| {},
        &never,
    )
    .expect("scan");
    let location: Vec<u32> = x
        .iter()
        .map(|&v| if v == 3.0 { 2 } else { v as u32 })
        .collect();
    let labelling = TimePermutation {
        location: &location,
        period: &period,
        periods: 4,
        seed: 7,
    };
    let model = SpaceTimePermutation::new(24);
    // Circles: {A}, {B}, {A,B}, {C} (rows 0, 1, 0+1, 2); the margins are fixed.
    let circles: [&[usize]; 4] = [&[0], &[1], &[0, 1], &[2]];
    for (r, &observed_max) in scanned.replicate_max.iter().enumerate() {
        let mut counts = vec![0u32; 12];
        labelling.fill(r + 1, &mut counts);
        let mut max = 0.0f64;
        for circle in circles {
            let circle_total: u32 = circle.iter().map(|&l| table[l].iter().sum::<u32>()).sum();
            for first in 0..4 {
                for last in first..4.min(first + 2) {
                    let c: u32 = circle
                        .iter()
                        .map(|&l| counts[l * 4 + first..=l * 4 + last].iter().sum::<u32>())
                        .sum();
                    let in_periods: u32 = (first..=last)
                        .map(|t| table.iter().map(|row| row[t]).sum::<u32>())
                        .sum();
                    let mu = f64::from(circle_total) * f64::from(in_periods) / 24.0;
                    max = max.max(model.ratio(mu, u64::from(c)));
                }
            }
        }
        assert_eq!(observed_max, max, "replicate {}", r + 1);
    }
}

#[test]
fn screened_runs_are_those_the_scalar_bound_passes() {
    // The vector screen against the bound of `expected_runs` run by run (first period, then
    // length, running sums as integers), on random circles: the same runs, bit for bit.
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    for _ in 0..200 {
        let t = rng.random_range(1..40usize);
        let lengths = rng.random_range(1..=t);
        let period_total: Vec<u64> = (0..t).map(|_| rng.random_range(0..5000)).collect();
        let total: u64 = period_total.iter().sum::<u64>().max(1);
        let acc: Vec<u32> = (0..t).map(|_| rng.random_range(0..60)).collect();
        let circle_records = f64::from(rng.random_range(1..3000u32));
        let floor = rng.random_range(0.0..30.0);
        let (total, total2) = (total as f64, total as f64 * total as f64);
        let prefix = |v: Vec<f64>| -> Vec<f64> {
            std::iter::once(0.0)
                .chain(v.iter().scan(0.0, |s, &x| {
                    *s += x;
                    Some(*s)
                }))
                .collect()
        };
        let cum = prefix(acc.iter().map(|&c| f64::from(c)).collect());
        let periods = prefix(period_total.iter().map(|&p| p as f64).collect());
        let bound = Bound {
            circle_records,
            total,
            total2,
            floor,
        };
        let mut passes = vec![false; lengths * t];
        screen_rows(&cum, &periods, lengths, bound, &mut passes);
        for d in 0..lengths {
            let starts = t - d;
            let row = &passes[d * t..d * t + starts];
            for (first, &marked) in row.iter().enumerate() {
                let c: u32 = acc[first..=first + d].iter().sum();
                let in_periods: u64 = period_total[first..=first + d].iter().sum();
                let p = circle_records * in_periods as f64;
                let excess = f64::from(c) * total - p;
                let scalar = !(excess <= 0.0
                    || excess * excess * total * (1.0 + 1e-9) <= floor * p * (total2 - p));
                assert_eq!(marked, scalar, "t {t}, first {first}, length {}", d + 1);
            }
        }
    }
}
