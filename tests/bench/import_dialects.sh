#!/usr/bin/env bash
# Benchmark: stance-import of the same 1,000,000 invented records in each export dialect
# (stance-synth --csv-dialect) against the clean comma/UTF-8 CSV: the cost of guessing the
# delimiter, transcoding (WHATWG Encoding Standard decoders) and decimal commas, and of JSON
# lines. Median of RUNS runs each; prints seconds and the extra over the clean CSV (target:
# under 15 % for the delimited dialects).
set -euo pipefail
cd "$(dirname "$0")/../.."
N=${N:-1000000}
RUNS=${RUNS:-3}
work=${BENCH_DIR:-target/bench}
mkdir -p "$work"
bin=target/release
median() { sort -n | awk '{a[NR]=$1} END {print (NR%2) ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2}'; }
time_one() { # command… → seconds
  local start end
  start=$(date +%s.%N); "$@" > /dev/null; end=$(date +%s.%N)
  awk -v a="$start" -v b="$end" 'BEGIN {print b - a}'
}
# dialect:file extension:extra import options
cases=(
  "comma-utf8:csv:"
  "semicolon-latin1:csv:--encoding windows-1252"
  "semicolon-bom-crlf-decimal-comma:csv:--decimal-comma"
  "semicolon-latin1-crlf-decimal-comma:csv:--decimal-comma --encoding windows-1252"
  "tab-utf16:tsv:"
  "pipe:csv:"
  "jsonl:jsonl:"
)
clean=""
for c in "${cases[@]}"; do
  IFS=: read -r dialect ext extra <<< "$c"
  file="$work/records_${N}_$dialect.$ext"
  if [ ! -f "$file" ]; then
    rm -f "$work/synth_dialect.gpkg"
    $bin/stance-synth --output "$work/synth_dialect.gpkg" --points "$N" --seed 11 --csv "$file" \
      --csv-dialect "$dialect" -q > /dev/null
  fi
  times=()
  for i in $(seq "$RUNS"); do
    rm -f "$work/dialect.gpkg"
    # shellcheck disable=SC2086
    times+=("$(time_one $bin/stance-import --input "$file" --output "$work/dialect.gpkg" --time-field time \
        --author-field author --text-field text --quality-field quality -q $extra)")
  done
  t=$(printf '%s\n' "${times[@]}" | median)
  [ -z "$clean" ] && clean=$t
  printf 'import %s rows, %-36s %6.2f s, %+6.1f %% over the clean CSV\n' "$N" "$dialect" "$t" \
    "$(awk -v a="$t" -v b="$clean" 'BEGIN {print 100 * (a / b - 1)}')"
done
