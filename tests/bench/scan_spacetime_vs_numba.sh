#!/usr/bin/env bash
# Benchmark: the space-time permutation scan of stance-scan (Kulldorff, Heffernan, Hartman,
# Assunção & Mostashari 2005) against a NumPy + Numba parallel peer of the same algorithm
# (tests/bench/scan_spacetime_peer.py) on RECORDS records snapped to LOCATIONS locations over
# MONTHS months (tests/bench/scan_spacetime_prepare.py), runs up to MAX_DURATION months, circles
# up to SHARE of the records, R replicates. Prints the whole-run time and peak memory (GNU time's
# maximum resident set size) of both, the peer's warm (second call in one process, the headline)
# and cold (first call, JIT included) scan times, and both top LLRs.
# Defaults: the issue's size (1,000,000 records, 20,000 locations, 36 months, 6, 999).
set -euo pipefail
cd "$(dirname "$0")/../.."
RECORDS=${RECORDS:-1000000}
LOCATIONS=${LOCATIONS:-20000}
MONTHS=${MONTHS:-36}
MAX_DURATION=${MAX_DURATION:-6}
SHARE=${SHARE:-0.001}
R=${R:-999}
PY=${PY:-.venv/bin/python}
[ -x "$PY" ] || PY=.venv-reference/bin/python
work=${BENCH_DIR:-target/bench}
mkdir -p "$work"
bin=${BIN:-target/release}
cores=$(nproc)
data="$work/spacetime_${RECORDS}_${LOCATIONS}_${MONTHS}"
if [ ! -f "$data.gpkg" ] || [ ! -f "$data.npz" ]; then
  rm -f "$data.gpkg"
  $PY tests/bench/scan_spacetime_prepare.py "$RECORDS" "$LOCATIONS" "$MONTHS" "$data.csv" "$data.npz"
  ogr2ogr -f GPKG -nln records -a_srs EPSG:32633 -oo X_POSSIBLE_NAMES=x -oo Y_POSSIBLE_NAMES=y \
    "$data.gpkg" "$data.csv"
  rm -f "$data.csv"
fi
rm -f "$work/spacetime_out.gpkg"
/usr/bin/time -f '%e %M' -o "$work/time_ours" $bin/stance-scan --input "$data.gpkg" --layer records \
  --output "$work/spacetime_out.gpkg" --model space-time-permutation --time-field time_utc --period month \
  --max-duration "$MAX_DURATION" --max-share "$SHARE" --replicates "$R" --max-clusters 1 -q > "$work/ours.json"
/usr/bin/time -f '%e %M' -o "$work/time_peer" $PY tests/bench/scan_spacetime_peer.py "$data.npz" "$SHARE" \
  "$MAX_DURATION" "$R" > "$work/peer.json"
$PY - "$work" "$SHARE" "$R" "$cores" "$MAX_DURATION" <<'PYEOF'
import json, sys
work, share, R, cores, D = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), sys.argv[5]
ours = json.load(open(f"{work}/ours.json"))
peer = json.load(open(f"{work}/peer.json"))
t_ours, m_ours = map(float, open(f"{work}/time_ours").read().split())
t_peer, m_peer = map(float, open(f"{work}/time_peer").read().split())
res = ours["results"]
llr = res["clusters"][0]["llr"]
print(f"space-time permutation, {res['features_analysed']} records, {res['locations']} locations, "
      f"{res['periods_studied']} months, max duration {D}, max share {share}, {R} replicates, {cores} cores")
print(f"  stance-scan : whole run {t_ours:8.2f} s (scan {res['scan_time_s']:.2f} s), peak {m_ours / 1024:.0f} MiB, "
      f"{res['windows_per_labelling']} cylinders/labelling, top LLR {llr:.9f}")
print(f"  numba peer  : warm scan {peer['warm_seconds']:8.2f} s, cold scan {peer['cold_seconds']:.2f} s "
      f"(process {t_peer:.2f} s), peak {m_peer / 1024:.0f} MiB, {peer['cylinders_per_labelling']} cylinders/labelling, "
      f"top LLR {peer['max_llr']:.9f}")
print(f"  ratio (peer warm scan / ours scan): {peer['warm_seconds'] / res['scan_time_s']:.1f}x; "
      f"(peer cold / ours whole run): {peer['cold_seconds'] / t_ours:.1f}x; "
      f"same cylinders: {res['windows_per_labelling'] == peer['cylinders_per_labelling']}; "
      f"|ΔLLR| = {abs(llr - peer['max_llr']):.2e}")
PYEOF
