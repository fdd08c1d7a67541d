#!/usr/bin/env bash
# Growth with the number of records: for each size in SIZES, stance-synth writes the invented
# scenario with its CSV; the CSV's coordinates are snapped to a 0.005° grid (about 450 × 550 m:
# the scan's counts matrix grows with distinct locations, and records at millions are in practice
# aggregated to places; rows without usable coordinates are left as they are, for the import to
# drop); then each step runs as a user would chain it, timed with GNU time
# (elapsed seconds, maximum resident set size):
#   import  stance-import of the snapped CSV (every check, time and author fields)
#   density stance-density, 3 classes + difference surfaces, 112 m cells, h = 5 km, FFT
#   scan    stance-scan, Bernoulli (oppose against the rest), max share 0.1, 999 replicates
#   rates   stance-rates of oppose per district (points in polygons, empirical Bayes)
# and, where a tool estimates its peak before working (the estimate it checks against
# --max-memory-mb, memory_estimate_mb in its summary), the estimate against the measured peak.
# With SHARDS=N (e.g. 4) the scan is also run as N shards one after the other plus the merge,
# and the overhead of sharding against the one-process scan is printed (the merged clusters
# must equal the one-process run's).
# Usage: SIZES="1000000 5000000 10000000" SHARDS=4 tests/bench/scale.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
SIZES=${SIZES:-"1000000 5000000 10000000"}
SHARDS=${SHARDS:-0}
R=${R:-999}
bin=$(realpath "${BIN:-target/release}")
work=$(realpath -m "${BENCH_DIR:-target/bench}/scale")
mkdir -p "$work"
cd "$work"

timed() {  # label command…: runs it under GNU time, prints "label seconds MiB"
  local label=$1; shift
  local file=${label// /_}; file=${file//\//_of_}
  /usr/bin/time -f '%e %M' -o time.txt "$@" > "$file.json" 2> "$file.log" \
    || { echo "$label failed:"; tail -n 3 "$file.log"; exit 1; }
  read -r seconds kib < time.txt
  # The tool's own estimate of its peak (memory_estimate_mb in its summary), when it makes one.
  local estimate
  estimate=$(sed -n 's/.*"memory_estimate_mb": *\([0-9]*\).*/\1/p' "$file.json" | tail -n 1)
  if [ -n "$estimate" ]; then
    estimate=$(awk -v e="$estimate" -v k="$kib" 'BEGIN { printf "estimate %d MiB = %.2f x the peak", e, e * 1024 / k }')
  fi
  printf '%-28s %8.2f s %7d MiB  %s\n' "$label" "$seconds" $((kib / 1024)) "$estimate"
}

for n in $SIZES; do
  echo "== $n records ($(nproc) cores, load $(cut -d' ' -f1-3 /proc/loadavg))"
  if [ ! -f "synth_$n.gpkg" ] || [ ! -f "snapped_$n.csv" ]; then
    rm -f "synth_$n.gpkg"
    "$bin/stance-synth" --output "synth_$n.gpkg" --points "$n" --seed 7 --csv "raw_$n.csv" -q > /dev/null
    # lon and lat are the 2nd and 3rd columns, before any quoted text.
    awk -F, 'BEGIN { OFS = "," } NR == 1 { print; next }
      $2 ~ /^-?[0-9.]+$/ && $3 ~ /^-?[0-9.]+$/ {
        $2 = sprintf("%.3f", int(($2 + 360) / 0.005 + 0.5) * 0.005 - 360);
        $3 = sprintf("%.3f", int(($3 + 90) / 0.005 + 0.5) * 0.005 - 90) }
      { print }' \
      "raw_$n.csv" > "snapped_$n.csv"
    rm -f "raw_$n.csv"
  fi
  out="run_$n.gpkg"
  rm -f "$out"
  timed "import $n" "$bin/stance-import" --input "snapped_$n.csv" --output "$out" --name records \
    --time-field time --author-field author --text-field text --quality-field quality
  timed "density $n" "$bin/stance-density" --input "$out" --layer records --output "$out" \
    --name density --bandwidth-m 5000 --cell-m 112 --permutations 0 --method fft -v
  timed "scan $n" "$bin/stance-scan" --input "$out" --layer records --output "$out" --name scan \
    --case-class oppose --max-share 0.1 --replicates "$R" --max-clusters 1 -v
  cp time.txt "scan_$n.time"
  grep -o 'on [0-9]* locations' "scan_$n.log" | head -n 1 | sed 's/^/  scan /'
  timed "rates $n" "$bin/stance-rates" --input "$out" --layer records --areas veldmark_districts \
    --areas-file "synth_$n.gpkg" --case-class oppose --at-risk-classes all --id-field code \
    --output "$out" --name rates
  if [ "$SHARDS" -gt 0 ]; then
    rm -rf "shards_$n"; mkdir -p "shards_$n"
    total=0
    for k in $(seq 1 "$SHARDS"); do
      timed "scan shard $k/$SHARDS" "$bin/stance-scan" --input "$out" --layer records \
        --output "shards_$n/$k.gpkg" --name scan --case-class oppose --max-share 0.1 \
        --replicates "$R" --max-clusters 1 --shard "$k/$SHARDS"
      total=$(awk -v a="$total" -v b="$(cut -d' ' -f1 time.txt)" 'BEGIN { print a + b }')
    done
    rm -f "merged_$n.gpkg"
    timed "scan merge" "$bin/stance-scan" --input "$out" --layer records --output "merged_$n.gpkg" \
      --name scan --case-class oppose --max-share 0.1 --replicates "$R" --max-clusters 1 \
      --merge-shards "shards_$n"
    total=$(awk -v a="$total" -v b="$(cut -d' ' -f1 time.txt)" 'BEGIN { print a + b }')
    first=$(awk '{ print $1 }' "scan_$n.time")
    again=$(/usr/bin/time -f '%e' "$bin/stance-scan" --input "$out" --layer records --output "again_$n.gpkg" \
      --overwrite --name scan --case-class oppose --max-share 0.1 --replicates "$R" --max-clusters 1 -q 2>&1 > /dev/null | tail -n 1)
    same=$(python3 - "$out" "merged_$n.gpkg" <<'PY'
import sqlite3, sys
q = "SELECT llr, p_monte_carlo, p_gumbel, radius_m FROM scan_clusters ORDER BY cluster_no"
a, b = (sqlite3.connect(f).execute(q).fetchall() for f in sys.argv[1:3])
print("identical clusters" if a == b and a else f"DIFFERENT: {a} vs {b}")
PY
)
    echo "  one process: $first s before the shards, $again s after; $SHARDS shards + merge, one after the other: $total s; $same"
    awk -v a="$first" -v b="$again" -v t="$total" \
      'BEGIN { m = (a + b) / 2; printf "  overhead of sharding: %.1f %% of the mean one-process run (%.2f s)\n", 100 * (t - m) / m, m }' 
  fi
done
