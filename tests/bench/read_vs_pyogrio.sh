#!/usr/bin/env bash
# Benchmark: reading layers as every analysis tool does, against pyogrio's read_arrow (GDAL's
# Arrow stream, its own GDAL) on the same files: 1,000,000 stance-synth points with the `stance`
# text field (ours projected to the working LAEA CRS, the peer's as stored), and the 70,000
# areas of tests/bench/areal_vs_pysal.sh with their `value` field (no projection on either side).
# Ours: the read_timing example (read_points / read_polygons, three rounds in one process, the
# median); the peer: three calls in one process, the fastest warm call as the headline.
# Usage: tests/bench/read_vs_pyogrio.sh [POINTS.gpkg LAYER]   (from the workspace root)
set -euo pipefail
cd "$(dirname "$0")/../.."
py=${PYTHON:-.venv-reference/bin/python}
work=${BENCH_DIR:-target/bench}
points=${1:-target/bench-density/s.gpkg}
layer=${2:-veldmark_records}
areas=$work/areas_70000.gpkg
cargo build -q --release -p stance-moran --example read_timing
mkdir -p "$(dirname "$points")" "$work"
[ -f "$points" ] || target/release/stance-synth --output "$points" --points 1000000 --seed 7 -q >/dev/null
[ -f "$areas" ] || "$py" tests/bench/areal_peer.py make "$areas" 250 280 7
median() { sort -g | awk '{v[NR] = $1} END {print v[int((NR + 1) / 2)]}'; }
echo "load before ours: $(cut -d' ' -f1 /proc/loadavg)"
ours=$(THREADS=${THREADS:-2} target/release/examples/read_timing "$points" "$layer" stance "$areas")
rp=$(echo "$ours" | grep read_points | sed 's/.*: \([0-9.]*\) s/\1/' | median)
ra=$(echo "$ours" | grep read_polygons | sed 's/.*: \([0-9.]*\) s/\1/' | median)
echo "load before the peer: $(cut -d' ' -f1 /proc/loadavg)"
pp=$("$py" tests/bench/read_points_peer.py "$points" "$layer" stance)
pa=$("$py" tests/bench/read_points_peer.py "$areas" areas value)
warm() { echo "$1" | sed 's/.*"warm_s": \([0-9.]*\).*/\1/'; }
cold() { echo "$1" | sed 's/.*"cold_s": \([0-9.]*\).*/\1/'; }
printf 'points: read_points %.3f s, pyogrio read_arrow warm %.3f s (cold %.3f s): %.2f × the warm peer\n' \
  "$rp" "$(warm "$pp")" "$(cold "$pp")" "$(awk -v a="$rp" -v b="$(warm "$pp")" 'BEGIN {print a / b}')"
printf 'areas: read_polygons %.3f s, pyogrio read_arrow warm %.3f s (cold %.3f s): %.2f × the warm peer\n' \
  "$ra" "$(warm "$pa")" "$(cold "$pa")" "$(awk -v a="$ra" -v b="$(warm "$pa")" 'BEGIN {print a / b}')"
