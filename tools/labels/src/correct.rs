//! Class shares corrected for misclassification by the matrix-inversion estimator (Buonaccorsi
//! 2010, *Measurement Error: Models, Methods and Applications*, ch. 3).
//!
//! With `P[t][l]` = P(label l | true class t) estimated on the reference subset (rows of
//! `n_t` reference records) and the observed label shares `q` of an area (`n` records), the true
//! shares solve `q = Pᵀ π`, so `π̂ = (Pᵀ)⁻¹ q`. Its variance by the delta method, treating `q`
//! and the rows of `P` as independent multinomial shares:
//! `Var π̂ = M⁻¹ [ (diag q − q qᵀ)/n + Σ_t π_t² (diag P_t − P_t P_tᵀ)/n_t ] M⁻ᵀ`, `M = Pᵀ`.
//! (The reference records of the area itself are counted in both parts; the covariance this
//! introduces is ignored.)
//!
//! π̂ may leave the simplex; it is then projected onto it (the Euclidean projection of Duchi et
//! al. 2008) and flagged. The correction is flagged as unstable when it was clamped or when the
//! 1-norm condition number of `M` exceeds [`MAX_CONDITION`].

/// Condition number above which a correction is flagged as unstable: errors in `q` may be
/// amplified more than tenfold.
pub const MAX_CONDITION: f64 = 10.0;

/// The estimated confusion of one labeller.
#[derive(Debug, Clone, PartialEq)]
pub struct Misclassification {
    /// `P[t][l]`.
    pub p: Vec<Vec<f64>>,
    /// Reference records of each true class.
    pub n: Vec<f64>,
    /// `(Pᵀ)⁻¹`, None when singular.
    pub inverse: Option<Vec<Vec<f64>>>,
    /// 1-norm condition number of `Pᵀ` (infinite when singular).
    pub condition: f64,
}

impl Misclassification {
    /// From confusion counts `[t][l]`.
    pub fn new(counts: &[Vec<u64>]) -> Self {
        let n: Vec<f64> = counts
            .iter()
            .map(|r| r.iter().sum::<u64>() as f64)
            .collect();
        let p: Vec<Vec<f64>> = counts
            .iter()
            .zip(&n)
            .map(|(r, &t)| r.iter().map(|&c| c as f64 / t).collect())
            .collect();
        let m = transpose(&p);
        let inverse = if p.iter().flatten().all(|v| v.is_finite()) {
            invert(&m)
        } else {
            None
        };
        let condition = inverse
            .as_ref()
            .map_or(f64::INFINITY, |inv| norm1(&m) * norm1(inv));
        Misclassification {
            p,
            n,
            inverse,
            condition,
        }
    }
}

/// The corrected shares of one area.
#[derive(Debug, Clone, PartialEq)]
pub struct Corrected {
    /// Observed label shares.
    pub raw: Vec<f64>,
    /// Corrected shares, on the simplex.
    pub shares: Vec<f64>,
    /// Delta-method standard errors of the unclamped estimate.
    pub se: Vec<f64>,
    /// The unclamped estimate left the simplex.
    pub clamped: bool,
    /// Clamped, or an ill-conditioned matrix.
    pub unstable: bool,
}

/// The corrected shares of an area with `counts[l]` records labelled `l`; None without records
/// or with a singular matrix.
pub fn correct(counts: &[u64], m: &Misclassification) -> Option<Corrected> {
    let inv = m.inverse.as_ref()?;
    let total: u64 = counts.iter().sum();
    if total == 0 {
        return None;
    }
    let n = total as f64;
    let q: Vec<f64> = counts.iter().map(|&c| c as f64 / n).collect();
    let k = q.len();
    let pi = mul_vec(inv, &q);
    let mut sigma = vec![vec![0.0; k]; k];
    for i in 0..k {
        for j in 0..k {
            let d = if i == j { q[i] } else { 0.0 };
            sigma[i][j] = (d - q[i] * q[j]) / n;
            for ((row, &size), &share) in m.p.iter().zip(&m.n).zip(&pi) {
                let dt = if i == j { row[i] } else { 0.0 };
                sigma[i][j] += share * share * (dt - row[i] * row[j]) / size;
            }
        }
    }
    let var = mul(&mul(inv, &sigma), &transpose(inv));
    let se = (0..k).map(|i| var[i][i].max(0.0).sqrt()).collect();
    let clamped = pi.iter().any(|&v| !(-1e-12..=1.0 + 1e-12).contains(&v));
    let shares = if clamped { simplex(&pi) } else { pi };
    Some(Corrected {
        raw: q,
        shares,
        se,
        clamped,
        unstable: clamped || m.condition > MAX_CONDITION,
    })
}

/// Euclidean projection onto the probability simplex (Duchi, Shalev-Shwartz, Singer & Chandra
/// 2008, ICML, fig. 1).
pub fn simplex(v: &[f64]) -> Vec<f64> {
    let mut sorted = v.to_vec();
    sorted.sort_by(|a, b| b.total_cmp(a));
    let (mut cumulative, mut theta) = (0.0, 0.0);
    for (j, &u) in sorted.iter().enumerate() {
        cumulative += u;
        let t = (cumulative - 1.0) / (j as f64 + 1.0);
        if u - t > 0.0 {
            theta = t;
        }
    }
    v.iter().map(|&x| (x - theta).max(0.0)).collect()
}

fn transpose(a: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = a.len();
    (0..k).map(|j| (0..k).map(|i| a[i][j]).collect()).collect()
}

fn mul(a: &[Vec<f64>], b: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = a.len();
    (0..k)
        .map(|i| {
            (0..k)
                .map(|j| (0..k).map(|t| a[i][t] * b[t][j]).sum())
                .collect()
        })
        .collect()
}

fn mul_vec(a: &[Vec<f64>], x: &[f64]) -> Vec<f64> {
    a.iter()
        .map(|r| r.iter().zip(x).map(|(u, v)| u * v).sum())
        .collect()
}

/// Largest absolute column sum.
fn norm1(a: &[Vec<f64>]) -> f64 {
    let k = a.len();
    (0..k)
        .map(|j| (0..k).map(|i| a[i][j].abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

/// Gauss–Jordan inversion with partial pivoting; None when (numerically) singular.
fn invert(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let k = a.len();
    let mut m: Vec<Vec<f64>> = a
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = r.clone();
            row.extend((0..k).map(|j| f64::from(u8::from(i == j))));
            row
        })
        .collect();
    for c in 0..k {
        let pivot = (c..k).max_by(|&x, &y| m[x][c].abs().total_cmp(&m[y][c].abs()))?;
        if m[pivot][c].abs() < 1e-12 {
            return None;
        }
        m.swap(c, pivot);
        let d = m[c][c];
        m[c].iter_mut().for_each(|v| *v /= d);
        for r in 0..k {
            if r != c {
                let f = m[r][c];
                let row_c = m[c].clone();
                m[r].iter_mut().zip(&row_c).for_each(|(v, u)| *v -= f * u);
            }
        }
    }
    Some(m.into_iter().map(|r| r[k..].to_vec()).collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Two classes: the matrix-inversion estimator is the Rogan–Gladen (1978) estimator
    /// π = (q + Sp − 1) / (Se + Sp − 1). Se = 0.9, Sp = 0.8, q = 0.4 → π = 0.2 / 0.7.
    #[test]
    fn two_classes_give_rogan_gladen() {
        // class 0 = positive: P[0] = (Se, 1 − Se), P[1] = (1 − Sp, Sp).
        let m = Misclassification::new(&[vec![90, 10], vec![20, 80]]);
        let got = correct(&[40, 60], &m).expect("corrected");
        assert_relative_eq!(got.shares[0], 0.2 / 0.7, epsilon = 1e-12);
        assert_relative_eq!(got.shares[1], 0.5 / 0.7, epsilon = 1e-12);
        assert!(!got.clamped);
        // Rogan–Gladen variance, q part only with n_t → ∞ omitted: here both parts.
        let q_part: f64 = 0.4 * 0.6 / 100.0;
        let (se, sp, pi): (f64, f64, f64) = (0.9, 0.8, 0.2 / 0.7);
        let p_part =
            pi * pi * se * (1.0 - se) / 100.0 + (1.0 - pi).powi(2) * sp * (1.0 - sp) / 100.0;
        let var = (q_part + p_part) / (0.7 * 0.7);
        assert_relative_eq!(got.se[0], var.sqrt(), epsilon = 1e-12);
    }

    #[test]
    fn the_identity_changes_nothing() {
        let m = Misclassification::new(&[vec![5, 0, 0], vec![0, 5, 0], vec![0, 0, 5]]);
        let got = correct(&[2, 3, 5], &m).expect("corrected");
        assert_relative_eq!(got.shares[2], 0.5, epsilon = 1e-12);
        assert_relative_eq!(m.condition, 1.0, epsilon = 1e-12);
    }

    #[test]
    fn estimates_off_the_simplex_are_projected_and_flagged() {
        let got = simplex(&[1.2, -0.1, -0.1]);
        assert_relative_eq!(got[0], 1.0, epsilon = 1e-12);
        assert_relative_eq!(got[1], 0.0);
        let m = Misclassification::new(&[vec![90, 10], vec![20, 80]]);
        let out = correct(&[5, 95], &m).expect("corrected");
        assert!(out.clamped && out.unstable);
        assert_relative_eq!(out.shares.iter().sum::<f64>(), 1.0, epsilon = 1e-12);
    }

    #[test]
    fn a_singular_matrix_gives_no_correction() {
        let m = Misclassification::new(&[vec![5, 5], vec![5, 5]]);
        assert!(m.inverse.is_none());
        assert!(correct(&[1, 1], &m).is_none());
    }
}
