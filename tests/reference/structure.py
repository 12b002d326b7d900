"""Independent recomputation of panelready's structural audit with pandas / numpy / scipy.

Usage:
  python structure.py grunfeld-unbalanced OUT_CSV
      Write the unbalanced Grunfeld panel built by the rule in `grunfeld_unbalanced`.
  python structure.py check RAW_CSV REPORT_JSON ENTITY PERIOD
      Apply the documented key steps to RAW_CSV (drop rows missing a key, drop exact copies,
      keep the first row of a conflicting key), recompute every figure of the JSON contract
      and compare with REPORT_JSON (a `build` report). Exits 1 on any mismatch.

Nothing here imports or calls panelready.
"""

import json
import os
import sys

import numpy as np
import pandas as pd
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))
REL = 1e-10  # stated tolerance for floating-point figures (relative)


def grunfeld_unbalanced(out):
    """Grunfeld (1958) data as recreated by Kleiber & Zeileis (2010), made unbalanced by rule:
    firm 2 enters in 1940; firm 4 leaves after 1948; firm 6 misses 1941, 1942 and 1950; firm 8
    misses every year divisible by 4; firm 9 misses 1945 and leaves after 1951; firm 11 keeps
    1935 only. Then three defects: row (1, 1935) is repeated exactly, (3, 1936) gets a second
    row with invest + 1, and one copy of (5, 1937) loses its firm id."""
    g = pd.read_csv(os.path.join(HERE, "data", "grunfeld.csv"))
    f, y = g["firm"], g["year"]
    drop = (
        ((f == 2) & (y < 1940))
        | ((f == 4) & (y > 1948))
        | ((f == 6) & y.isin([1941, 1942, 1950]))
        | ((f == 8) & (y % 4 == 0))
        | ((f == 9) & ((y == 1945) | (y > 1951)))
        | ((f == 11) & (y > 1935))
    )
    g = g[~drop].copy()
    g["firm"] = g["firm"].astype("Int64")
    exact = g[(g.firm == 1) & (g.year == 1935)]
    conflict = g[(g.firm == 3) & (g.year == 1936)].copy()
    conflict["invest"] += 1
    nokey = g[(g.firm == 5) & (g.year == 1937)]
    g = pd.concat([g, exact, conflict, nokey], ignore_index=True)
    g.loc[len(g) - 1, "firm"] = pd.NA
    g.to_csv(out, index=False, float_format="%.10g")


def key_steps(raw, entity, period):
    """Figures of the key steps and the panel they leave (policy keep-first)."""
    raw = raw.copy()
    raw["__row"] = np.arange(1, len(raw) + 1)
    missing = raw[entity].isna() | raw[period].isna()
    df = raw[~missing].copy()
    values = [c for c in raw.columns if c != "__row"]
    copy = df.duplicated(subset=values, keep="first")
    copies = df[copy]
    df = df[~copy]
    n_key = df.groupby([entity, period])[entity].transform("size")
    conflicting = df[n_key > 1]
    keys = {
        "missing_key_rows": int(missing.sum()),
        "exact_duplicate_rows": int(len(copies)),
        "exact_duplicate_keys": int(len(copies[[entity, period]].drop_duplicates())),
        "conflicting_keys": int(len(conflicting[[entity, period]].drop_duplicates())),
        "conflicting_rows": int(len(conflicting)),
    }
    df = df.sort_values("__row").drop_duplicates(subset=[entity, period], keep="first")
    df[period] = df[period].astype("int64")
    return keys, df


def structure(df, entity, period, compare):
    k = df[[entity, period]].drop_duplicates().sort_values([entity, period])
    T = k.groupby(entity).size()
    n, N = len(T), int(T.sum())
    first, last = int(k[period].min()), int(k[period].max())
    out = {}
    out["panel"] = {
        "rows": len(df),
        "entities": n,
        "periods": int(k[period].nunique()),
        "first_period": first,
        "last_period": last,
        "balanced": bool(len(df) == len(k) == n * (last - first + 1)),
        # Ahrens & Pincus (1981): gamma = n / (Tbar * sum(1/T_i)), nu = N^2 / (n * sum(T_i^2))
        "evenness_harmonic": n / ((N / n) * float((1.0 / T).sum())),
        "evenness_squares": N**2 / (n * float((T**2).sum())),
    }
    per = k.groupby(entity)[period].agg(["min", "max", "size"])
    per["gaps"] = per["max"] - per["min"] + 1 - per["size"]
    steps = k.groupby(entity)[period].diff()
    k = k.assign(step=steps)
    spells = 1 + (k["step"] > 1).groupby(k[entity]).sum()
    longest = (k["step"] - 1).groupby(k[entity]).max().fillna(0)
    shapes = (
        per.groupby(["min", "max", "gaps"]).size().reset_index(name="entities")
        .sort_values(["entities", "min", "max", "gaps"], ascending=[False, True, True, True])
    )
    cov = {
        "entities_with_gaps": int((per["gaps"] > 0).sum()),
        "gap_periods": int(per["gaps"].sum()),
        "longest_gap": int(longest.max()),
        "singletons": int((per["size"] == 1).sum()),
        "singletons_two_way": two_way(k[[entity, period]], entity, period),
        "spells": int(spells.sum()),
        # Hyndman & Fan (1996) type 7 = numpy's default linear percentile
        "per_entity": {
            "min": float(T.min()),
            "q1": float(np.percentile(T, 25)),
            "median": float(np.percentile(T, 50)),
            "q3": float(np.percentile(T, 75)),
            "max": float(T.max()),
            "mean": float(T.mean()),
        },
        "shapes": [
            {"first": int(r["min"]), "last": int(r["max"]), "gap_periods": int(r["gaps"]), "entities": int(r["entities"])}
            for _, r in shapes.head(8).iterrows()
        ],
        "distinct_shapes": len(shapes),
    }
    out["coverage"] = cov
    k = k.merge(per[["min", "max"]], left_on=entity, right_index=True)
    ee = []
    for p in range(first, last + 1):
        at = k[k[period] == p]
        ee.append({
            "period": p,
            "present": len(at),
            "entrants": int((at["min"] == p).sum()) if p > first else None,
            "leavers": int((at["max"] == p).sum()) if p < last else None,
            "reentrants": int((at["step"] > 1).sum()),
        })
    out["entry_exit"] = ee
    surv = []
    for c in range(first, last + 1):
        members = per.index[per["min"] == c]
        if len(members) == 0:
            continue
        obs = k[k[entity].isin(members)]
        shares = [float((obs[period] == c + j).sum()) / len(members) for j in range(0, last - c + 1)]
        surv.append({"cohort": c, "entities": len(members), "shares": shares})
    out["survival"] = surv
    leaver = per["max"] < last
    first_rows = df.merge(per[["min"]], left_on=entity, right_index=True)
    first_rows = first_rows[first_rows[period] == first_rows["min"]].drop_duplicates(subset=[entity])
    first_rows = first_rows.set_index(entity)
    tests = []
    for v in compare:
        x = first_rows[v].astype("float64")
        x = x[np.isfinite(x)]
        a = x[leaver.reindex(x.index).astype(bool)]
        b = x[~leaver.reindex(x.index).astype(bool)]
        # Welch (1947) unequal-variance t-test: scipy.stats.ttest_ind(equal_var=False)
        if len(a) >= 2 and len(b) >= 2:
            r = stats.ttest_ind(a, b, equal_var=False)
            t, dfree, pv = float(r.statistic), float(r.df), float(r.pvalue)
        else:
            t = dfree = pv = None
        tests.append({
            "variable": v, "n_leavers": len(a), "n_stayers": len(b),
            "mean_leavers": float(a.mean()) if len(a) else None,
            "mean_stayers": float(b.mean()) if len(b) else None,
            "t": t, "df": dfree, "p": pv,
        })
    out["attrition_groups"] = {"leavers": int(leaver.sum()), "stayers": int((~leaver).sum())}
    out["attrition"] = tests
    return out


def two_way(k, entity, period):
    """Rows lost when entity and period singletons are dropped until none is left (Correia 2015)."""
    kept = k
    while True:
        e = kept.groupby(entity)[entity].transform("size")
        p = kept.groupby(period)[period].transform("size")
        nxt = kept[(e > 1) & (p > 1)]
        if len(nxt) == len(kept):
            return len(k) - len(kept)
        kept = nxt


def compare(want, got, path, failures, counter):
    if isinstance(want, dict):
        for key, w in want.items():
            if key not in got:
                failures.append(f"{path}.{key}: missing in the report")
                continue
            compare(w, got[key], f"{path}.{key}", failures, counter)
    elif isinstance(want, list):
        if len(want) != len(got):
            failures.append(f"{path}: {len(want)} items expected, {len(got)} reported")
            return
        for i, (w, g) in enumerate(zip(want, got)):
            compare(w, g, f"{path}[{i}]", failures, counter)
    elif isinstance(want, float) and got is not None:
        counter[0] += 1
        if not np.isclose(want, got, rtol=REL, atol=1e-14):
            failures.append(f"{path}: reference {want!r}, report {got!r}")
    else:
        counter[0] += 1
        if want != got:
            failures.append(f"{path}: reference {want!r}, report {got!r}")


def main():
    if sys.argv[1] == "grunfeld-unbalanced":
        grunfeld_unbalanced(sys.argv[2])
        return
    raw_path, report_path, entity, period = sys.argv[2:6]
    report = json.load(open(report_path))
    raw = pd.read_csv(raw_path, dtype={entity: "string"})
    keys, df = key_steps(raw, entity, period)
    names = [v["variable"] for v in report["attrition"]]
    if any(v not in df.columns for v in names):
        sys.path.insert(0, HERE)
        import ratios  # the demo's derived ratios, computed independently

        import assemble  # the further raw files of the demo, joined independently

        df = df.join(ratios.expected(df).drop(columns=[entity, period]))
        df = assemble.with_joins(df, raw_path, entity, period)
    want = structure(df, entity, period, names)
    want["keys"] = keys
    failures, counter = [], [0]
    compare(want, report, "report", failures, counter)
    for f in failures[:40]:
        print("MISMATCH", f)
    print(f"structure: {counter[0] - len(failures)} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
