"""Peer of tests/bench/areal_vs_pysal.sh: the job of stance-moran (read, libpysal Queen weights,
esda global and local (numba) Moran's I with 999 permutations, the output layer written) on the same
synthetic areas; also writes the synthetic areas.

  areal_peer.py make OUT.gpkg ROWS COLS SEED   jittered ROWS x COLS grid of polygons, field `value`
  areal_peer.py run IN.gpkg THREADS OUT.gpkg   runs the job twice in one process (cold, then warm)
                                               and prints the JSON timings of both
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


def job(path, threads, out, seed):
    """The same job as stance-moran: read, queen weights (row-standardised), global Moran's I and
    local Moran's I with 999 permutations each, and the areas written back with the local fields.
    Returns the seconds of each phase."""
    import esda
    import geopandas
    import libpysal

    times = {}
    start = time.perf_counter()
    frame = geopandas.read_file(path, layer="areas", engine="pyogrio")
    times["read_s"] = time.perf_counter() - start
    start = time.perf_counter()
    w = libpysal.weights.Queen.from_dataframe(frame, use_index=False, silence_warnings=True)
    w.transform = "r"
    times["weights_s"] = time.perf_counter() - start
    values = frame["value"].to_numpy()
    start = time.perf_counter()
    glob = esda.Moran(values, w, transformation="r", permutations=999)
    times["global_s"] = time.perf_counter() - start
    start = time.perf_counter()
    local = esda.Moran_Local(values, w, transformation="r", permutations=999, n_jobs=threads, seed=seed)
    times["local_s"] = time.perf_counter() - start
    start = time.perf_counter()
    frame["local_i"] = local.Is
    frame["p_permutation"] = local.p_sim
    frame["quadrant"] = local.q
    frame.to_file(out, layer="moran", driver="GPKG", engine="pyogrio")
    times["write_s"] = time.perf_counter() - start
    times["total_s"] = sum(times.values())
    times["links"] = int(w.nonzero)
    times["global_p"] = float(glob.p_sim)
    return times


def run(path, threads, out):
    """Runs the job twice in one process: cold (numba compiles) and warm (the headline)."""
    import os

    cold = job(path, threads, out, 1)
    os.remove(out)
    warm = job(path, threads, out, 2)
    print(json.dumps({"cold": cold, "warm": warm}))


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5]))
    else:
        run(sys.argv[2], int(sys.argv[3]), sys.argv[4])
