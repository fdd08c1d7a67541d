#!/usr/bin/env bash
# Benchmark: local join counts and Getis-Ord Gi* with 999 permutations on the 70,000-area
# synthetic layer of tests/bench/areal_vs_pysal.sh (a jittered 250 x 280 grid), stance-local
# against libpysal Queen + esda (numba) Join_Counts_Local / G_Local(star=True) in one Python run
# (tests/bench/local_peer.py). Both use 2 threads and queen contiguity built on the fly; the
# attribute of the join counts is value > 0, Gi* analyses positive = value - min + 1 with binary
# weights (self weight 1).
# Ours end to end = one stance-local run (read, queen weights, statistic with 999 permutations,
# write the output layer). The headline peer time is warm: read + Queen + the statistic's second
# call in the same process (after numba's compilation); the cold first call is context.
set -euo pipefail
cd "$(dirname "$0")/../.."
work=${BENCH_DIR:-target/bench}
py=${PYTHON:-.venv-reference/bin/python}
threads=${THREADS:-2}
bin=${BIN:-target/release}
mkdir -p "$work"
time_one() { # command… → seconds
  local start end
  start=$(date +%s.%N); "$@" > /dev/null 2>&1; end=$(date +%s.%N)
  awk -v a="$start" -v b="$end" 'BEGIN {print b - a}'
}
n=70000
areas="$work/areas_$n.gpkg"
[ -f "$areas" ] || "$py" tests/bench/areal_peer.py make "$areas" 250 280 7
input="$work/local_areas_$n.gpkg"
[ -f "$input" ] || "$py" tests/bench/local_peer.py prepare "$areas" "$input"
peer=$("$py" tests/bench/local_peer.py run "$input" "$threads")
rm -f "$work/local_ours_$n.gpkg"
jc=$(time_one $bin/stance-local --input "$input" --output "$work/local_ours_$n.gpkg" --name jc \
    --statistic join-count --field value --rule "> 0" --permutations 999 --threads "$threads" -q)
gs=$(time_one $bin/stance-local --input "$input" --output "$work/local_ours_$n.gpkg" --name gstar \
    --statistic gi-star --field positive --permutations 999 --threads "$threads" -q)
field() { echo "$peer" | sed "s/.*\"$1\": \([0-9.e-]*\).*/\1/"; }
for pair in "join_count:$jc" "gi_star:$gs"; do
  key=${pair%%:*}; ours=${pair#*:}
  pt=$(field "${key}_total_s"); pw=$(field "${key}_warm_s")
  # Warm job: the read and Queen of the first call plus the statistic's second (warm) call.
  pj=$(awk -v t="$pt" -v s="$(field "${key}_s")" -v w="$pw" 'BEGIN {print t - s + w}')
  printf '%s areas, %s, 999 permutations: libpysal+esda warm %.2f s (cold end to end %.2f s), stance-local %.2f s: %.1f× the warm peer (%.1f× cold)\n' \
    "$n" "$key" "$pj" "$pt" "$ours" "$(awk -v a="$pj" -v b="$ours" 'BEGIN {print a / b}')" \
    "$(awk -v a="$pt" -v b="$ours" 'BEGIN {print a / b}')"
done
echo "  peer: $peer"
