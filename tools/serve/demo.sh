#!/usr/bin/env bash
# The service part of `make demo`: starts `stance serve` for a moment on a free loopback port,
# runs one job through OGC API – Processes with curl (neighbours of the sample's districts),
# shows its status and summary, and stops the service.
#   usage: tools/serve/demo.sh STANCE_BINARY OUT_DIR
set -euo pipefail
stance=$1; out=$2
command -v curl >/dev/null || { echo "demo: curl is missing (.ci/install-deps installs it)" >&2; exit 2; }
workspace="$out/service"
rm -rf "$workspace"; mkdir -p "$workspace/files"
cp sample-gpkg/veldmark.gpkg "$workspace/files/veldmark.gpkg"
log="$out/service.log"
"$stance" serve --bind 127.0.0.1:0 --workspace "$workspace" --workers 2 2> "$log" &
server=$!
trap 'kill $server 2>/dev/null; wait $server 2>/dev/null || true' EXIT
url=""
for _ in $(seq 1 100); do
  url=$(grep -o 'http://127\.0\.0\.1:[0-9]*' "$log" | head -1 || true)
  [ -n "$url" ] && break
  sleep 0.1
done
[ -n "$url" ] || { echo "demo: the service did not start:" >&2; cat "$log" >&2; exit 1; }
echo "service: $url (workspace $workspace)"
curl -sf "$url/processes" | python3 -c 'import json,sys; print("  processes:", ", ".join(p["id"] for p in json.load(sys.stdin)["processes"]))'
# One asynchronous job: 201 with the job's Location, then poll its status until it is done.
location=$(curl -sf -o /dev/null -D - -X POST "$url/processes/weights/execution" \
  -H 'Content-Type: application/json' -H 'Prefer: respond-async' \
  -d '{"inputs": {"input": "veldmark.gpkg", "layer": "veldmark_districts", "id-field": "code", "name": "district_weights"}}' \
  | tr -d '\r' | sed -n 's/^[Ll]ocation: //p')
case "$location" in http*) ;; *) location="$url$location" ;; esac
for _ in $(seq 1 300); do
  status=$(curl -sf "$location" | python3 -c 'import json,sys; print(json.load(sys.stdin)["status"])')
  [ "$status" = successful ] || [ "$status" = failed ] && break
  sleep 0.1
done
echo "  job $location: $status"
[ "$status" = successful ] || { curl -s "$location" >&2; exit 1; }
curl -sf "$location/results" > "$out/service_results.json"
python3 -c 'import json,sys; r=json.load(open(sys.argv[1])); s=[v for v in r.values() if isinstance(v, dict) and "value" in v][0]["value"]; print("  summary: links", s["results"]["links"], "areas", s["results"]["areas"])' "$out/service_results.json"
