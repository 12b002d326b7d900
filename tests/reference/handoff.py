"""Independent checks of the hand-off features, with pandas, pyarrow and openpyxl.

  handoff.py perturb PANEL_CSV OUTDIR
      writes OUTDIR/old.csv (the demo bundle's cleaned panel without `source_row`) and
      OUTDIR/new.csv: a seeded copy with firm-years removed and added, a whole firm removed,
      numbers changed (some within, some beyond the tolerance the test passes), text changed,
      values blanked and filled, text changed only in case and spaces, two columns renamed
      and one copied under a new name.
  handoff.py compare OUTDIR SUMMARY_JSON CHANGES_CSV
      recounts with pandas what `compare` reports: firm-years and entities added and removed,
      and per column the cells changed beyond |new - old| > abs + rel * |old| (abs 0,
      rel 1e-6, revenue abs 10, the options the test passes), values that vanished or
      appeared; the change ledger must list exactly those cells; and the columns only in one
      vintage that hold another's values under a new name.
  handoff.py parquet BUNDLE
      reads panel.parquet's key-value metadata with pyarrow: each column's entry must equal
      dictionary.json's, and the labels must be the rules' labels; each entry's type and
      where the column's values lie, recomputed from panel.parquet with pyarrow and pandas.
  handoff.py xlsx CSV XLSX
      writes the CSV as a spreadsheet with openpyxl (numbers as numbers, one sheet "panel").
  handoff.py groups BUNDLE
      recomputes winsorizing of roa and leverage by sector x fiscal year with numpy, groups
      smaller than 1 / (the smaller tail) taking the pooled cutoffs, and the audit's outlier
      counts by the same groups when the report has them; corrections.csv must list exactly
      the cells moved, each with its old value and its cutoff; and the cleaned panel's
      smallest value, quartiles and largest value of every numeric column, by pandas.
  handoff.py yearend DATA_DIR REPORT_JSON
      derives the fiscal year from the demo's year-end dates with pandas (month <= 5: the
      previous year), recounts the key steps on it and the firms whose year-end month changed,
      and compares with an `audit` report made with the demo's rules_year_end.toml.
  handoff.py xlsx-hostile OUTDIR
      writes merged.xlsx (merged cells) and mixed.xlsx (a number typed as text in a number
      column, a number in a text column, a sheet with only a header, an empty sheet) and
      dates.xlsx (year-end dates) and written.xlsx (numbers typed as text with thousands
      separators, in parentheses or with a percent sign).

Prints `N passed, M failed`; exits 1 on any mismatch.
"""

import json
import os
import sys

import numpy as np
import pandas as pd

passed = failed = 0


def check(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print(f"MISMATCH {name}: {detail}")


def read(path):
    # round_trip: the same doubles polars parses from the same text.
    return pd.read_csv(path, float_precision="round_trip", keep_default_na=True)


def perturb(panel_csv, outdir):
    old = read(panel_csv).drop(columns=["source_row"])
    rng = np.random.default_rng(7)
    new = old.copy()
    # A whole firm leaves; a few firm-years drop out; two firm-years and a new firm arrive.
    gone = new["firm_id"].iloc[0]
    new = new[new["firm_id"] != gone]
    new = new.drop(index=rng.choice(new.index, 5, replace=False))
    extra = new.drop_duplicates("firm_id").iloc[:2].copy()
    extra["fiscal_year"] = 2030
    newcomer = new.iloc[:1].copy()
    newcomer["firm_id"] = "VM99999"
    new = pd.concat([new, extra, newcomer], ignore_index=True)
    idx = rng.choice(new.index[:-3], 40, replace=False)
    # Numbers: 10 revenue changes below its absolute tolerance of 10, 10 beyond it; 10 tiny
    # relative changes to assets (below 1e-6); 5 big ones.
    new.loc[idx[:10], "revenue"] += 3.0
    new.loc[idx[10:20], "revenue"] += 250.0
    new.loc[idx[20:30], "assets_total"] *= 1 + 1e-9
    new.loc[idx[30:35], "assets_total"] += 1000.0
    # Text, a value blanked and one filled.
    new.loc[idx[35:37], "sector"] = "Sector Zeta"
    new.loc[idx[37:39], "op_profit"] = np.nan
    blank = new.index[new["rnd_spend"].isna()][:1]
    new.loc[blank, "rnd_spend"] = 12.5
    # Seven other firm-years' sector in capitals with a trailing space: changed only in case
    # and spaces.
    rest = [i for i in new.index[:-3] if i not in set(idx)]
    recased = np.random.default_rng(11).choice(rest, 7, replace=False)
    new.loc[recased, "sector"] = new.loc[recased, "sector"].str.upper() + " "
    # Two columns renamed, their values kept (a provider's new field names), and a copy of a
    # column both vintages keep under a new name: only the renamed pairs hold a removed
    # column's values.
    new = new.rename(columns={"region": "area", "cur_assets": "current_assets"})
    new["debt_short_copy"] = new["debt_short"]
    old.to_csv(f"{outdir}/old.csv", index=False)
    new.to_csv(f"{outdir}/new.csv", index=False)
    # The same two vintages with the new one's rows in key order, as bundles and many exports
    # are (new.csv has its arrivals at the end): compared by another path, to the same counts.
    os.makedirs(f"{outdir}/sorted", exist_ok=True)
    old.to_csv(f"{outdir}/sorted/old.csv", index=False)
    new.sort_values(["firm_id", "fiscal_year"]).to_csv(f"{outdir}/sorted/new.csv", index=False)
    print("wrote old.csv and new.csv, and sorted/")


def compare(outdir, summary_json, changes_csv):
    old = read(f"{outdir}/old.csv")
    new = read(f"{outdir}/new.csv")
    summary = json.load(open(summary_json))
    ledger = pd.read_csv(changes_csv, dtype={"column": str})
    keys = ["firm_id", "fiscal_year"]
    m = old.merge(new, on=keys, how="outer", suffixes=("__o", "__n"), indicator=True)
    added = int((m["_merge"] == "right_only").sum())
    removed = int((m["_merge"] == "left_only").sum())
    check("firm-years added", added == summary["firm_years_added"], (added, summary))
    check("firm-years removed", removed == summary["firm_years_removed"], removed)
    check("firm-years in both", int((m["_merge"] == "both").sum()) == summary["firm_years_in_both"])
    ea = sorted(set(new["firm_id"]) - set(old["firm_id"]))
    er = sorted(set(old["firm_id"]) - set(new["firm_id"]))
    check("entities added", ea == summary["entities_added"], (ea, summary["entities_added"]))
    check("entities removed", er == summary["entities_removed"], er)
    both = m[m["_merge"] == "both"]
    by_col = {c["column"]: c for c in summary["columns"]}
    expected_cells = set()
    for c in [c for c in old.columns if c not in keys and c in new.columns]:
        o, n = both[f"{c}__o"], both[f"{c}__n"]
        presence = o.isna() != n.isna()
        if pd.api.types.is_numeric_dtype(o) and pd.api.types.is_numeric_dtype(n):
            tol_abs = 10.0 if c == "revenue" else 0.0
            value = (n - o).abs() > tol_abs + 1e-6 * o.abs()
        else:
            value = o.astype(str) != n.astype(str)
        changed = presence | (o.notna() & n.notna() & value)
        check(f"{c}: cells changed", int(changed.sum()) == by_col[c]["cells_changed"],
              (int(changed.sum()), by_col[c]))
        if not pd.api.types.is_numeric_dtype(o) and not pd.api.types.is_numeric_dtype(n):
            fold = lambda x: x.astype(str).str.strip().str.lower()
            folded = int((changed & o.notna() & n.notna() & (fold(o) == fold(n))).sum())
            check(f"{c}: case or spaces only", by_col[c].get("case_or_spaces_only") == folded,
                  (by_col[c].get("case_or_spaces_only"), folded))
            if c == "sector":
                check("sector recased planted", folded == 7, folded)
        check(f"{c}: became missing", int((o.notna() & n.isna()).sum()) == by_col[c]["became_missing"])
        check(f"{c}: became present", int((o.isna() & n.notna()).sum()) == by_col[c]["became_present"])
        for _, r in both[changed].iterrows():
            expected_cells.add((r["firm_id"], int(r["fiscal_year"]), c))
    # Columns only in one vintage holding the same values on every firm-year in both (missing
    # alike, numbers within the tolerance, text equal), values that vary; each column paired
    # once, a removed column with the first added one that matches.
    removed_cols = [c for c in old.columns if c not in keys and c not in new.columns]
    added_cols = [c for c in new.columns if c not in keys and c not in old.columns]
    same, taken = [], set()
    for r in removed_cols:
        o = both[r]
        for a in added_cols:
            n = both[a]
            if a in taken or o.nunique() < 2 or not (o.isna() == n.isna()).all():
                continue
            if pd.api.types.is_numeric_dtype(o) and pd.api.types.is_numeric_dtype(n):
                tol_abs = 10.0 if r == "revenue" else 0.0
                alike = ((n - o).abs() <= tol_abs + 1e-6 * o.abs())[o.notna()].all()
            elif pd.api.types.is_numeric_dtype(o) or pd.api.types.is_numeric_dtype(n):
                alike = False
            else:
                alike = (o.astype(str) == n.astype(str)).all()
            if alike:
                same.append((r, a))
                taken.add(a)
                break
    got = [(p["old"], p["new"]) for p in summary["same_values"]]
    check("same values under another name", got == same, (got, same))
    check("renamed pairs planted", same == [("region", "area"), ("cur_assets", "current_assets")],
          same)
    # Planted changes are found: 10 revenue changes beyond 10, none of the 10 below it; 5
    # large asset changes, none of the 10 tiny ones.
    check("revenue beyond tolerance", by_col["revenue"]["cells_changed"] == 10)
    check("assets beyond tolerance", by_col["assets_total"]["cells_changed"] == 5)
    cells = ledger[ledger["change"] == "value changed"]
    got = {(r["firm_id"], int(r["fiscal_year"]), r["column"]) for _, r in cells.iterrows()}
    check("ledger cells", got == expected_cells, (len(got), len(expected_cells)))
    check("ledger rows added", int((ledger["change"] == "firm-year added").sum()) == added)
    check("ledger rows removed", int((ledger["change"] == "firm-year removed").sum()) == removed)
    check("changed flag", summary["changed"] is True)


def parquet(bundle):
    import pyarrow.parquet as pq

    # The file's key-value metadata (not the Arrow schema's).
    meta = pq.read_metadata(f"{bundle}/panel.parquet").metadata or {}
    meta = {k.decode(): v.decode() for k, v in meta.items()}
    dictionary = json.load(open(f"{bundle}/dictionary.json"))
    check("whole dictionary in the file", json.loads(meta["panelready.dictionary"]) == dictionary)
    columns = pq.read_schema(f"{bundle}/panel.parquet").names
    check("one entry per column, in order", [e["name"] for e in dictionary["columns"]] == columns)
    for entry in dictionary["columns"]:
        got = json.loads(meta[f"panelready.column.{entry['name']}"])
        check(f"{entry['name']} entry", got == entry, got)
    # Field metadata in the Arrow schema, as readers see it on each field.
    schema = pq.read_schema(f"{bundle}/panel.parquet")
    for entry in dictionary["columns"]:
        md = {k.decode(): v.decode() for k, v in (schema.field(entry["name"]).metadata or {}).items()}
        for key in ("label", "unit", "definition", "source"):
            want = entry[key]
            check(f"{entry['name']} field {key}", md.get(key, "") == want, (md.get(key), want))
    labels = {e["name"]: e["label"] for e in dictionary["columns"]}
    # rules/standard.toml's label for size.
    check("size label", labels["size"] == "Firm size: natural log of total assets", labels["size"])
    dictionary_values(bundle, dictionary)


def dictionary_values(bundle, dictionary):
    """Each column's type and where its values lie, recomputed from panel.parquet with pyarrow
    (the type) and pandas: a number's count, min, quantiles (linear interpolation, pandas'
    default: Hyndman & Fan 1996 type 7) and max over the non-missing values; a text's count,
    distinct values and most common value (of those tied, the first met in the file's order);
    the keys' rows, entities, periods, first and last period."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pq.read_table(f"{bundle}/panel.parquet")
    panel = table.to_pandas()
    keys = {"source_row", "firm_id", "fiscal_year"}
    numbers = texts = 0
    for entry in dictionary["columns"]:
        name, values = entry["name"], entry["values"]
        t = table.schema.field(name).type
        want = ("whole number" if pa.types.is_integer(t) else
                "number" if pa.types.is_floating(t) else
                "text" if pa.types.is_string(t) or pa.types.is_large_string(t)
                or pa.types.is_string_view(t) else str(t))
        check(f"{name} type", entry["type"] == want, (entry["type"], want))
        x = panel[name].dropna()
        if name == "source_row":
            check(f"{name} no values", values is None, values)
            continue
        if name in keys:
            # The keys: every row has both (pandas' count), the entities and the periods are
            # their distinct values (nunique), the first and last periods their min and max.
            want = {"n": len(panel)}
            if name == "firm_id":
                want["entities"] = int(panel[name].nunique())
            else:
                want.update(periods=int(panel[name].nunique()), first=int(panel[name].min()),
                            last=int(panel[name].max()))
            check(f"{name} values", values == want, (values, want))
            continue
        check(f"{name} has values", values is not None)
        if values is None:
            continue
        check(f"{name} n", values["n"] == len(x), (values["n"], len(x)))
        if entry["type"] == "text":
            counts = x.value_counts(sort=False)
            tied = counts[counts == counts.max()].index
            first = x[x.isin(tied)].iloc[0]
            check(f"{name} distinct", values["distinct"] == len(counts), (values["distinct"], len(counts)))
            check(f"{name} most common", values["most_common"] == first, (values["most_common"], first))
            check(f"{name} most common rows", values["most_common_rows"] == counts.max())
            changing = int((panel.groupby("firm_id")[name].nunique() > 1).sum())
            check(f"{name} entities changing", values["entities_changing"] == changing,
                  (values["entities_changing"], changing))
            texts += 1
            continue
        x = x.astype("float64")
        want = {"min": x.min(), "p25": x.quantile(0.25), "median": x.quantile(0.5),
                "p75": x.quantile(0.75), "max": x.max()}
        for k, w in want.items():
            check(f"{name} {k}", bool(np.isclose(values[k], float(w), rtol=1e-12, atol=1e-15)),
                  (values[k], w))
        numbers += 1
    check("dictionary numbers", numbers >= 20, numbers)
    check("dictionary texts", texts >= 3, texts)


def xlsx(csv_path, xlsx_path):
    from openpyxl import Workbook

    df = read(csv_path)
    wb = Workbook()
    ws = wb.active
    ws.title = "panel"
    ws.append(list(df.columns))
    for row in df.itertuples(index=False):
        ws.append([None if (isinstance(v, float) and np.isnan(v)) else
                   (v.item() if hasattr(v, "item") else v) for v in row])
    wb.save(xlsx_path)
    print(f"wrote {xlsx_path}")


def groups(bundle):
    """Winsorizing by sector x fiscal year at the report's percentiles (numpy's default
    percentile: linear, Hyndman & Fan 1996 type 7), a group with fewer than 1 / (the smaller
    tail) values taking the pooled percentiles instead, then clipping; roa and leverage recomputed
    from the panel's raw columns by their standard definitions (METHODS.md s.7)."""
    panel = read(f"{bundle}/panel.csv")
    report = json.load(open(f"{bundle}/report.json"))
    corrections = read(f"{bundle}/corrections.csv")
    lines = {t["variable"]: t for t in report["treatment"]}
    assets = panel["assets_total"]
    raw = {
        "roa": (panel["net_profit"] / assets).where(assets > 0),
        "leverage": ((panel["debt_short"] + panel["debt_long"]) / assets).where(assets > 0),
    }
    for v, x in raw.items():
        line = lines[v]
        check(f"{v} groups", line["groups"] == ["sector", "fiscal_year"], line.get("groups"))
        lo_p, hi_p = line["lower_percentile"], line["upper_percentile"]
        smallest = int(np.ceil(100.0 / min(lo_p, 100.0 - hi_p) - 1e-9))
        present = x.dropna().to_numpy()
        pooled = (np.percentile(present, lo_p), np.percentile(present, hi_p))
        by_group = {tuple(g["group"]): g for g in line["group_cutoffs"]}
        expected = x.copy()
        moved = []
        below = above = fallbacks = 0
        for (sector, year), idx in panel.groupby(["sector", "fiscal_year"]).groups.items():
            values = x.loc[idx].dropna().to_numpy()
            small = len(values) < smallest
            lo, hi = pooled if small else (np.percentile(values, lo_p), np.percentile(values, hi_p))
            g = by_group[(str(sector), str(year))]
            check(f"{v} {sector} {year} count", g["values"] == len(values), (g["values"], len(values)))
            check(f"{v} {sector} {year} fallback", g["pooled_fallback"] == small)
            check(f"{v} {sector} {year} lower", np.isclose(g["lower"], lo, rtol=1e-12, atol=1e-15))
            check(f"{v} {sector} {year} upper", np.isclose(g["upper"], hi, rtol=1e-12, atol=1e-15))
            fallbacks += small
            below += int((values < lo).sum())
            above += int((values > hi).sum())
            expected.loc[idx] = x.loc[idx].clip(lo, hi)
            for side, beyond, cut in (("below", x.loc[idx] < lo, lo), ("above", x.loc[idx] > hi, hi)):
                rows = panel.loc[idx][beyond.to_numpy()]
                moved += [(f, y, old, cut, side)
                          for f, y, old in zip(rows["firm_id"], rows["fiscal_year"], x.loc[rows.index])]
        check(f"{v} below", line["below"] == below, (line["below"], below))
        check(f"{v} above", line["above"] == above, (line["above"], above))
        # The audit's outlier counts by the same groups (on the panel before treatment, which
        # these raw-column ratios are), when the rules ask for them.
        audit = {o["variable"]: o for o in report["outliers"]}.get(v, {})
        if audit.get("by") == "groups":
            check(f"{v} audit groups", audit["groups"] == ["sector", "fiscal_year"])
            check(f"{v} audit below", audit["below"] == below, (audit["below"], below))
            check(f"{v} audit above", audit["above"] == above, (audit["above"], above))
            check(f"{v} audit fallbacks", audit["pooled_fallback_groups"] == fallbacks,
                  (audit["pooled_fallback_groups"], fallbacks))
        got = panel[v]
        both = expected.notna() & got.notna()
        check(f"{v} values", bool(np.allclose(got[both], expected[both], rtol=1e-12, atol=1e-15)))
        check(f"{v} missing alike", bool((expected.isna() == got.isna()).all()))
        # Every value moved is in corrections.csv, once, with its old value and its cutoff.
        listed = corrections[corrections["column"] == v]
        want = pd.DataFrame(moved, columns=["firm_id", "fiscal_year", "old", "new", "side"])
        got_lines = listed.assign(side=np.where(listed["reason"].str.contains("below"), "below",
                                                np.where(listed["reason"].str.contains("above"),
                                                         "above", "?")))
        key = ["firm_id", "fiscal_year"]
        check(f"{v} corrections lines", len(listed) == len(want), (len(listed), len(want)))
        joined = want.merge(got_lines, on=key, how="outer", suffixes=("", "_got"), indicator=True)
        check(f"{v} corrections cells", bool((joined["_merge"] == "both").all()),
              joined[joined["_merge"] != "both"].head().to_dict("records"))
        both = joined[joined["_merge"] == "both"]
        check(f"{v} corrections sides", bool((both["side"] == both["side_got"]).all()))
        check(f"{v} corrections old", bool(np.allclose(both["old_got"].astype(float), both["old"],
                                                         rtol=1e-12, atol=1e-15)))
        check(f"{v} corrections new", bool(np.allclose(both["new_got"].astype(float), both["new"],
                                                         rtol=1e-12, atol=1e-15)))
        print(f"{v}: {len(by_group)} groups, {fallbacks} on the pooled cutoffs")
    spread(panel, report["cleaned"]["variation"])


def spread(panel, lines):
    """Each numeric variable's smallest value, quartiles and largest value in the cleaned
    panel as handed over: pandas' min, quantile (linear interpolation, its default: Hyndman &
    Fan 1996 type 7) and max over the non-missing values. The treated variables' figures are
    computed again after winsorizing, the others' carried over from the panel as read; both
    must match the bundle's panel."""
    seen = 0
    for line in lines:
        if "min" not in line:
            continue
        x = panel[line["variable"]].dropna().astype("float64")
        want = {"min": x.min(), "p25": x.quantile(0.25), "median": x.quantile(0.5),
                "p75": x.quantile(0.75), "max": x.max()}
        for k, w in want.items():
            check(f"spread {line['variable']} {k}",
                  bool(np.isclose(line[k], float(w), rtol=1e-12, atol=1e-15)), (line[k], w))
        seen += 1
    check("spread lines", seen >= 20, seen)


def xlsx_hostile(outdir):
    """Two awkward workbooks: merged cells, and numbers typed as text in a number column."""
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(["firm", "year", "assets"])
    ws.append(["A", 2001, 10.5])
    ws.append(["A", 2002, 11.0])
    ws.append(["B", 2001, 7.25])
    ws.merge_cells("A2:A3")
    wb.save(f"{outdir}/merged.xlsx")
    wb = Workbook()
    ws = wb.active
    ws.title = "accounts"
    ws.append(["firm", "year", "assets", "note"])
    ws.append(["A", 2001, 10.5, "ok"])
    ws.append(["A", 2002, "11", "ok"])
    ws.append(["B", 2001, 7.25, 3])
    ws.append(["B", 2002, 8, "late"])
    wb.create_sheet("other").append(["x"])
    wb.create_sheet("blank")
    wb.save(f"{outdir}/mixed.xlsx")
    # Fiscal-year-end dates as real date cells; firm A moves its year end from December to
    # March, which puts two of its rows into fiscal year 2020.
    import datetime as dt

    wb = Workbook()
    ws = wb.active
    ws.append(["firm", "fye", "assets"])
    for firm, day, assets in [("A", dt.date(2019, 12, 31), 10), ("A", dt.date(2020, 12, 31), 11),
                              ("A", dt.date(2021, 3, 31), 12), ("B", dt.date(2020, 6, 30), 5),
                              ("B", dt.date(2021, 6, 30), 6)]:
        ws.append([firm, day, assets])
    wb.save(f"{outdir}/dates.xlsx")
    # Numbers typed as text as people write them: with thousands separators and a negative in
    # parentheses (`assets`), and with a percent sign (`margin`).
    wb = Workbook()
    ws = wb.active
    ws.append(["firm", "year", "assets", "margin"])
    for row in [["A", 2001, "1,234.5", "5%"], ["A", 2002, "2 000", "6%"],
                ["B", 2001, "(3,000)", "7%"], ["B", 2002, 1500, "8%"]]:
        ws.append(row)
    wb.save(f"{outdir}/written.xlsx")
    print("wrote merged.xlsx, mixed.xlsx, dates.xlsx and written.xlsx")


def yearend(data_dir, report_json):
    """The fiscal year from the year-end date (a year ending in month 5 or earlier belongs to
    the previous fiscal year: common practice), with pandas' datetime parsing; then the key
    steps of structure.py on that period, and the firms whose year-end month changed."""
    import os

    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    import structure

    raw = pd.read_csv(f"{data_dir}/velmora_accounts.csv", dtype={"firm_id": "string"})
    date = pd.to_datetime(raw["year_end"], format="%Y-%m-%d")
    raw["fiscal_year_from_date"] = (date.dt.year - (date.dt.month <= 5)).astype("Int64")
    keys, _ = structure.key_steps(raw, "firm_id", "fiscal_year_from_date")
    report = json.load(open(report_json))
    for k, v in keys.items():
        check(f"keys.{k}", report["keys"][k] == v, (report["keys"][k], v))
    months = raw.assign(m=date.dt.month).dropna(subset=["firm_id", "m"])
    changed = sorted(months.groupby("firm_id")["m"].nunique().loc[lambda n: n > 1].index)
    got = report["keys"]["year_end_changes"]
    check("year_end_changes.entities", got["entities"] == len(changed), (got["entities"], changed))
    check("year_end_changes.examples", got["examples"] == changed[:5], (got["examples"], changed))
    planted = json.load(open(f"{data_dir}/planted.json"))["tables"]["year_end_changes"]
    check("the planted changes", changed == planted, (changed, planted))
    # The accounts' own fiscal year leaves no such conflicts: the extra conflicting keys are
    # the changes (one per firm: the year its short period falls into).
    own, _ = structure.key_steps(raw, "firm_id", "fiscal_year")
    check("one extra conflicting key per change",
          keys["conflicting_keys"] - own["conflicting_keys"] == len(changed),
          (keys["conflicting_keys"], own["conflicting_keys"], len(changed)))


if __name__ == "__main__":
    mode, *args = sys.argv[1:]
    {"perturb": perturb, "compare": compare, "parquet": parquet, "xlsx": xlsx,
     "xlsx-hostile": xlsx_hostile, "groups": groups, "yearend": yearend}[mode](*args)
    if mode in ("compare", "parquet", "groups", "yearend"):
        print(f"{passed} passed, {failed} failed")
        sys.exit(1 if failed else 0)
