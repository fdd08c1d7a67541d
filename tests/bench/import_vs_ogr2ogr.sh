#!/usr/bin/env bash
# Benchmark: stance-import of a 1,000,000-row CSV against GDAL's ogr2ogr doing the same
# conversion (CSV with lon/lat columns → GeoPackage point layer, EPSG:4326), side by side on
# the same file, median of 3 runs each; then reading the 1,000,000 points back (stance-core's
# read_points against pyogrio's Arrow reader, tests/bench/read_vs_pyogrio.sh). Prints the ratios.
set -euo pipefail
cd "$(dirname "$0")/../.."
N=${N:-1000000}
RUNS=${RUNS:-3}
work=${BENCH_DIR:-target/bench}
mkdir -p "$work"
bin=target/release
csv="$work/records_$N.csv"
if [ ! -f "$csv" ]; then
  rm -f "$work/synth.gpkg"
  $bin/stance-synth --output "$work/synth.gpkg" --points "$N" --seed 11 --csv "$csv" -q > /dev/null
fi
median() { sort -n | awk '{a[NR]=$1} END {print (NR%2) ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2}'; }
time_one() { # command… → seconds
  local start end
  start=$(date +%s.%N); "$@" > /dev/null 2>&1; end=$(date +%s.%N)
  awk -v a="$start" -v b="$end" 'BEGIN {print b - a}'
}
ours=(); peer=()
for i in $(seq "$RUNS"); do
  rm -f "$work/ogr.gpkg" "$work/ours.gpkg"
  peer+=("$(time_one ogr2ogr -f GPKG "$work/ogr.gpkg" "$csv" -oo X_POSSIBLE_NAMES=lon -oo Y_POSSIBLE_NAMES=lat \
      -oo KEEP_GEOM_COLUMNS=NO -a_srs EPSG:4326 -nln records)")
  ours+=("$(time_one $bin/stance-import --input "$csv" --output "$work/ours.gpkg" --time-field time \
      --author-field author --text-field text --quality-field quality -q)")
done
p=$(printf '%s\n' "${peer[@]}" | median); o=$(printf '%s\n' "${ours[@]}" | median)
printf 'import %s rows: ogr2ogr %.2f s, stance-import %.2f s (with checks), ratio %.2f\n' "$N" "$p" "$o" "$(awk -v a="$o" -v b="$p" 'BEGIN {print a / b}')"
PYTHON=${PYTHON:-.venv-reference/bin/python} tests/bench/read_vs_pyogrio.sh "$work/ours.gpkg" records
