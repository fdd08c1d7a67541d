"""Peer for the space-time scan benchmark: the space-time permutation scan statistic
(Kulldorff, Heffernan, Hartman, Assuncao & Mostashari 2005, PLoS Medicine 2(3): e59) in NumPy +
Numba's parallel JIT, written for this benchmark with the same algorithm as stance-scan.

Cylinders: circles centred on each distinct location, growing through the nearest locations
(ties in distance enter together) up to max_share of the records, neighbour lists sorted once
per centre; times every run of 1..max_duration consecutive periods, summed from the circle's
per-period counts. mu = c(circle) c(periods) / C; LLR = c ln(c/mu) + (C-c) ln((C-c)/(C-mu)) for
c > mu. A cylinder is scored only when the logarithm-free bound (c-mu)(c/mu - (C-c)/(C-mu))
exceeds the best so far (as stance-scan does). Monte Carlo: R shuffles of the records' periods,
prange across replicates.

The whole scan runs twice in one process: cold (first call, JIT compilation included) and warm
(second call), the headline.

Usage: scan_spacetime_peer.py PREPARED.npz MAX_SHARE MAX_DURATION REPLICATES → one JSON line.
"""
import json
import sys
import time

import numba
import numpy as np
from numba import njit, prange


@njit(parallel=True)
def neighbour_lists(x, y, weight, cap):
    """Per centre: locations by distance up to the cap, as a ragged array; plus circle ends."""
    L = len(x)
    lengths = np.zeros(L, np.int64)
    for i in prange(L):
        d2 = (x - x[i]) ** 2 + (y - y[i]) ** 2
        order = np.argsort(d2, kind="mergesort")
        total = 0.0
        k = 0
        while k < L:
            end = k
            group = 0.0
            while end < L and d2[order[end]] == d2[order[k]]:
                group += weight[order[end]]
                end += 1
            if total + group > cap:
                break
            total += group
            k = end
        lengths[i] = k
    starts = np.zeros(L + 1, np.int64)
    starts[1:] = np.cumsum(lengths)
    items = np.empty(starts[-1], np.int32)
    closes = np.zeros(starts[-1], np.bool_)
    for i in prange(L):
        d2 = (x - x[i]) ** 2 + (y - y[i]) ** 2
        order = np.argsort(d2, kind="mergesort")
        s = starts[i]
        for j in range(lengths[i]):
            items[s + j] = order[j]
            closes[s + j] = (j + 1 == L) or d2[order[j + 1]] != d2[order[j]]
    return starts, items, closes


@njit
def llr(c, mu, C):
    rest = C - c
    v = c * np.log(c) - c * np.log(mu)
    if rest > 0:
        v += rest * np.log(rest) - rest * np.log(C - mu)
    return v


@njit
def max_llr(counts, weight, period_total, starts, items, closes, D, C):
    """Largest LLR over every cylinder, and the number of cylinders."""
    L = len(starts) - 1
    T = counts.shape[1]
    acc = np.zeros(T)
    best = 0.0
    cylinders = 0
    for i in range(L):
        acc[:] = 0.0
        circle = 0.0
        for j in range(starts[i], starts[i + 1]):
            loc = items[j]
            for t in range(T):
                acc[t] += counts[loc, t]
            circle += weight[loc]
            if not closes[j]:
                continue
            for first in range(T):
                c = 0.0
                in_periods = 0.0
                for last in range(first, min(first + D, T)):
                    c += acc[last]
                    in_periods += period_total[last]
                    cylinders += 1
                    mu = circle * in_periods / C
                    if c <= mu or mu <= 0.0:
                        continue
                    bound = (c - mu) * (c / mu - (C - c) / (C - mu))
                    if bound * (1.0 + 1e-9) + 1e-12 <= best:
                        continue
                    v = llr(c, mu, C)
                    if v > best:
                        best = v
    return best, cylinders


@njit(parallel=True)
def replicate_maxima(loc_of, month, L, T, weight, period_total, starts, items, closes, D, C, R, seed):
    out = np.zeros(R)
    for r in prange(R):
        np.random.seed(seed + r)
        shuffled = np.random.permutation(month)
        counts = np.zeros((L, T), np.int32)
        for p in range(len(loc_of)):
            counts[loc_of[p], shuffled[p]] += 1
        out[r] = max_llr(counts, weight, period_total, starts, items, closes, D, C)[0]
    return out


def scan(x, y, month, share, D, R):
    locs, loc_of = np.unique(np.column_stack([x, y]), axis=0, return_inverse=True)
    loc_of = loc_of.ravel().astype(np.int64)
    T = int(month.max()) + 1
    L = len(locs)
    weight = np.bincount(loc_of, minlength=L).astype(np.float64)
    C = float(len(month))
    period_total = np.bincount(month, minlength=T).astype(np.float64)
    starts, items, closes = neighbour_lists(locs[:, 0].copy(), locs[:, 1].copy(), weight, share * C)
    counts = np.zeros((L, T), np.int32)
    np.add.at(counts, (loc_of, month), 1)
    observed, cylinders = max_llr(counts, weight, period_total, starts, items, closes, D, C)
    maxima = replicate_maxima(loc_of, month, L, T, weight, period_total, starts, items, closes, D, C, R,
                              12345)
    p = (1 + int((maxima >= observed).sum())) / (R + 1)
    return observed, p, cylinders, L


def main():
    data = np.load(sys.argv[1])
    share, D, R = float(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
    x, y, month = data["x"], data["y"], data["month"].astype(np.int64)
    runs = []
    for _ in range(2):
        start = time.perf_counter()
        observed, p, cylinders, L = scan(x, y, month, share, D, R)
        runs.append(time.perf_counter() - start)
    print(json.dumps({"cold_seconds": runs[0], "warm_seconds": runs[1], "max_llr": observed, "p_value": p,
                      "cylinders_per_labelling": cylinders, "locations": int(L), "records": int(len(month)),
                      "threads": numba.get_num_threads(), "numba": numba.__version__,
                      "numpy": np.__version__}))


if __name__ == "__main__":
    main()
