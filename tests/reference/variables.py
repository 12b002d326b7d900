"""Independent recomputation of panelready's variable audit with numpy / pandas / scipy /
statsmodels.

Usage:
  python variables.py grunfeld-age OUT_CSV
      Write the 10-firm Grunfeld panel with an invented founding year per firm.
  python variables.py check RAW_CSV REPORT_JSON ENTITY PERIOD [PLANTED_JSON]
      Apply the documented key steps (as structure.py), recompute the variation, absorption,
      missing-value, outlier, unit-slip and accounting-rule figures, and compare them with
      REPORT_JSON (a `build` report). With PLANTED_JSON (the demo), also insist the unit slips
      and rule violations are exactly the planted ones. Exits 1 on any mismatch.

Nothing here imports or calls panelready.
"""

import json
import os
import sys

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import structure  # noqa: E402  (key steps, shared with the structural reference)

REL = 1e-9
failures, checked = [], [0]


def same(path, want, got, rel=REL, abs_=1e-12):
    checked[0] += 1
    if want is None or got is None or (isinstance(want, float) and np.isnan(want)):
        ok = (want is None or (isinstance(want, float) and np.isnan(want))) and got is None
    elif isinstance(want, (bool, str, list)) or isinstance(got, (bool, str, list)):
        ok = want == got
    else:
        ok = bool(np.isclose(float(want), float(got), rtol=rel, atol=abs_))
    if not ok:
        failures.append(f"{path}: reference {want!r}, report {got!r}")


def grunfeld_age(out):
    """Grunfeld (1958), 10-firm set (firms 1-10), plus an invented founding year per firm
    (1890 + 3 * firm): age = year - founded varies within every firm yet is absorbed by firm
    and year effects together."""
    g = pd.read_csv(os.path.join(HERE, "data", "grunfeld.csv"))
    g = g[g["firm"] <= 10].copy()
    g["founded"] = 1890 + 3 * g["firm"]
    g.to_csv(out, index=False, float_format="%.10g")


def check_variation(df, entity, period, report, expect_text=False):
    lines = {v["variable"]: v for v in report["variation"]}
    # Text variables: pandas' nunique and value_counts (missing values left out); the most
    # common value is one holding the most rows.
    text = [n for n, l in lines.items() if "distinct" in l and n in df.columns]
    changing_text = []
    if expect_text:  # the demo panel has sector, region and year-end dates as text
        same("text variables counted", True, len(text) >= 2)
    for name in text:
        line = lines[name]
        counts = df[name].dropna().astype(str).value_counts()
        same(f"variation.{name}.distinct", int(counts.size), line["distinct"])
        same(f"variation.{name}.most_common_rows", int(counts.iloc[0]), line["most_common_rows"])
        same(f"variation.{name}.most_common holds them", int(counts.iloc[0]),
             int(counts.get(line["most_common"], -1)))
        # Entities holding two or more different values: pandas' nunique per entity (missing
        # values left out).
        changing = int((df.groupby(entity)[name].nunique() > 1).sum())
        same(f"variation.{name}.entities_changing", changing, line["entities_changing"])
        changing_text.append((name, changing))
    if expect_text:  # the demo's year-end dates change every year: some entity changes
        same("an entity's text changes", True, any(c > 0 for _, c in changing_text))
    for name, line in lines.items():
        if line["sd_total"] is None:
            continue
        d = df[[entity, period, name]].dropna()
        x = d[name].astype("float64")
        n = len(x)
        em = x.groupby(d[entity]).transform("mean")
        tss = float(((x - x.mean()) ** 2).sum())
        wss = float(((x - em) ** 2).sum())
        # METHODS.md s.1 (common practice for the df): total and within SD with N - 1;
        # between SD = SD of entity means, each entity once, n - 1.
        p = f"variation.{name}"
        same(p + ".n", n, line["n"])
        same(p + ".mean", float(x.mean()), line["mean"])
        same(p + ".sd_total", float(np.sqrt(tss / (n - 1))), line["sd_total"])
        same(p + ".sd_within", float(np.sqrt(wss / (n - 1))), line["sd_within"])
        # Smallest value, quartiles and largest value: pandas' min, quantile (linear, its
        # default: Hyndman & Fan 1996 type 7) and max.
        same(p + ".min", float(x.min()), line.get("min"))
        same(p + ".p25", float(x.quantile(0.25)), line.get("p25"))
        same(p + ".median", float(x.quantile(0.5)), line.get("median"))
        same(p + ".p75", float(x.quantile(0.75)), line.get("p75"))
        same(p + ".max", float(x.max()), line.get("max"))
        same(p + ".sd_between", float(x.groupby(d[entity]).mean().std(ddof=1)), line["sd_between"])
        same(p + ".within_share", wss / tss if tss > 0 else 0.0, line["within_share"])
        g = x.groupby(d[entity])
        flat = int(((g.size() > 1) & (g.max() == g.min())).sum())
        same(p + ".zero_within_entities", flat, line["zero_within_entities"])
        # Absorption: residual share after entity means, after period means, and from
        # statsmodels OLS on entity and period dummies together (the two-way case).
        shares = {"entity": wss / tss if tss > 0 else 0.0}
        pm = x.groupby(d[period]).transform("mean")
        shares["period"] = float(((x - pm) ** 2).sum()) / tss if tss > 0 else 0.0
        if tss > 0 and shares["entity"] >= 1e-10 and shares["period"] >= 1e-10:
            data = pd.DataFrame({"x": x.to_numpy(), "e": d[entity].astype(str).to_numpy(), "t": d[period].to_numpy()})
            shares["entity+period"] = float(smf.ols("x ~ C(e) + C(t)", data=data).fit().ssr) / tss
        else:
            shares["entity+period"] = 0.0
        want = None
        for label in ["entity", "period", "entity+period"]:
            if shares[label] < 1e-10:
                want = label
                break
        same(p + ".absorbed_by", want, line["absorbed_by"])
        if line["two_way_share"] is not None and shares["entity+period"] > 1e-8:
            # the panel core solves the period system exactly: statsmodels' dummy OLS to 1e-9
            same(p + ".two_way_share", shares["entity+period"], line["two_way_share"], rel=1e-9)
        nearly = want is None and (wss / tss if tss > 0 else 0.0) < 0.05
        same(p + ".nearly_absorbed", nearly, line["nearly_absorbed"])


def check_missing(df, report):
    for m in report["missing"]:
        v = m["variable"]
        same(f"missing.{v}.missing", int(df[v].isna().sum()), m["missing"])
        same(f"missing.{v}.share", float(df[v].isna().mean()), m["share"])


def check_outliers(df, report):
    for o in report["outliers"]:
        v = o["variable"]
        x = df[v].astype("float64").dropna().to_numpy()
        # Hyndman & Fan (1996) type 7 = numpy's default linear percentile; pooled cutoffs.
        lo, hi = np.percentile(x, 1), np.percentile(x, 99)
        same(f"outliers.{v}.lower", float(lo), o["lower"])
        same(f"outliers.{v}.upper", float(hi), o["upper"])
        same(f"outliers.{v}.below", int((x < lo).sum()), o["below"])
        same(f"outliers.{v}.above", int((x > hi).sum()), o["above"])
        # scipy.stats.median_abs_deviation(scale="normal") = MAD * 1.4826
        mad = float(stats.median_abs_deviation(x, scale="normal"))
        same(f"outliers.{v}.mad", mad, o["mad"])
        # A MAD of zero leaves the robust z undefined (a division by zero): reported as null.
        z = int((np.abs(x - np.median(x)) / mad > 5).sum()) if mad > 0 else None
        same(f"outliers.{v}.robust_z_beyond", z, o["robust_z_beyond"])


def unit_slips(df, entity, period, levels):
    """Ratios to the previous period of the same entity near 10^3 or 10^6 (or inverses),
    factors within x2, not counting the jump back of a slip listed the period before."""
    found = []
    d = df.sort_values([entity, period])
    for v in levels:
        prev = d.groupby(entity)[v].shift(1)
        prev_t = d.groupby(entity)[period].shift(1)
        ok = (prev_t == d[period] - 1) & (d[v] > 0) & (prev > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.log10(d[v] / prev).where(ok)
        mag = pd.Series(np.nan, index=d.index)
        for m in [3, -3, 6, -6]:
            mag[(r - m).abs() < np.log10(2)] = m
        prev_mag = mag.groupby(d[entity]).shift(1)
        listed = mag.notna() & ~(prev_mag == -mag)
        for i in d.index[listed]:
            found.append((d.at[i, entity], int(d.at[i, period]), v))
    return sorted(found)


def check_slips_and_rules(df, entity, period, report, planted):
    got = sorted((u["entity"], u["period"], u["variable"]) for u in report["unit_slips"])
    levels = sorted({u["variable"] for u in report["unit_slips"]} | {o["variable"] for o in report["outliers"] if o["log_jumps"] is not None})
    same("unit_slips (pandas recount)", unit_slips(df, entity, period, levels), got)
    if planted:
        want = sorted([(f, y, "assets_total") for f, y in planted["unit_slips"]] + [(f, y, "revenue") for f, y in planted["unit_slips"]])
        same("unit_slips (planted)", want, got)
        rules = {r["name"]: r["violations"] for r in report["rules"]}
        same("rules.assets_positive (planted)", len(planted["nonpositive_assets"]), rules["assets_positive"])
        same("rules.interest_nonnegative (planted)", len(planted["negative_interest"]), rules["interest_nonnegative"])
        recount = {
            "assets_positive": int((df["assets_total"] <= 0).sum()),
            "current_assets_within_total": int((df["cur_assets"] > df["assets_total"]).sum()),
            "debt_nonnegative": int(((df["debt_short"] < 0) | (df["debt_long"] < 0)).sum()),
            "interest_nonnegative": int((df["interest_paid"] < 0).sum()),
            "sales_nonnegative": int((df["revenue"] < 0).sum()),
        }
        for name, n in recount.items():
            same(f"rules.{name} (pandas recount)", n, rules[name])


def main():
    if sys.argv[1] == "grunfeld-age":
        grunfeld_age(sys.argv[2])
        return
    raw_path, report_path, entity, period = sys.argv[2:6]
    planted = json.load(open(sys.argv[6])) if len(sys.argv) > 6 else None
    report = json.load(open(report_path))
    raw = pd.read_csv(raw_path, dtype={entity: "string"})
    _, df = structure.key_steps(raw, entity, period)
    derived = [d["name"] for d in report["derived"]]
    if "assets_total" in df.columns:
        import ratios  # the demo's derived ratios, computed independently

        import assemble  # the further raw files of the demo, joined independently

        df = df.join(ratios.expected(df).drop(columns=[entity, period]))
        df = assemble.with_joins(df, raw_path, entity, period)
    if "age" in derived:
        df["age"] = df[period] - df["founded"]  # the Grunfeld check's invented firm age
    check_variation(df, entity, period, report, expect_text=planted is not None)
    check_missing(df, report)
    check_outliers(df, report)
    check_slips_and_rules(df, entity, period, report, planted)
    for f in failures[:40]:
        print("MISMATCH", f)
    print(f"variables: {checked[0] - len(failures)} passed, {len(failures)} failed")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
