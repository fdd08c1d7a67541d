use super::*;
use approx::assert_relative_eq;
use geo_types::{polygon, MultiPolygon};

/// Unit square with lower-left corner (x, y).
fn square(x: f64, y: f64) -> MultiPolygon<f64> {
    MultiPolygon::new(vec![polygon![
        (x: x, y: y), (x: x + 1.0, y: y), (x: x + 1.0, y: y + 1.0), (x: x, y: y + 1.0)
    ]])
}

/// A rows × cols lattice of unit squares, row-major from the lower left.
fn lattice(rows: usize, cols: usize) -> Vec<MultiPolygon<f64>> {
    (0..rows)
        .flat_map(|r| (0..cols).map(move |c| square(c as f64, r as f64)))
        .collect()
}

#[test]
fn three_by_three_lattice_by_hand() {
    // Worked by hand: 3 × 3 rook has 12 shared edges → 24 directed links; queen adds the
    // 8 diagonal pairs → 40. Centre (4) has 4 rook / 8 queen neighbours.
    let areas = lattice(3, 3);
    let rook = contiguity(&areas, Contiguity::Rook, 0.0).expect("valid input");
    let queen = contiguity(&areas, Contiguity::Queen, 0.0).expect("valid input");
    assert_eq!(rook.links(), 24);
    assert_eq!(queen.links(), 40);
    assert_eq!(rook.lists[4], vec![1, 3, 5, 7]);
    assert_eq!(queen.lists[4], vec![0, 1, 2, 3, 5, 6, 7, 8]);
    assert_eq!(queen.lists[0], vec![1, 3, 4]);
    let s = queen.summary();
    assert_eq!(
        (s.min_neighbours, s.max_neighbours, s.components),
        (3, 8, 1)
    );
    assert_relative_eq!(s.mean_neighbours, 40.0 / 9.0);
    assert!(s.symmetric && s.islands.is_empty());
}

#[test]
fn island_and_components() {
    let mut areas = lattice(1, 2);
    areas.push(square(10.0, 0.0));
    areas.push(square(10.0, 1.0));
    areas.push(square(20.0, 0.0));
    let queen = contiguity(&areas, Contiguity::Queen, 0.0).expect("valid input");
    let s = queen.summary();
    assert_eq!(s.islands, vec![4]);
    assert_eq!(s.components, 3);
    assert_eq!(queen.components(), vec![0, 0, 1, 1, 2]);
    let mut linked = queen.clone();
    let xs: Vec<f64> = areas.iter().map(|p| centroid(p).0).collect();
    let ys: Vec<f64> = areas.iter().map(|p| centroid(p).1).collect();
    // Island centroid (20.5, 0.5): nearest is area 2 at (10.5, 0.5), distance 10.
    assert_eq!(linked.link_islands_to_nearest(&xs, &ys), vec![(4, 2)]);
    assert_eq!(linked.lists[4], vec![2]);
    assert_eq!(linked.lists[2], vec![3, 4]);
    assert!(linked.islands().is_empty());
}

#[test]
fn corner_touch_is_queen_not_rook_and_snap_closes_gaps() {
    let areas = vec![square(0.0, 0.0), square(1.0, 1.0)];
    assert_eq!(
        contiguity(&areas, Contiguity::Queen, 0.0)
            .expect("valid input")
            .links(),
        2
    );
    assert_eq!(
        contiguity(&areas, Contiguity::Rook, 0.0)
            .expect("valid input")
            .links(),
        0
    );
    // A 1 mm digitising gap between two squares: no link exactly, linked with 5 mm snap.
    let areas = vec![square(0.0, 0.0), square(1.001, 0.0)];
    assert_eq!(
        contiguity(&areas, Contiguity::Rook, 0.0)
            .expect("valid input")
            .links(),
        0
    );
    assert_eq!(
        contiguity(&areas, Contiguity::Rook, 0.005)
            .expect("valid input")
            .links(),
        2
    );
    assert_eq!(
        contiguity(&areas, Contiguity::Queen, 0.005)
            .expect("valid input")
            .links(),
        2
    );
    assert!(contiguity(&areas, Contiguity::Queen, -1.0).is_err());
}

#[test]
fn knn_and_distance_band() {
    // Five centroids on a line at x = 0, 1, 2, 4, 8.
    let x = [0.0, 1.0, 2.0, 4.0, 8.0];
    let y = [0.0; 5];
    let knn = k_nearest(&x, &y, 2).expect("valid input");
    // Area 1: 0 and 2 tie at 1 → both. Area 3: 2 (d 2), then 1 (d 3).
    assert_eq!(knn.lists[1], vec![0, 2]);
    assert_eq!(knn.lists[3], vec![1, 2]);
    assert_eq!(knn.lists[4], vec![2, 3]);
    assert!(!knn.is_symmetric());
    assert!(knn.symmetrised().is_symmetric());
    let band = distance_band(&x, &y, 2.0).expect("valid input");
    assert_eq!(band.lists[0], vec![1, 2]);
    assert_eq!(band.lists[3], vec![2]);
    assert!(band.lists[4].is_empty());
    assert!(k_nearest(&x, &y, 5).is_err());
    assert!(distance_band(&x, &y, 0.0).is_err());
    // Ties resolve by the lower index: area 1 with k = 1 takes area 0 (both at distance 1).
    assert_eq!(k_nearest(&x, &y, 1).expect("valid input").lists[1], vec![0]);
}

#[test]
fn standardisation_and_moments() {
    // Path 0 – 1 – 2, row standardised: w01 = 1, w10 = w12 = ½, w21 = 1.
    let n = Neighbours {
        lists: vec![vec![1], vec![0, 2], vec![1]],
    };
    let w = n.standardise(Standardisation::Row);
    assert_eq!(w.row(1), (&[0u32, 2][..], &[0.5, 0.5][..]));
    let m = w.moments();
    // S0 = 3; S1 = ½ Σ (w_ij + w_ji)² = ½ · 4 · 1.5² = 4.5;
    // row sums 1, 1, 1; column sums ½, 2, ½ → S2 = 1.5² + 3² + 1.5² = 13.5.
    assert_relative_eq!(m.s0, 3.0);
    assert_relative_eq!(m.s1, 4.5);
    assert_relative_eq!(m.s2, 13.5);
    let b = n.standardise(Standardisation::Binary).moments();
    assert_relative_eq!(b.s0, 4.0);
    assert_relative_eq!(b.s1, 8.0);
    assert_relative_eq!(b.s2, 4.0 + 16.0 + 4.0);
    // Asymmetric: 0 → 1 only. S1 = ½ (w01² + w10²) both from the one link = ½·2·1 = 1.
    let a = Neighbours {
        lists: vec![vec![1], vec![]],
    };
    assert_relative_eq!(a.standardise(Standardisation::Binary).moments().s1, 1.0);
}

/// S1 as first written: w_ji looked up in a map filled row by row (the last of repeated
/// links wins), summed in row order.
fn s1_by_map(w: &SparseWeights) -> f64 {
    let mut lookup = HashMap::new();
    for i in 0..w.len() {
        let (js, ws) = w.row(i);
        for (j, v) in js.iter().zip(ws) {
            lookup.insert((i as u32, *j), *v);
        }
    }
    let mut s1 = 0.0;
    for i in 0..w.len() {
        let (js, ws) = w.row(i);
        for (j, v) in js.iter().zip(ws) {
            let back: f64 = lookup.get(&(*j, i as u32)).copied().unwrap_or(0.0);
            s1 += (v + back).powi(2);
            if back == 0.0 {
                s1 += (v + back).powi(2);
            }
        }
    }
    s1 * 0.5
}

#[test]
fn s1_equals_the_map_lookup_bit_for_bit() {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let n = 300;
    // Asymmetric links, unsorted rows, some repeated, some zero weights.
    let mut offsets = vec![0];
    let (mut neighbours, mut weights) = (Vec::new(), Vec::new());
    for _ in 0..n {
        for _ in 0..rng.random_range(0..12) {
            neighbours.push(rng.random_range(0..n as u32));
            weights.push(if rng.random_bool(0.1) {
                0.0
            } else {
                rng.random_range(0.01..2.0)
            });
        }
        offsets.push(neighbours.len());
    }
    let w = SparseWeights {
        offsets,
        neighbours,
        weights,
    };
    assert_eq!(w.moments().s1.to_bits(), s1_by_map(&w).to_bits());
    let queen = Neighbours {
        lists: (0..n as u32)
            .map(|i| {
                [i.wrapping_sub(1), i + 1]
                    .into_iter()
                    .filter(|&j| j < n as u32)
                    .collect()
            })
            .collect(),
    }
    .standardise(Standardisation::Row);
    assert_eq!(queen.moments().s1.to_bits(), s1_by_map(&queen).to_bits());
}

#[test]
fn centroid_of_square_with_hole_and_empty_input() {
    let c = centroid(&square(2.0, 3.0));
    assert_relative_eq!(c.0, 2.5);
    assert_relative_eq!(c.1, 3.5);
    let empty = contiguity(&[], Contiguity::Queen, 0.0).expect("valid input");
    assert!(empty.is_empty());
    assert_eq!(empty.summary().components, 0);
}

#[test]
fn ten_thousand_squares_quickly() {
    let areas = lattice(100, 100);
    let queen = contiguity(&areas, Contiguity::Queen, 0.0).expect("valid input");
    // Interior 98² × 8 + edges 4·98 × 5 + corners 4 × 3.
    assert_eq!(queen.links(), 98 * 98 * 8 + 4 * 98 * 5 + 4 * 3);
    let snapped = contiguity(&areas, Contiguity::Rook, 1e-6).expect("valid input");
    assert_eq!(snapped.links(), 98 * 98 * 4 + 4 * 98 * 3 + 4 * 2);
}
