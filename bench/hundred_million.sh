#!/usr/bin/env bash
# 100 million firm-years: `panelready build` and `audit` on a folder of ten Parquet files of the
# shared kit's panel, each under GNU time, and the peak memory of each against 24 GB.
#
#   bench/hundred_million.sh
#
# The folder ($PANELBENCH_ROOT/data100, default /tmp/panelbench/data100, 6.2 GB) is made once
# with the kit's generator: ten 10 M panels (885,000 firms, 20 years, seeds 20250101 to
# 20250110), each firm id given its part's digit after the leading letter (C0000016 in part 3
# becomes C30000016) so that the parts hold different firms and, read in the order of their
# names, one panel sorted by firm and year. Generating takes about 10 minutes on two cores and
# 2.7 GB of memory at a time; the runs about 2 minutes each, with some 21 GiB at the peak, so
# nothing else large should run beside them. panel.parquet of the build is about 12 GB.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
repo=$(cd "$here/.." && pwd)
kit=$(cd "${PANELBENCH_KIT:-$repo/../shared/bench}" && pwd)
root=${PANELBENCH_ROOT:-/tmp/panelbench}
data=$root/data100
out=$root/results/100m

if ! "$root/venv/bin/python" -c "import numpy, pandas, pyarrow" 2>/dev/null; then
  python3 -m venv "$root/venv"
  "$root/venv/bin/pip" install -q -r "$kit/requirements.txt"
fi
py=$root/venv/bin/python
mkdir -p "$data" "$out"
for k in 0 1 2 3 4 5 6 7 8 9; do
  [ -s "$data/part_$k.parquet" ] && continue
  echo "== generating part $k of 10" >&2
  "$py" "$kit/gen_panel.py" --firms 885000 --years 20 --seed $((20250101 + k)) \
    --out "$data/tmp_$k" --no-csv > /dev/null
  "$py" - "$data/tmp_$k.parquet" "$data/part_$k.parquet" "$k" <<'EOF'
import os, sys
import pyarrow.compute as pc
import pyarrow.parquet as pq
source, target, k = sys.argv[1:]
table = pq.read_table(source)
i = table.schema.get_field_index("firm_id")
table = table.set_column(i, "firm_id", pc.utf8_replace_slice(table.column(i), 1, 1, k))
pq.write_table(table, target + ".partial", compression="snappy")
os.replace(target + ".partial", target)
EOF
  rm -f "$data/tmp_$k.parquet" "$data/tmp_$k.truth.json"
done

export CARGO_TARGET_DIR=${CARGO_TARGET_DIR:-${XDG_CACHE_HOME:-${HOME:-/tmp}/.cache}/panelready/target}
(cd "$repo" && cargo build --quiet)
bin=$CARGO_TARGET_DIR/debug/panelready
rules=$kit/rules_bench.toml
for cmd in build audit; do
  echo "== 100m panelready $cmd" >&2
  cat "$data"/*.parquet > /dev/null
  rm -rf "$out/bundle"
  if [ "$cmd" = build ]; then
    args=(build "$data" --rules "$rules" --out "$out/bundle" --quiet --no-panel-csv --timings)
  else
    args=(audit "$data" --rules "$rules" --format json --quiet --timings)
  fi
  /usr/bin/time -v -o "$out/$cmd.time" "$bin" "${args[@]}" > "$out/$cmd.stdout" 2> "$out/$cmd.stderr" ||
    echo "   FAILED (see $out/$cmd.stderr)" >&2
  wall=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$out/$cmd.time")
  kib=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$out/$cmd.time")
  python3 -c "import sys; k = int(sys.argv[3]); print(f'{sys.argv[1]}: wall {sys.argv[2]}, peak {k / 2**20:.2f} GiB = {k * 1024 / 1e9:.2f} GB ({k * 1024 / 24e9:.0%} of 24 GB)')" "$cmd" "$wall" "$kib"
done
rm -rf "$out/bundle"
