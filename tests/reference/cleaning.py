"""Independent check of panelready's winsorizing and balancing on the unbalanced Grunfeld
panel of structure.py.

Usage: python cleaning.py RAW_CSV BUNDLE_DIR

The bundle must come from rules that keep the first of conflicting keys, winsorize `value`
and `capital` at the 5th / 95th percentiles by year, and balance on the largest window.
Reference: numpy's default percentile (linear, Hyndman & Fan 1996 type 7) per year, clipping
applied independently; a brute-force search over every window for the one keeping the most
firm-years. Exits 1 on any mismatch.
"""

import json
import os
import sys

import numpy as np
import pandas as pd

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import structure  # noqa: E402

failures, checked = [], [0]


def same(path, want, got, rel=1e-12):
    checked[0] += 1
    if isinstance(want, float) or isinstance(got, float):
        ok = got is not None and np.isclose(want, got, rtol=rel, atol=1e-12)
    else:
        ok = want == got
    if not ok:
        failures.append(f"{path}: reference {want!r}, report {got!r}")


def main():
    raw_path, bundle = sys.argv[1], sys.argv[2]
    report = json.load(open(os.path.join(bundle, "report.json")))
    panel = pd.read_csv(os.path.join(bundle, "panel.csv"))
    _, df = structure.key_steps(pd.read_csv(raw_path, dtype={"firm": "string"}), "firm", "year")
    df["firm"] = df["firm"].astype(str)

    # Winsorizing at the 5th / 95th percentile by year (type 7), then clipping.
    lines = {t["variable"]: t for t in report["treatment"]}
    for v in ["value", "capital"]:
        cuts = {c["period"]: (c["lower"], c["upper"]) for c in lines[v]["cutoffs"]}
        below = above = 0
        for year, g in df.groupby("year"):
            x = g[v].dropna().to_numpy()
            lo, hi = np.percentile(x, 5), np.percentile(x, 95)
            same(f"{v}.cutoffs[{year}].lower", float(lo), cuts[int(year)][0])
            same(f"{v}.cutoffs[{year}].upper", float(hi), cuts[int(year)][1])
            below += int((x < lo).sum())
            above += int((x > hi).sum())
            df.loc[g.index, v] = g[v].clip(lo, hi)
        same(f"{v}.below", below, lines[v]["below"])
        same(f"{v}.above", above, lines[v]["above"])

    # Largest balanced window by brute force over every (first, last).
    years = sorted(df["year"].unique())
    have = df.groupby("firm")["year"].apply(set)
    scores = []
    for a in years:
        for b in years:
            if b < a:
                continue
            need = set(range(a, b + 1))
            n = int(sum(need <= s for s in have))
            # Windows of two periods or more keeping an entity first (a single period is a
            # cross-section), then entity-periods, longer, earlier.
            scores.append((b > a and n > 0, n * (b - a + 1), b - a, -a, a, b, n))
    scores.sort(reverse=True)
    best = scores[0]
    bal = report["balance"]
    same("balance.window", [best[4], best[5]], [bal["first"], bal["last"]])
    same("balance.entities", best[6], bal["entities"])
    same("balance.rows", best[1], bal["rows"])
    for i, r in enumerate(bal["runner_up"]):
        same(f"balance.runner_up[{i}]", [scores[i + 1][4], scores[i + 1][5], scores[i + 1][6]], [r["first"], r["last"], r["entities"]])

    # The cleaned panel: firms complete over the window, cut to it, with clipped values.
    a, b = best[4], best[5]
    keep = [f for f, s in have.items() if set(range(a, b + 1)) <= s]
    want = df[df["firm"].isin(keep) & df["year"].between(a, b)].sort_values(["firm", "year"])
    got = panel.assign(firm=panel["firm"].astype(str)).sort_values(["firm", "year"])
    same("panel.rows", len(want), len(got))
    if len(want) == len(got):
        for v in ["invest", "value", "capital"]:
            ok = np.allclose(want[v].to_numpy(), got[v].to_numpy(), rtol=1e-12)
            same(f"panel.{v} values", True, bool(ok))
    # The cleaned panel's smallest value, quartiles and largest value (balancing removed rows,
    # so every variable's are computed again): numpy's min, percentile (linear, Hyndman & Fan
    # type 7) and max of the reference's own cleaned panel.
    lines = {v["variable"]: v for v in report["cleaned"]["variation"]}
    for v in ["invest", "value", "capital"]:
        x = want[v].dropna().to_numpy(dtype="float64")
        for k, w in zip(["min", "p25", "median", "p75", "max"],
                        [x.min(), *np.percentile(x, [25, 50, 75]), x.max()]):
            same(f"cleaned.{v}.{k}", float(w), lines[v].get(k))
    for f in failures:
        print("MISMATCH", f)
    print(f"cleaning: {checked[0] - len(failures)} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
