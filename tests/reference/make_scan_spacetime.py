"""Brute-force reference for the space-time scan of stance-scan: every cylinder evaluated.

Cylinders (Kulldorff, Heffernan, Hartman, Assuncao & Mostashari 2005, PLoS Medicine 2(3): e59):
a circle centred on each distinct location, growing through the nearest locations (every group
of locations at one distance entering together, so a circle ends only where the next location
is farther) while it holds at most max_share * N records over all periods, times every run of
1..max_duration consecutive periods.

Statistics, written directly with numpy.log from the papers:
- space-time permutation (Kulldorff et al. 2005): mu = c(circle) * c(periods) / C and
  LLR = c ln(c/mu) + (C - c) ln((C - c)/(C - mu)) for c > mu, else 0;
- Bernoulli in the cylinder (Kulldorff 1997, Commun. Statist. Theory Meth. 26: 1481-1496):
  LLR = c ln(c/n) + (n-c) ln((n-c)/n) + (C-c) ln((C-c)/(N-n)) + (N-n-C+c) ln((N-n-C+c)/(N-n))
        - C ln(C/N) - (N-C) ln((N-C)/N), for c/n > C/N (high side), else 0.

Independent of the Rust code: a full distance matrix and loops over centres, circles and runs.

The data: 400 records on a 20 x 20 grid of integer coordinates (shared locations, tied
distances) in six months of 2026, a class each (oppose or support), with a burst of extra records
richer in oppose around (6, 14) in months 4-5; generated here from a fixed seed and stored in
the JSON with the results. Locations are numbered in order of first appearance.

Run from the repository root:
    .venv/bin/python tests/reference/make_scan_spacetime.py
Writes tests/reference/data/scan_spacetime.json.
"""
import json
import sys

import numpy as np

PERIODS = 6


def xlogx(v):
    v = float(v)
    return v * np.log(v) if v > 0 else 0.0


def permutation_llr(c, mu, C):
    if not c > mu or mu <= 0:
        return 0.0
    rest = C - c
    outside = rest * np.log(rest / (C - mu)) if rest > 0 else 0.0
    return c * np.log(c / mu) + outside


def bernoulli_llr(c, n, C, N):
    if n == 0 or not c * N > n * C:
        return 0.0
    return (xlogx(c) + xlogx(n - c) - xlogx(n) + xlogx(C - c) + xlogx(N - n - C + c)
            - xlogx(N - n) - xlogx(C) - xlogx(N - C) + xlogx(N))


def data(seed=2005):
    rng = np.random.default_rng(seed)
    background, burst = 340, 60
    x = rng.integers(0, 20, background)
    y = rng.integers(0, 20, background)
    period = rng.integers(0, PERIODS, background)
    oppose = rng.random(background) < 0.35
    angle = rng.random(burst) * 2 * np.pi
    radius = 4 * np.sqrt(rng.random(burst))
    bx = np.clip(np.round(6 + radius * np.cos(angle)), 0, 19).astype(int)
    by = np.clip(np.round(14 + radius * np.sin(angle)), 0, 19).astype(int)
    bperiod = rng.integers(3, 5, burst)
    boppose = rng.random(burst) < 0.7
    order = rng.permutation(background + burst)
    cat = lambda a, b: np.concatenate([a, b])[order]
    return (cat(x, bx).astype(float), cat(y, by).astype(float), cat(period, bperiod),
            cat(oppose, boppose))


def scan(x, y, period, case, model, share, duration):
    N = len(x)
    index = {}
    loc_of = np.empty(N, dtype=int)
    for i, key in enumerate(zip(x, y)):
        loc_of[i] = index.setdefault(key, len(index))
    locs = np.array(list(index.keys()))
    L = len(locs)
    records = np.zeros((L, PERIODS))
    cases = np.zeros((L, PERIODS))
    np.add.at(records, (loc_of, period), 1.0)
    np.add.at(cases, (loc_of, period), case.astype(float))
    period_total = records.sum(axis=0)
    C_cases = cases.sum()
    d2_all = ((locs[:, None, :] - locs[None, :, :]) ** 2).sum(axis=2)
    cylinders = []
    for centre in range(L):
        d2 = d2_all[centre]
        order = np.lexsort((np.arange(L), d2))
        inside = np.zeros(L, dtype=bool)
        for k, loc in enumerate(order):
            inside[loc] = True
            if k + 1 < L and d2[order[k + 1]] == d2[loc]:
                continue
            if records[inside].sum() > share * N + 1e-9:
                break
            per_period = records[inside].sum(axis=0)
            per_period_cases = cases[inside].sum(axis=0)
            circle_total = per_period.sum()
            for first in range(PERIODS):
                for last in range(first, min(first + duration, PERIODS)):
                    run = slice(first, last + 1)
                    n = per_period[run].sum()
                    if model == "space-time-permutation":
                        mu = circle_total * period_total[run].sum() / N
                        llr = permutation_llr(n, mu, N)
                    else:
                        llr = bernoulli_llr(per_period_cases[run].sum(), n, C_cases, N)
                    if llr > 0:
                        cylinders.append((llr, centre, float(np.sqrt(d2[loc])),
                                          inside.copy(), first, last - first + 1))
    top = max(c[0] for c in cylinders)
    tied = [c for c in cylinders if c[0] >= top - 1e-9]
    out = []
    for llr, centre, radius, inside, first, periods in tied:
        members = [i for i in range(N)
                   if inside[loc_of[i]] and first <= period[i] < first + periods]
        out.append({"llr": llr, "centre": [float(v) for v in locs[centre]], "radius": radius,
                    "first_period": first, "periods": periods, "records": members})
    others = sorted({c[0] for c in cylinders if c[0] < top - 1e-9}, reverse=True)
    return {"max_llr": top, "top_cylinders": out,
            "next_llr": others[0] if others else None, "cylinders": len(cylinders)}


def main():
    x, y, period, case = data()
    scans = []
    for model, share, duration in (("space-time-permutation", 0.2, 3),
                                   ("space-time-permutation", 0.5, 2),
                                   ("bernoulli", 0.2, 3)):
        result = scan(x, y, period, case, model, share, duration)
        result.update({"model": model, "max_share": share, "max_duration": duration})
        scans.append(result)
        print(model, share, duration, repr(result["max_llr"]), len(result["top_cylinders"]),
              result["next_llr"], [(t["centre"], t["radius"], t["first_period"], t["periods"])
                                   for t in result["top_cylinders"]])
    out = {
        "source": "brute-force NumPy space-time scan, tests/reference/make_scan_spacetime.py",
        "numpy": np.__version__,
        "python": sys.version.split()[0],
        "periods": PERIODS,
        "first_month": "2026-01",
        "x": x.tolist(), "y": y.tolist(), "period": period.tolist(),
        "stance": ["oppose" if c else "support" for c in case],
        "scans": scans,
    }
    with open("tests/reference/data/scan_spacetime.json", "w") as f:
        json.dump(out, f, indent=1)


if __name__ == "__main__":
    main()
