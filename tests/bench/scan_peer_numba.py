"""Peer for the stance-scan benchmark: the same Bernoulli scan statistic (Kulldorff 1997), or the
multinomial one (Jung, Kulldorff & Richard 2010) on the three stance classes, in NumPy + Numba's
parallel JIT, written for this benchmark.

Windows: circles centred on each distinct location, growing through the nearest locations (ties
in distance enter together) up to max_share of the records; neighbour lists sorted once per
centre and stored up to the cap (no N×N matrix); Monte Carlo: R random relabellings with the
number of cases fixed (a shuffle of the labels), prange across replicates.

Usage: scan_peer_numba.py PREPARED.npz MAX_SHARE REPLICATES [bernoulli|multinomial]
→ one JSON line on stdout.
"""
import json
import sys
import time

import numba
import numpy as np
from numba import njit, prange


@njit(cache=True)
def xlogx(v):
    return v * np.log(v) if v > 0 else 0.0


@njit(cache=True)
def llr_high(c, n, C, N, null):
    if c * N <= n * C:
        return 0.0
    return xlogx(c) + xlogx(n - c) - xlogx(n) + xlogx(C - c) + xlogx(N - n - C + c) - xlogx(N - n) - null


@njit(parallel=True, cache=True)
def neighbour_lists(x, y, weight, cap):
    """Per centre: locations by distance up to the cap, as a ragged array; plus window ends."""
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


@njit(cache=True)
def max_llr(cases_at, weight, starts, items, closes, C, N, null):
    best = 0.0
    L = len(starts) - 1
    for i in range(L):
        c = 0.0
        n = 0.0
        for j in range(starts[i], starts[i + 1]):
            loc = items[j]
            c += cases_at[loc]
            n += weight[loc]
            if closes[j]:
                v = llr_high(c, n, C, N, null)
                if v > best:
                    best = v
    return best


@njit(cache=True)
def max_llr_multinomial(counts_at, weight, starts, items, closes, totals, N, null):
    """Multinomial ln L = sum_k [c_k ln c_k + (C_k-c_k) ln(C_k-c_k)] - n ln n - (N-n) ln(N-n) - null,
    null = sum_k C_k ln C_k - N ln N; every window scored (no side)."""
    best = 0.0
    L = len(starts) - 1
    K = counts_at.shape[1]
    c = np.zeros(K)
    for i in range(L):
        c[:] = 0.0
        n = 0.0
        for j in range(starts[i], starts[i + 1]):
            loc = items[j]
            for k in range(K):
                c[k] += counts_at[loc, k]
            n += weight[loc]
            if closes[j]:
                v = -xlogx(n) - xlogx(N - n) - null
                for k in range(K):
                    v += xlogx(c[k]) + xlogx(totals[k] - c[k])
                if v > best:
                    best = v
    return best


@njit(parallel=True, cache=True)
def replicate_maxima_multinomial(of_point, classes, n_loc, weight, starts, items, closes, totals, N, null, R,
                                 seed):
    out = np.zeros(R)
    for r in prange(R):
        np.random.seed(seed + r)
        shuffled = np.random.permutation(classes)
        counts_at = np.zeros((n_loc, len(totals)))
        for p in range(len(of_point)):
            counts_at[of_point[p], shuffled[p]] += 1.0
        out[r] = max_llr_multinomial(counts_at, weight, starts, items, closes, totals, N, null)
    return out


@njit(parallel=True, cache=True)
def replicate_maxima(of_point, labels, n_loc, weight, starts, items, closes, C, N, null, R, seed):
    out = np.zeros(R)
    for r in prange(R):
        np.random.seed(seed + r)
        shuffled = np.random.permutation(labels)
        cases_at = np.zeros(n_loc)
        for p in range(len(of_point)):
            cases_at[of_point[p]] += shuffled[p]
        out[r] = max_llr(cases_at, weight, starts, items, closes, C, N, null)
    return out


def main():
    data = np.load(sys.argv[1])
    share = float(sys.argv[2])
    R = int(sys.argv[3])
    model = sys.argv[4] if len(sys.argv) > 4 else "bernoulli"
    x, y, labels = data["x"], data["y"], data["labels"].astype(np.float64)
    pts = np.column_stack([x, y])
    locs, of_point = np.unique(pts, axis=0, return_inverse=True)
    of_point = of_point.ravel().astype(np.int64)
    weight = np.bincount(of_point, minlength=len(locs)).astype(np.float64)
    N = float(len(labels))
    C = float(labels.sum())
    null = C * np.log(C) + (N - C) * np.log(N - C) - N * np.log(N)
    classes = data["classes"].astype(np.int64) if model == "multinomial" else None
    # Compile on a tiny problem first so the timing is of the run, not of the JIT.
    t = np.arange(6, dtype=np.float64)
    s, it, cl = neighbour_lists(t, t, np.ones(6), 3.0)
    if model == "multinomial":
        replicate_maxima_multinomial(np.arange(6), np.array([0, 1, 2, 0, 1, 2]), 6, np.ones(6), s, it, cl,
                                     np.array([2.0, 2.0, 2.0]), 6.0, 0.0, 2, 1)
    else:
        replicate_maxima(np.arange(6), np.array([1.0, 0, 0, 1, 0, 0]), 6, np.ones(6), s, it, cl, 2.0, 6.0, 0.0,
                         2, 1)
    start = time.perf_counter()
    starts, items, closes = neighbour_lists(locs[:, 0].copy(), locs[:, 1].copy(), weight, share * N)
    if model == "multinomial":
        totals = np.bincount(classes, minlength=3).astype(np.float64)
        null = float(sum(v * np.log(v) for v in totals if v > 0) - N * np.log(N))
        counts_at = np.zeros((len(locs), 3))
        np.add.at(counts_at, (of_point, classes), 1.0)
        observed = max_llr_multinomial(counts_at, weight, starts, items, closes, totals, N, null)
        maxima = replicate_maxima_multinomial(of_point, classes, len(locs), weight, starts, items, closes,
                                              totals, N, null, R, 12345)
    else:
        cases_at = np.bincount(of_point, weights=labels, minlength=len(locs))
        observed = max_llr(cases_at, weight, starts, items, closes, C, N, null)
        maxima = replicate_maxima(of_point, labels, len(locs), weight, starts, items, closes, C, N, null, R,
                                  12345)
    seconds = time.perf_counter() - start
    windows = int(closes.sum())
    p = (1 + int((maxima >= observed).sum())) / (R + 1)
    print(json.dumps({"seconds": seconds, "model": model, "max_llr": observed, "p_value": p,
                      "windows_per_labelling": windows, "locations": int(len(locs)), "records": int(N),
                      "threads": numba.get_num_threads(), "numba": numba.__version__,
                      "numpy": np.__version__}))


if __name__ == "__main__":
    main()
