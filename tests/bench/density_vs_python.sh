#!/usr/bin/env bash
# stance-density against a Python peer (pyogrio + KDEpy FFTKDE + rasterio) on 1,000,000
# stance-synth points, three classes, a 1000x1000 grid, quartic kernel: the same job on both
# sides (read and project, three classes, four comparison surfaces, seven Float32 surfaces
# written into a GeoPackage). The peer runs the job twice in one process: the warm (second) call
# is the headline, the cold one context. Prints the ratios, the maximum error against exact
# evaluation, peak memory, and the 1-minute load average before each side.
# Usage: tests/bench/density_vs_python.sh   (from the workspace root; builds release)
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
PY=${STANCE_BENCH_PYTHON:-$ROOT/.venv-reference/bin/python}
B=$ROOT/target/release
W=${STANCE_BENCH_DIR:-$ROOT/target/bench-density}
mkdir -p "$W"
cargo build --release -p stance-density -p stance-synth --manifest-path "$ROOT/Cargo.toml" >&2
[ -f "$W/s.gpkg" ] || "$B/stance-synth" --output "$W/s.gpkg" --points 1000000 --seed 7 -q >/dev/null
TIME=""; [ -x /usr/bin/time ] && TIME="/usr/bin/time -v"
run() { local log=$1; shift; local t0=$(date +%s.%N); $TIME "$@" 2>"$log" >"$log.out"; echo "$(date +%s.%N) - $t0" | bc; }
rm -f "$W/d.gpkg"
LOAD_RUST=$(cut -d' ' -f1 /proc/loadavg)
# About 1000 x 1000 cells of 112 m (1072 x 883) over the ~110 x 90 km region plus the 5 km support.
T_RUST=$(run "$W/rust.log" "$B/stance-density" --input "$W/s.gpkg" --layer veldmark_records --output "$W/d.gpkg" \
  --bandwidth-m 5000 --cell-m 112 --permutations 0 --method fft -v)
"$PY" - "$W" <<'PYEOF'
import json, sys, sqlite3
w = sys.argv[1]
s = json.load(open(f"{w}/rust.log.out"))["results"]
import rasterio
with rasterio.open(f"{w}/d.gpkg", table="density_support") as d:
    wkt = d.crs.to_wkt()
g = s["grid"]
json.dump({"crs_wkt": wkt, "cell_m": g["cell_m"], "cols": g["cols"], "rows": g["rows"], "x_min": g["x_min"],
           "y_min": g["y_min"], "bandwidth_m": s["bandwidth_m"]}, open(f"{w}/grid.json", "w"))
PYEOF
LOAD_PEER=$(cut -d' ' -f1 /proc/loadavg)
T_PEER=$(run "$W/peer.log" "$PY" "$ROOT/tests/bench/density_peer.py" "$W/s.gpkg" "$W/grid.json" "$W")
"$PY" - "$W" "$T_RUST" "$T_PEER" "$LOAD_RUST" "$LOAD_PEER" <<'PYEOF'
import json, sys, re, math
import numpy as np, rasterio, pyogrio
w, t_rust, t_peer = sys.argv[1], float(sys.argv[2]), float(sys.argv[3])
load_rust, load_peer = sys.argv[4], sys.argv[5]
peer = json.loads(open(f"{w}/peer.log.out").read())
g = json.load(open(f"{w}/grid.json"))
def peak(log):
    m = re.search(r"Maximum resident set size \(kbytes\): (\d+)", open(log).read())
    return f"{int(m.group(1)) / 1024:.0f} MiB" if m else "n/a (no /usr/bin/time)"
# Error of the binned FFT surface against exact evaluation at 2,000 random cells.
with rasterio.open(f"{w}/d.gpkg", table="density_support") as d:
    z = d.read(1).astype(float)
df = pyogrio.read_dataframe(f"{w}/s.gpkg", layer="veldmark_records", columns=["stance"]).to_crs(g["crs_wkt"])
sel = (df["stance"] == "support").to_numpy()
x, y = df.geometry.x.to_numpy()[sel], df.geometry.y.to_numpy()[sel]
h, cell = g["bandwidth_m"], g["cell_m"]
rng = np.random.default_rng(1)
top = np.argsort(z.ravel())[-1000:]
cells = np.concatenate([top, rng.integers(0, z.size, 1000)])
err = 0.0
for k in cells:
    r, c = divmod(int(k), g["cols"])
    cx = g["x_min"] + (c + 0.5) * cell; cy = g["y_min"] + (g["rows"] - r - 0.5) * cell
    u = ((x - cx) ** 2 + (y - cy) ** 2) / h ** 2
    exact = (3 / (math.pi * h * h) * np.where(u < 1, (1 - u) ** 2, 0)).sum() * 1e6
    err = max(err, abs(z[r, c] - exact))
rust_log = open(f"{w}/rust.log").read()
m = re.search(r"compute_s: ([0-9.]+)", rust_log)
rust_compute = float(m.group(1)) if m else float("nan")
warm, cold = peer["warm"], peer["cold"]
print(f"end to end: stance-density {t_rust:.2f} s (load {load_rust}); Python peer warm {warm['total_s']:.2f} s, "
      f"cold {cold['total_s']:.2f} s (load {load_peer}; process {t_peer:.2f} s for both calls)")
print(f"ratio against the warm peer {warm['total_s'] / t_rust:.1f}x (cold {cold['total_s'] / t_rust:.1f}x)")
print(f"peer warm phases: read {warm['read_s']:.2f} s, compute {warm['compute_s']:.2f} s, write {warm['write_s']:.2f} s")
print(f"compute only (3 classes): stance-density {rust_compute:.2f} s, KDEpy FFTKDE warm {warm['compute_s']:.2f} s, ratio {warm['compute_s'] / rust_compute:.1f}x")
print(f"max error vs exact evaluation at 2,000 cells (incl. the 1,000 highest): {err / z.max():.2e} of the maximum (Float32 output)")
print(f"peak memory: stance-density {peak(f'{w}/rust.log')}, peer {peak(f'{w}/peer.log')}")
PYEOF
