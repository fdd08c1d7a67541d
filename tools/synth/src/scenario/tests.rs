//! Whole-scenario checks: determinism, bounds, the planted zones and burst, authors,
//! duplicates, districts and label noise, each against the rate or shape it was planted with.

use super::districts::{GRID_COLUMNS, GRID_ROWS};
use super::places::{
    REGION_CENTRE_LAT, REGION_CENTRE_LON, REGION_EAST_LON, REGION_NORTH_LAT, REGION_SOUTH_LAT,
    REGION_WEST_LON,
};
use super::rings::{ring_contains, shoelace_area_deg2};
use super::time::{MONTH_START_DAY, SECONDS_PER_DAY, TIME_END_UNIX_S, TIME_START_UNIX_S};
use super::*;
use crate::geodesy::metres_between;

fn scenario(points: usize, seed: u64) -> Scenario {
    generate(&ScenarioParams { points, seed })
}

fn exterior(district: &District) -> Vec<[f64; 2]> {
    district
        .polygon
        .exterior()
        .coords()
        .map(|c| [c.x, c.y])
        .collect()
}

fn share<F: Fn(&Record) -> bool, G: Fn(&Record) -> bool>(
    records: &[Record],
    select: F,
    count: G,
) -> (f64, usize) {
    let selected: Vec<&Record> = records.iter().filter(|r| select(r)).collect();
    let hits = selected.iter().filter(|r| count(r)).count();
    (hits as f64 / selected.len().max(1) as f64, selected.len())
}

#[test]
fn same_seed_same_records_and_different_seed_differs() {
    let a = scenario(5_000, 7);
    let b = scenario(5_000, 7);
    let c = scenario(5_000, 8);
    assert_eq!(a, b);
    assert_ne!(a.records, c.records);
    // The geography is fixed; only records depend on the seed.
    assert_eq!(a.districts, c.districts);
}

#[test]
fn counts_bounds_and_times() {
    for points in [0, 1, 3, 20_000] {
        let s = scenario(points, 11);
        assert_eq!(s.records.len(), points);
        for r in &s.records {
            assert!(r.lon > REGION_WEST_LON && r.lon < REGION_EAST_LON, "{r:?}");
            assert!(
                r.lat > REGION_SOUTH_LAT && r.lat < REGION_NORTH_LAT,
                "{r:?}"
            );
            assert!((TIME_START_UNIX_S..=TIME_END_UNIX_S).contains(&r.time_unix_s));
            assert!(r.town < s.towns.len());
            assert!((-1..=1).contains(&r.stance));
            assert!(!r.text.is_empty() && r.text.len() < 80, "{}", r.text);
        }
    }
}

#[test]
fn towns_are_plausible() {
    let s = scenario(0, 1);
    assert!((8..=12).contains(&s.towns.len()));
    assert!(s
        .towns
        .iter()
        .all(|t| (2_000..=120_000).contains(&t.population)));
    assert_eq!(
        s.towns.iter().filter(|t| t.population >= 100_000).count(),
        1
    );
}

#[test]
fn support_and_oppose_zones_are_detectable() {
    let s = scenario(50_000, 3);
    for zone in &s.zones {
        let inside = |r: &Record| metres_between(r.lon, r.lat, zone.lon, zone.lat) <= zone.radius_m;
        let favoured = |r: &Record| r.stance == zone.favours;
        let (share_in, n_in) = share(&s.records, inside, favoured);
        let (share_out, _) = share(&s.records, |r| !inside(r), favoured);
        assert!(n_in > 1_000, "{}: only {n_in} records inside", zone.name);
        // Odds × 3 moves the share by ≈ 0.15–0.2; 0.08 leaves room for the
        // dilution by snapped records and ≈ 0.01 sampling error at n > 1000.
        assert!(
            share_in > share_out + 0.08,
            "{}: inside {share_in:.3} vs outside {share_out:.3}",
            zone.name
        );
    }
    assert_eq!(s.zones.iter().filter(|z| z.favours == 1).count(), 2);
    assert!(s.zones.iter().any(|z| z.favours == -1));
}

#[test]
fn stance_and_quality_shares() {
    let s = scenario(50_000, 5);
    let n = s.records.len() as f64;
    let neutral = s.records.iter().filter(|r| r.stance == 0).count() as f64 / n;
    // 0.30 ± 4 standard errors (σ ≈ 0.002 at n = 50 000).
    assert!((neutral - 0.30).abs() < 0.01, "{neutral}");
    for (quality, expected) in [
        (Quality::Exact, 0.45),
        (Quality::Street, 0.25),
        (Quality::Town, 0.25),
        (Quality::District, 0.05),
    ] {
        let got = s.records.iter().filter(|r| r.quality == quality).count() as f64 / n;
        assert!(
            (got - expected).abs() < 0.015,
            "{}: {got}",
            quality.as_str()
        );
    }
    for r in s.records.iter().filter(|r| r.quality == Quality::Town) {
        assert_eq!((r.lon, r.lat), (s.towns[r.town].lon, s.towns[r.town].lat));
    }
    for r in s.records.iter().filter(|r| r.quality == Quality::District) {
        assert_eq!((r.lon, r.lat), (REGION_CENTRE_LON, REGION_CENTRE_LAT));
    }
}

#[test]
fn burst_is_concentrated_in_its_month_and_disc() {
    let s = scenario(50_000, 9);
    let b = &s.burst;
    let month_start =
        |m: u32| TIME_START_UNIX_S + MONTH_START_DAY[m as usize - 1] * SECONDS_PER_DAY;
    let mut per_month = [0_usize; 9];
    for r in &s.records {
        if metres_between(r.lon, r.lat, b.lon, b.lat) <= b.radius_m {
            let m = (1..=9).rev().find(|&m| r.time_unix_s >= month_start(m));
            if let Some(m) = m {
                per_month[m as usize - 1] += 1;
            }
        }
    }
    let in_burst = per_month[b.month as usize - 1];
    let other_max = per_month
        .iter()
        .enumerate()
        .filter(|&(i, _)| i + 1 != b.month as usize)
        .map(|(_, &c)| c)
        .max()
        .unwrap_or(0);
    // ≈ 0.04 × 50 000 × 0.7 unsnapped ≈ 1 400 extra records against a few hundred.
    assert!(in_burst > 2 * other_max + 500, "{per_month:?}");
}

#[test]
fn authors_and_duplicates() {
    let s = scenario(50_000, 13);
    let n = s.records.len() as f64;
    let mut counts = std::collections::BTreeMap::<&str, usize>::new();
    for r in &s.records {
        *counts.entry(r.author.as_str()).or_default() += 1;
    }
    let prolific = counts.values().filter(|&&c| c as f64 >= 0.008 * n).count();
    assert_eq!(prolific, 5);
    let largest = counts.values().copied().max().unwrap_or(0) as f64 / n;
    assert!(largest <= 0.025, "{largest}");
    let small = counts.values().filter(|&&c| c <= 3).count() as f64 / counts.len() as f64;
    assert!(small > 0.95, "{small}");
    let duplicates = s
        .records
        .windows(2)
        .filter(|w| w[0].author == w[1].author && w[0].text == w[1].text)
        .count() as f64
        / n;
    // 0.005 minus the burst slots, ± 4 standard errors (σ ≈ 0.0003).
    assert!((duplicates - 0.005).abs() < 0.0015, "{duplicates}");
}

#[test]
fn districts_tile_the_region_with_an_island_and_an_empty_cell() {
    let s = scenario(50_000, 17);
    let grid = &s.districts[..s.districts.len() - 1];
    let island = &s.districts[s.districts.len() - 1];
    assert!((150..=300).contains(&grid.len()));
    for d in &s.districts {
        let ring = exterior(d);
        assert!(ring.len() >= 4);
        assert_eq!(ring.first(), ring.last(), "{} not closed", d.code);
        assert!(
            shoelace_area_deg2(&ring[..ring.len() - 1]) > 0.0,
            "{} not CCW",
            d.code
        );
        assert!(d.polygon.interiors().is_empty());
    }
    // Every grid vertex lies in the bounding box, the island entirely east of it,
    // so the island touches nothing.
    for d in grid {
        for [x, y] in exterior(d) {
            assert!((REGION_WEST_LON..=REGION_EAST_LON).contains(&x));
            assert!((REGION_SOUTH_LAT..=REGION_NORTH_LAT).contains(&y));
        }
    }
    assert!(exterior(island).iter().all(|&[x, _]| x > REGION_EAST_LON));
    // Neighbours share edges exactly.
    for row in 0..GRID_ROWS {
        for column in 0..GRID_COLUMNS - 1 {
            let west = exterior(&grid[row * GRID_COLUMNS + column]);
            let east = exterior(&grid[row * GRID_COLUMNS + column + 1]);
            assert_eq!((west[1], west[2]), (east[0], east[3]));
        }
    }
    // The cells tile the box: areas add up to its area (exact up to rounding).
    let total: f64 = grid
        .iter()
        .map(|d| {
            let ring = exterior(d);
            shoelace_area_deg2(&ring[..ring.len() - 1])
        })
        .sum();
    assert!((total - 1.2 * 0.8).abs() < 1e-9, "{total}");

    let empty: Vec<&District> = s.districts.iter().filter(|d| d.population == 0).collect();
    assert_eq!(empty.len(), 1);
    let ring = exterior(empty[0]);
    let quad = [ring[0], ring[1], ring[2], ring[3]];
    assert!(s
        .records
        .iter()
        .all(|r| !ring_contains(&quad, r.lon, r.lat)));
    assert!(island.population > 0);
    // Codes are unique and in order.
    for (i, d) in s.districts.iter().enumerate() {
        assert_eq!(d.code, format!("VD-{:03}", i + 1));
    }
    let mut names: Vec<&str> = s.districts.iter().map(|d| d.name.as_str()).collect();
    names.sort_unstable();
    names.dedup();
    assert_eq!(names.len(), s.districts.len());
    // The census follows the towns: the most populous district is the big city's.
    let city = &s.towns[0];
    let top = grid.iter().max_by_key(|d| d.population).map(exterior);
    let top = top.map(|r| [r[0], r[1], r[2], r[3]]);
    assert!(top.is_some_and(|q| {
        let dist = metres_between(
            0.25 * q.iter().map(|p| p[0]).sum::<f64>(),
            0.25 * q.iter().map(|p| p[1]).sum::<f64>(),
            city.lon,
            city.lat,
        );
        dist < 10_000.0
    }));
}

#[test]
fn confusion_rows_sum_to_one_and_labels_follow_them() {
    let s = scenario(50_000, 21);
    for matrix in [&s.confusion_a, &s.confusion_b] {
        for row in matrix {
            assert!((row.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        }
    }
    let diagonal_mean = |m: &[[f64; 3]; 3]| (m[0][0] + m[1][1] + m[2][2]) / 3.0;
    assert!(diagonal_mean(&s.confusion_a) > diagonal_mean(&s.confusion_b) + 0.1);
    let n = s.records.len() as f64;
    let agreement_a = s.records.iter().filter(|r| r.label_a == r.stance).count() as f64 / n;
    let agreement_b = s.records.iter().filter(|r| r.label_b == r.stance).count() as f64 / n;
    // Diagonals differ by ≤ 0.02 between classes and sampling σ ≈ 0.002, so 0.02 holds.
    assert!(
        (agreement_a - diagonal_mean(&s.confusion_a)).abs() < 0.02,
        "{agreement_a}"
    );
    assert!(
        (agreement_b - diagonal_mean(&s.confusion_b)).abs() < 0.02,
        "{agreement_b}"
    );
}

#[test]
fn labels_and_quality_names() {
    assert_eq!(stance_label(-1), "oppose");
    assert_eq!(stance_label(0), "neutral");
    assert_eq!(stance_label(1), "support");
    assert_eq!(Quality::Exact.as_str(), "exact");
    assert_eq!(Quality::Street.as_str(), "street");
    assert_eq!(Quality::Town.as_str(), "town");
    assert_eq!(Quality::District.as_str(), "district");
}
