//! A binomial share with its standard error and the Wilson (1927) score interval, and the
//! standard normal quantile the interval needs.

use stance_core::normal::upper_tail;

/// A share k/n with its standard error and Wilson interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Share {
    /// k / n.
    pub share: f64,
    /// √(p(1 − p)/n).
    pub se: f64,
    /// Lower end of the Wilson interval.
    pub low: f64,
    /// Upper end of the Wilson interval.
    pub high: f64,
}

/// The share `k` of `n` with the Wilson score interval at level 1 − α, given z = z_{1−α/2}:
/// (p + z²/2n ± z √(p(1−p)/n + z²/4n²)) / (1 + z²/n). None when n = 0.
pub fn share(k: f64, n: f64, z: f64) -> Option<Share> {
    if n <= 0.0 {
        return None;
    }
    let p = k / n;
    let z2 = z * z;
    let denominator = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denominator;
    let half = z * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt() / denominator;
    Some(Share {
        share: p,
        se: (p * (1.0 - p) / n).sqrt(),
        low: (centre - half).max(0.0),
        high: (centre + half).min(1.0),
    })
}

/// The standard normal quantile Φ⁻¹(q) for 0 < q < 1: a rational first guess refined by
/// Newton steps on the tail of [`stance_core::normal`] (to ~1e-15).
pub fn normal_quantile(q: f64) -> f64 {
    if !(q > 0.0 && q < 1.0) {
        return f64::NAN;
    }
    // Solve 1 − Φ(x) = tail on the smaller tail, so that q near 0 keeps its precision.
    let tail = q.min(1.0 - q);
    // Starting point: the tail approximation t − (c0 + c1 t + c2 t²)/(1 + d1 t + d2 t² + d3 t³)
    // with t = √(−2 ln tail) (Abramowitz & Stegun 26.2.23, error < 4.5e-4).
    let t = (-2.0 * tail.ln()).sqrt();
    let mut x = t
        - (2.515517 + 0.802853 * t + 0.010328 * t * t)
            / (1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    let density = |x: f64| (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt();
    for _ in 0..4 {
        x += (upper_tail(x) - tail) / density(x);
    }
    if q < 0.5 {
        -x
    } else {
        x
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Standard normal quantiles as tabulated (Abramowitz & Stegun, table 26.5, to 15 digits
    /// via the published 1.959963984540054 and 2.575829303548901).
    #[test]
    fn quantiles() {
        assert_relative_eq!(
            normal_quantile(0.975),
            1.959963984540054,
            max_relative = 1e-13
        );
        assert_relative_eq!(
            normal_quantile(0.995),
            2.575829303548901,
            max_relative = 1e-13
        );
        assert_relative_eq!(
            normal_quantile(0.025),
            -1.959963984540054,
            max_relative = 1e-13
        );
        assert!(normal_quantile(0.5).abs() < 1e-15);
    }

    /// Worked from the formula: k = 0, n = 10, z = 1.96 → (0, z²/(n + z²)) = (0, 0.27753).
    #[test]
    fn zero_successes() {
        let s = share(0.0, 10.0, 1.96).expect("share");
        assert_eq!((s.share, s.se, s.low), (0.0, 0.0, 0.0));
        assert_relative_eq!(s.high, 3.8416 / 13.8416, max_relative = 1e-12);
        assert!(share(0.0, 0.0, 1.96).is_none());
    }
}
