//! The standard normal upper tail, for the analytic p-values of z-scores.

/// 1 − Φ(x) = erfc(x / √2) / 2, to ~1e-15 relative.
pub fn upper_tail(x: f64) -> f64 {
    0.5 * erfc(x / std::f64::consts::SQRT_2)
}

/// Two-sided p of a standard normal deviate: min(1, 2 (1 − Φ(|z|))); NaN stays NaN.
pub fn two_sided_p(z: f64) -> f64 {
    if z.is_nan() {
        return f64::NAN;
    }
    (2.0 * upper_tail(z.abs())).min(1.0)
}

/// Complementary error function: the Maclaurin series of erf for |x| < 2.5 (the all-positive
/// form 2/√π e^{−x²} Σ 2ⁿ x^{2n+1} / (2n+1)!!, Abramowitz & Stegun 7.1.6) and the continued
/// fraction of erfc otherwise (A&S 7.1.14, by Lentz's method).
pub fn erfc(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x < 0.0 {
        return 2.0 - erfc(-x);
    }
    if x < 2.5 {
        let x2 = x * x;
        let (mut term, mut sum, mut n) = (x, x, 0.0);
        while term > sum * 1e-17 {
            n += 1.0;
            term *= 2.0 * x2 / (2.0 * n + 1.0);
            sum += term;
        }
        return 1.0 - 2.0 / std::f64::consts::PI.sqrt() * (-x2).exp() * sum;
    }
    if x > 27.0 {
        return 0.0;
    }
    let tiny = 1e-300;
    let (mut f, mut c, mut d) = (x, x, 0.0);
    for k in 1..500 {
        let a = f64::from(k) / 2.0;
        d = x + a * d;
        d = if d.abs() < tiny { tiny } else { d };
        c = x + a / c;
        c = if c.abs() < tiny { tiny } else { c };
        d = 1.0 / d;
        let delta = c * d;
        f *= delta;
        if (delta - 1.0).abs() < 1e-16 {
            break;
        }
    }
    (-x * x).exp() / std::f64::consts::PI.sqrt() / f
}

/// The standard normal quantile Φ⁻¹(q) for 0 < q < 1: a rational first guess refined by
/// Newton steps on the tail of [`upper_tail`] (to ~1e-15).
pub fn quantile(q: f64) -> f64 {
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
        assert_relative_eq!(quantile(0.975), 1.959963984540054, max_relative = 1e-13);
        assert_relative_eq!(quantile(0.995), 2.575829303548901, max_relative = 1e-13);
        assert_relative_eq!(quantile(0.025), -1.959963984540054, max_relative = 1e-13);
        assert!(quantile(0.5).abs() < 1e-15);
    }

    #[test]
    fn tails_against_python_math() {
        // Python 3.11 math.erfc and statistics.NormalDist, printed to 17 digits.
        assert_relative_eq!(erfc(0.5), 0.4795001221869535, max_relative = 1e-14);
        assert_relative_eq!(erfc(3.0), 2.209049699858544e-05, max_relative = 1e-13);
        assert_relative_eq!(upper_tail(1.959963984540054), 0.025, max_relative = 1e-13);
        assert_relative_eq!(two_sided_p(-1.959963984540054), 0.05, max_relative = 1e-13);
        assert!(two_sided_p(f64::NAN).is_nan());
    }
}
