//! A binomial share with its standard error and the Wilson (1927) score interval.

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

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Worked from the formula: k = 0, n = 10, z = 1.96 → (0, z²/(n + z²)) = (0, 0.27753).
    #[test]
    fn zero_successes() {
        let s = share(0.0, 10.0, 1.96).expect("share");
        assert_eq!((s.share, s.se, s.low), (0.0, 0.0, 0.0));
        assert_relative_eq!(s.high, 3.8416 / 13.8416, max_relative = 1e-12);
        assert!(share(0.0, 0.0, 1.96).is_none());
    }
}
