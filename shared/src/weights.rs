//! Spatial weights: neighbour lists of areas — queen / rook contiguity from shared vertices and
//! edges, k nearest centroids, distance band — their summaries, and row or binary
//! standardisation (Bivand, Pebesma & Gómez-Rubio 2013, *Applied Spatial Data Analysis with R*,
//! ch. 9; Anselin 1988, *Spatial Econometrics*, ch. 3).
//!
//! API contract: every list is sorted and holds no self-link; `lists[i]` are the indices (into
//! the areas' order) of the neighbours of area `i`. Contiguity and distance-band lists are
//! symmetric; k-nearest lists in general are not.
//!
//! Contiguity never compares all pairs: vertices are grouped by exact coordinates (or, with a
//! snap tolerance, through a hash grid of cell size `snap_m` and a union–find of the vertices
//! closer than `snap_m`), and two areas are queen neighbours when they share a vertex group,
//! rook neighbours when they share an edge between two vertex groups. This is the vertex rule
//! of spdep `poly2nb` and libpysal `Queen` / `Rook.from_dataframe`: two areas whose boundaries
//! touch only where neither has a vertex are not linked.

use std::collections::HashMap;

use geo_types::{LineString, MultiPolygon};
use rayon::prelude::*;
use rstar::{primitives::GeomWithData, RTree};

/// Neighbour lists of `n` areas.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Neighbours {
    /// `lists[i]`: sorted indices of the neighbours of area `i` (no self-links).
    pub lists: Vec<Vec<u32>>,
}

/// Contiguity rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Contiguity {
    /// Neighbours share at least one boundary point (vertex).
    Queen,
    /// Neighbours share at least one boundary edge (two consecutive vertices).
    Rook,
}

/// How neighbour weights are scaled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Standardisation {
    /// Row-standardised: w_ij = 1 / |N(i)|, so each row sums to 1 (spdep style "W").
    Row,
    /// Binary: w_ij = 1 for every neighbour (spdep style "B").
    Binary,
}

/// Summary of a set of neighbour lists.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// Number of areas.
    pub areas: usize,
    /// Number of directed links Σ|N(i)| (spdep's "nonzero links"; twice the number of
    /// neighbouring pairs for symmetric lists).
    pub links: usize,
    /// Fewest neighbours of any area.
    pub min_neighbours: usize,
    /// Mean number of neighbours.
    pub mean_neighbours: f64,
    /// Most neighbours of any area.
    pub max_neighbours: usize,
    /// Indices of areas without neighbours.
    pub islands: Vec<usize>,
    /// Number of connected components (an island is a component of its own).
    pub components: usize,
    /// Whether every link i→j has its reverse j→i.
    pub symmetric: bool,
}

/// Sparse weights in compressed-row form, aligned with a [`Neighbours`].
#[derive(Debug, Clone, PartialEq)]
pub struct SparseWeights {
    /// Row `i` spans `offsets[i]..offsets[i + 1]` of `neighbours` and `weights`.
    pub offsets: Vec<usize>,
    /// Neighbour indices, row after row.
    pub neighbours: Vec<u32>,
    /// Weights w_ij, row after row.
    pub weights: Vec<f64>,
}

impl SparseWeights {
    /// Number of areas (rows).
    pub fn len(&self) -> usize {
        self.offsets.len().saturating_sub(1)
    }

    /// True when there are no areas.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Neighbour indices and weights of row `i`.
    pub fn row(&self, i: usize) -> (&[u32], &[f64]) {
        let span = self.offsets[i]..self.offsets[i + 1];
        (&self.neighbours[span.clone()], &self.weights[span])
    }

    /// Σ_j w_ij z_j, the spatial lag of `z` at area `i`.
    pub fn lag(&self, i: usize, z: &[f64]) -> f64 {
        let (js, ws) = self.row(i);
        js.iter().zip(ws).map(|(j, w)| w * z[*j as usize]).sum()
    }

    /// Sums of weights used by Moran's I (Cliff & Ord 1981, p. 19):
    /// S0 = Σ_i Σ_j w_ij, S1 = ½ Σ_i Σ_j (w_ij + w_ji)², S2 = Σ_i (w_i· + w_·i)².
    pub fn moments(&self) -> WeightMoments {
        let n = self.len();
        let mut row_sum = vec![0.0; n];
        let mut column_sum = vec![0.0; n];
        for (i, row) in row_sum.iter_mut().enumerate() {
            let (js, ws) = self.row(i);
            for (j, w) in js.iter().zip(ws) {
                *row += w;
                column_sum[*j as usize] += w;
            }
        }
        let s0: f64 = row_sum.iter().sum();
        // The links by target: for each area i, the (source j, w_ji) of every link j → i, in
        // source order (rows are visited in order), so w_ji is found by binary search; of
        // repeated links the last one counts, as a map filled row by row would keep.
        let mut starts = vec![0usize; n + 1];
        for i in 0..n {
            for j in self.row(i).0 {
                starts[*j as usize + 1] += 1;
            }
        }
        for i in 0..n {
            starts[i + 1] += starts[i];
        }
        let mut fill = starts.clone();
        let mut sources = vec![0u32; starts[n]];
        let mut incoming = vec![0.0; starts[n]];
        for i in 0..n {
            let (js, ws) = self.row(i);
            for (j, w) in js.iter().zip(ws) {
                let at = &mut fill[*j as usize];
                sources[*at] = i as u32;
                incoming[*at] = *w;
                *at += 1;
            }
        }
        let weight_from = |j: u32, i: usize| -> f64 {
            let range = starts[i]..starts[i + 1];
            let after = sources[range.clone()].partition_point(|&s| s <= j);
            match after.checked_sub(1) {
                Some(k) if sources[range.start + k] == j => incoming[range.start + k],
                _ => 0.0,
            }
        };
        let mut s1 = 0.0;
        for i in 0..n {
            let (js, ws) = self.row(i);
            for (j, w) in js.iter().zip(ws) {
                let back = weight_from(*j, i);
                s1 += (w + back).powi(2);
                if back == 0.0 {
                    // The pair (j, i) is absent from row j, so its term (w_ji + w_ij)² is counted here.
                    s1 += (w + back).powi(2);
                }
            }
        }
        s1 *= 0.5;
        let s2 = row_sum
            .iter()
            .zip(&column_sum)
            .map(|(r, c)| (r + c).powi(2))
            .sum();
        WeightMoments { s0, s1, s2 }
    }
}

/// The weight sums S0, S1, S2 of Cliff & Ord (1981).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WeightMoments {
    /// Σ_i Σ_j w_ij.
    pub s0: f64,
    /// ½ Σ_i Σ_j (w_ij + w_ji)².
    pub s1: f64,
    /// Σ_i (w_i· + w_·i)².
    pub s2: f64,
}

/// Errors of the weights builders.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum WeightsError {
    /// A coordinate or parameter is not a finite number, or out of range.
    #[error("{0}")]
    Invalid(String),
}

impl Neighbours {
    /// Number of areas.
    pub fn len(&self) -> usize {
        self.lists.len()
    }

    /// True when there are no areas.
    pub fn is_empty(&self) -> bool {
        self.lists.is_empty()
    }

    /// Areas without neighbours.
    pub fn islands(&self) -> Vec<usize> {
        (0..self.lists.len())
            .filter(|&i| self.lists[i].is_empty())
            .collect()
    }

    /// Lists of `n` areas from directed links (i, j): self-links and repeats are dropped, lists
    /// sorted. Links naming an area ≥ `n` are ignored.
    pub fn from_links(n: usize, links: impl IntoIterator<Item = (u32, u32)>) -> Self {
        let mut lists = vec![Vec::new(); n];
        for (i, j) in links {
            if i != j && (i as usize) < n && (j as usize) < n {
                lists[i as usize].push(j);
            }
        }
        lists.par_iter_mut().for_each(|l| {
            l.sort_unstable();
            l.dedup();
        });
        Neighbours { lists }
    }

    /// Directed links Σ|N(i)|.
    pub fn links(&self) -> usize {
        self.lists.iter().map(Vec::len).sum()
    }

    /// Whether every link i→j has its reverse j→i.
    pub fn is_symmetric(&self) -> bool {
        self.lists.iter().enumerate().all(|(i, l)| {
            l.iter()
                .all(|&j| self.lists[j as usize].binary_search(&(i as u32)).is_ok())
        })
    }

    /// Adds the reverse of every link (k-nearest lists made symmetric).
    pub fn symmetrised(&self) -> Neighbours {
        let links = self
            .lists
            .iter()
            .enumerate()
            .flat_map(|(i, l)| l.iter().flat_map(move |&j| [(i as u32, j), (j, i as u32)]));
        Neighbours::from_links(self.len(), links)
    }

    /// Connected component of every area (links taken as undirected), numbered 0, 1, … in
    /// order of each component's lowest area index.
    pub fn components(&self) -> Vec<u32> {
        let n = self.len();
        let mut parent: Vec<u32> = (0..n as u32).collect();
        fn find(parent: &mut [u32], mut a: u32) -> u32 {
            while parent[a as usize] != a {
                let up = parent[parent[a as usize] as usize];
                parent[a as usize] = up;
                a = up;
            }
            a
        }
        for (i, list) in self.lists.iter().enumerate() {
            for &j in list {
                let (a, b) = (find(&mut parent, i as u32), find(&mut parent, j));
                if a != b {
                    parent[a.max(b) as usize] = a.min(b);
                }
            }
        }
        let mut label = vec![u32::MAX; n];
        let mut next = 0;
        let mut out = vec![0; n];
        for (i, slot) in out.iter_mut().enumerate() {
            let root = find(&mut parent, i as u32) as usize;
            if label[root] == u32::MAX {
                label[root] = next;
                next += 1;
            }
            *slot = label[root];
        }
        out
    }

    /// Areas, links, min / mean / max neighbours, islands, components and symmetry.
    pub fn summary(&self) -> Summary {
        let counts: Vec<usize> = self.lists.iter().map(Vec::len).collect();
        let areas = counts.len();
        let links: usize = counts.iter().sum();
        Summary {
            areas,
            links,
            min_neighbours: counts.iter().copied().min().unwrap_or(0),
            mean_neighbours: if areas == 0 {
                0.0
            } else {
                links as f64 / areas as f64
            },
            max_neighbours: counts.iter().copied().max().unwrap_or(0),
            islands: self.islands(),
            components: self
                .components()
                .iter()
                .map(|c| *c as usize + 1)
                .max()
                .unwrap_or(0),
            symmetric: self.is_symmetric(),
        }
    }

    /// Links every island to its nearest other area by centroid distance, in both directions
    /// (ties go to the lower index). Returns the links added as (island, nearest) pairs.
    ///
    /// Centroids `x`, `y` must be aligned with the lists and finite.
    pub fn link_islands_to_nearest(&mut self, x: &[f64], y: &[f64]) -> Vec<(usize, usize)> {
        let islands = self.islands();
        if islands.is_empty() || self.len() < 2 {
            return Vec::new();
        }
        let tree = centroid_tree(x, y);
        let mut added = Vec::new();
        for i in islands {
            if let Some(j) = nearest_others(&tree, x[i], y[i], i, 1).first().copied() {
                added.push((i, j as usize));
            }
        }
        for &(i, j) in &added {
            for (a, b) in [(i, j), (j, i)] {
                let list = &mut self.lists[a];
                if let Err(position) = list.binary_search(&(b as u32)) {
                    list.insert(position, b as u32);
                }
            }
        }
        added
    }

    /// The weights of these lists under `style`; islands get empty rows.
    pub fn standardise(&self, style: Standardisation) -> SparseWeights {
        let mut offsets = Vec::with_capacity(self.len() + 1);
        offsets.push(0);
        let mut neighbours = Vec::with_capacity(self.links());
        let mut weights = Vec::with_capacity(self.links());
        for list in &self.lists {
            let w = match style {
                Standardisation::Row => 1.0 / list.len() as f64,
                Standardisation::Binary => 1.0,
            };
            neighbours.extend_from_slice(list);
            weights.extend(std::iter::repeat_n(w, list.len()));
            offsets.push(neighbours.len());
        }
        SparseWeights {
            offsets,
            neighbours,
            weights,
        }
    }
}

/// Exact-equality key of a coordinate pair (−0 and +0 are the same point).
fn exact_key(x: f64, y: f64) -> (u64, u64) {
    ((x + 0.0).to_bits(), (y + 0.0).to_bits())
}

/// Every ring (exterior and holes) of every part of a multipolygon.
fn rings(polygon: &MultiPolygon<f64>) -> impl Iterator<Item = &LineString<f64>> {
    polygon
        .0
        .iter()
        .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
}

/// Contiguity neighbours of `polygons` (coordinates in metres when `snap_m` > 0).
///
/// Vertices closer than `snap_m` are one boundary point (chains of such vertices merge, so a
/// group can span more than `snap_m`); `snap_m` = 0 asks for exactly equal coordinates.
/// Time and memory are O(V log V) in the number of vertices V.
///
/// # Errors
/// [`WeightsError::Invalid`] for a negative or non-finite `snap_m` or a non-finite vertex.
pub fn contiguity(
    polygons: &[MultiPolygon<f64>],
    rule: Contiguity,
    snap_m: f64,
) -> Result<Neighbours, WeightsError> {
    if !(snap_m.is_finite() && snap_m >= 0.0) {
        return Err(WeightsError::Invalid(format!(
            "snap tolerance {snap_m} must be a finite number ≥ 0"
        )));
    }
    // Vertices in ring order: (x, y, area, ring id). Ring ids let rook read consecutive pairs.
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    let mut area_of = Vec::new();
    let mut ring_starts = vec![0usize];
    for (area, polygon) in polygons.iter().enumerate() {
        for ring in rings(polygon) {
            for c in &ring.0 {
                if !(c.x.is_finite() && c.y.is_finite()) {
                    return Err(WeightsError::Invalid(format!(
                        "area {area} has a non-finite vertex ({}, {})",
                        c.x, c.y
                    )));
                }
                xs.push(c.x);
                ys.push(c.y);
                area_of.push(area as u32);
            }
            ring_starts.push(xs.len());
        }
    }
    let group = if snap_m == 0.0 {
        exact_groups(&xs, &ys)
    } else {
        snapped_groups(&xs, &ys, snap_m)
    };
    // Keys shared by areas: a vertex group (queen) or an edge between two groups (rook).
    let mut keyed: Vec<(u64, u32)> = match rule {
        Contiguity::Queen => group
            .iter()
            .zip(&area_of)
            .map(|(g, a)| (u64::from(*g), *a))
            .collect(),
        Contiguity::Rook => {
            let mut edges = Vec::with_capacity(xs.len());
            for w in ring_starts.windows(2) {
                for v in w[0]..w[1].saturating_sub(1) {
                    let (a, b) = (group[v], group[v + 1]);
                    if a != b {
                        let key = (u64::from(a.min(b)) << 32) | u64::from(a.max(b));
                        edges.push((key, area_of[v]));
                    }
                }
            }
            edges
        }
    };
    keyed.par_sort_unstable();
    keyed.dedup();
    let mut links = Vec::new();
    let mut start = 0;
    while start < keyed.len() {
        let mut end = start + 1;
        while end < keyed.len() && keyed[end].0 == keyed[start].0 {
            end += 1;
        }
        for a in start..end {
            for b in a + 1..end {
                links.push((keyed[a].1, keyed[b].1));
                links.push((keyed[b].1, keyed[a].1));
            }
        }
        start = end;
    }
    Ok(Neighbours::from_links(polygons.len(), links))
}

/// Group id of every vertex: equal coordinates share a group.
fn exact_groups(xs: &[f64], ys: &[f64]) -> Vec<u32> {
    let mut order: Vec<u32> = (0..xs.len() as u32).collect();
    order.par_sort_unstable_by_key(|&v| exact_key(xs[v as usize], ys[v as usize]));
    let mut group = vec![0u32; xs.len()];
    let mut next = 0u32;
    for (k, &v) in order.iter().enumerate() {
        if k > 0 {
            let previous = order[k - 1] as usize;
            if exact_key(xs[previous], ys[previous]) != exact_key(xs[v as usize], ys[v as usize]) {
                next += 1;
            }
        }
        group[v as usize] = next;
    }
    group
}

/// Group id of every vertex: vertices within `snap` of each other (transitively) share a group.
/// A hash grid of cell size `snap` is the spatial index: only the 3 × 3 cells around a vertex
/// can hold vertices within `snap` of it.
fn snapped_groups(xs: &[f64], ys: &[f64], snap: f64) -> Vec<u32> {
    let cell = |v: f64| (v / snap).floor() as i64;
    let mut grid: HashMap<(i64, i64), Vec<u32>> = HashMap::new();
    for v in 0..xs.len() {
        grid.entry((cell(xs[v]), cell(ys[v])))
            .or_default()
            .push(v as u32);
    }
    let mut parent: Vec<u32> = (0..xs.len() as u32).collect();
    fn find(parent: &mut [u32], mut a: u32) -> u32 {
        while parent[a as usize] != a {
            let up = parent[parent[a as usize] as usize];
            parent[a as usize] = up;
            a = up;
        }
        a
    }
    let snap2 = snap * snap;
    for v in 0..xs.len() {
        let (cx, cy) = (cell(xs[v]), cell(ys[v]));
        for dx in -1..=1 {
            for dy in -1..=1 {
                let Some(others) = grid.get(&(cx + dx, cy + dy)) else {
                    continue;
                };
                for &o in others {
                    let o_index = o as usize;
                    if o_index <= v {
                        continue;
                    }
                    let d2 = (xs[o_index] - xs[v]).powi(2) + (ys[o_index] - ys[v]).powi(2);
                    if d2 <= snap2 {
                        let (a, b) = (find(&mut parent, v as u32), find(&mut parent, o));
                        if a != b {
                            parent[a.max(b) as usize] = a.min(b);
                        }
                    }
                }
            }
        }
    }
    (0..xs.len() as u32).map(|v| find(&mut parent, v)).collect()
}

/// Area-weighted centroid of a multipolygon (holes subtract), from the `geo` crate (the same
/// definition the scan uses); a zero-area shape gets the centroid of its outline, an empty one
/// NaN.
pub fn centroid(polygon: &MultiPolygon<f64>) -> (f64, f64) {
    use geo::Centroid;
    polygon
        .centroid()
        .map_or((f64::NAN, f64::NAN), |p| (p.x(), p.y()))
}

type IndexedPoint = GeomWithData<[f64; 2], u32>;

fn centroid_tree(x: &[f64], y: &[f64]) -> RTree<IndexedPoint> {
    RTree::bulk_load(
        x.iter()
            .zip(y)
            .enumerate()
            .map(|(i, (a, b))| IndexedPoint::new([*a, *b], i as u32))
            .collect(),
    )
}

/// The `k` nearest points to (`px`, `py`) other than point `me`, ordered by distance then index
/// (deterministic under ties).
fn nearest_others(tree: &RTree<IndexedPoint>, px: f64, py: f64, me: usize, k: usize) -> Vec<u32> {
    let mut found: Vec<(f64, u32)> = Vec::with_capacity(k + 4);
    for candidate in tree.nearest_neighbor_iter_with_distance_2(&[px, py]) {
        let (point, d2) = candidate;
        if point.data as usize == me {
            continue;
        }
        // Keep reading past the k-th while distances tie, so ties resolve by index.
        if found.len() >= k && d2 > found[k - 1].0 {
            break;
        }
        found.push((d2, point.data));
        if found.len() >= k {
            found.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        }
    }
    found.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    found.truncate(k);
    found.into_iter().map(|(_, i)| i).collect()
}

fn check_points(x: &[f64], y: &[f64]) -> Result<(), WeightsError> {
    if x.len() != y.len() {
        return Err(WeightsError::Invalid(format!(
            "{} x coordinates for {} y coordinates",
            x.len(),
            y.len()
        )));
    }
    if let Some(i) = x
        .iter()
        .zip(y)
        .position(|(a, b)| !a.is_finite() || !b.is_finite())
    {
        return Err(WeightsError::Invalid(format!(
            "area {i} has a non-finite centroid"
        )));
    }
    Ok(())
}

/// The `k` nearest other centroids of every area (Euclidean distance; ties by lower index).
/// Not symmetric in general. An R-tree answers each query in O(log n).
///
/// # Errors
/// [`WeightsError::Invalid`] when `k` is 0 or not below the number of areas, or a centroid is
/// not finite.
pub fn k_nearest(x: &[f64], y: &[f64], k: usize) -> Result<Neighbours, WeightsError> {
    check_points(x, y)?;
    if k == 0 || k >= x.len() {
        return Err(WeightsError::Invalid(format!(
            "k = {k} neighbours needs 1 ≤ k < number of areas ({})",
            x.len()
        )));
    }
    let tree = centroid_tree(x, y);
    let lists = (0..x.len())
        .into_par_iter()
        .map(|i| {
            let mut l = nearest_others(&tree, x[i], y[i], i, k);
            l.sort_unstable();
            l
        })
        .collect();
    Ok(Neighbours { lists })
}

/// Every other centroid within `max_distance` (inclusive) of each area's centroid. Symmetric.
///
/// # Errors
/// [`WeightsError::Invalid`] for a non-positive or non-finite distance, or a non-finite centroid.
pub fn distance_band(x: &[f64], y: &[f64], max_distance: f64) -> Result<Neighbours, WeightsError> {
    check_points(x, y)?;
    if !(max_distance.is_finite() && max_distance > 0.0) {
        return Err(WeightsError::Invalid(format!(
            "maximum distance {max_distance} must be a finite number > 0"
        )));
    }
    let tree = centroid_tree(x, y);
    let d2 = max_distance * max_distance;
    let lists = (0..x.len())
        .into_par_iter()
        .map(|i| {
            let mut l: Vec<u32> = tree
                .locate_within_distance([x[i], y[i]], d2)
                .map(|p| p.data)
                .filter(|&j| j as usize != i)
                .collect();
            l.sort_unstable();
            l
        })
        .collect();
    Ok(Neighbours { lists })
}

/// How neighbours are defined.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Method {
    /// Queen contiguity (a shared boundary point).
    Queen,
    /// Rook contiguity (a shared boundary edge).
    Rook,
    /// The k nearest centroids.
    KNearest(usize),
    /// Centroids within a distance (inclusive), in the coordinates' unit.
    DistanceBand(f64),
}

/// Area-weighted centroids of every area, as (x, y) columns.
pub fn centroids(polygons: &[MultiPolygon<f64>]) -> (Vec<f64>, Vec<f64>) {
    polygons.par_iter().map(centroid).unzip()
}

/// Neighbours of `polygons` by `method` ([`contiguity`] with `snap_m`, [`k_nearest`] or
/// [`distance_band`] on [`centroids`]).
///
/// # Errors
/// As the builder called.
pub fn build(
    polygons: &[MultiPolygon<f64>],
    method: Method,
    snap_m: f64,
) -> Result<Neighbours, WeightsError> {
    match method {
        Method::Queen => contiguity(polygons, Contiguity::Queen, snap_m),
        Method::Rook => contiguity(polygons, Contiguity::Rook, snap_m),
        Method::KNearest(k) => {
            let (x, y) = centroids(polygons);
            k_nearest(&x, &y, k)
        }
        Method::DistanceBand(d) => {
            let (x, y) = centroids(polygons);
            distance_band(&x, &y, d)
        }
    }
}

#[cfg(test)]
mod tests;
