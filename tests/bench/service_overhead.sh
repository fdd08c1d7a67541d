#!/usr/bin/env bash
# Benchmark: what `stance serve` adds to a job. The same small job on the sample
# (stance weights, queen contiguity of the 209 districts of sample-gpkg/veldmark.gpkg) is run
# RUNS times from the shell and RUNS times through the service (synchronous execute with curl,
# one at a time, each writing its own output), interleaved, median of each; the difference is the service's
# overhead per job (target: under 50 ms). Then JOBS jobs submitted at once with --workers 2
# (asynchronous), timed until the last one finishes: throughput in jobs per second.
#   STANCE_BIN        the umbrella (default target/release/stance)
#   STANCE_SERVE_CMD  how to start the service (default "$STANCE_BIN serve")
set -euo pipefail
cd "$(dirname "$0")/../.."
RUNS=${RUNS:-20}
JOBS=${JOBS:-40}
bin=${STANCE_BIN:-target/release/stance}
read -r -a serve <<< "${STANCE_SERVE_CMD:-$bin serve}"
work=${BENCH_DIR:-target/bench}/service
rm -rf "$work"; mkdir -p "$work/ws/files"
cp sample-gpkg/veldmark.gpkg "$work/ws/files/sample.gpkg"
median() { sort -n | awk '{a[NR]=$1} END {print (NR%2) ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2}'; }
now() { date +%s.%N; }

"${serve[@]}" --bind 127.0.0.1:0 --workspace "$work/ws" --workers 2 2> "$work/serve.log" &
server=$!
trap 'kill "$server" 2>/dev/null || true' EXIT
for _ in $(seq 100); do grep -q listening "$work/serve.log" && break; sleep 0.1; done
url=$(grep -o 'http://[0-9.:]*' "$work/serve.log" | head -1)
body='{"inputs": {"input": "sample.gpkg", "layer": "veldmark_districts"}}'
# Interleaved, so both see the same load on the machine.
shell=(); served=()
for i in $(seq "$RUNS"); do
  start=$(now)
  "$bin" weights --input "$work/ws/files/sample.gpkg" --layer veldmark_districts \
    --output "$work/shell-$i.gpkg" > /dev/null 2>&1
  shell+=("$(awk -v a="$start" -v b="$(now)" 'BEGIN {print b - a}')")
  t=$(curl -s -o /dev/null -w '%{time_total} %{http_code}' -X POST -d "$body" \
    "$url/processes/weights/execution")
  [ "${t#* }" = 200 ] || { echo "service answered ${t#* }" >&2; exit 1; }
  served+=("${t% *}")
done
s=$(printf '%s\n' "${shell[@]}" | median); v=$(printf '%s\n' "${served[@]}" | median)
printf 'weights on the sample (%s runs each, median): shell %.1f ms, service %.1f ms, overhead %.1f ms per job\n' \
  "$RUNS" "$(awk -v x="$s" 'BEGIN {print x * 1000}')" "$(awk -v x="$v" 'BEGIN {print x * 1000}')" \
  "$(awk -v a="$v" -v b="$s" 'BEGIN {print (a - b) * 1000}')"

start=$(now)
ids=()
for i in $(seq "$JOBS"); do
  ids+=("$(curl -s -X POST -H 'Prefer: respond-async' -d "$body" "$url/processes/weights/execution" |
    sed -n 's/.*"jobID": "\([0-9a-f]*\)".*/\1/p')")
done
for id in "${ids[@]}"; do
  until curl -s "$url/jobs/$id" | grep -Eq '"status": "(successful|failed)"'; do sleep 0.05; done
done
elapsed=$(awk -v a="$start" -v b="$(now)" 'BEGIN {print b - a}')
failed=$(curl -s "$url/jobs" | grep -c '"status": "failed"' || true)
printf '%s jobs submitted at once, --workers 2: %.2f s in all, %.1f jobs/s (%s failed)\n' \
  "$JOBS" "$elapsed" "$(awk -v n="$JOBS" -v t="$elapsed" 'BEGIN {print n / t}')" "$failed"
