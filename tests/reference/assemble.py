"""Independent recomputation, with pandas, of assembling a panel from several raw files.

Usage: python assemble.py DATA_DIR BUNDLE_DIR

Reads DATA_DIR/rules.toml (its [panel] keys, [[join]] tables and [repair] corrections), applies
the main file's key steps as structure.py does (keep-first), then joins every table with
pandas: a table's rows with an empty key, its exact copies and (keep-first) its repeated keys
are set aside; the rest is left-joined on `on` (pandas merge with indicator). Compares with the
bundle: every figure of report.json's `joins`, the ledger rows of each joined file in
rejected.csv (by row number and step), the manifest's hashes and row counts, the joined
columns in panel.csv after the corrections file is applied, and `real_sales = sales / cpi *
100` where the demo derives it. Exits 1 on any mismatch. Nothing here imports or calls
panelready.
"""

import hashlib
import json
import os
import sys
import tomllib

import numpy as np
import pandas as pd

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import structure  # noqa: E402  (the main file's key steps)

passed = failed = 0


def check(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print(f"MISMATCH {name}: {detail}")


def same(name, want, got):
    check(name, want == got, f"reference {want!r}, bundle {got!r}")


def read_table(path, spec, entity, period):
    """One joined table under its panel names, with its row numbers, and the rows set aside."""
    t = pd.read_csv(path, dtype={entity: "string"}).rename(columns=spec.get("rename", {}))
    t["__row"] = np.arange(1, len(t) + 1)
    on = spec["on"]
    brought = spec.get("columns") or [c for c in t.columns if c not in on and c != "__row"]
    t = t[["__row", *on, *brought]]
    missing = t[on].isna().any(axis=1)
    rest = t[~missing]
    copy = rest.duplicated(subset=[*on, *brought], keep="first")
    rest, copies = rest[~copy], rest[copy]
    repeat = rest.duplicated(subset=on, keep="first")
    if repeat.any():
        assert spec.get("duplicates") == "keep-first", "the bundle would have refused the table"
    rest, repeats = rest[~repeat], rest[repeat]
    if period in on:
        rest = rest.astype({period: "int64"})
    aside = {
        "join: missing key": set(t.loc[missing, "__row"]),
        "join: exact copies": set(copies["__row"]),
        "join: repeated key": set(repeats["__row"]),
    }
    return rest, brought, aside, len(t)


def assemble(df, data_dir, rules, entity, period, report=None, ledger=None, manifest=None):
    """Join every table onto the key-stepped panel `df`, checking the bundle's figures on the
    way when given; returns the joined frame and the columns brought in."""
    columns = []
    for i, spec in enumerate(rules.get("join", [])):
        path = os.path.join(data_dir, spec["file"])
        table, brought, aside, rows = read_table(path, spec, entity, period)
        on = spec["on"]
        merged = df.merge(table.drop(columns="__row"), on=on, how="left", indicator=True)
        assert len(merged) == len(df), "a left join on unique keys keeps the panel's rows"
        panel_keys = df[on].drop_duplicates()
        lonely = table.merge(panel_keys, on=on, how="left", indicator=True)
        lonely = lonely[lonely["_merge"] == "left_only"]
        unmatched = merged[merged["_merge"] == "left_only"]
        want = {
            "file": spec["file"],
            "on": on,
            "columns": brought,
            "rows": rows,
            "rows_used": len(table) - len(lonely),
            "rows_unmatched": len(lonely),
            "missing_keys": len(aside["join: missing key"]),
            "exact_copies": len(aside["join: exact copies"]),
            "repeated_keys": len(aside["join: repeated key"]),
            "panel_rows": len(df),
            "panel_rows_unmatched": len(unmatched),
            "panel_keys": len(panel_keys),
            "panel_keys_unmatched": len(unmatched[on].drop_duplicates()),
        }
        if report is not None:
            got = report["joins"][i]
            for k, v in want.items():
                same(f"joins[{i}].{k}", v, got[k])
            # Rows in the file balance: used + every row in the ledger.
            same(
                f"joins[{i}] rows balance",
                rows,
                got["rows_used"] + got["rows_unmatched"] + got["missing_keys"]
                + got["exact_copies"] + got["repeated_keys"],
            )
        if ledger is not None:
            mine = ledger[ledger["source_file"] == spec["file"]]
            aside["join: no match"] = set(lonely["__row"])
            for step, rows_set in aside.items():
                same(
                    f"ledger rows of {spec['file']} at `{step}`",
                    sorted(rows_set),
                    sorted(mine.loc[mine["step"] == step, "source_row"].astype(int)),
                )
        if manifest is not None:
            rec = manifest["joins"][i]
            same(f"manifest joins[{i}].name", spec["file"], rec["name"])
            same(f"manifest joins[{i}].rows", rows, rec["rows"])
            same(f"manifest joins[{i}].rejected", rows - want["rows_used"], rec["rejected"])
            digest = hashlib.sha256(open(path, "rb").read()).hexdigest()
            same(f"manifest joins[{i}].sha256", digest, rec["sha256"])
        df = merged.drop(columns="_merge")
        columns += brought
    return df, columns


def corrected(df, data_dir, rules, entity, period):
    """Apply the corrections file: each line sets one cell of one firm-year."""
    name = rules.get("repair", {}).get("corrections")
    if not name:
        return df
    fixes = pd.read_csv(os.path.join(data_dir, name), dtype={"entity": "string"})
    df = df.copy()
    for f in fixes.itertuples():
        at = (df[entity] == f.entity) & (df[period] == int(f.period))
        assert at.sum() == 1, f"one row for {f.entity} {f.period}"
        df.loc[at, f.column] = np.nan if pd.isna(f.value) else float(f.value)
    return df


def with_joins(df, raw_path, entity, period):
    """The key-stepped demo panel with the tables its rules join, the corrections applied and
    `real_sales` derived (sales / price index * 100: deflating, common practice); unchanged
    when the rules beside `raw_path` join nothing."""
    data_dir = os.path.dirname(os.path.abspath(raw_path))
    path = os.path.join(data_dir, "rules.toml")
    if not os.path.exists(path):
        return df
    rules = tomllib.load(open(path, "rb"))
    if not rules.get("join"):
        return df
    df, _ = assemble(df, data_dir, rules, entity, period)
    df = corrected(df, data_dir, rules, entity, period)
    if "real_sales" in rules.get("derive", {}):
        df["real_sales"] = df["revenue"] / df["cpi"] * 100
    return df


def main():
    data_dir, bundle = sys.argv[1], sys.argv[2]
    rules = tomllib.load(open(os.path.join(data_dir, "rules.toml"), "rb"))
    entity, period = rules["panel"]["entity"], rules["panel"]["period"]
    raw_path = os.path.join(data_dir, "velmora_accounts.csv")
    raw = pd.read_csv(raw_path, dtype={entity: "string"})
    _, df = structure.key_steps(raw, entity, period)
    report = json.load(open(os.path.join(bundle, "report.json")))
    manifest = json.load(open(os.path.join(bundle, "manifest.json")))
    ledger = pd.read_csv(os.path.join(bundle, "rejected.csv"), dtype={entity: "string"})
    df, brought = assemble(df, data_dir, rules, entity, period, report, ledger, manifest)
    df = corrected(df, data_dir, rules, entity, period)

    # The main file's rows balance on their own: read = kept + its rows in the ledger.
    panel = pd.read_csv(os.path.join(bundle, "panel.csv"), dtype={entity: "string"})
    main_rows = int((ledger["source_file"] == os.path.basename(raw_path)).sum())
    same("rows read = kept + main-file ledger rows", len(raw), len(panel) + main_rows)
    same("manifest rows.rejected", main_rows, manifest["rows"]["rejected"])
    # The main input's hash (taken beside the pipeline once the file is read) against
    # hashlib's SHA-256 of the same bytes.
    digest = hashlib.sha256(open(raw_path, "rb").read()).hexdigest()
    same("manifest input.sha256", digest, manifest["input"]["sha256"])

    # The joined columns of the cleaned panel, after the corrections file.
    both = df.merge(panel, on=[entity, period], suffixes=("_ref", ""))
    same("panel rows found in the reference", len(panel), len(both))
    for c in brought:
        a, b = both[f"{c}_ref"], both[c]
        if a.dtype.kind in "fi" or b.dtype.kind in "fi":
            a, b = a.astype("float64").to_numpy(), b.astype("float64").to_numpy()
            ok = np.array_equal(np.isnan(a), np.isnan(b)) and np.allclose(
                a[~np.isnan(a)], b[~np.isnan(b)], rtol=0, atol=0
            )
        else:
            ok = a.fillna("").astype(str).equals(b.fillna("").astype(str))
        check(f"panel.{c} equals the pandas join", ok)
    # Deflating: real sales = sales / price index * 100 (common practice), relative 1e-12.
    if "real_sales" in panel.columns:
        want = (both["revenue_ref"] / both["cpi_ref"] * 100).to_numpy()
        got = both["real_sales"].to_numpy()
        ok = np.array_equal(np.isnan(want), np.isnan(got)) and np.allclose(
            want[~np.isnan(want)], got[~np.isnan(got)], rtol=1e-12, atol=0
        )
        check("real_sales = revenue / cpi * 100", ok)
    # The corrections ledger's lines from the corrections file (its other lines are the
    # rules' and winsorizing's) are exactly the corrections file's cells.
    fixes = rules.get("repair", {}).get("corrections")
    if fixes:
        want = pd.read_csv(os.path.join(data_dir, fixes), dtype={"entity": "string"})
        got = pd.read_csv(os.path.join(bundle, "corrections.csv"), dtype={entity: "string"})
        got = got[got["reason"].str.startswith("corrections file")]
        same(
            "corrections.csv cells",
            sorted(zip(want["entity"], want["period"], want["column"], want["value"].astype(float))),
            sorted(zip(got[entity], got[period], got["column"], got["new"].astype(float))),
        )
    print(f"assemble: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
