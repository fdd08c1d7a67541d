"""Peer for the reading benchmark (tests/bench/read_vs_pyogrio.sh): pyogrio (its own GDAL)
reading a layer through GDAL's Arrow stream (`read_arrow`) with the geometry and one field,
three times in one process: the first call is cold, the fastest of the others the warm headline.

Usage: read_points_peer.py FILE LAYER FIELD → one JSON line {"rows": n, "cold_s": s, "warm_s": s}.
"""
import json
import sys
import time

import pyogrio.raw

path, layer, field = sys.argv[1:4]
seconds = []
for _ in range(3):
    start = time.perf_counter()
    meta, table = pyogrio.raw.read_arrow(path, layer=layer, columns=[field])
    seconds.append(time.perf_counter() - start)
print(json.dumps({"rows": table.num_rows, "cold_s": round(seconds[0], 3),
                  "warm_s": round(min(seconds[1:]), 3)}))
