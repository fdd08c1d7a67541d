"""Peer for the point-reading benchmark: pyogrio (its own GDAL) reading x, y and one field.

Usage: read_points_peer.py FILE LAYER FIELD  → one JSON line {"points": n, "seconds": s}.
"""
import json
import sys
import time

import pyogrio.raw

path, layer, field = sys.argv[1:4]
start = time.perf_counter()
meta, table = pyogrio.raw.read_arrow(path, layer=layer, columns=[field])
seconds = time.perf_counter() - start
print(json.dumps({"points": table.num_rows, "seconds": round(seconds, 3)}))
