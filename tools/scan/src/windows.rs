//! Circular scan windows: locations merged by coordinate, centres, and per centre the locations
//! sorted once by distance up to a size cap (Kulldorff 1997, §3: the circles grow through the
//! nearest locations), found with a uniform grid index.

use std::collections::HashMap;

/// Distinct locations and, per input point, the location it falls on.
#[derive(Debug, Clone)]
pub struct Locations {
    /// Easting of each distinct location (m).
    pub x: Vec<f64>,
    /// Northing of each distinct location (m).
    pub y: Vec<f64>,
    /// Per input point: index of its location.
    pub of_point: Vec<u32>,
}

/// Merges points with identical coordinates (bit for bit, after projection) into one location,
/// numbered in order of first appearance.
pub fn merge_locations(x: &[f64], y: &[f64]) -> Locations {
    let mut index: HashMap<(u64, u64), u32> = HashMap::with_capacity(x.len());
    let mut out = Locations {
        x: Vec::new(),
        y: Vec::new(),
        of_point: Vec::with_capacity(x.len()),
    };
    for (&px, &py) in x.iter().zip(y) {
        // +0.0 and −0.0 are the same place.
        let key = ((px + 0.0).to_bits(), (py + 0.0).to_bits());
        let next = out.x.len() as u32;
        let id = *index.entry(key).or_insert_with(|| {
            out.x.push(px);
            out.y.push(py);
            next
        });
        out.of_point.push(id);
    }
    out
}

/// Centres of the cells of a regular grid of `cell_m` over the locations' extent that hold at
/// least one location, in row-major order from the south-west.
pub fn grid_centres(x: &[f64], y: &[f64], cell_m: f64) -> Vec<(f64, f64)> {
    let (x0, y0) = (min(x), min(y));
    let mut cells: Vec<(i64, i64)> = x
        .iter()
        .zip(y)
        .map(|(&px, &py)| {
            (
                ((py - y0) / cell_m).floor() as i64,
                ((px - x0) / cell_m).floor() as i64,
            )
        })
        .collect();
    cells.sort_unstable();
    cells.dedup();
    cells
        .into_iter()
        .map(|(row, col)| {
            (
                x0 + (col as f64 + 0.5) * cell_m,
                y0 + (row as f64 + 0.5) * cell_m,
            )
        })
        .collect()
}

fn min(v: &[f64]) -> f64 {
    v.iter().copied().fold(f64::INFINITY, f64::min)
}

fn max(v: &[f64]) -> f64 {
    v.iter().copied().fold(f64::NEG_INFINITY, f64::max)
}

/// Indices of `points` in the order in which a Hilbert curve over their bounding square visits
/// them (Hilbert 1891, Math. Ann. 38:459–460), ties by index. Points close along the curve are close in space, so work done in this order keeps
/// what neighbouring points share in the caches. Coordinates are snapped to a 2¹⁶ × 2¹⁶ grid.
pub fn hilbert_order(points: &[(f64, f64)]) -> Vec<u32> {
    const SIDE: u32 = 1 << 16;
    let (mut x0, mut y0) = (f64::INFINITY, f64::INFINITY);
    let (mut x1, mut y1) = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    for &(px, py) in points {
        x0 = x0.min(px);
        y0 = y0.min(py);
        x1 = x1.max(px);
        y1 = y1.max(py);
    }
    let extent = (x1 - x0).max(y1 - y0);
    // One scale for both axes keeps the curve's cells square.
    let scale = if extent.is_finite() && extent > 0.0 {
        f64::from(SIDE - 1) / extent
    } else {
        0.0
    };
    // `as` saturates (NaN to 0), so every snapped coordinate lies on the grid.
    let snap = |v: f64, v0: f64| (((v - v0) * scale) as u32).min(SIDE - 1);
    let mut keyed: Vec<(u64, u32)> = points
        .iter()
        .enumerate()
        .map(|(i, &(px, py))| (hilbert_index(snap(px, x0), snap(py, y0), SIDE), i as u32))
        .collect();
    keyed.sort_unstable();
    keyed.into_iter().map(|(_, i)| i).collect()
}

/// Position of cell (`x`, `y`) along the Hilbert curve over a `side` × `side` grid (`side` a
/// power of two).
fn hilbert_index(mut x: u32, mut y: u32, side: u32) -> u64 {
    let mut index = 0u64;
    let mut s = side / 2;
    while s > 0 {
        let rx = u32::from(x & s > 0);
        let ry = u32::from(y & s > 0);
        index += u64::from(s) * u64::from(s) * u64::from((3 * rx) ^ ry);
        // Rotate the quadrant so that the curve inside it starts where the parent's enters.
        if ry == 0 {
            if rx == 1 {
                x = side - 1 - x;
                y = side - 1 - y;
            }
            std::mem::swap(&mut x, &mut y);
        }
        s /= 2;
    }
    index
}

/// A uniform grid over the locations (compressed rows: the locations of each cell).
#[derive(Debug, Clone)]
pub struct GridIndex {
    x0: f64,
    y0: f64,
    cell: f64,
    columns: usize,
    rows: usize,
    starts: Vec<u32>,
    items: Vec<u32>,
}

impl GridIndex {
    /// An index with about four locations per occupied cell on average over the extent.
    pub fn new(x: &[f64], y: &[f64]) -> Self {
        let (x0, y0) = (min(x), min(y));
        let (width, height) = ((max(x) - x0).max(0.0), (max(y) - y0).max(0.0));
        let target_cells = (x.len() as f64 / 4.0).max(1.0);
        let mut cell = ((width.max(1e-9) * height.max(1e-9)) / target_cells).sqrt();
        if !cell.is_finite() || cell <= 0.0 {
            cell = 1.0;
        }
        // Keep the grid at most ~4× the locations in cells when the extent is a thin strip.
        cell = cell.max(width.max(height) / (4.0 * x.len() as f64).max(1.0));
        let cell = cell.max(1e-6);
        let columns = ((width / cell).floor() as usize + 1).max(1);
        let rows = ((height / cell).floor() as usize + 1).max(1);
        let cell_of = |px: f64, py: f64| {
            let c = (((px - x0) / cell).floor() as usize).min(columns - 1);
            let r = (((py - y0) / cell).floor() as usize).min(rows - 1);
            r * columns + c
        };
        let mut counts = vec![0u32; columns * rows + 1];
        for (&px, &py) in x.iter().zip(y) {
            counts[cell_of(px, py) + 1] += 1;
        }
        for i in 1..counts.len() {
            counts[i] += counts[i - 1];
        }
        let mut fill = counts.clone();
        let mut items = vec![0u32; x.len()];
        for (i, (&px, &py)) in x.iter().zip(y).enumerate() {
            let c = cell_of(px, py);
            items[fill[c] as usize] = i as u32;
            fill[c] += 1;
        }
        GridIndex {
            x0,
            y0,
            cell,
            columns,
            rows,
            starts: counts,
            items,
        }
    }
}

/// The locations of one window centre sorted by distance, cut where the next circle would hold
/// more than the cap.
#[derive(Debug, Clone, Default)]
pub struct Neighbourhood {
    /// Location indices, nearest first (ties in distance by index).
    pub order: Vec<u32>,
    /// Distance of each from the centre (m).
    pub distance_m: Vec<f64>,
    /// Whether a circle ends after this location (the next one is farther).
    pub closes_window: Vec<bool>,
    /// Distance of the first location left out (m), or infinity when none is left out.
    pub next_distance_m: f64,
    candidates: Vec<(f64, u32)>,
}

/// The locations circles grow through: their index, coordinates (m) and weights.
#[derive(Debug, Clone, Copy)]
pub struct Sites<'a> {
    /// The grid index over the locations.
    pub index: &'a GridIndex,
    /// Eastings (m).
    pub x: &'a [f64],
    /// Northings (m).
    pub y: &'a [f64],
    /// Weight of each location (records, or expected cases).
    pub weight: &'a [f64],
}

/// Limits on the windows: total weight (records or population) and radius.
#[derive(Debug, Clone, Copy)]
pub struct WindowLimits {
    /// A window holds at most this much weight.
    pub max_weight: f64,
    /// A window's radius is at most this (m); infinity for none.
    pub max_radius_m: f64,
}

impl Neighbourhood {
    /// Fills the neighbourhood of centre (`cx`, `cy`): every location within the largest circle
    /// whose weight (sum of `weight` over its locations) is ≤ `limits.max_weight` and whose
    /// radius is ≤ `limits.max_radius_m`.
    pub fn fill(&mut self, sites: &Sites<'_>, (cx, cy): (f64, f64), limits: WindowLimits) {
        let Sites {
            index,
            x,
            y,
            weight,
        } = *sites;
        self.order.clear();
        self.distance_m.clear();
        self.closes_window.clear();
        self.candidates.clear();
        let g = index;
        let cc = (((cx - g.x0) / g.cell).floor() as i64).clamp(0, g.columns as i64 - 1);
        let cr = (((cy - g.y0) / g.cell).floor() as i64).clamp(0, g.rows as i64 - 1);
        let mut collected_weight = 0.0;
        let mut ring: i64 = 0;
        let mut last_check_weight = -1.0;
        // Distance below which every location has been collected.
        let complete_below;
        loop {
            let (c0, c1, r0, r1) = (cc - ring, cc + ring, cr - ring, cr + ring);
            let last_column = g.columns as i64 - 1;
            for r in r0.max(0)..=r1.min(g.rows as i64 - 1) {
                // Edge rows of the ring are new in full; inside rows only at their two ends.
                let mut visit = |c: i64| {
                    let cell = r as usize * g.columns + c as usize;
                    let (s, e) = (g.starts[cell] as usize, g.starts[cell + 1] as usize);
                    for &item in &g.items[s..e] {
                        let (dx, dy) = (x[item as usize] - cx, y[item as usize] - cy);
                        self.candidates.push((dx * dx + dy * dy, item));
                        collected_weight += weight[item as usize];
                    }
                };
                if r == r0 || r == r1 {
                    for c in c0.max(0)..=c1.min(last_column) {
                        visit(c);
                    }
                } else {
                    if c0 >= 0 {
                        visit(c0);
                    }
                    if c1 <= last_column && c1 != c0 {
                        visit(c1);
                    }
                }
            }
            let covers_all =
                c0 <= 0 && r0 <= 0 && c1 >= g.columns as i64 - 1 && r1 >= g.rows as i64 - 1;
            if covers_all {
                complete_below = f64::INFINITY;
                break;
            }
            // Nearest point of the uncollected area: the block's nearest side.
            let left = cx - (g.x0 + c0 as f64 * g.cell);
            let right = g.x0 + (c1 + 1) as f64 * g.cell - cx;
            let bottom = cy - (g.y0 + r0 as f64 * g.cell);
            let top = g.y0 + (r1 + 1) as f64 * g.cell - cy;
            let reach = left.min(right).min(bottom).min(top).max(0.0);
            if reach > limits.max_radius_m {
                complete_below = reach;
                break;
            }
            if collected_weight > limits.max_weight && collected_weight > last_check_weight {
                last_check_weight = collected_weight * 1.1;
                let reach2 = reach * reach;
                let inside: f64 = self
                    .candidates
                    .iter()
                    .filter(|(d2, _)| *d2 < reach2)
                    .map(|(_, i)| weight[*i as usize])
                    .sum();
                if inside > limits.max_weight {
                    complete_below = reach;
                    break;
                }
            }
            ring += 1;
        }
        let complete2 = complete_below * complete_below;
        let radius2 = limits.max_radius_m * limits.max_radius_m;
        self.candidates
            .retain(|(d2, _)| *d2 < complete2 || complete_below.is_infinite());
        self.candidates
            .sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let mut total = 0.0;
        let mut k = 0;
        self.next_distance_m = f64::INFINITY;
        while k < self.candidates.len() {
            // One tie group: every location at the same distance enters together.
            let d2 = self.candidates[k].0;
            let mut end = k;
            let mut group_weight = 0.0;
            while end < self.candidates.len() && self.candidates[end].0 == d2 {
                group_weight += weight[self.candidates[end].1 as usize];
                end += 1;
            }
            if d2 > radius2 || total + group_weight > limits.max_weight {
                self.next_distance_m = d2.sqrt();
                break;
            }
            total += group_weight;
            for j in k..end {
                self.order.push(self.candidates[j].1);
                self.distance_m.push(d2.sqrt());
                self.closes_window.push(j + 1 == end);
            }
            k = end;
        }
        if self.next_distance_m.is_infinite() && complete_below.is_finite() {
            // Everything collected fits; the first location left out is beyond `complete_below`.
            self.next_distance_m = complete_below;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn brute(x: &[f64], y: &[f64], w: &[f64], cx: f64, cy: f64, limits: WindowLimits) -> Vec<u32> {
        let mut all: Vec<(f64, u32)> = x
            .iter()
            .zip(y)
            .enumerate()
            .map(|(i, (a, b))| ((a - cx).powi(2) + (b - cy).powi(2), i as u32))
            .collect();
        all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let mut out = Vec::new();
        let mut total = 0.0;
        let mut k = 0;
        while k < all.len() {
            let mut end = k;
            let mut gw = 0.0;
            while end < all.len() && all[end].0 == all[k].0 {
                gw += w[all[end].1 as usize];
                end += 1;
            }
            if all[k].0 > limits.max_radius_m.powi(2) || total + gw > limits.max_weight {
                break;
            }
            total += gw;
            out.extend(all[k..end].iter().map(|p| p.1));
            k = end;
        }
        out
    }

    #[test]
    fn neighbourhoods_match_brute_force() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let n = 500;
        // Integer coordinates make many distance ties; a few far outliers stretch the grid.
        let mut x: Vec<f64> = (0..n).map(|_| f64::from(rng.random_range(0..40))).collect();
        let mut y: Vec<f64> = (0..n).map(|_| f64::from(rng.random_range(0..40))).collect();
        x.push(5000.0);
        y.push(-300.0);
        let w: Vec<f64> = (0..x.len())
            .map(|_| f64::from(rng.random_range(1..4)))
            .collect();
        let index = GridIndex::new(&x, &y);
        let sites = Sites {
            index: &index,
            x: &x,
            y: &y,
            weight: &w,
        };
        let mut hood = Neighbourhood::default();
        for (max_weight, max_radius_m) in
            [(100.0, f64::INFINITY), (600.0, 7.5), (1e9, f64::INFINITY)]
        {
            let limits = WindowLimits {
                max_weight,
                max_radius_m,
            };
            for c in (0..x.len()).step_by(7) {
                hood.fill(&sites, (x[c], y[c]), limits);
                assert_eq!(hood.order, brute(&x, &y, &w, x[c], y[c], limits));
            }
            hood.fill(&sites, (20.5, 20.5), limits);
            assert_eq!(hood.order, brute(&x, &y, &w, 20.5, 20.5, limits));
        }
    }

    #[test]
    fn identical_points_merge() {
        let loc = merge_locations(&[1.0, 2.0, 1.0, -0.0], &[1.0, 2.0, 1.0, 0.0]);
        assert_eq!(loc.x, vec![1.0, 2.0, -0.0]);
        assert_eq!(loc.of_point, vec![0, 1, 0, 2]);
        let loc = merge_locations(&[0.0], &[0.0]);
        assert_eq!(loc.of_point, vec![0]);
    }

    #[test]
    fn hilbert_curve_visits_a_grid_in_unit_steps() {
        // On a 2^k × 2^k grid the curve is a path: consecutive cells share an edge.
        let side = 8u32;
        let mut cells: Vec<(u64, u32, u32)> = (0..side)
            .flat_map(|x| (0..side).map(move |y| (hilbert_index(x, y, side), x, y)))
            .collect();
        cells.sort_unstable();
        for (i, pair) in cells.windows(2).enumerate() {
            assert_eq!(pair[0].0, i as u64);
            let step = pair[0].1.abs_diff(pair[1].1) + pair[0].2.abs_diff(pair[1].2);
            assert_eq!(step, 1, "{pair:?}");
        }
        // The order is a permutation, ties (equal points) by index, and copes with one point.
        let points = [(5.0, 5.0), (0.0, 0.0), (5.0, 5.0), (10.0, 0.0), (0.0, 10.0)];
        let order = hilbert_order(&points);
        let mut sorted = order.clone();
        sorted.sort_unstable();
        assert_eq!(sorted, vec![0, 1, 2, 3, 4]);
        let first = order.iter().position(|&i| i == 0).expect("present");
        assert_eq!(order[first + 1], 2);
        assert_eq!(order[0], 1, "the curve starts at the south-west corner");
        assert_eq!(hilbert_order(&[(3.0, 4.0)]), vec![0]);
        assert!(hilbert_order(&[]).is_empty());
    }

    #[test]
    fn grid_centres_cover_occupied_cells() {
        let c = grid_centres(&[0.0, 10.0, 25.0], &[0.0, 0.0, 0.0], 10.0);
        assert_eq!(c, vec![(5.0, 5.0), (15.0, 5.0), (25.0, 5.0)]);
    }
}
