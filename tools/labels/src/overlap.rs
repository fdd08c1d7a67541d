//! How much clusters found under different labellers agree: the Jaccard index (Jaccard 1912,
//! New Phytologist 11, 37–50) |A ∩ B| / |A ∪ B| of areas, between the union of each layer's
//! polygons (cluster circles, tolerance regions) and between single features, and which features
//! of a layer are matched in every other layer or in none ("labeller-specific").

use geo::{Area, BooleanOps};
use geo_types::MultiPolygon;

/// The Jaccard index of two regions (NaN when both are empty).
pub fn jaccard(a: &MultiPolygon<f64>, b: &MultiPolygon<f64>) -> f64 {
    let both = a.intersection(b).unsigned_area();
    let either = a.union(b).unsigned_area();
    if either > 0.0 {
        both / either
    } else {
        f64::NAN
    }
}

/// The union of a layer's polygons.
pub fn union_all(polygons: &[MultiPolygon<f64>]) -> MultiPolygon<f64> {
    polygons
        .iter()
        .fold(MultiPolygon::new(Vec::new()), |acc, p| acc.union(p))
}

/// One feature of one compared layer.
#[derive(Debug, Clone, PartialEq)]
pub struct FeatureMatch {
    /// Index of its layer.
    pub layer: usize,
    /// Index of the feature in its layer.
    pub index: usize,
    /// Per layer, the largest Jaccard index with any of its features (NaN for its own layer;
    /// 0 when the other layer is empty).
    pub best: Vec<f64>,
    /// Other layers with a feature at or above the threshold.
    pub matched_in: usize,
}

/// The comparison of several layers.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// Jaccard index of the unions of every pair of layers `(a, b, index)`.
    pub pairs: Vec<(usize, usize, f64)>,
    /// Every feature of every layer.
    pub features: Vec<FeatureMatch>,
}

/// Compares `layers` (all in one CRS); a feature is matched in another layer when its Jaccard
/// index with one of that layer's features is at least `threshold`. With `sides` (a label per
/// feature, e.g. the side a cluster leans to), only features with the same label are compared.
pub fn compare(
    layers: &[Vec<MultiPolygon<f64>>],
    sides: Option<&[Vec<Option<String>>]>,
    threshold: f64,
) -> Comparison {
    let same = |a: (usize, usize), b: (usize, usize)| {
        sides.is_none_or(|s| s[a.0].get(a.1) == s[b.0].get(b.1))
    };
    let unions: Vec<MultiPolygon<f64>> = layers.iter().map(|l| union_all(l)).collect();
    let mut pairs = Vec::new();
    for a in 0..layers.len() {
        for b in a + 1..layers.len() {
            pairs.push((a, b, jaccard(&unions[a], &unions[b])));
        }
    }
    let mut features = Vec::new();
    for (li, layer) in layers.iter().enumerate() {
        for (index, feature) in layer.iter().enumerate() {
            let best: Vec<f64> = (0..layers.len())
                .map(|other| {
                    if other == li {
                        return f64::NAN;
                    }
                    layers[other]
                        .iter()
                        .enumerate()
                        .filter(|(gi, _)| same((li, index), (other, *gi)))
                        .map(|(_, g)| jaccard(feature, g))
                        .filter(|v| v.is_finite())
                        .fold(0.0, f64::max)
                })
                .collect();
            let matched_in = best.iter().filter(|&&v| v >= threshold).count();
            features.push(FeatureMatch {
                layer: li,
                index,
                best,
                matched_in,
            });
        }
    }
    Comparison { pairs, features }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use geo_types::polygon;

    fn square(x0: f64, y0: f64, side: f64) -> MultiPolygon<f64> {
        MultiPolygon::new(vec![polygon![
            (x: x0, y: y0), (x: x0 + side, y: y0), (x: x0 + side, y: y0 + side), (x: x0, y: y0 + side), (x: x0, y: y0),
        ]])
    }

    /// Two unit squares overlapping by half: intersection 0.5, union 1.5 → 1/3.
    #[test]
    fn half_overlapping_squares_give_one_third() {
        assert_relative_eq!(
            jaccard(&square(0.0, 0.0, 1.0), &square(0.5, 0.0, 1.0)),
            1.0 / 3.0,
            epsilon = 1e-12
        );
        assert_relative_eq!(jaccard(&square(0.0, 0.0, 1.0), &square(5.0, 0.0, 1.0)), 0.0);
    }

    /// A zone found under all three labellers and one found only under the third.
    #[test]
    fn a_zone_of_one_labeller_only_is_matched_nowhere() {
        let shared = square(0.0, 0.0, 10.0);
        let layers = vec![
            vec![square(0.5, 0.0, 10.0)],
            vec![shared.clone()],
            vec![square(0.0, 0.5, 10.0), square(50.0, 50.0, 5.0)],
        ];
        let got = compare(&layers, None, 0.5);
        let only = got
            .features
            .iter()
            .find(|f| f.layer == 2 && f.index == 1)
            .expect("feature");
        assert_eq!(only.matched_in, 0);
        let found = got.features.iter().find(|f| f.layer == 1).expect("feature");
        assert_eq!(found.matched_in, 2);
        assert_eq!(got.pairs.len(), 3);
        // Unions of layers 0 and 1: 95 / 105.
        assert_relative_eq!(got.pairs[0].2, 95.0 / 105.0, epsilon = 1e-9);
        // With sides: the same place leaning the other way is not the same finding.
        let side = |s: &str| Some(s.to_owned());
        let sides = vec![
            vec![side("oppose")],
            vec![side("support")],
            vec![side("support"), side("oppose")],
        ];
        let got = compare(&layers, Some(&sides), 0.5);
        let first = got.features.iter().find(|f| f.layer == 0).expect("feature");
        assert_eq!(first.matched_in, 0);
        assert_relative_eq!(first.best[1], 0.0);
    }
}
