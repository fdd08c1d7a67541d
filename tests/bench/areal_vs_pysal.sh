#!/usr/bin/env bash
# Benchmark: queen weights + global and local Moran's I with 999 permutations on synthetic areas
# (a jittered grid, 3,000 and 70,000 polygons), stance against libpysal + esda (numba) doing the
# same job in one Python process (tests/bench/areal_peer.py): read, queen weights, global and
# local Moran, the output layer written. Both use 2 threads.
# The peer runs the job twice in the same process: the second (warm) call, after numba's
# compilation, is the headline; the first (cold) is context. Ours: (a) one stance-moran run with
# the weights built inside it; (b) a separate stance-weights step, then stance-moran --weights.
# The 1-minute load average is printed before each measurement (the machine is shared).
set -euo pipefail
cd "$(dirname "$0")/../.."
work=${BENCH_DIR:-target/bench}
py=${PYTHON:-.venv-reference/bin/python}
threads=${THREADS:-2}
sizes=${SIZES:-"50 60;250 280"}
mkdir -p "$work"
bin=target/release
load() { cut -d' ' -f1 /proc/loadavg; }
time_one() { # command… → seconds
  local start end
  start=$(date +%s.%N); "$@" > /dev/null 2>&1; end=$(date +%s.%N)
  awk -v a="$start" -v b="$end" 'BEGIN {print b - a}'
}
ratio() { awk -v a="$1" -v b="$2" 'BEGIN {printf "%.1f", a / b}'; }
IFS=';' read -ra size_list <<< "$sizes"
for size in "${size_list[@]}"; do
  set -- $size
  n=$(( $1 * $2 ))
  areas="$work/areas_$n.gpkg"
  [ -f "$areas" ] || "$py" tests/bench/areal_peer.py make "$areas" "$1" "$2" 7
  l_peer=$(load)
  rm -f "$work/peer_$n.gpkg"
  peer=$("$py" tests/bench/areal_peer.py run "$areas" "$threads" "$work/peer_$n.gpkg")
  rm -f "$work/inline_$n.gpkg" "$work/separate_$n.gpkg"
  l_inline=$(load)
  inline=$(time_one $bin/stance-moran --input "$areas" --output "$work/inline_$n.gpkg" --field value \
      --permutations 999 --threads "$threads" -q)
  l_separate=$(load)
  start=$(date +%s.%N)
  w=$(time_one $bin/stance-weights --input "$areas" --output "$work/separate_$n.gpkg" --name queen \
      --threads "$threads" -q)
  m=$(time_one $bin/stance-moran --input "$areas" --output "$work/separate_$n.gpkg" --field value \
      --weights queen --weights-file "$work/separate_$n.gpkg" --permutations 999 --threads "$threads" -q)
  separate=$(awk -v a="$w" -v b="$m" 'BEGIN {print a + b}')
  warm=$("$py" -c 'import json,sys; print(json.loads(sys.argv[1])["warm"]["total_s"])' "$peer")
  cold=$("$py" -c 'import json,sys; print(json.loads(sys.argv[1])["cold"]["total_s"])' "$peer")
  printf '%s areas: peer warm %.2f s (cold %.2f s; load %s)\n' "$n" "$warm" "$cold" "$l_peer"
  printf '  stance-moran, weights inside: %.2f s (load %s): %s× the warm peer (%s× cold)\n' \
    "$inline" "$l_inline" "$(ratio "$warm" "$inline")" "$(ratio "$cold" "$inline")"
  printf '  stance-weights %.2f s + stance-moran --weights %.2f s = %.2f s (load %s): %s× the warm peer (%s× cold)\n' \
    "$w" "$m" "$separate" "$l_separate" "$(ratio "$warm" "$separate")" "$(ratio "$cold" "$separate")"
  echo "  peer phases: $peer"
done
