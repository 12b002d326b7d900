#!/usr/bin/env bash
# Time panelready beside the hand-written pandas script and the polars read floor on one panel
# size of the shared benchmark kit, in one run, and print a Markdown table with the ratios.
#
#   bench/side_by_side.sh 100k|1m|10m
#
# The kit (../shared/bench by default, PANELBENCH_KIT to change it) generates the panel,
# times pandas_audit.py, the floor and `panelready build` (the kit's rules_bench.toml, Parquet
# input, without the panel.csv copy, as the pandas script writes Parquet only); this script
# then times `panelready audit` on the same file the same way (warm page cache, GNU time) and
# prints every run with its ratio to pandas. Ratios in one run are what count; absolute times
# move with the machine. Knobs of the kit (PANELBENCH_REPEAT, PANELBENCH_ROOT, ...) apply.
set -euo pipefail

size=${1:?usage: bench/side_by_side.sh 100k|1m|10m}
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
repo=$(cd "$here/.." && pwd)
kit=$(cd "${PANELBENCH_KIT:-$repo/../shared/bench}" && pwd)
root=${PANELBENCH_ROOT:-/tmp/panelbench}
repeat=${PANELBENCH_REPEAT:-1}

# The binary the README's commands build (the dev profile), in the target folder .ci/run uses
# unless CARGO_TARGET_DIR says otherwise (a cold polars build takes a long while).
export CARGO_TARGET_DIR=${CARGO_TARGET_DIR:-${XDG_CACHE_HOME:-${HOME:-/tmp}/.cache}/panelready/target}
echo "== cargo build (target folder $CARGO_TARGET_DIR)" >&2
(cd "$repo" && cargo build --quiet)
target=$(cd "$repo" && cargo metadata --format-version 1 --no-deps |
  python3 -c 'import json, sys; print(json.load(sys.stdin)["target_directory"])')
bin=$target/debug/panelready
rules=$kit/rules_bench.toml

export PANELBENCH_INPUTS=${PANELBENCH_INPUTS:-parquet}
export PANELBENCH_TOOL_CMD="$bin build {in} --rules $rules --out {out} --quiet --no-panel-csv --timings"
res=$root/results/$size
# The kit clears its earlier results with `rm -f`; the bundles panelready wrote there are
# folders, so clear them first.
rm -rf "$res"/tool_parquet "$res"/tool_csv
"$kit/run_peer.sh" "$size"

data=$(ls -t "$root"/data/panel_"${size}"_*.parquet | head -1)
for i in $(seq 1 "$repeat"); do
  echo "== $size panelready audit run $i/$repeat" >&2
  cat "$data" > /dev/null
  /usr/bin/time -v -o "$res/audit_parquet.r$i.time" \
    "$bin" audit "$data" --rules "$rules" --format json --quiet --timings \
    > "$res/audit_parquet.r$i.stdout" 2> "$res/audit_parquet.r$i.stderr" ||
    echo "   FAILED (see $res/audit_parquet.r$i.stderr)" >&2
done
"$root/venv/bin/python" "$kit/collect.py" "$size" "${data%.parquet}" "$res" > /dev/null
python3 "$here/table.py" "$res/summary.json"
