#!/usr/bin/env python3
"""Print one size's summary.json (from the shared kit's collect.py) as a Markdown table with
each run's wall time and peak memory as ratios to the pandas script and the polars floor.

    python3 bench/table.py /tmp/panelbench/results/1m/summary.json
"""
import json
import sys

s = json.load(open(sys.argv[1]))
runs = s["runs"]
pandas = runs.get("pandas_parquet", {})
floor = runs.get("floor_polars_eager", {})
names = {
    "pandas_parquet": "pandas script",
    "floor_polars_scan": "polars floor (scan + sum)",
    "floor_polars_eager": "polars floor (read all + sum)",
    "tool_parquet": "panelready build",
    "audit_parquet": "panelready audit",
}
print(f"{s['label']}: {s['rows']:,} rows, {s['firms']:,} firms, Parquet input; machine: "
      f"{s['machine'].get('nproc')} cores, {s['machine'].get('cpu', '?')}, "
      f"{s['machine'].get('mem_total_gib', '?')} GiB")
print()
print("| run | wall s | peak RSS MiB | pandas time / this | this / floor (read all) time | this RSS / pandas RSS |")
print("|---|---:|---:|---:|---:|---:|")
for key, label in names.items():
    r = runs.get(key)
    if not r or "wall_s" not in r:
        continue
    w, m = r["wall_s"], r.get("max_rss_mib", float("nan"))
    vs_pandas = pandas.get("wall_s", float("nan")) / w
    vs_floor = w / floor.get("wall_s", float("nan"))
    mem = m / pandas.get("max_rss_mib", float("nan"))
    fail = " (FAILED)" if r.get("failed_runs") else ""
    print(f"| {label}{fail} | {w:.2f} | {m:,.0f} | {vs_pandas:.2f}x | {vs_floor:.2f}x | {mem:.2f} |")
busy = [k for k, r in runs.items() if r.get("cpu_busy_pct_before_max", 0) > 10]
if busy:
    print(f"\nWARNING: the machine was busy before: {', '.join(busy)}; the figures are not clean.")
