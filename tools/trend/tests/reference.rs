//! stance-trend's statistics against reference implementations, on fixed series stored by
//! tests/reference/make_trend.py in tests/reference/data/trend_reference.json (versions recorded
//! there too): pymannkendall 1.4.3 `original_test`, `hamed_rao_modification_test` and
//! `sens_slope`; SciPy 1.14.1 `kendalltau` (asymptotic) and `theilslopes`; statsmodels 0.14.4
//! `proportion_confint(method="wilson")`; SciPy `norm.ppf`.

use approx::assert_relative_eq;
use serde_json::Value;
use stance_core::normal::quantile as normal_quantile;
use stance_trend::mann_kendall::{self, hamed_rao};
use stance_trend::sen::sen_slope;
use stance_trend::wilson::share;

/// 1e-9 relative: the same closed forms evaluated in double precision on both sides (sums in
/// another order; observed differences ~1e-15).
const TOLERANCE: f64 = 1e-9;

fn reference() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/data/trend_reference.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("reference JSON")).expect("JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("number expected, got {v}"))
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}

fn series(r: &Value) -> Vec<(String, Vec<f64>, Vec<f64>, &Value)> {
    r["series"]
        .as_array()
        .expect("series")
        .iter()
        .map(|s| {
            let name = s["name"].as_str().expect("name").to_owned();
            (name, numbers(&s["t"]), numbers(&s["x"]), s)
        })
        .collect()
}

fn z95() -> f64 {
    normal_quantile(0.975)
}

#[test]
fn mann_kendall_matches_pymannkendall_original_test() {
    let r = reference();
    let mut checked = 0;
    for (name, _, x, s) in series(&r) {
        let o = &s["original_test"];
        if o.is_null() {
            continue;
        }
        let got = mann_kendall::test(&x);
        assert_eq!(got.s, f(&o["s"]), "{name}: S");
        assert_relative_eq!(got.variance, f(&o["var_s"]), max_relative = TOLERANCE);
        assert_relative_eq!(got.z, f(&o["z"]), max_relative = TOLERANCE, epsilon = 1e-15);
        assert_relative_eq!(got.p, f(&o["p"]), max_relative = TOLERANCE);
        checked += 1;
    }
    assert!(checked >= 6, "only {checked} series checked");
}

#[test]
fn hamed_rao_correction_matches_pymannkendall() {
    let r = reference();
    let mut inflated = 0;
    for (name, t, x, s) in series(&r) {
        let h = &s["hamed_rao_modification_test"];
        if h.is_null() {
            continue;
        }
        let plain = mann_kendall::test(&x);
        let slope = sen_slope(&x, &t, plain.variance, z95())
            .expect("slope")
            .slope;
        let got = hamed_rao(&x, &t, slope, 0.05);
        assert_eq!(got.s, f(&h["s"]), "{name}: S");
        assert_relative_eq!(got.variance, f(&h["var_s"]), max_relative = TOLERANCE);
        assert_relative_eq!(got.z, f(&h["z"]), max_relative = TOLERANCE, epsilon = 1e-15);
        assert_relative_eq!(got.p, f(&h["p"]), max_relative = TOLERANCE);
        if (got.variance - plain.variance).abs() > 1e-6 * plain.variance {
            inflated += 1;
        }
    }
    // The check must exercise the correction, not only the uncorrected variance.
    assert!(
        inflated >= 2,
        "only {inflated} series had a corrected variance"
    );
}

/// With no ties in time, S = τ_b √(n₀(n₀ − n₁)) (n₀ = n(n−1)/2, n₁ = Σ t(t−1)/2 over tied
/// groups of x), and SciPy's asymptotic variance of τ_b's numerator is Var(S) with ties, so its
/// p-value is 2(1 − Φ(|S|/√Var S)) (no continuity correction).
#[test]
fn score_and_variance_agree_with_scipy_kendalltau() {
    let r = reference();
    for (name, _, x, s) in series(&r) {
        let k = &s["kendalltau"];
        let n = x.len() as f64;
        let n0 = n * (n - 1.0) / 2.0;
        let mut sorted = x.clone();
        sorted.sort_by(f64::total_cmp);
        let mut n1 = 0.0;
        let mut i = 0;
        while i < sorted.len() {
            let j = (i..sorted.len())
                .find(|&j| sorted[j] != sorted[i])
                .unwrap_or(sorted.len());
            let t = (j - i) as f64;
            n1 += t * (t - 1.0) / 2.0;
            i = j;
        }
        let got = mann_kendall::test(&x);
        let s_from_tau = f(&k["tau_b"]) * (n0 * (n0 - n1)).sqrt();
        assert!(
            (got.s - s_from_tau).abs() < 1e-9,
            "{name}: S {} vs {s_from_tau}",
            got.s
        );
        let p = stance_core::normal::two_sided_p(got.s / got.variance.sqrt());
        assert_relative_eq!(p, f(&k["p_asymptotic"]), max_relative = TOLERANCE);
    }
}

/// Sen's slope and its interval: the same pairwise slopes and order statistics, so equal to
/// 1e-12 (SciPy's interval uses the variance with ties of x and of t; t has none here).
#[test]
fn sen_slope_matches_scipy_theilslopes_and_pymannkendall() {
    let r = reference();
    for (name, t, x, s) in series(&r) {
        let variance = mann_kendall::test(&x).variance;
        for (key, level) in [("theilslopes_95", 0.95), ("theilslopes_90", 0.90)] {
            let z = normal_quantile(1.0 - (1.0 - level) / 2.0);
            let got = sen_slope(&x, &t, variance, z).expect("slope");
            let e = &s[key];
            assert!((got.slope - f(&e["slope"])).abs() < 1e-12, "{name}: slope");
            assert!(
                (got.low - f(&e["low_slope"])).abs() < 1e-12,
                "{name} {key}: low {}",
                got.low
            );
            assert!(
                (got.high - f(&e["high_slope"])).abs() < 1e-12,
                "{name} {key}: high {}",
                got.high
            );
        }
        if !s["sens_slope"].is_null() {
            let got = sen_slope(&x, &t, variance, z95()).expect("slope");
            assert!(
                (got.slope - f(&s["sens_slope"])).abs() < 1e-12,
                "{name}: sens_slope"
            );
            assert!((got.slope - f(&s["original_test"]["slope"])).abs() < 1e-12);
        }
    }
}

/// Wilson score intervals against statsmodels, 1e-12 absolute (one closed form).
#[test]
fn wilson_intervals_match_statsmodels() {
    let r = reference();
    for w in r["wilson"].as_array().expect("wilson") {
        let (k, n, alpha) = (f(&w["k"]), f(&w["n"]), f(&w["alpha"]));
        let got = share(k, n, normal_quantile(1.0 - alpha / 2.0)).expect("share");
        assert!(
            (got.low - f(&w["low"])).abs() < 1e-12,
            "{k}/{n}: low {}",
            got.low
        );
        assert!(
            (got.high - f(&w["high"])).abs() < 1e-12,
            "{k}/{n}: high {}",
            got.high
        );
    }
}

/// Normal quantiles against SciPy's `norm.ppf`, 1e-12 relative.
#[test]
fn normal_quantiles_match_scipy() {
    let r = reference();
    for q in r["normal_quantiles"].as_array().expect("quantiles") {
        let got = normal_quantile(f(&q["q"]));
        assert_relative_eq!(got, f(&q["z"]), max_relative = 1e-12, epsilon = 1e-15);
    }
}
