"""Brute-force reference for the multinomial scan statistic (Jung, Kulldorff & Richard 2010,
Statistics in Medicine 29: 1910-1918) of stance-scan. Independent of the Rust code: a full
distance matrix, the published ratio written directly with numpy.log,

    ln L = sum_k [c_k ln(c_k/n) + (C_k - c_k) ln((C_k - c_k)/(N - n))] - sum_k C_k ln(C_k/N),

and every window evaluated: circles centred on each distinct location, growing through the
nearest locations, every group of locations at one distance entering together (a window ends
only where the next location is farther), holding at most max_share * N records and, when
given, no location farther than max_radius.

The data: 300 records on a 30 x 30 grid of integer coordinates (so locations are shared and
distances tie), three classes, with a zone around (8, 20) richer in class 0; generated here
from a fixed seed and stored in the JSON with the results.

Run from the repository root:
    .venv-reference/bin/python tests/reference/make_scan_multinomial.py
Writes tests/reference/data/scan_multinomial.json.
"""
import json
import sys

import numpy as np


def xlogx(v):
    v = np.asarray(v, dtype=float)
    return np.where(v > 0, v * np.log(np.where(v > 0, v, 1.0)), 0.0)


def multinomial_llr(c, n, C, N):
    """c: windows x K counts inside, n: records inside; the published form term by term."""
    c = np.asarray(c, float)
    n = np.asarray(n, float)[:, None]
    out = C[None, :] - c
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = np.where(c > 0, c * np.log(c / n), 0.0)
        outside = np.where(out > 0, out * np.log(out / (N - n)), 0.0)
    null = float(sum(Ck * np.log(Ck / N) for Ck in C if Ck > 0))
    return inside.sum(axis=1) + outside.sum(axis=1) - null


def data(seed=2010, records=300):
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 30, records).astype(float)
    y = rng.integers(0, 30, records).astype(float)
    zone = (x - 8) ** 2 + (y - 20) ** 2 <= 36
    p_zone, p_rest = [0.6, 0.2, 0.2], [0.25, 0.4, 0.35]
    label = np.array([rng.choice(3, p=p_zone if z else p_rest) for z in zone])
    return x, y, label


def scan(x, y, label, share, max_radius):
    pts = np.column_stack([x, y])
    locs, inverse = np.unique(pts, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    counts = np.zeros((len(locs), 3))
    np.add.at(counts, (inverse, label), 1.0)
    n_loc = counts.sum(axis=1)
    N = float(len(x))
    C = counts.sum(axis=0)
    d2_all = ((locs[:, None, :] - locs[None, :, :]) ** 2).sum(axis=2)
    per_centre = []
    for i, centre in enumerate(locs):
        d2 = d2_all[i]
        order = np.lexsort((np.arange(len(locs)), d2))
        d_sorted = d2[order]
        n_cum = np.cumsum(n_loc[order])
        c_cum = np.cumsum(counts[order], axis=0)
        ends = np.append(d_sorted[1:] != d_sorted[:-1], True)
        ok = ends & (n_cum <= share * N + 1e-9) & (d_sorted <= max_radius ** 2)
        if not ok.any():
            continue
        llr = multinomial_llr(c_cum[ok], n_cum[ok], C, N)
        j = int(np.argmax(llr))
        per_centre.append((float(llr[j]), centre, int(n_cum[ok][j]), c_cum[ok][j],
                           float(np.sqrt(d_sorted[ok][j]))))
    top = max(v[0] for v in per_centre)
    best = [v for v in per_centre if v[0] >= top - 1e-12]
    return {
        "max_llr": top,
        "records": best[0][2],
        "inside": [int(v) for v in best[0][3]],
        "radius": best[0][4],
        # Several centres can reach the same window (or one with the same ratio).
        "top_centres": [[float(v[1][0]), float(v[1][1])] for v in best],
        "windows_tied": len(best),
    }


def main():
    x, y, label = data()
    cases = []
    for share, radius in ((0.5, np.inf), (0.2, np.inf), (0.1, np.inf), (0.5, 5.0)):
        result = scan(x, y, label, share, radius)
        result.update({"max_share": share, "max_radius": None if np.isinf(radius) else radius})
        cases.append(result)
        print(share, radius, repr(result["max_llr"]), result["records"], result["inside"],
              result["windows_tied"])
    C = np.bincount(label, minlength=3).astype(float)
    worked = {"inside": [5, 1, 4], "totals": [7, 5, 9],
              "llr": float(multinomial_llr([[5, 1, 4]], [10], np.array([7.0, 5.0, 9.0]), 21.0)[0])}
    out = {
        "source": "brute-force NumPy multinomial scan, tests/reference/make_scan_multinomial.py",
        "numpy": np.__version__,
        "python": sys.version.split()[0],
        "x": x.tolist(), "y": y.tolist(), "class": label.tolist(),
        "class_totals": C.tolist(),
        "worked_example": worked,
        "scans": cases,
    }
    json.dump(out, open("tests/reference/data/scan_multinomial.json", "w"), indent=1)


if __name__ == "__main__":
    main()
