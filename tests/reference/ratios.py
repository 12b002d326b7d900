"""Independent recomputation of panelready's derived ratios and panel functions with pandas.

Usage: python ratios.py RAW_CSV PANEL_CSV

Reads the raw demo accounts, applies the same documented key steps (drop rows missing a key,
collapse exact copies, keep the first row of a conflicting key), computes every ratio from its
published definition, and compares with panelready's panel.csv. Exits 1 on any mismatch.
Nothing here imports or calls panelready.
"""

import json
import os
import sys
import tomllib

import numpy as np
import pandas as pd

RTOL = 1e-9  # stated tolerance: relative, on values that went through a CSV round trip
ATOL = 1e-12

ENTITY, PERIOD = "firm_id", "fiscal_year"


def load_raw(path):
    raw = pd.read_csv(path, dtype={ENTITY: "string"})
    raw["source_row"] = np.arange(1, len(raw) + 1)
    raw = raw[raw[ENTITY].notna() & raw[PERIOD].notna()].copy()
    raw[PERIOD] = raw[PERIOD].astype("int64")
    value_cols = [c for c in raw.columns if c != "source_row"]
    raw = raw[~raw.duplicated(subset=value_cols, keep="first")]  # exact copies
    raw = raw.sort_values("source_row")
    raw = raw[~raw.duplicated(subset=[ENTITY, PERIOD], keep="first")]  # policy keep-first
    return raw


def lag(df, column, k):
    """Value of `column` at period t-k of the same firm; NaN when that period is absent."""
    lookup = dict(zip(zip(df[ENTITY], df[PERIOD]), df[column]))
    return pd.Series(
        [lookup.get((e, p - k), np.nan) for e, p in zip(df[ENTITY], df[PERIOD])],
        index=df.index,
        dtype="float64",
    )


def expected(df):
    ta = df["assets_total"]
    pos = ta > 0
    out = pd.DataFrame(index=df.index)
    out[ENTITY], out[PERIOD] = df[ENTITY], df[PERIOD]
    # size = ln(total assets), null when assets <= 0: Frank & Goyal (2009), METHODS.md s.7
    out["size"] = np.where(pos, np.log(ta.where(pos)), np.nan)
    # leverage = (short + long debt) / assets: Rajan & Zingales (1995) (from memory)
    out["leverage"] = ((df["debt_short"] + df["debt_long"]) / ta).where(pos)
    # ROA = net income / assets: Barber & Lyon (1996)
    out["roa"] = (df["net_profit"] / ta).where(pos)
    lag_ta = lag(df, "assets_total", 1)
    out["roa_lagged_assets"] = (df["net_profit"] / lag_ta).where(lag_ta > 0)
    # R&D / assets with missing R&D -> 0 plus indicator: Koh & Reeb (2015)
    out["rd_assets"] = (df["rnd_spend"].fillna(0) / ta).where(pos)
    out["rd_missing"] = df["rnd_spend"].isna().astype("int64")
    # working capital / assets: Altman (1968)
    out["working_capital_assets"] = ((df["cur_assets"] - df["cur_liabilities"]) / ta).where(pos)
    # interest cover = EBIT / interest, null when interest <= 0: common practice
    ie = df["interest_paid"]
    out["interest_cover"] = (df["op_profit"] / ie).where(ie > 0)
    # growth(x, 1) = x / lag(x, 1) - 1, null when the lag is absent or <= 0: common practice
    lag_sales = lag(df, "revenue", 1)
    out["sales_growth"] = (df["revenue"] / lag_sales - 1).where(lag_sales > 0)
    out["asset_growth"] = (ta / lag_ta - 1).where(lag_ta > 0)
    out["firm_age"] = df[PERIOD] - df["founded"]
    return out


def winsorize(out, spec):
    """Clip at pooled percentiles: numpy's default linear percentile (Hyndman & Fan 1996
    type 7) over the non-missing values, as METHODS.md s.6 prescribes."""
    for v in spec["variables"]:
        x = out[v].dropna().to_numpy()
        lo = np.percentile(x, 100 * spec.get("lower", 0.01))
        hi = np.percentile(x, 100 * spec.get("upper", 0.99))
        out[v] = out[v].clip(lo, hi)
    return out


def main():
    raw_path, panel_path = sys.argv[1], sys.argv[2]
    want = expected(load_raw(raw_path))
    rules = tomllib.load(open(os.path.join(os.path.dirname(raw_path), "rules.toml"), "rb"))
    spec = rules.get("clean", {}).get("winsorize")
    if spec:
        assert spec.get("by", "pooled") == "pooled", "this reference handles pooled cutoffs"
        want = winsorize(want, spec)
    got = pd.read_csv(panel_path, dtype={ENTITY: "string"})
    failures, passed = [], 0

    keys_want = set(zip(want[ENTITY], want[PERIOD]))
    keys_got = set(zip(got[ENTITY], got[PERIOD]))
    if keys_want != keys_got:
        failures.append(f"row sets differ: {len(keys_want ^ keys_got)} keys in one only")
    else:
        passed += 1
    merged = want.merge(got, on=[ENTITY, PERIOD], suffixes=("_ref", "_tool"))
    for name in [c for c in want.columns if c not in (ENTITY, PERIOD)]:
        a = merged[f"{name}_ref"].astype("float64").to_numpy()
        b = merged[f"{name}_tool"].astype("float64").to_numpy()
        same_nulls = np.array_equal(np.isnan(a), np.isnan(b))
        ok = np.isnan(a) | np.isclose(a, b, rtol=RTOL, atol=ATOL)
        if same_nulls and ok.all():
            passed += 1
        else:
            bad = np.flatnonzero(~ok | (np.isnan(a) != np.isnan(b)))[:3]
            failures.append(f"{name}: {len(bad)}+ mismatches, e.g. ref {a[bad]} tool {b[bad]}")
    # Null reasons of the growth variables (report.json, counted on the panel before
    # cleaning, which here is `load_raw`'s: no rule drops rows before derivation): a growth
    # from a previous value of zero or less has every input and no value; a previous period
    # absent (or its value missing) is an input missing. Counted with pandas on the raw file.
    report = json.load(open(os.path.join(os.path.dirname(panel_path), "report.json")))
    raw = load_raw(raw_path)
    for name, column in [("asset_growth", "assets_total"), ("sales_growth", "revenue")]:
        previous = lag(raw, column, 1)
        no_value = int(((previous <= 0) & raw[column].notna()).sum())
        missing = int((previous.isna() | raw[column].isna()).sum())
        line = next(d for d in report["derived"] if d["name"] == name)
        reasons = {n["reason"].split(" (")[0]: n["rows"] for n in line["null_reasons"]}
        got = (reasons.get("no value from the expression though every input is present", 0),
               reasons.get("an input is missing", 0))
        if got == (no_value, missing):
            passed += 1
        else:
            failures.append(f"{name} null reasons: ref {(no_value, missing)} tool {got}")
    for f in failures:
        print("MISMATCH", f)
    print(f"ratios: {passed} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
