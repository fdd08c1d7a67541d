#!/bin/bash
# The cluster test: on a single-node Slurm (set up by tests/cluster/slurm-up.sh), plans sharded
# runs with `stance plan-batch`, submits the generated job array and merge job, waits for them,
# and checks that the merged outputs are bit-identical to the same run on one machine. Then
# removes one shard: the merge job fails naming it; rerunning that shard and the merge
# completes the run. Tools: stance-density (tolerance and type-probability relabellings) and
# stance-scan (ordinal model, 99 replicates) on an invented scenario of 3,000 records, and
# stance-local (Gi* permutations) and stance-moran (global and local, 999 permutations) on the
# North Carolina SIDS counties (tests/reference/data/nc.gpkg, from R spdep); and stance-density
# split by tiles of its grid (direct sums, masked), planned with `plan-batch --tiles 3`.
set -euo pipefail
cd "$(dirname "$0")/../.."
STANCE=$(realpath "${STANCE:-target/debug/stance}")
WORK=$(realpath -m "${STANCE_TEST_OUT:-target/test-output}")/cluster
rm -rf "$WORK"; mkdir -p "$WORK"
tests/cluster/slurm-up.sh

# Every table of a GeoPackage, every row; reals by repr (exact), blobs by SHA-256.
dump() {
  python3 - "$1" <<'PY'
import hashlib, sqlite3, sys
c = sqlite3.connect(sys.argv[1])
for (t,) in c.execute("SELECT table_name FROM gpkg_contents ORDER BY 1"):
    print("table", t)
    for row in c.execute(f'SELECT * FROM "{t}" ORDER BY 1'):
        print([hashlib.sha256(v).hexdigest() if isinstance(v, bytes) else repr(v) for v in row])
PY
}

wait_for() {  # job ids…: waits until none is queued or running
  for i in $(seq 1 600); do
    [ -z "$(squeue -h -j "$(IFS=,; echo "$*")" 2>/dev/null)" ] && return 0
    sleep 2
  done
  echo "cluster test: jobs $* still running after 20 minutes" >&2; return 1
}

check() {  # name tool args…: one-machine run, plan, submit, wait, compare, then a lost shard
  # (SPLIT=tiles check …: the same with tiles of the grid)
  local split=${SPLIT:-shards} word
  word=${split%s}
  local name=$1; shift
  local dir="$WORK/$name"; mkdir -p "$dir"
  (cd "$WORK" && "$STANCE" "$@" --output "$name/whole.gpkg" -q > /dev/null)
  [ "$(dump "$dir/whole.gpkg" | grep -c '^table ')" -ge 1 ] || { echo "$name: the one-machine run wrote too little"; return 1; }
  (cd "$WORK" && "$STANCE" plan-batch "--$split" 3 --dir "$name/batch" -- "$@" --output "$name/merged.gpkg" > "$dir/plan.json")
  echo "$name: planned $(cat "$dir/plan.json")"
  local out; out=$(sh "$dir/batch/submit.sh")
  echo "$name: $out"
  local array merge
  array=$(echo "$out" | sed -n "s/^$split: job \\([0-9]*\\).*/\\1/p")
  merge=$(echo "$out" | sed -n 's/.*merge: job \([0-9]*\).*/\1/p')
  wait_for "$array" "$merge"
  [ -f "$dir/merged.gpkg" ] || { echo "$name: the merge job wrote nothing; log:"; cat "$dir/batch/logs/merge.log"; return 1; }
  ls "$dir/batch/$split/${word}_1.gpkg" "$dir/batch/$split/${word}_2.gpkg" "$dir/batch/$split/${word}_3.gpkg" > /dev/null
  if ! cmp -s <(dump "$dir/whole.gpkg") <(dump "$dir/merged.gpkg"); then
    echo "$name: merged outputs differ from the one-machine run"; return 1
  fi
  echo "$name: merged outputs of 3 Slurm $split = one-machine run, bit for bit"

  # A lost part: the merge job fails and names it; rerunning the part and the merge completes.
  rm "$dir/batch/$split/${word}_2.gpkg" "$dir/merged.gpkg"
  if sbatch --wait "$dir/batch/merge.sbatch" > /dev/null 2>&1; then
    echo "$name: the merge ran without $word 2"; return 1
  fi
  grep -q "$word 2 of 3 is missing" "$dir/batch/logs/merge.log" \
    || { echo "$name: merge log does not name the missing $word:"; cat "$dir/batch/logs/merge.log"; return 1; }
  [ ! -f "$dir/merged.gpkg" ] || { echo "$name: a refused merge wrote its output"; return 1; }
  sbatch --wait --array=2 "$dir/batch/$split.sbatch" > /dev/null
  sbatch --wait "$dir/batch/merge.sbatch" > /dev/null
  cmp -s <(dump "$dir/whole.gpkg") <(dump "$dir/merged.gpkg") \
    || { echo "$name: outputs after rerunning $word 2 differ"; return 1; }
  echo "$name: missing $word refused by name; rerun of $word 2 and the merge = one-machine run"
}

"$STANCE" synth --output "$WORK/scenario.gpkg" --points 3000 --seed 5 -q > /dev/null
ogr2ogr -f GPKG -nln nc "$WORK/nc.gpkg" tests/reference/data/nc.gpkg
check density density --input scenario.gpkg --layer veldmark_records --cell-m 1500 \
  --type-probabilities --permutations 39 --seed 3 --name d
check local local --input nc.gpkg --statistic gi-star --field SID79 --permutations 999 \
  --seed 17 --name hot
check scan scan --input scenario.gpkg --layer veldmark_records --model ordinal --toward both \
  --max-radius-m 12000 --replicates 99 --seed 4 --name s
check moran moran --input nc.gpkg --field SID79 --permutations 999 --seed 21 --name m
SPLIT=tiles check density_tiles density --input scenario.gpkg --layer veldmark_records \
  --cell-m 500 --method direct --permutations 0 --mask-layer veldmark_districts --name t
echo "cluster test: passed"
