#!/usr/bin/env bash
# Benchmark: stance-scan (Bernoulli, case class oppose, toward oppose; and the multinomial scan
# on the three classes) against a NumPy + Numba parallel peer of the same statistic
# (tests/bench/scan_peer_numba.py) on 100,000 stance-synth records at 20,000 distinct locations,
# max share 0.1 and 0.5, 999 replicates. MODELS="bernoulli multinomial" by default. Prints the time
# of each whole run, windows evaluated per second per core, the ratio, both maximum LLRs, and
# the peak memory (GNU time's maximum resident set size).
set -euo pipefail
cd "$(dirname "$0")/../.."
R=${R:-999}
SHARES=${SHARES:-"0.1 0.5"}
MODELS=${MODELS:-"bernoulli multinomial"}
PY=${PY:-.venv/bin/python}
[ -x "$PY" ] || PY=.venv-reference/bin/python
work=${BENCH_DIR:-target/bench}
mkdir -p "$work"
bin=target/release
cores=$(nproc)
if [ ! -f "$work/scan_bench.npz" ] || ! $PY -c "import numpy, sys; sys.exit('classes' not in numpy.load('$work/scan_bench.npz'))"; then
  rm -f "$work/scan_synth.gpkg" "$work/scan_bench.gpkg"
  $bin/stance-synth --output "$work/scan_synth.gpkg" --points 100000 --seed 11 -q > /dev/null
  $PY tests/bench/scan_prepare_data.py "$work/scan_synth.gpkg" "$work/scan_bench.gpkg" "$work/scan_bench.npz"
fi
for model in $MODELS; do
for share in $SHARES; do
  rm -f "$work/scan_out.gpkg"
  if [ "$model" = multinomial ]; then model_args=(--model multinomial); else model_args=(--case-class oppose); fi
  /usr/bin/time -f '%e %M' -o "$work/time_ours" $bin/stance-scan --input "$work/scan_bench.gpkg" --layer records \
    --output "$work/scan_out.gpkg" "${model_args[@]}" --max-share "$share" --replicates "$R" --max-clusters 1 -q \
    > "$work/ours.json"
  /usr/bin/time -f '%e %M' -o "$work/time_peer" $PY tests/bench/scan_peer_numba.py "$work/scan_bench.npz" "$share" "$R" \
    "$model" > "$work/peer.json"
  $PY - "$work" "$share" "$R" "$cores" "$model" <<'PYEOF'
import json, sys
work, share, R, cores, model = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), sys.argv[5]
ours = json.load(open(f"{work}/ours.json"))
peer = json.load(open(f"{work}/peer.json"))
t_ours, m_ours = map(float, open(f"{work}/time_ours").read().split())
t_peer, m_peer = map(float, open(f"{work}/time_peer").read().split())
res = ours["results"]
w = res["windows_per_labelling"] * (R + 1)
wp = peer["windows_per_labelling"] * (R + 1)
llr = res["clusters"][0]["llr"]
print(f"{model}, max share {share}, {res['locations']} locations, {res['features_analysed']} records, {R} replicates, {cores} cores")
print(f"  stance-scan : whole run {t_ours:8.2f} s (scan {res['scan_time_s']:.2f} s), "
      f"{w / res['scan_time_s'] / cores:.3e} windows/s/core, peak {m_ours / 1024:.0f} MiB, max LLR {llr:.9f}")
print(f"  numba peer  : whole run {t_peer:8.2f} s (scan {peer['seconds']:.2f} s), "
      f"{wp / peer['seconds'] / cores:.3e} windows/s/core, peak {m_peer / 1024:.0f} MiB, max LLR {peer['max_llr']:.9f}")
print(f"  ratio against the warm peer (its scan after compiling on a tiny problem / ours whole run): "
      f"{peer['seconds'] / t_ours:.1f}x; cold (peer whole run / ours whole run): {t_peer / t_ours:.1f}x; "
      f"same windows: {res['windows_per_labelling'] == peer['windows_per_labelling']}; "
      f"|ΔLLR| = {abs(llr - peer['max_llr']):.2e}")
PYEOF
done
done
