//! Local join counts (Anselin & Li 2019, "Local join count statistics", J. Geogr. Syst. 21:
//! 189–210) under binary weights, with conditional-permutation pseudo p-values:
//!
//! - univariate: LJC_i = x_i Σ_j w_ij x_j — an area with the attribute among neighbours with it;
//! - bivariate without co-location: BJC_i = x_i (1 − z_i) Σ_j w_ij z_j (1 − x_j) — an area with
//!   attribute x (not z) among neighbours with z (not x);
//! - co-location: CLC_i = x_i z_i Σ_j w_ij x_j z_j — both attributes here and next door.
//!
//! Each is f_i Σ_j w_ij v_j with a factor f_i of the area itself and a value v_j of its
//! neighbours; conditional permutation keeps (x_i, z_i) and draws the neighbours' pairs from the
//! other areas. Following the paper, only areas with f_i = 1 are tested (upper tail: more joins
//! than chance allows); the others get no p-value.

use stance_core::weights::SparseWeights;

use crate::permutation::{conditional_counts, p_greater, Counts, Replicates};

/// Which local join count.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum JoinKind {
    /// x next to x.
    Univariate,
    /// x (without z) next to z (without x).
    Bivariate,
    /// x and z together, next to x and z together.
    CoLocation,
}

/// The local join counts of every area.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalJoins {
    /// The statistic (NaN for areas without neighbours).
    pub join_count: Vec<f64>,
    /// Whether the area is tested (f_i = 1 and it has neighbours).
    pub tested: Vec<bool>,
    /// Upper-tail conditional-permutation p (NaN when not tested or without permutations).
    pub p_permutation: Vec<f64>,
    /// Permuted lags ≥ and ≤ the observed one, per area (what shards add up).
    pub counts: Vec<Counts>,
}

/// The factor f_i and neighbour value v_j of `kind` from the attributes `x` and `z`.
pub fn factor_and_value(kind: JoinKind, x: &[bool], z: &[bool]) -> (Vec<bool>, Vec<f64>) {
    let n = x.len();
    let both = |i: usize| x[i] && z[i];
    match kind {
        JoinKind::Univariate => (
            x.to_vec(),
            x.iter().map(|&a| f64::from(u8::from(a))).collect(),
        ),
        JoinKind::Bivariate => (
            (0..n).map(|i| x[i] && !z[i]).collect(),
            (0..n).map(|i| f64::from(u8::from(z[i] && !x[i]))).collect(),
        ),
        JoinKind::CoLocation => (
            (0..n).map(both).collect(),
            (0..n).map(|i| f64::from(u8::from(both(i)))).collect(),
        ),
    }
}

/// Local join counts of `kind` under binary weights `w`, with `replicates` permutations.
/// `progress` is told how many permutations are done.
pub fn local_join_counts(
    kind: JoinKind,
    x: &[bool],
    z: &[bool],
    w: &SparseWeights,
    replicates: &Replicates,
    progress: &dyn Fn(usize),
) -> LocalJoins {
    let (factor, v) = factor_and_value(kind, x, z);
    let n = x.len();
    let has_neighbours = |i: usize| !w.row(i).0.is_empty();
    let lag: Vec<f64> = (0..n)
        .map(|i| {
            if has_neighbours(i) {
                w.lag(i, &v)
            } else {
                f64::NAN
            }
        })
        .collect();
    let join_count = (0..n)
        .map(|i| if factor[i] { lag[i] } else { 0.0 * lag[i] })
        .collect();
    let tested: Vec<bool> = (0..n).map(|i| factor[i] && has_neighbours(i)).collect();
    let counts = conditional_counts(&v, w, &lag, &tested, replicates, progress);
    let p_permutation = (0..n)
        .map(|i| {
            if tested[i] && replicates.permutations > 0 {
                p_greater(counts[i], replicates.permutations)
            } else {
                f64::NAN
            }
        })
        .collect();
    LocalJoins {
        join_count,
        tested,
        p_permutation,
        counts,
    }
}

/// One global join count with its moments under non-free sampling.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct JoinMoments {
    /// The count of joins (each neighbouring pair once: ½ Σ_i Σ_j w_ij …).
    pub count: f64,
    /// Its expectation.
    pub expected: f64,
    /// Its variance.
    pub variance: f64,
    /// (count − expected) / √variance.
    pub z: f64,
}

/// Global join counts BB, WW, BW (Cliff & Ord 1981, *Spatial Processes*, §1.5, non-free
/// sampling), over the areas with neighbours.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GlobalJoins {
    /// Joins between two areas with the attribute.
    pub bb: JoinMoments,
    /// Joins between two areas without it.
    pub ww: JoinMoments,
    /// Joins between an area with it and one without.
    pub bw: JoinMoments,
    /// Areas with neighbours (n).
    pub n: usize,
    /// Of them, with the attribute (n1).
    pub n1: usize,
    /// All joins ½ S0.
    pub joins: f64,
}

/// n^(k) = n (n − 1) … (n − k + 1).
fn falling(n: f64, k: usize) -> f64 {
    (0..k).map(|j| n - j as f64).product()
}

/// The global join counts of `x` under binary weights `w` with the analytic moments of Cliff &
/// Ord (1981, eqs. 1.31–1.33 for non-free sampling): with n^(k) the falling factorial,
/// E[BB] = ½ S0 n1^(2)/n^(2),
/// Var[BB] = ¼ [S1 n1^(2)/n^(2) + (S2 − 2 S1) n1^(3)/n^(3) + (S0² + S1 − S2) n1^(4)/n^(4)] − E²,
/// E[BW] = S0 n1 n2 / n^(2),
/// Var[BW] = ¼ [2 S1 n1 n2/n^(2) + (S2 − 2 S1) n1 n2 (n1 + n2 − 2)/n^(3)
///            + 4 (S0² + S1 − S2) n1^(2) n2^(2)/n^(4)] − E².
/// Islands take no part (n counts the areas with neighbours).
pub fn global_join_counts(x: &[bool], w: &SparseWeights) -> GlobalJoins {
    let m = w.moments();
    let with: Vec<usize> = (0..x.len()).filter(|&i| !w.row(i).0.is_empty()).collect();
    let n = with.len() as f64;
    let n1 = with.iter().filter(|&&i| x[i]).count() as f64;
    let n2 = n - n1;
    let (mut bb, mut ww, mut bw) = (0.0, 0.0, 0.0);
    for i in 0..x.len() {
        let (js, ws) = w.row(i);
        for (j, wj) in js.iter().zip(ws) {
            match (x[i], x[*j as usize]) {
                (true, true) => bb += wj,
                (false, false) => ww += wj,
                _ => bw += wj,
            }
        }
    }
    let same = |count: f64, k: f64| {
        let expected = 0.5 * m.s0 * falling(k, 2) / falling(n, 2);
        let variance = 0.25
            * (m.s1 * falling(k, 2) / falling(n, 2)
                + (m.s2 - 2.0 * m.s1) * falling(k, 3) / falling(n, 3)
                + (m.s0 * m.s0 + m.s1 - m.s2) * falling(k, 4) / falling(n, 4))
            - expected * expected;
        moments(count, expected, variance)
    };
    let expected_bw = m.s0 * n1 * n2 / falling(n, 2);
    let variance_bw = 0.25
        * (2.0 * m.s1 * n1 * n2 / falling(n, 2)
            + (m.s2 - 2.0 * m.s1) * n1 * n2 * (n1 + n2 - 2.0) / falling(n, 3)
            + 4.0 * (m.s0 * m.s0 + m.s1 - m.s2) * falling(n1, 2) * falling(n2, 2) / falling(n, 4))
        - expected_bw * expected_bw;
    GlobalJoins {
        bb: same(bb / 2.0, n1),
        ww: same(ww / 2.0, n2),
        bw: moments(bw / 2.0, expected_bw, variance_bw),
        n: with.len(),
        n1: n1 as usize,
        joins: m.s0 / 2.0,
    }
}

fn moments(count: f64, expected: f64, variance: f64) -> JoinMoments {
    JoinMoments {
        count,
        expected,
        variance,
        z: (count - expected) / variance.sqrt(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use stance_core::weights::{Neighbours, Standardisation};

    /// A path 0 – 1 – 2 – 3 – 4.
    fn path5() -> SparseWeights {
        Neighbours {
            lists: vec![vec![1], vec![0, 2], vec![1, 3], vec![2, 4], vec![3]],
        }
        .standardise(Standardisation::Binary)
    }

    const NONE: Replicates = Replicates {
        permutations: 0,
        stream: 0,
        drawn: 0..0,
        given: None,
    };

    #[test]
    fn local_counts_by_hand() {
        // x = 1 1 0 1 1, z = 0 0 1 0 0 on the path (worked by hand):
        // univariate: area 0: x0 · x1 = 1; 1: x1 (x0 + x2) = 1; 2: 0; 3: x4 = 1; 4: x3 = 1.
        let w = path5();
        let x = [true, true, false, true, true];
        let z = [false, false, true, false, false];
        let u = local_join_counts(JoinKind::Univariate, &x, &z, &w, &NONE, &|_| {});
        assert_eq!(u.join_count, vec![1.0, 1.0, 0.0, 1.0, 1.0]);
        assert_eq!(u.tested, vec![true, true, false, true, true]);
        // Bivariate: areas with x next to areas with z: 1 (→ 2) and 3 (→ 2).
        let b = local_join_counts(JoinKind::Bivariate, &x, &z, &w, &NONE, &|_| {});
        assert_eq!(b.join_count, vec![0.0, 1.0, 0.0, 1.0, 0.0]);
        // Co-location: no area holds both, so nothing is tested.
        let c = local_join_counts(JoinKind::CoLocation, &x, &z, &w, &NONE, &|_| {});
        assert!(c.tested.iter().all(|t| !t));
        let both = [true, true, true, false, false];
        let c = local_join_counts(JoinKind::CoLocation, &both, &both, &w, &NONE, &|_| {});
        assert_eq!(c.join_count, vec![1.0, 2.0, 1.0, 0.0, 0.0]);
    }

    #[test]
    fn global_counts_and_moments_by_hand() {
        // x = 1 1 0 1 1 on the 5-path: joins 01 (BB), 12 (BW), 23 (BW), 34 (BB).
        // S0 = 8, S1 = ½ Σ (w_ij + w_ji)² = ½ · 8 · 4 = 16, S2 = Σ (2 d_i)² = 4 + 16·3 + 4 = 56.
        // n = 5, n1 = 4: E[BB] = ½ · 8 · 12/20 = 2.4;
        // Var[BB] = ¼ [16 · 12/20 + (56 − 32) · 24/60 + (64 + 16 − 56) · 24/120] − 2.4²
        //         = ¼ [9.6 + 9.6 + 4.8] − 5.76 = 0.24.
        let w = path5();
        let g = global_join_counts(&[true, true, false, true, true], &w);
        assert_eq!((g.bb.count, g.ww.count, g.bw.count), (2.0, 0.0, 2.0));
        assert_relative_eq!(g.bb.expected, 2.4, max_relative = 1e-14);
        assert_relative_eq!(g.bb.variance, 0.24, max_relative = 1e-12);
        // E[BW] = 8 · 4 · 1 / 20 = 1.6 (n2 = 1, so WW has expectation 0).
        assert_relative_eq!(g.bw.expected, 1.6, max_relative = 1e-14);
        assert_eq!(g.ww.expected, 0.0);
        assert_eq!(g.joins, 4.0);
    }
}
