#!/usr/bin/env bash
# Benchmark: queen weights and local Moran's I with 999 permutations on synthetic areas
# (a jittered grid, 3,000 and 70,000 polygons), stance-weights + stance-moran against libpysal
# + esda (numba) doing the same in one Python run (tests/bench/areal_peer.py). Both use 2 threads.
# Ours end to end = one stance-moran run (read, queen weights, global + local Moran with 999
# permutations each, write the output layer); stance-weights alone is timed beside libpysal Queen.
# The peer's end to end = read + Queen + Moran_Local (first call, numba compilation included).
set -euo pipefail
cd "$(dirname "$0")/../.."
work=${BENCH_DIR:-target/bench}
py=${PYTHON:-.venv-reference/bin/python}
threads=${THREADS:-2}
mkdir -p "$work"
bin=target/release
time_one() { # command… → seconds
  local start end
  start=$(date +%s.%N); "$@" > /dev/null 2>&1; end=$(date +%s.%N)
  awk -v a="$start" -v b="$end" 'BEGIN {print b - a}'
}
for size in "50 60" "250 280"; do
  set -- $size
  n=$(( $1 * $2 ))
  areas="$work/areas_$n.gpkg"
  [ -f "$areas" ] || "$py" tests/bench/areal_peer.py make "$areas" "$1" "$2" 7
  peer=$("$py" tests/bench/areal_peer.py run "$areas" "$threads")
  rm -f "$work/ours_$n.gpkg"
  w=$(time_one $bin/stance-weights --input "$areas" --output "$work/ours_$n.gpkg" --threads "$threads" -q)
  m=$(time_one $bin/stance-moran --input "$areas" --output "$work/ours_$n.gpkg" --field value \
      --permutations 999 --threads "$threads" -q)
  pw=$(echo "$peer" | sed 's/.*"weights_s": \([0-9.e-]*\).*/\1/')
  pt=$(echo "$peer" | sed 's/.*"total_s": \([0-9.e-]*\).*/\1/')
  pl=$(echo "$peer" | sed 's/.*"local_warm_s": \([0-9.e-]*\).*/\1/')
  printf '%s areas: weights: libpysal Queen %.2f s, stance-weights %.2f s (ratio %.1f×)\n' \
    "$n" "$pw" "$w" "$(awk -v a="$pw" -v b="$w" 'BEGIN {print a / b}')"
  printf '%s areas: end to end: libpysal+esda %.2f s (warm Moran_Local alone %.2f s), stance-moran %.2f s (ratio %.1f×)\n' \
    "$n" "$pt" "$pl" "$m" "$(awk -v a="$pt" -v b="$m" 'BEGIN {print a / b}')"
  echo "  peer: $peer"
done
