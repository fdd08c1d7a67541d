"""Peer of tests/bench/local_vs_pysal.sh: libpysal Queen weights and esda (numba) local join
counts and Getis-Ord Gi* with 999 permutations on the synthetic areas of
tests/bench/areal_peer.py, in one run.

  local_peer.py prepare IN.gpkg OUT.gpkg   copies layer `areas` adding `positive` (value - min + 1)
  local_peer.py run IN.gpkg THREADS        prints JSON timings
"""
import json
import sys
import time

import numpy as np


def prepare(source, target):
    import geopandas

    frame = geopandas.read_file(source, layer="areas", engine="pyogrio")
    frame["positive"] = frame["value"] - frame["value"].min() + 1.0
    frame.to_file(target, layer="areas", driver="GPKG", engine="pyogrio")


def run(path, threads):
    import esda
    import geopandas
    import libpysal

    start = time.perf_counter()
    frame = geopandas.read_file(path, layer="areas", engine="pyogrio")
    read_s = time.perf_counter() - start
    start = time.perf_counter()
    w = libpysal.weights.Queen.from_dataframe(frame, use_index=False, silence_warnings=True)
    weights_s = time.perf_counter() - start
    high = (frame["value"].to_numpy() > 0).astype(float)
    positive = frame["positive"].to_numpy()
    timings = {"areas": int(w.n), "read_s": read_s, "weights_s": weights_s}
    for key, call in [
        ("join_count", lambda seed: esda.Join_Counts_Local(connectivity=w, n_jobs=threads, seed=seed)
         .fit(high, permutations=999)),
        ("gi_star", lambda seed: esda.G_Local(positive, w, transform="B", star=True, permutations=999,
                                              n_jobs=threads, seed=seed)),
    ]:
        start = time.perf_counter()
        call(1)
        timings[f"{key}_s"] = time.perf_counter() - start
        start = time.perf_counter()
        call(2)
        timings[f"{key}_warm_s"] = time.perf_counter() - start
        timings[f"{key}_total_s"] = read_s + weights_s + timings[f"{key}_s"]
    print(json.dumps(timings))


if __name__ == "__main__":
    if sys.argv[1] == "prepare":
        prepare(sys.argv[2], sys.argv[3])
    else:
        run(sys.argv[2], int(sys.argv[3]))
