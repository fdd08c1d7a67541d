"""Reference trend statistics for stance-trend (tools/trend/tests/reference.rs).

Writes tests/reference/data/trend_reference.json: fixed series of shares (drawn once with a
fixed numpy seed and stored: shares k/n of binomial counts, so ties occur; some with a
trend, one AR(1)-correlated, one with gaps in time) and, for each,
  - pymannkendall original_test (S, Var(S) with ties, Z with continuity correction, p, Sen's
    slope) and hamed_rao_modification_test (variance inflated for autocorrelation, alpha 0.05),
    and sens_slope (series without gaps only: pymannkendall takes time as the position),
  - SciPy kendalltau(t, x) (tau-b and its asymptotic p-value: with no ties in t, S = tau_b *
    sqrt(n0 (n0 - n1)) and the asymptotic variance is Var(S) with ties, p without continuity
    correction),
  - SciPy theilslopes(x, t, alpha=0.95 and 0.90): Sen's slope and its interval;
and Wilson score intervals from statsmodels proportion_confint(method='wilson') and standard
normal quantiles from scipy.stats.norm.ppf.
Run: make reference (.venv-reference, pinned in requirements-reference.txt), or alone:
     python3 -m venv /tmp/trend-venv && /tmp/trend-venv/bin/pip install \
       numpy==2.1.3 scipy==1.14.1 statsmodels==0.14.4 pymannkendall==1.4.3
     /tmp/trend-venv/bin/python tests/reference/make_trend.py
"""
import json
import pathlib
from importlib import metadata

import numpy as np
import pymannkendall as mk
from scipy.stats import kendalltau, norm, theilslopes
from statsmodels.stats.proportion import proportion_confint

rng = np.random.RandomState(20261202)


def shares(p, n):
    k = rng.binomial(n, np.clip(p, 0.0, 1.0))
    return (k / n).tolist()


def ar1(n, phi, sd):
    e = np.zeros(n)
    for i in range(1, n):
        e[i] = phi * e[i - 1] + rng.normal(0, sd)
    return e


series = []
# name, times, shares
series.append(("flat_small_n", list(range(12)), shares(np.full(12, 0.3), 20)))
series.append(("rising", list(range(15)), shares(0.2 + 0.02 * np.arange(15), 60)))
series.append(("falling_ties", list(range(20)), shares(0.6 - 0.01 * np.arange(20), 10)))
series.append(("autocorrelated", list(range(40)), (0.4 + ar1(40, 0.8, 0.05)).round(3).tolist()))
series.append(("autocorrelated_trend", list(range(30)),
               (0.3 + 0.004 * np.arange(30) + ar1(30, 0.7, 0.04)).round(2).tolist()))
series.append(("short", list(range(5)), [0.2, 0.25, 0.25, 0.4, 0.3]))
series.append(("nine_months", list(range(24318, 24327)), shares(np.full(9, 0.28), 130)))
gap_times = [0, 1, 3, 4, 5, 8, 9, 12, 13, 14, 17, 18]
series.append(("gaps", gap_times, shares(0.3 + 0.01 * np.array(gap_times), 40)))

out = []
for name, t, x in series:
    xa = np.array(x, dtype=float)
    ta = np.array(t, dtype=float)
    entry = {"name": name, "t": t, "x": x}
    contiguous = all(b - a == 1 for a, b in zip(t, t[1:]))
    if contiguous:
        o = mk.original_test(xa, alpha=0.05)
        entry["original_test"] = {"s": float(o.s), "var_s": float(o.var_s), "z": float(o.z),
                                  "p": float(o.p), "slope": float(o.slope)}
        h = mk.hamed_rao_modification_test(xa, alpha=0.05)
        entry["hamed_rao_modification_test"] = {"s": float(h.s), "var_s": float(h.var_s),
                                                "z": float(h.z), "p": float(h.p)}
        entry["sens_slope"] = float(mk.sens_slope(xa).slope)
    tau = kendalltau(ta, xa, method="asymptotic")
    entry["kendalltau"] = {"tau_b": float(tau.statistic), "p_asymptotic": float(tau.pvalue)}
    for conf in (0.95, 0.90):
        r = theilslopes(xa, ta, alpha=conf)
        entry[f"theilslopes_{int(conf * 100)}"] = {
            "slope": float(r.slope), "low_slope": float(r.low_slope),
            "high_slope": float(r.high_slope)}
    out.append(entry)

wilson = []
for k, n, alpha in [(0, 10, 0.05), (1, 10, 0.05), (5, 10, 0.05), (81, 263, 0.05), (15, 148, 0.05),
                    (29, 34, 0.05), (10, 10, 0.05), (37, 130, 0.10), (131, 514, 0.01),
                    (600, 2252, 0.05)]:
    low, high = proportion_confint(k, n, alpha=alpha, method="wilson")
    wilson.append({"k": k, "n": n, "alpha": alpha, "low": float(low), "high": float(high)})

quantiles = [{"q": q, "z": float(norm.ppf(q))}
             for q in (0.5, 0.8, 0.9, 0.95, 0.975, 0.995, 0.9995, 0.999999, 0.01, 1e-10)]

versions = {p: metadata.version(p) for p in ("numpy", "scipy", "statsmodels", "pymannkendall")}
data = {"versions": versions, "series": out, "wilson": wilson, "normal_quantiles": quantiles}
path = pathlib.Path(__file__).parent / "data" / "trend_reference.json"
path.write_text(json.dumps(data, indent=1) + "\n")
print(f"wrote {path}")
