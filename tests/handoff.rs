//! Hand-off across people and time: a starter rules file, two vintages compared, labels in
//! the Parquet file, spreadsheets in. The references are independent: pandas recounts what
//! `compare` reports, pyarrow reads the Parquet metadata, openpyxl writes the spreadsheets.

use std::path::Path;

use crate::util::{root, run_reference, Workdir};

/// `compare --format json` found nothing (its exit code 0 says the same).
fn unchanged(json: &str) {
    let summary: serde_json::Value = serde_json::from_str(json).unwrap();
    assert_eq!(summary["changed"], false, "{json}");
    assert_eq!(summary["firm_years_added"], 0);
    assert!(summary["columns"]
        .as_array()
        .unwrap()
        .iter()
        .all(|c| c["cells_changed"] == 0));
}

fn check(args: &[&Path]) {
    let out = run_reference("handoff.py", args);
    assert!(out.contains(" 0 failed"), "{out}");
}

#[test]
fn compare_matches_a_pandas_recount_on_a_perturbed_demo() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    std::fs::create_dir_all(w.path("v")).unwrap();
    run_reference(
        "handoff.py",
        &[
            Path::new("perturb"),
            &w.path("d/bundle/panel.csv"),
            &w.path("v"),
        ],
    );
    let keys = ["--entity", "firm_id", "--period", "fiscal_year"];
    let mut args = vec![
        "compare",
        "v/old.csv",
        "v/new.csv",
        "--relative",
        "1e-6",
        "--absolute",
        "revenue=10",
        "--report",
        "v/summary.json",
        "--changes",
        "v/changes.csv",
    ];
    args.extend(keys);
    let r = w.run(&args);
    assert_eq!(
        r.code, 1,
        "a changed vintage exits 1:\n{}{}",
        r.stdout, r.stderr
    );
    check(&[
        Path::new("compare"),
        &w.path("v"),
        &w.path("v/summary.json"),
        &w.path("v/changes.csv"),
    ]);
    // Both vintages in key order (the rows paired by a merge of the sorted keys, not a join):
    // the same pandas recount, and the same summary and changes but for the paths.
    let sorted: Vec<&str> = args
        .iter()
        .map(|a| match *a {
            "v/old.csv" => "v/sorted/old.csv",
            "v/new.csv" => "v/sorted/new.csv",
            "v/summary.json" => "v/sorted/summary.json",
            "v/changes.csv" => "v/sorted/changes.csv",
            a => a,
        })
        .collect();
    assert_eq!(w.run(&sorted).code, 1);
    check(&[
        Path::new("compare"),
        &w.path("v/sorted"),
        &w.path("v/sorted/summary.json"),
        &w.path("v/sorted/changes.csv"),
    ]);
    let read = |p: &str| std::fs::read_to_string(w.path(p)).unwrap();
    assert_eq!(read("v/sorted/changes.csv"), read("v/changes.csv"));
    let summary = |p: &str| {
        let mut s: serde_json::Value = serde_json::from_str(&read(p)).unwrap();
        s["old"]["path"] = serde_json::Value::Null;
        s["new"]["path"] = serde_json::Value::Null;
        s
    };
    assert_eq!(summary("v/sorted/summary.json"), summary("v/summary.json"));
    // The same file twice: nothing changed, exit 0.
    let mut same = vec!["compare", "v/old.csv", "v/old.csv"];
    same.extend(keys);
    same.extend(["--format", "json"]);
    unchanged(&w.ok(&same).stdout);
    // Two bundles: a restated revenue shows in the derived variables it feeds, marked so.
    let raw = std::fs::read_to_string(w.path("d/data/velmora_accounts.csv")).unwrap();
    let mut lines: Vec<String> = raw.lines().map(str::to_string).collect();
    let at = lines[0].split(',').position(|c| c == "revenue").unwrap();
    let mut cells: Vec<String> = lines[5].split(',').map(str::to_string).collect();
    let revenue: f64 = cells[at].parse().unwrap();
    cells[at] = (2.0 * revenue + 1.0).to_string();
    lines[5] = cells.join(",");
    w.write("restated.csv", &(lines.join("\n") + "\n"));
    w.ok(&[
        "build",
        "restated.csv",
        "--rules",
        "d/data/rules.toml",
        "--out",
        "b2",
    ]);
    let r = w.run(&["compare", "d/bundle", "b2", "--format", "json"]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let column = |name: &str| {
        summary["columns"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["column"] == name)
            .unwrap()
            .clone()
    };
    assert_eq!(column("revenue")["derived"], false);
    assert_eq!(column("sales_growth")["derived"], true);
    assert!(column("sales_growth")["cells_changed"].as_u64().unwrap() >= 1);
    // A bad tolerance is refused in one line.
    w.fails(
        &[
            "compare",
            "v/old.csv",
            "v/new.csv",
            "--entity",
            "firm_id",
            "--period",
            "fiscal_year",
            "--absolute",
            "x=-1",
        ],
        "give a number >= 0",
    );
}

#[test]
fn labels_travel_in_the_parquet_file_and_dictionary_json() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    check(&[Path::new("parquet"), &w.path("d/bundle")]);
    let manifest = std::fs::read_to_string(w.path("d/bundle/manifest.json")).unwrap();
    assert!(manifest.contains("\"dictionary.json\""), "{manifest}");
    let md = std::fs::read_to_string(w.path("d/bundle/dictionary.md")).unwrap();
    assert!(
        md.contains("Firm size: natural log of total assets"),
        "{md}"
    );
}

#[test]
fn a_spreadsheet_reads_back_as_its_csv_twin() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let keys = ["--entity", "firm_id", "--period", "fiscal_year"];
    // The cleaned panel as a spreadsheet: every firm-year and cell equal. openpyxl writes 16
    // significant digits (spreadsheets keep about 15: common practice), so a number may move
    // by one unit in the last place: relative tolerance 1e-15.
    run_reference(
        "handoff.py",
        &[
            Path::new("xlsx"),
            &w.path("d/bundle/panel.csv"),
            &w.path("twin.xlsx"),
        ],
    );
    let mut args = vec![
        "compare",
        "d/bundle/panel.csv",
        "twin.xlsx",
        "--relative",
        "1e-15",
    ];
    args.extend(keys);
    args.extend(["--format", "json"]);
    unchanged(&w.ok(&args).stdout);
    // The raw demo accounts as a spreadsheet build the same bundle as the CSV, exactly.
    run_reference(
        "handoff.py",
        &[
            Path::new("xlsx"),
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("raw.xlsx"),
        ],
    );
    w.ok(&[
        "build",
        "raw.xlsx",
        "--rules",
        "d/data/rules.toml",
        "--out",
        "bx",
    ]);
    unchanged(
        &w.ok(&[
            "compare",
            "d/bundle",
            "bx",
            "--relative",
            "0",
            "--format",
            "json",
        ])
        .stdout,
    );
    let manifest = std::fs::read_to_string(w.path("bx/manifest.json")).unwrap();
    assert!(manifest.contains("\"spreadsheet\""), "{manifest}");
}

#[test]
fn awkward_spreadsheets_are_refused_or_reported() {
    let w = Workdir::new();
    // Workbooks written by openpyxl (handoff.py); expectations worked by hand.
    run_reference("handoff.py", &[Path::new("xlsx-hostile"), &w.path("")]);
    let keys = ["--entity", "firm", "--period", "year"];
    let mut args = vec!["audit", "merged.xlsx"];
    args.extend(keys);
    w.fails(&args, "merged cells at A2:A3");
    let mut args = vec!["audit", "mixed.xlsx", "--format", "json"];
    args.extend(keys);
    let r = w.ok(&args);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let notes = report["input"]["notes"].as_array().unwrap();
    let text: Vec<&str> = notes.iter().map(|n| n.as_str().unwrap()).collect();
    assert!(
        text.iter()
            .any(|n| n.contains("`assets`: 1 cell of text that reads as a number")),
        "{text:?}"
    );
    assert!(
        text.iter()
            .any(|n| n.contains("`note` mixes numbers and text")),
        "{text:?}"
    );
    assert_eq!(report["input"]["sheet"], "accounts");
    let mut args = vec!["audit", "mixed.xlsx", "--sheet", "nope"];
    args.extend(keys);
    w.fails(&args, "no sheet `nope` (sheets: accounts, other, blank)");
    // A sheet with only a header, and one with no cell at all, each said as it is.
    let mut args = vec!["audit", "mixed.xlsx", "--sheet", "other"];
    args.extend(keys);
    w.fails(&args, "no data rows (only a header)");
    let mut args = vec!["audit", "mixed.xlsx", "--sheet", "blank"];
    args.extend(keys);
    w.fails(&args, "sheet `blank` is empty (no header, no data rows)");
    // Numbers typed as text with thousands separators or in parentheses are numbers, noted
    // (they were text without a word): assets mean (1,234.5 + 2,000 − 3,000 + 1,500) / 4 =
    // 433.625. Percentages typed with their sign stay text, noted with the first cell.
    let mut args = vec!["audit", "written.xlsx", "--format", "json"];
    args.extend(keys);
    let report: serde_json::Value = serde_json::from_str(&w.ok(&args).stdout).unwrap();
    let assets = &report["variation"][0];
    assert_eq!(assets["variable"], "assets");
    assert!(
        (assets["mean"].as_f64().unwrap() - 433.625).abs() < 1e-12,
        "{assets}"
    );
    assert_eq!(
        report["input"]["notes"],
        serde_json::json!([
            "column `assets`: 3 cells of text with thousands separators or in parentheses for \
             a negative number (the first in sheet row 2) read as numbers",
            "column `margin` stays text: its values are numbers written with a currency or \
             percent sign (sheet row 2 holds `5%`); take the sign out (and say in a label what \
             the unit is) to use them as numbers"
        ])
    );
}

#[test]
fn a_drafted_rules_file_guesses_keys_and_columns_and_builds() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d", "--data-only"]);
    let r = w.ok(&["rules", "draft", "d/data/velmora_accounts.csv"]);
    let draft = r.stdout;
    for want in [
        "entity = \"firm_id\"",
        "period = \"fiscal_year\"",
        "total_assets = \"assets_total\"",
        "sales = \"revenue\"",
        "net_income = \"net_profit\"",
        "rows repeat a pair",
    ] {
        assert!(draft.contains(want), "draft lacks {want}:\n{draft}");
    }
    w.write("draft.toml", &draft);
    w.ok(&[
        "build",
        "d/data/velmora_accounts.csv",
        "--rules",
        "draft.toml",
        "--out",
        "b",
    ]);
    // Unfamiliar names: the same data with other headers.
    let csv = std::fs::read_to_string(w.path("d/data/velmora_accounts.csv")).unwrap();
    let (head, body) = csv.split_once('\n').unwrap();
    let renamed = head
        .replace("firm_id", "company_code")
        .replace("fiscal_year", "yr")
        .replace("assets_total", "Total Assets")
        .replace("revenue", "turnover");
    w.write("odd.csv", &format!("{renamed}\n{body}"));
    w.ok(&["rules", "draft", "odd.csv", "--out", "odd.toml"]);
    let odd = std::fs::read_to_string(w.path("odd.toml")).unwrap();
    for want in [
        "entity = \"company_code\"",
        "period = \"yr\"",
        "total_assets = \"Total Assets\"",
        "sales = \"turnover\"",
    ] {
        assert!(odd.contains(want), "draft lacks {want}:\n{odd}");
    }
    w.ok(&["build", "odd.csv", "--rules", "odd.toml", "--out", "b2"]);
    w.fails(
        &["rules", "draft", "odd.csv", "--out", "odd.toml"],
        "exists",
    );
    // Public panels: their keys as their sources document them (tests/reference/data/README.md).
    for (file, entity, period) in [
        ("wagepan.csv", "nr", "year"),
        ("jtrain.csv", "fcode", "year"),
        ("grunfeld.csv", "firm", "year"),
    ] {
        let path = root().join("tests/reference/data").join(file);
        let r = w.ok(&["rules", "draft", path.to_str().unwrap()]);
        assert!(
            r.stdout.contains(&format!("entity = \"{entity}\"")),
            "{file}:\n{}",
            r.stdout
        );
        assert!(
            r.stdout.contains(&format!("period = \"{period}\"")),
            "{file}:\n{}",
            r.stdout
        );
    }
}

#[test]
fn sure_unit_slips_are_rescaled_and_corrections_applied_with_a_ledger() {
    let w = Workdir::new();
    // Expectations worked by hand; the slip rule (a jump near x1000 that returns the next
    // period) is common practice (METHODS.md s.9).
    // Firm A slips x1000 in 2002 and returns (sure); firm B jumps x1000 in 2002 and stays
    // (not sure: never repaired); firm C is corrected by hand in 2001.
    w.write(
        "p.csv",
        "f,y,assets,sales\nA,2001,100,50\nA,2002,100000,52\nA,2003,104,54\n\
         B,2001,80,40\nB,2002,80000,41\nB,2003,81000,42\nC,2001,70,35\nC,2002,72,36\n",
    );
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nC,2001,sales,,audited accounts restated\n",
    );
    w.write(
        "rules.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[columns]\ntotal_assets = \"assets\"\n\
         [derive.size]\nexpr = \"ln(total_assets)\"\n\
         [repair]\nunit_slips = \"rescale\"\ncorrections = \"fix.csv\"\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "b"]);
    let ledger = std::fs::read_to_string(w.path("b/corrections.csv")).unwrap();
    let lines: Vec<&str> = ledger.lines().collect();
    assert_eq!(lines[0], "f,y,column,old,new,reason", "{ledger}");
    assert!(
        lines.contains(&"C,2001,sales,35,,corrections file: audited accounts restated"),
        "{ledger}"
    );
    assert!(
        lines.contains(&"A,2002,assets,100000,100.0,unit slip: divided by 1000"),
        "{ledger}"
    );
    assert!(
        !lines.iter().any(|l| l.starts_with("B,")),
        "an unsure slip was repaired: {ledger}"
    );
    // The derived variable uses the repaired value: ln(100) in A's 2002 row.
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    let a2002 = panel.lines().find(|l| l.contains(",A,2002,")).unwrap();
    assert!(a2002.contains(&format!("{}", 100f64.ln())), "{a2002}");
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    assert_eq!(report["repairs"]["unit_slips_repaired"], 1);
    assert_eq!(report["repairs"]["corrected_cells"], 1);
    let steps: Vec<&str> = report["sample_construction"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["step"].as_str().unwrap())
        .collect();
    assert!(steps.contains(&"unit slips rescaled: 1 cells"), "{steps:?}");
    let manifest = std::fs::read_to_string(w.path("b/manifest.json")).unwrap();
    assert!(manifest.contains("\"fix.csv\""), "{manifest}");
    // A correction that matches no row is an error naming its line; so is a bad value.
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nC,2001,sales,1,x\nZ,2001,sales,1,x\n",
    );
    w.fails(
        &["build", "p.csv", "--rules", "rules.toml", "--out", "b2"],
        "line 3: no row of the data",
    );
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nC,2001,sales,lots,x\n",
    );
    w.fails(
        &["build", "p.csv", "--rules", "rules.toml", "--out", "b2"],
        "line 2: `sales` holds numbers",
    );
    // Text the number parser takes for NaN or an infinity is no value either (IEEE 754: not
    // finite); an empty value is the way to ask for a missing one.
    for value in ["nan", "NaN", "inf", "-inf"] {
        w.write(
            "fix.csv",
            &format!("entity,period,column,value,reason\nC,2001,sales,{value},x\n"),
        );
        w.fails(
            &["build", "p.csv", "--rules", "rules.toml", "--out", "b2"],
            "line 2: `sales` takes finite numbers",
        );
    }
    assert!(!w.path("b2").exists());
}

#[test]
fn corrections_keep_their_value_whatever_the_columns_type() {
    // Worked by hand. `sales` is read as whole numbers: 52.5 was cut to 52, and a number
    // beyond 64-bit integers became missing, with the ledger saying 52 and nothing; the
    // column now becomes floating-point numbers. `listed` (true / false) could not be
    // corrected at all: the engine's "casting from Utf8View to Boolean not supported".
    let w = Workdir::new();
    w.write(
        "p.csv",
        "f,y,sales,listed\nA,2001,50,true\nA,2002,52,false\nB,2001,40,true\n",
    );
    w.write(
        "rules.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[repair]\ncorrections = \"fix.csv\"\n",
    );
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nA,2002,sales,52.5,restated\n\
         B,2001,sales,99999999999999999999999,keyed\nA,2002,listed, TRUE ,listed late\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert_eq!(
        panel.lines().collect::<Vec<_>>(),
        [
            "source_row,f,y,sales,listed",
            "1,A,2001,50.0,true",
            "2,A,2002,52.5,true",
            "3,B,2001,1e+23,true",
        ]
    );
    let ledger = std::fs::read_to_string(w.path("b/corrections.csv")).unwrap();
    for line in [
        "A,2002,sales,52.0,52.5,corrections file: restated",
        "B,2001,sales,40.0,1e+23,corrections file: keyed",
        "A,2002,listed,false,true,corrections file: listed late",
    ] {
        assert!(ledger.lines().any(|l| l == line), "{line}: {ledger}");
    }
    // Whole numbers in range leave the column as it was.
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nA,2002,sales,53,restated\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "b3"]);
    let panel = std::fs::read_to_string(w.path("b3/panel.csv")).unwrap();
    assert!(panel.contains("\n2,A,2002,53,false\n"), "{panel}");
    // A word that is neither true nor false names its line.
    w.write(
        "fix.csv",
        "entity,period,column,value,reason\nA,2002,listed,yes,x\n",
    );
    w.fails(
        &["build", "p.csv", "--rules", "rules.toml", "--out", "b2"],
        "line 2: `listed` holds true / false; the value is neither",
    );
    assert!(!w.path("b2").exists());
}

#[test]
fn the_fiscal_year_is_derived_from_a_year_end_date_with_a_cutoff_month() {
    let w = Workdir::new();
    run_reference("handoff.py", &[Path::new("xlsx-hostile"), &w.path("")]);
    // Common practice: a year ending January-May belongs to the previous fiscal year.
    w.write(
        "rules.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"fiscal_year\"\nyear_end = \"fye\"\n\
         [clean]\nduplicates = \"keep-last\"\n",
    );
    w.ok(&["build", "dates.xlsx", "--rules", "rules.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    // A's 2020-12-31 and 2021-03-31 both fall in fiscal 2020; keep-last keeps March.
    assert_eq!(
        panel.lines().collect::<Vec<_>>(),
        [
            "source_row,firm,fye,assets,fiscal_year",
            "1,A,2019-12-31,10,2019",
            "3,A,2021-03-31,12,2020",
            "4,B,2020-06-30,5,2020",
            "5,B,2021-06-30,6,2021",
        ]
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    assert_eq!(report["keys"]["year_end_changes"]["entities"], 1);
    assert_eq!(report["keys"]["conflicting_keys"], 1);
    // A date that is not YYYY-MM-DD names its row; a cutoff that is not a month is refused.
    w.write("bad.csv", "firm,fye\nA,2019-12-31\nA,31.12.2020\n");
    w.fails(
        &["audit", "bad.csv", "--rules", "rules.toml"],
        "row 2: `fye`",
    );
    w.write(
        "r13.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"fy\"\nyear_end = \"fye\"\nyear_end_cutoff = 13\n",
    );
    w.fails(
        &["audit", "bad.csv", "--rules", "r13.toml"],
        "year_end_cutoff",
    );
}

#[test]
fn accounting_rules_read_other_periods_gap_aware() {
    let w = Workdir::new();
    // Worked by hand. Equity may not move by more than 50 from one year to the next. A: 2001 -> 2002 moves
    // 190 (broken); 2004 has no 2003 (gap: not checkable); first years are not checkable.
    w.write(
        "p.csv",
        "f,y,equity\nA,2001,10\nA,2002,200\nA,2004,205\nB,2001,5\nB,2002,6\n",
    );
    w.write(
        "rules.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n\
         [[rule]]\nname = \"equity_steady\"\nexpr = \"abs(diff(equity, 1)) <= 50\"\naction = \"drop\"\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "b"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    let rule = &report["rules"][0];
    assert_eq!(rule["violations"], 1, "{rule}");
    assert_eq!(rule["unknown"], 3, "{rule}");
    let rejected = std::fs::read_to_string(w.path("b/rejected.csv")).unwrap();
    assert!(
        rejected.contains("2,accounting rules,\"rule `equity_steady` does not hold"),
        "{rejected}"
    );
    assert_eq!(
        rejected.lines().next().unwrap(),
        "source_row,step,reason,related_row,f,y,equity"
    );
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert_eq!(panel.lines().next().unwrap(), "source_row,f,y,equity");
    assert_eq!(panel.lines().count(), 5);
}

#[test]
fn winsorizing_and_outlier_counts_by_any_groups_match_numpy_with_a_pooled_fallback() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d", "--data-only"]);
    let rules = std::fs::read_to_string(w.path("d/data/rules.toml")).unwrap();
    let by_group = rules
        .lines()
        .map(|l| {
            if l.starts_with("winsorize") {
                "winsorize = { variables = [\"roa\", \"leverage\"], lower = 0.015, upper = 0.985, by = [\"sector\", \"fiscal_year\"] }"
            } else {
                l
            }
        })
        .collect::<Vec<_>>()
        .join("\n")
        // The audit's own outlier counts by the same groups and percentiles.
        + "\n[audit]\noutliers = { lower = 0.015, upper = 0.985, by = [\"sector\", \"fiscal_year\"] }\n";
    // Beside the demo's rules: the files it joins are named relative to it.
    w.write("d/data/groups.toml", &by_group);
    w.ok(&[
        "build",
        "d/data/velmora_accounts.csv",
        "--rules",
        "d/data/groups.toml",
        "--out",
        "b",
    ]);
    check(&[Path::new("groups"), &w.path("b")]);
    let md = std::fs::read_to_string(w.path("b/report.md")).unwrap();
    assert!(
        md.contains(
            "`build` lists each value winsorizing replaced in the bundle's corrections.csv"
        ),
        "{md}"
    );
    let dictionary = std::fs::read_to_string(w.path("b/dictionary.md")).unwrap();
    assert!(
        dictionary.contains("each value replaced is in corrections.csv"),
        "{dictionary}"
    );
    // At 1.5% a group needs 67 values: some of the 90 sector-years have fewer and take the
    // pooled cutoffs, the others their own; both paths are exercised.
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    let groups = report["treatment"][0]["group_cutoffs"].as_array().unwrap();
    let fallback = groups
        .iter()
        .filter(|g| g["pooled_fallback"] == true)
        .count();
    assert!(
        fallback > 0 && fallback < groups.len(),
        "{fallback} of {}",
        groups.len()
    );
    // A grouping column the data lacks is refused in one line, before anything is written.
    w.write(
        "d/data/bad.toml",
        &by_group.replace("\"sector\", \"fiscal_year\"", "\"nosuch\""),
    );
    w.fails(
        &[
            "build",
            "d/data/velmora_accounts.csv",
            "--rules",
            "d/data/bad.toml",
            "--out",
            "b2",
        ],
        "`nosuch`",
    );
}

#[test]
fn declared_categorical_codes_are_never_averaged_or_winsorized() {
    let w = Workdir::new();
    // Worked by hand. `ind` is an industry code: a number that is a category, constant within
    // each firm.
    w.write(
        "p.csv",
        "f,y,ind,x\nA,1,2834,1.0\nA,2,2834,2.0\nB,1,7372,3.0\nB,2,7372,5.0\nC,1,2834,4.0\nC,2,2834,4.5\n",
    );
    let keys = "[panel]\nentity = \"f\"\nperiod = \"y\"\ncategorical = [\"ind\"]\n";
    w.write("rules.toml", keys);
    let r = w.ok(&[
        "audit",
        "p.csv",
        "--rules",
        "rules.toml",
        "--format",
        "json",
    ]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let ind = report["variation"]
        .as_array()
        .unwrap()
        .iter()
        .find(|v| v["variable"] == "ind")
        .unwrap();
    assert!(ind["mean"].is_null(), "{ind}");
    assert_eq!(ind["absorbed_by"], "entity", "{ind}");
    let outliers: Vec<&str> = report["outliers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| o["variable"].as_str().unwrap())
        .collect();
    assert_eq!(outliers, ["x"]);
    w.write(
        "w.toml",
        &format!("{keys}[clean]\nwinsorize = {{ variables = [\"ind\", \"x\"] }}\n"),
    );
    w.fails(
        &["audit", "p.csv", "--rules", "w.toml"],
        "`ind` is declared categorical",
    );
    w.write(
        "m.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\ncategorical = [\"nosuch\"]\n",
    );
    w.fails(
        &["audit", "p.csv", "--rules", "m.toml"],
        "`[panel] categorical`",
    );
}

#[test]
fn compare_says_cells_not_checked_when_there_is_nothing_to_compare() {
    // A check that examined nothing says so (the brief's rule), not "unchanged".
    let w = Workdir::new();
    w.write("a.csv", "f,y\nA,1\nA,2\n");
    w.write("b.csv", "f,y\nA,1\nA,2\n");
    let r = w.ok(&[
        "compare", "a.csv", "b.csv", "--entity", "f", "--period", "y", "--format", "json",
    ]);
    let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(summary["cells_checked"], false);
    let r = w.ok(&[
        "compare", "a.csv", "b.csv", "--entity", "f", "--period", "y",
    ]);
    assert!(r.stdout.contains("Cells not checked"), "{}", r.stdout);
}

#[test]
fn compare_says_when_added_firms_are_removed_ones_without_their_zeros() {
    // Worked by hand: a vintage passed through a spreadsheet lost the zeros of `007` and
    // `0100`; `12` is a new firm. Before, two firms removed and three added, nothing more.
    let w = Workdir::new();
    w.write("a.csv", "f,y,x\n007,1,1\n0100,1,2\n55,1,3\n");
    w.write("b.csv", "f,y,x\n7,1,1\n100,1,2\n55,1,3\n12,1,4\n");
    let args = [
        "compare", "a.csv", "b.csv", "--entity", "f", "--period", "y",
    ];
    let r = w.run(&[&args[..], &["--format", "json"]].concat());
    assert_eq!(r.code, 1, "{}", r.stderr);
    let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(
        summary["ids_rewritten"],
        serde_json::json!({"entities": 2, "example": ["007", "7"]})
    );
    let r = w.run(&args);
    assert!(
        r.stdout
            .contains("2 of the entities added are entities removed written without their"),
        "{}",
        r.stdout
    );
}

#[test]
fn compare_counts_exact_copies_once_and_refuses_a_key_with_two_rows_of_values() {
    // Worked by hand. `old.csv`: A-1 twice with the same values (an exact copy, counted once),
    // a row without its period (left out), B-2 after B-1 out of order; `new.csv`: the same
    // firm-years, B-2's x changed. 6 rows read, 1 without a key, 1 copy, 4 firm-years; 1 cell
    // changed. A key on rows with different values cannot be matched: refused, naming it and
    // its rows.
    let w = Workdir::new();
    w.write(
        "old.csv",
        "f,y,x\nA,1,1.5\nB,2,4\nA,1,1.5\nA,,9\nA,2,2\nB,1,3\n",
    );
    w.write("new.csv", "f,y,x\nA,1,1.5\nA,2,2\nB,1,3\nB,2,5\n");
    let keys = ["--entity", "f", "--period", "y", "--format", "json"];
    let mut args = vec!["compare", "old.csv", "new.csv"];
    args.extend(keys);
    let r = w.run(&args);
    assert_eq!(r.code, 1, "{}", r.stderr);
    let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let old = &summary["old"];
    assert_eq!(
        (
            &old["rows_read"],
            &old["rows_without_key"],
            &old["exact_copies"],
            &old["firm_years"]
        ),
        (&6.into(), &1.into(), &1.into(), &4.into()),
        "{old}"
    );
    assert_eq!(summary["firm_years_in_both"], 4, "{summary}");
    let x = &summary["columns"][0];
    assert_eq!(
        (&x["column"], &x["cells_changed"]),
        (&"x".into(), &1.into()),
        "{x}"
    );
    w.write("clash.csv", "f,y,x\nA,1,1.5\nB,1,3\nA,1,1.6\n");
    let mut args = vec!["compare", "clash.csv", "new.csv"];
    args.extend(keys);
    w.fails(&args, "key A in 1 is on rows 1 and 3 with different values");
    // An exact copy of the first row comes before the row that differs: the rows named are
    // the first and the one with other values.
    w.write("clash.csv", "f,y,x\nA,1,1.5\nA,1,1.5\nB,1,3\nA,1,1.6\n");
    w.fails(&args, "key A in 1 is on rows 1 and 4 with different values");
}

#[test]
fn compare_reads_numbers_beside_text_in_the_other_vintage_as_numbers() {
    // A vintage with one text cell in a numeric column (`one`, as an export writes a note)
    // reads that column as text; comparing it as text counted every cell whose spelling
    // differs (`2.0` against `2`) as changed. Worked by hand: of the four cells, `one` against
    // 1 counts (text), 2 against `2` and 0 against `0` do not (numbers), 5 against `5.5`
    // counts with a change of 0.5. Old and new swapped, the same counts.
    let w = Workdir::new();
    w.write("old.csv", "f,y,a\nA,1,1.0\nA,2,2.0\nB,1,0.0\nB,2,5.0\n");
    w.write("new.csv", "f,y,a\nA,1,one\nA,2,2\nB,1,0\nB,2,5.5\n");
    for (old, new) in [("old.csv", "new.csv"), ("new.csv", "old.csv")] {
        let r = w.run(&[
            "compare",
            old,
            new,
            "--entity",
            "f",
            "--period",
            "y",
            "--format",
            "json",
            "--changes",
            "ch.csv",
        ]);
        assert_eq!(r.code, 1, "{}", r.stderr);
        let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        let a = &summary["columns"][0];
        assert_eq!(a["compared_as"], "number and text", "{a}");
        assert_eq!(a["cells_changed"], 2, "{a}");
        assert_eq!(a["largest_change"], 0.5, "{a}");
        let ledger = std::fs::read_to_string(w.path("ch.csv")).unwrap();
        let lines: Vec<&str> = ledger.lines().skip(1).collect();
        assert_eq!(lines.len(), 2, "{ledger}");
        assert!(lines[0].starts_with("A,1,value changed,a,"), "{ledger}");
        assert!(lines[0].ends_with(','), "no difference for text: {ledger}");
        assert!(lines[1].starts_with("B,2,value changed,a,"), "{ledger}");
        assert!(
            lines[1].ends_with(if old == "old.csv" { ",0.5" } else { ",-0.5" }),
            "{ledger}"
        );
    }
    let text = w.run(&[
        "compare", "old.csv", "new.csv", "--entity", "f", "--period", "y",
    ]);
    assert!(
        text.stdout
            .contains("Numbers in one vintage and text in the other: a."),
        "{}",
        text.stdout
    );
}

#[test]
fn a_corrections_file_is_read_with_the_input_settings_of_the_data() {
    // Where the data is a semicolon-separated file with decimal commas in Windows-1252 (as a
    // spreadsheet in much of Europe saves it), the corrections file written beside it the same
    // way was refused for its header; now it is read as the data is. Worked by hand: firm
    // `Bräu`'s 2001 value 1,5 becomes 5,5 (5.5), recorded in corrections.csv.
    let w = Workdir::new();
    let latin = |text: &str| -> Vec<u8> {
        text.chars()
            .map(|c| u8::try_from(u32::from(c)).unwrap())
            .collect()
    };
    std::fs::write(
        w.path("p.csv"),
        latin("firm;year;x\nBräu;2001;1,5\nBräu;2002;2\nZeta;2001;3\n"),
    )
    .unwrap();
    std::fs::write(
        w.path("corr.csv"),
        latin("entity;period;column;value;reason\nBräu;2001;x;5,5;typed from the annual report\n"),
    )
    .unwrap();
    w.write(
        "rules.toml",
        "[input]\ndelimiter = \";\"\ndecimal_comma = true\nencoding = \"windows-1252\"\n\
         [panel]\nentity = \"firm\"\nperiod = \"year\"\n[repair]\ncorrections = \"corr.csv\"\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "b"]);
    let ledger = std::fs::read_to_string(w.path("b/corrections.csv")).unwrap();
    assert!(
        ledger.contains("Bräu,2001,x,1.5,5.5,corrections file: typed from the annual report"),
        "{ledger}"
    );
}
