"""Peer of tests/bench/areal_vs_pysal.sh: libpysal Queen weights and esda (numba) local Moran's I
with 999 permutations on the same synthetic areas, in one run; also writes the synthetic areas.

  areal_peer.py make OUT.gpkg ROWS COLS SEED   jittered ROWS x COLS grid of polygons, field `value`
  areal_peer.py run IN.gpkg THREADS            prints JSON timings (read, weights, local, total)
"""
import json
import sys
import time

import numpy as np


def make(path, rows, cols, seed):
    import geopandas
    from shapely.geometry import Polygon

    rng = np.random.default_rng(seed)
    # Shared jittered vertices: neighbouring cells keep exactly the same corner coordinates.
    xs = np.arange(cols + 1, dtype=float)[None, :] + rng.uniform(-0.3, 0.3, (rows + 1, cols + 1))
    ys = np.arange(rows + 1, dtype=float)[:, None] + rng.uniform(-0.3, 0.3, (rows + 1, cols + 1))
    xs *= 1000.0
    ys *= 1000.0
    polygons, values = [], []
    for r in range(rows):
        for c in range(cols):
            corners = [(r, c), (r, c + 1), (r + 1, c + 1), (r + 1, c)]
            polygons.append(Polygon([(xs[a, b], ys[a, b]) for a, b in corners]))
            values.append(np.sin(r / 7.0) + np.cos(c / 9.0) + rng.normal(0.0, 1.0))
    frame = geopandas.GeoSeries(polygons, crs="EPSG:3035").to_frame("geometry")
    frame.insert(0, "value", values)
    frame.to_file(path, layer="areas", driver="GPKG", engine="pyogrio")


def run(path, threads):
    import esda
    import geopandas
    import libpysal

    total = time.perf_counter()
    start = time.perf_counter()
    frame = geopandas.read_file(path, layer="areas", engine="pyogrio")
    read_s = time.perf_counter() - start
    start = time.perf_counter()
    w = libpysal.weights.Queen.from_dataframe(frame, use_index=False, silence_warnings=True)
    w.transform = "r"
    weights_s = time.perf_counter() - start
    start = time.perf_counter()
    local = esda.Moran_Local(frame["value"].to_numpy(), w, transformation="r", permutations=999,
                             n_jobs=threads, seed=1)
    local_s = time.perf_counter() - start
    start = time.perf_counter()
    esda.Moran_Local(frame["value"].to_numpy(), w, transformation="r", permutations=999,
                     n_jobs=threads, seed=2)
    local_warm_s = time.perf_counter() - start
    print(json.dumps({"areas": int(w.n), "links": int(w.nonzero), "read_s": read_s, "weights_s": weights_s,
                      "local_s": local_s, "local_warm_s": local_warm_s,
                      "total_s": read_s + weights_s + local_s,
                      "significant": int((local.p_sim < 0.05).sum())}))


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5]))
    else:
        run(sys.argv[2], int(sys.argv[3]))
