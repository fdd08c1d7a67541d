"""Brute-force reference for stance-scan: the Bernoulli scan statistic (Kulldorff 1997) on the
humberside case-control data, and the ordinal likelihood ratio (Jung, Kulldorff & Klassen 2007)
by numerical constrained maximisation. Independent of the Rust code: full distance matrix, a
direct formula with numpy.log, every window evaluated; the ordinal MLE found by SciPy's SLSQP
rather than by pooling.

Run from the repository root with the reference venv:
    .venv-reference/bin/python tests/reference/make_scan.py
Writes tests/reference/data/scan_humberside.json and tests/reference/data/scan_ordinal.json.
"""
import json
import sys

import numpy as np
import scipy
from scipy.optimize import minimize


def xlogx(v):
    v = np.asarray(v, dtype=float)
    return np.where(v > 0, v * np.log(np.where(v > 0, v, 1.0)), 0.0)


def bernoulli_llr(c, n, C, N):
    """ln of the Bernoulli likelihood ratio, from the four cell proportions."""
    c, n = np.asarray(c, float), np.asarray(n, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = xlogx(c) + xlogx(n - c) - xlogx(n)
        outside = xlogx(C - c) + xlogx(N - n - C + c) - xlogx(N - n)
    return inside + outside - (xlogx(C) + xlogx(N - C) - xlogx(N))


def scan(x, y, case, share, direction):
    """Max LLR over circles centred on each distinct location, every tie group a window."""
    pts = np.column_stack([x, y])
    locs, inverse = np.unique(pts, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    n_loc = np.bincount(inverse, minlength=len(locs)).astype(float)
    c_loc = np.bincount(inverse, weights=case, minlength=len(locs))
    N, C = float(len(x)), float(case.sum())
    best = (0.0, None)
    for i, centre in enumerate(locs):
        d2 = ((locs - centre) ** 2).sum(axis=1)
        order = np.lexsort((np.arange(len(locs)), d2))
        d_sorted = d2[order]
        n_cum = np.cumsum(n_loc[order])
        c_cum = np.cumsum(c_loc[order])
        # A window ends where the next location is farther; it must hold ≤ share·N records.
        ends = np.append(d_sorted[1:] != d_sorted[:-1], True)
        ok = ends & (n_cum <= share * N + 1e-9)
        n, c = n_cum[ok], c_cum[ok]
        llr = bernoulli_llr(c, n, C, N)
        high = c * N > n * C
        low = c * N < n * C
        keep = {"high": high, "low": low, "both": high | low}[direction]
        llr = np.where(keep, llr, 0.0)
        if len(llr) and llr.max() > best[0]:
            j = int(np.argmax(llr))
            best = (float(llr[j]), {"centre_x": float(centre[0]), "centre_y": float(centre[1]),
                                    "records": int(n[j]), "cases": int(c[j])})
    return best


def ordinal_numeric(inside, totals, increasing=True):
    """max ln L under p_k/q_k monotone minus ln L under H0, by SLSQP from several starts."""
    inside = np.asarray(inside, float)
    totals = np.asarray(totals, float)
    outside = totals - inside
    N, n = totals.sum(), inside.sum()
    null = float((xlogx(totals) - totals * np.log(N)).sum())

    def unpack(z):
        p = np.exp(z[:3]) / np.exp(z[:3]).sum()
        q = np.exp(z[3:]) / np.exp(z[3:]).sum()
        return p, q

    def negll(z):
        p, q = unpack(z)
        return -float((inside * np.log(p)).sum() + (outside * np.log(q)).sum())

    sign = 1.0 if increasing else -1.0
    cons = [{"type": "ineq", "fun": (lambda z, k=k: sign * ((z[k + 1] - z[k + 4]) - (z[k] - z[k + 3])))}
            for k in range(2)]
    best = -np.inf
    rng = np.random.default_rng(1)
    for start in range(20):
        z0 = np.concatenate([np.log(totals / N), np.log(totals / N)]) + (0 if start == 0 else rng.normal(0, 0.3, 6))
        res = minimize(negll, z0, constraints=cons, method="SLSQP", options={"ftol": 1e-14, "maxiter": 1000})
        p, q = unpack(res.x)
        feasible = all(sign * (np.log(p[k + 1] / q[k + 1]) - np.log(p[k] / q[k])) >= -1e-7 for k in range(2))
        if feasible:
            best = max(best, -res.fun)
    return max(best - null, 0.0)


def main():
    data = json.load(open("tests/reference/data/humberside.json"))
    x = np.array(data["x"], float)
    y = np.array(data["y"], float)
    case = np.array([m == "case" for m in data["marks"]], float)
    results = []
    for share in (0.5, 0.25, 0.1):
        for direction in ("high", "low", "both"):
            llr, where = scan(x, y, case, share, direction)
            results.append({"max_share": share, "direction": direction, "max_llr": llr, "window": where})
    out = {
        "source": "brute-force NumPy scan, tests/reference/make_scan.py",
        "numpy": np.__version__,
        "python": sys.version.split()[0],
        "data": data["source"],
        "worked_example": {"N": 10, "C": 4, "n": 3, "c": 3,
                           "llr": float(bernoulli_llr(3, 3, 4, 10))},
        "scans": results,
    }
    json.dump(out, open("tests/reference/data/scan_humberside.json", "w"), indent=1)
    tables = [([5, 1, 4], [7, 5, 9]), ([1, 3, 6], [10, 10, 10]), ([6, 2, 0], [7, 5, 9]),
              ([2, 9, 3], [12, 15, 8]), ([30, 5, 40], [100, 60, 90])]
    ordinal = []
    for inside, totals in tables:
        ordinal.append({"inside": inside, "totals": totals,
                        "llr_high": ordinal_numeric(inside, totals, True),
                        "llr_low": ordinal_numeric(inside, totals, False)})
    json.dump({"source": "SciPy SLSQP maximisation of the ordinal likelihood under p_k/q_k monotone, "
                         "tests/reference/make_scan.py",
               "numpy": np.__version__, "scipy": scipy.__version__, "tables": ordinal},
              open("tests/reference/data/scan_ordinal.json", "w"), indent=1)
    for r in results:
        print(r["max_share"], r["direction"], repr(r["max_llr"]), r["window"])
    for o in ordinal:
        print(o)


if __name__ == "__main__":
    main()
