#!/usr/bin/env bash
# Issue 17's "same values": runs the tools of two builds on the benchmark data and compares every
# output table (SQLite's sha3_query over all rows in fid order; raster tiles by their bytes) and
# the results of each JSON summary. Prints one line per output: same or DIFFERENT.
# Usage: tests/bench/identical.sh OLD_BIN_DIR NEW_BIN_DIR [N]   (N: records, default 1000000;
#        needs target/bench/scale/run_N.gpkg and synth_N.gpkg from tests/bench/scale.sh and
#        target/bench/areas_70000.gpkg from tests/bench/areal_vs_pysal.sh or read_vs_pyogrio.sh)
set -euo pipefail
cd "$(dirname "$0")/../.."
old=$(realpath "$1"); new=$(realpath "$2"); n=${3:-1000000}
scale=target/bench/scale
work=$(mktemp -d); trap 'rm -rf "$work"' EXIT
# The areas' value field at 15 significant digits: the reader before issue 17's page reader took
# fields through GDAL's text form of a real (15 digits); on such values both read the same number.
python3 - "$work/areas.gpkg" target/bench/areas_70000.gpkg <<'EOF'
import shutil, sqlite3, sys
shutil.copy(sys.argv[2], sys.argv[1])
c = sqlite3.connect(sys.argv[1])
for f in ["ST_IsEmpty", "ST_MinX", "ST_MaxX", "ST_MinY", "ST_MaxY"]:
    c.create_function(f, 1, lambda g: 0)  # the R-tree triggers name them; geometries do not change
rows = c.execute("SELECT fid, value FROM areas").fetchall()
c.executemany("UPDATE areas SET value = ? WHERE fid = ?", [(float("%.15g" % v), f) for f, v in rows])
c.commit()
EOF
run() {  # side tool args…: writes $work/<side>_<tool>.gpkg and .json
  local side=$1 tool=$2; shift 2
  local bin; bin=$([ "$side" = old ] && echo "$old" || echo "$new")
  "$bin/stance-$tool" "$@" --output "$work/${side}_$tool.gpkg" -q > "$work/${side}_$tool.json"
}
for side in old new; do
  run "$side" density --input "$scale/run_$n.gpkg" --layer records --name density \
    --bandwidth-m 5000 --cell-m 112 --permutations 0 --method fft
  run "$side" rates --input "$scale/run_$n.gpkg" --layer records --areas veldmark_districts \
    --areas-file "$scale/synth_$n.gpkg" --case-class oppose --at-risk-classes all --id-field code \
    --name rates
  run "$side" scan --input "$scale/run_$n.gpkg" --layer records --case-class oppose \
    --max-share 0.1 --replicates 99 --max-clusters 1 --name scan
  run "$side" weights --input "$work/areas.gpkg" --name queen
  run "$side" moran --input "$work/areas.gpkg" --field value --permutations 999 --name moran
done
status=0
for tool in density rates scan weights moran; do
  for table in $(sqlite3 "$work/new_$tool.gpkg" "SELECT table_name FROM gpkg_contents"); do
    digest() {
      sqlite3 "$work/$1_$tool.gpkg" "SELECT hex(sha3_query('SELECT * FROM \"$table\" ORDER BY 1, 2, 3'))"
    }
    if [ "$(digest old)" = "$(digest new)" ]; then echo "same       $tool $table"; else
      echo "DIFFERENT  $tool $table"; status=1; fi
  done
  # The results without their timings (keys ending in _s, e.g. scan_time_s).
  results() { python3 -c '
import json, sys
def drop(v):
    if isinstance(v, dict): return {k: drop(x) for k, x in v.items() if not k.endswith("_s")}
    if isinstance(v, list): return [drop(x) for x in v]
    return v
print(json.dumps(drop(json.load(open(sys.argv[1]))["results"]), sort_keys=True))' "$work/$1_$tool.json"; }
  if [ "$(results old)" = "$(results new)" ]; then echo "same       $tool results"; else
    echo "DIFFERENT  $tool results"; status=1; fi
done
exit $status
