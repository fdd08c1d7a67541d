//! Most likely and secondary clusters (no shared location with a higher-ranked one; Kulldorff
//! 1997, §6; cylinders: no shared location in a shared period) with Monte Carlo p-values against the distribution of the maximum (Dwass 1957) and
//! Gumbel-approximated p-values (Abrams, Kleinman & Kulldorff 2010, Int. J. Health Geogr. 9:61).

use crate::cylinders::CylinderBest;
use crate::engine::CentreBest;
use crate::windows::{GridIndex, Neighbourhood, Sites, WindowLimits};

/// A selected cluster, before its statistics are written.
#[derive(Debug, Clone)]
pub struct Cluster {
    /// 1 = most likely.
    pub rank: usize,
    /// Index of its centre.
    pub centre: usize,
    /// Its window.
    pub window: CentreBest,
    /// Its locations.
    pub members: Vec<u32>,
    /// Its run of periods (space-time scans).
    pub time: Option<ClusterTime>,
    /// Monte Carlo p-value, None without replicates.
    pub p_value: Option<f64>,
    /// Gumbel p-value, None with fewer than 2 replicates or no spread in the maxima.
    pub p_value_gumbel: Option<f64>,
}

/// Inputs of the selection.
#[derive(Debug, Clone, Copy)]
pub struct Selection<'a> {
    /// Location eastings (m).
    pub x: &'a [f64],
    /// Location northings (m).
    pub y: &'a [f64],
    /// Location weights (as scanned).
    pub weight: &'a [f64],
    /// Centres (m).
    pub centres: &'a [(f64, f64)],
    /// Window limits (as scanned).
    pub limits: WindowLimits,
    /// Most clusters to keep.
    pub max_clusters: usize,
    /// Keep only clusters with a p-value at most this (ignored without replicates).
    pub report_p: f64,
}

/// When a space-time cluster happens: a run of periods.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClusterTime {
    /// First period of the run (0 = the first period studied).
    pub first_period: usize,
    /// Periods in the run.
    pub periods: usize,
    /// Records expected inside from the margins (space-time permutation), else None.
    pub expected: Option<f64>,
}

impl ClusterTime {
    /// Whether the runs share a period.
    fn overlaps(&self, other: &ClusterTime) -> bool {
        self.first_period < other.first_period + other.periods
            && other.first_period < self.first_period + self.periods
    }
}

/// Picks clusters from the best window of each centre, highest ratio first (ties: lower centre
/// index), skipping any that shares a location with one already picked; then attaches p-values
/// from the replicate maxima and drops those above `report_p`.
pub fn select(
    selection: &Selection<'_>,
    best: &[Option<CentreBest>],
    replicate_max: &[f64],
) -> Vec<Cluster> {
    let candidates = best
        .iter()
        .enumerate()
        .filter_map(|(i, b)| b.map(|b| (i, b, None)))
        .collect();
    pick(selection, candidates, replicate_max)
}

/// [`select`] for cylinders: a cylinder is skipped when it shares a location with one already
/// picked and a period with it too.
pub fn select_cylinders(
    selection: &Selection<'_>,
    best: &[Option<CylinderBest>],
    replicate_max: &[f64],
    permutation: bool,
) -> Vec<Cluster> {
    let candidates = best
        .iter()
        .enumerate()
        .filter_map(|(i, b)| {
            b.map(|b| {
                let window = CentreBest {
                    llr: b.llr,
                    side: b.side,
                    locations: b.locations,
                    size: b.records as f64,
                    radius_m: b.radius_m,
                    next_distance_m: b.next_distance_m,
                    inside: b.inside,
                };
                let time = ClusterTime {
                    first_period: b.first_period,
                    periods: b.periods,
                    expected: permutation.then_some(b.size),
                };
                (i, window, Some(time))
            })
        })
        .collect();
    pick(selection, candidates, replicate_max)
}

/// The selection shared by circles and cylinders.
fn pick(
    selection: &Selection<'_>,
    mut order: Vec<(usize, CentreBest, Option<ClusterTime>)>,
    replicate_max: &[f64],
) -> Vec<Cluster> {
    order.retain(|(_, b, _)| b.llr > 0.0);
    order.sort_by(|a, b| b.1.llr.total_cmp(&a.1.llr).then(a.0.cmp(&b.0)));
    let index = GridIndex::new(selection.x, selection.y);
    let sites = Sites {
        index: &index,
        x: selection.x,
        y: selection.y,
        weight: selection.weight,
    };
    let mut hood = Neighbourhood::default();
    // Per location, the clusters (their positions in `clusters`) holding it.
    let mut holders: Vec<Vec<usize>> = vec![Vec::new(); selection.x.len()];
    let gumbel = GumbelFit::of(replicate_max);
    let mut clusters: Vec<Cluster> = Vec::new();
    for (centre, window, time) in order {
        if clusters.len() >= selection.max_clusters {
            break;
        }
        hood.fill(&sites, selection.centres[centre], selection.limits);
        let members: Vec<u32> = hood.order[..window.locations.min(hood.order.len())].to_vec();
        let clashes = |other: &Cluster| match (&time, &other.time) {
            (Some(a), Some(b)) => a.overlaps(b),
            _ => true,
        };
        if members
            .iter()
            .any(|&m| holders[m as usize].iter().any(|&k| clashes(&clusters[k])))
        {
            continue;
        }
        let p_value = (!replicate_max.is_empty())
            .then(|| stance_core::montecarlo::upper_tail_p(window.llr, replicate_max));
        if p_value.is_some_and(|p| p > selection.report_p) {
            // Lower-ranked windows have lower ratios and so p-values at least as large.
            break;
        }
        for &m in &members {
            holders[m as usize].push(clusters.len());
        }
        clusters.push(Cluster {
            rank: clusters.len() + 1,
            centre,
            window,
            members,
            time,
            p_value,
            p_value_gumbel: gumbel.map(|g| g.upper_tail(window.llr)),
        });
    }
    clusters
}

/// A Gumbel (type I extreme value) distribution fitted to the replicate maxima by the method of
/// moments: β = s√6/π, μ = m − γβ (m, s: mean and standard deviation with n − 1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GumbelFit {
    /// Location μ.
    pub location: f64,
    /// Scale β.
    pub scale: f64,
}

/// Euler–Mascheroni constant γ.
const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

impl GumbelFit {
    /// The fit, or None with fewer than two maxima or none that differ.
    pub fn of(maxima: &[f64]) -> Option<Self> {
        if maxima.len() < 2 {
            return None;
        }
        let n = maxima.len() as f64;
        let mean = maxima.iter().sum::<f64>() / n;
        let variance = maxima.iter().map(|m| (m - mean).powi(2)).sum::<f64>() / (n - 1.0);
        let scale = variance.sqrt() * 6.0f64.sqrt() / std::f64::consts::PI;
        (scale > 0.0 && scale.is_finite()).then_some(GumbelFit {
            location: mean - EULER_GAMMA * scale,
            scale,
        })
    }

    /// P(max ≥ x) = 1 − exp(−exp(−(x − μ)/β)), computed with `expm1` so tiny values keep
    /// their digits.
    pub fn upper_tail(&self, x: f64) -> f64 {
        let z = (x - self.location) / self.scale;
        -(-(-z).exp()).exp_m1()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::Side;
    use approx::assert_relative_eq;

    #[test]
    fn gumbel_moments_and_tail() {
        // Maxima 1, 2, 3, 4: mean 2.5, s² = 5/3, β = √(5/3)·√6/π = 1.006584…,
        // μ = 2.5 − 0.5772157·β = 1.918985… (computed by hand from the definitions).
        let fit = GumbelFit::of(&[1.0, 2.0, 3.0, 4.0]).expect("fit");
        let beta = (5.0f64 / 3.0).sqrt() * 6.0f64.sqrt() / std::f64::consts::PI;
        assert_relative_eq!(fit.scale, beta, max_relative = 1e-14);
        assert_relative_eq!(fit.location, 2.5 - EULER_GAMMA * beta, max_relative = 1e-14);
        // At x = μ the tail is 1 − e^{−1}.
        assert_relative_eq!(
            fit.upper_tail(fit.location),
            1.0 - (-1.0f64).exp(),
            max_relative = 1e-14
        );
        // Far in the tail it is ≈ e^{−z}.
        let z = 40.0;
        assert_relative_eq!(
            fit.upper_tail(fit.location + z * fit.scale),
            (-z).exp(),
            max_relative = 1e-12
        );
        assert!(GumbelFit::of(&[2.0, 2.0]).is_none());
        assert!(GumbelFit::of(&[2.0]).is_none());
    }

    #[test]
    fn secondary_clusters_share_no_location() {
        // Four locations on a line; centre 0's best window takes {0, 1}, centre 1's {1, 2}
        // (overlaps, skipped), centre 3's {3}.
        let x = [0.0, 1.0, 2.1, 10.0];
        let y = [0.0; 4];
        let weight = [1.0; 4];
        let centres: Vec<(f64, f64)> = x.iter().map(|&a| (a, 0.0)).collect();
        let window = |llr: f64, locations: usize| CentreBest {
            llr,
            side: Side::High,
            locations,
            size: locations as f64,
            radius_m: 0.0,
            next_distance_m: 1.0,
            inside: [0; 3],
        };
        let best = vec![
            Some(window(5.0, 2)),
            Some(window(4.0, 2)),
            None,
            Some(window(1.0, 1)),
        ];
        let selection = Selection {
            x: &x,
            y: &y,
            weight: &weight,
            centres: &centres,
            limits: WindowLimits {
                max_weight: 2.0,
                max_radius_m: f64::INFINITY,
            },
            max_clusters: 10,
            report_p: 1.0,
        };
        let clusters = select(&selection, &best, &[0.5, 4.5, 6.0]);
        assert_eq!(clusters.len(), 2);
        assert_eq!(clusters[0].members, vec![0, 1]);
        assert_eq!(clusters[1].members, vec![3]);
        // p = (1 + #{max ≥ 5}) / 4 = 2/4; (1 + #{max ≥ 1}) / 4 = 3/4.
        assert_eq!(clusters[0].p_value, Some(0.5));
        assert_eq!(clusters[1].p_value, Some(0.75));
        let strict = Selection {
            report_p: 0.6,
            ..selection
        };
        assert_eq!(select(&strict, &best, &[0.5, 4.5, 6.0]).len(), 1);
        let one = Selection {
            max_clusters: 1,
            ..selection
        };
        assert_eq!(select(&one, &best, &[]).len(), 1);
        assert_eq!(select(&one, &best, &[])[0].p_value, None);
    }
}
