//! Several raw files: joined tables, their match reports, their rows in the ledger and the
//! manifest, and the errors that name a joined file's row or column.

use crate::util::{run_reference, Workdir};

#[test]
fn joined_files_match_a_pandas_recount_on_the_demo() {
    // assemble.py joins the demo's headcount, firm and price-index files with pandas merges
    // (indicator=True) and recounts every match figure, the ledger rows of each joined file,
    // the manifest's hashes and counts, the joined columns after the corrections file, and
    // real sales = sales / index * 100 (deflating, common practice) to relative 1e-12.
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let out = run_reference("assemble.py", &[&w.path("d/data"), &w.path("d/bundle")]);
    assert!(out.contains(" 0 failed"), "{out}");
    // `audit` joins the same way and reports the same figures.
    let audit = w.ok(&[
        "audit",
        "d/data/velmora_accounts.csv",
        "--rules",
        "d/data/rules.toml",
        "--format",
        "json",
    ]);
    let audit: serde_json::Value = serde_json::from_str(&audit.stdout).unwrap();
    assert_eq!(audit["joins"], w.json("d/bundle/report.json")["joins"]);
    let md = std::fs::read_to_string(w.path("d/bundle/report.md")).unwrap();
    assert!(md.contains("## Joined files"), "{md}");
    assert!(md.contains("velmora_prices.csv (period table, on fiscal_year)"));
}

const PANEL: &str = "firm,year,currency,sales\n\
A,2020,EUR,100\n\
A,2021,EUR,110\n\
B,2020,USD,50\n\
B,2021,USD,60\n\
C,2020,XYZ,70\n\
C,2021,XYZ,80\n";

const RATES: &str = "currency,year,rate\n\
EUR,2020,1.5\n\
EUR,2021,2\n\
USD,2020,1\n\
USD,2021,1\n\
GBP,2020,1.25\n";

fn rules(join_extra: &str) -> String {
    format!(
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n\n\
         [[join]]\nfile = \"rates.csv\"\non = [\"currency\", \"year\"]\n{join_extra}\n\n\
         [derive.sales_usd]\nexpr = \"sales * rate\"\n"
    )
}

#[test]
fn a_group_period_table_converts_currencies_and_drops_unmatched_rows() {
    let w = Workdir::new();
    w.write("p.csv", PANEL);
    w.write("rates.csv", RATES);
    w.write("r.toml", &rules("unmatched = \"drop\""));
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert_eq!(
        panel,
        "source_row,firm,year,currency,sales,rate,sales_usd\n\
         1,A,2020,EUR,100,1.5,150.0\n\
         2,A,2021,EUR,110,2.0,220.0\n\
         3,B,2020,USD,50,1.0,50.0\n\
         4,B,2021,USD,60,1.0,60.0\n"
    );
    let rejected = std::fs::read_to_string(w.path("b/rejected.csv")).unwrap();
    let lines: Vec<&str> = rejected.lines().collect();
    assert_eq!(
        lines[0],
        "source_row,source_file,step,reason,related_row,firm,year,currency,sales"
    );
    assert!(lines[1].starts_with("5,p.csv,join: unmatched,no row of `rates.csv` matches"));
    assert!(lines[2].starts_with("6,p.csv,join: unmatched,"));
    assert_eq!(
        lines[3],
        "5,rates.csv,join: no match,no panel row has this key,,,2020,GBP,"
    );
    assert_eq!(lines.len(), 4);
    let m = w.json("b/manifest.json");
    assert_eq!(m["rows"]["input"], 6);
    assert_eq!(m["rows"]["kept"], 4);
    assert_eq!(m["rows"]["rejected"], 2);
    assert_eq!(m["joins"][0]["name"], "rates.csv");
    assert_eq!(m["joins"][0]["rows"], 5);
    assert_eq!(m["joins"][0]["rejected"], 1);
    let r = w.json("b/report.json");
    let j = &r["joins"][0];
    assert_eq!(j["kind"], "group-period table");
    assert_eq!(j["rows_used"], 4);
    assert_eq!(j["rows_unmatched"], 1);
    assert_eq!(j["panel_rows_unmatched"], 2);
    assert_eq!(j["panel_keys_unmatched"], 2);
    assert_eq!(
        j["examples"],
        serde_json::json!(["XYZ / 2020", "XYZ / 2021"])
    );
    let step = r["sample_construction"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["step"] == "join rates.csv: rows without a match")
        .expect("a sample-construction line for the join");
    assert_eq!(step["removed"], 2);
    assert_eq!(step["entities_after"], 2);
    // Kept by default: the rows stay, with empty joined columns.
    w.write("keep.toml", &rules(""));
    w.ok(&["build", "p.csv", "--rules", "keep.toml", "--out", "k"]);
    let panel = std::fs::read_to_string(w.path("k/panel.csv")).unwrap();
    assert!(
        panel.ends_with("5,C,2020,XYZ,70,,\n6,C,2021,XYZ,80,,\n"),
        "{panel}"
    );
    // The dictionary says where a joined column came from.
    let dict = std::fs::read_to_string(w.path("k/dictionary.md")).unwrap();
    assert!(
        dict.contains("joined from `rates.csv` on currency, year"),
        "{dict}"
    );
}

#[test]
fn a_repeated_key_in_a_joined_table_is_refused_unless_the_first_is_kept() {
    let w = Workdir::new();
    w.write("p.csv", PANEL);
    w.write("rates.csv", &format!("{RATES}EUR,2020,1.6\nUSD,2020,1\n"));
    w.write("r.toml", &rules(""));
    let line = w.fails(
        &["audit", "p.csv", "--rules", "r.toml"],
        "rates.csv`, row 6: 1 rows repeat the key (currency, year) of an earlier row with other values (the first: row 1)",
    );
    assert!(line.contains("keep-first"), "{line}");
    w.write("first.toml", &rules("duplicates = \"keep-first\""));
    w.ok(&["build", "p.csv", "--rules", "first.toml", "--out", "b"]);
    let rejected = std::fs::read_to_string(w.path("b/rejected.csv")).unwrap();
    assert!(
        rejected.contains("6,rates.csv,join: repeated key,its key repeats an earlier row with other values (keep-first),1,"),
        "{rejected}"
    );
    assert!(
        rejected.contains("7,rates.csv,join: exact copies,an exact copy of an earlier row,3,"),
        "{rejected}"
    );
    let r = w.json("b/report.json");
    assert_eq!(r["joins"][0]["repeated_keys"], 1);
    assert_eq!(r["joins"][0]["exact_copies"], 1);
    assert_eq!(r["joins"][0]["rows"], 7);
    assert_eq!(r["joins"][0]["rows_used"], 4);
}

#[test]
fn joined_files_with_bad_settings_or_values_are_named() {
    let w = Workdir::new();
    w.write("p.csv", PANEL);
    w.write("rates.csv", RATES);
    let run = |extra: &str, want: &str| {
        w.write("r.toml", &rules(extra));
        w.fails(&["audit", "p.csv", "--rules", "r.toml"], want);
    };
    run("unmatched = \"skip\"", "[[join]]");
    run("duplicates = \"last\"", "keep-first");
    // A key named twice stopped the engine with a message that named no file.
    // Rules of their own, refused naming `want`.
    let refused = |toml: &str, want: &str| {
        w.write("other.toml", toml);
        w.fails(&["audit", "p.csv", "--rules", "other.toml"], want);
    };
    refused(
        &rules("").replace(
            "on = [\"currency\", \"year\"]",
            "on = [\"currency\", \"year\", \"year\"]",
        ),
        "`rates.csv`: `on` names `year` twice",
    );
    run(
        "columns = [\"fx\"]",
        "`rates.csv`: no column `fx` (named in `columns`",
    );
    refused(
        &rules("rename = { rate = \"sales\" }").replace("sales * rate", "sales"),
        "`rates.csv`: no column `sales` (the panel already has this column",
    );
    // A key column the file lacks.
    w.write("rates.csv", "ccy,year,rate\nEUR,2020,1.5\n");
    run("", "`rates.csv`: no column `currency` (named in `on`");
    // Renamed, it matches.
    w.write("r.toml", &rules("rename = { ccy = \"currency\" }"));
    w.ok(&["audit", "p.csv", "--rules", "r.toml"]);
    // A period that is not a whole number, named by its row.
    w.write(
        "rates.csv",
        "currency,year,rate\nEUR,2020,1.5\nEUR,20x1,2\n",
    );
    run("", "`rates.csv`, row 2: `year` holds `20x1`");
    // A cell that made a joined column of numbers text stopped the derived variable, and an
    // accounting rule, computing with it with the engine's words about types alone; the
    // joined file's cell is named instead (worked by hand: data row 3 holds `n.v.`).
    w.write(
        "rates.csv",
        "currency,year,rate\nEUR,2020,1.5\nEUR,2021,2\nUSD,2020,n.v.\nUSD,2021,1\n",
    );
    run(
        "",
        "`rates.csv`, row 3, column `rate`: `n.v.` is not a number, and derived variable \
         `sales_usd` (`sales * rate`) computes with the column",
    );
    refused(
        &rules("").replace(
            "[derive.sales_usd]\nexpr = \"sales * rate\"",
            "[[rule]]\nname = \"rate_positive\"\nexpr = \"rate > 0\"",
        ),
        "`rates.csv`, row 3, column `rate`: `n.v.` is not a number, and accounting rule \
         `rate_positive` (`rate > 0`) computes with the column",
    );
    // A row short of a field was read with its rate missing, nothing said.
    w.write("rates.csv", "currency,year,rate\nEUR,2020,1.5\nEUR,2021\n");
    run("", "`rates.csv`, row 2: 2 fields where the header has 3");
    // A file that is not there.
    std::fs::remove_file(w.path("rates.csv")).unwrap();
    run("", "rates.csv");
    // A joined column may stand for a canonical name.
    w.write("rates.csv", RATES);
    w.write(
        "c.toml",
        &format!("{}\n[columns]\nsales = \"rate\"\n", rules("")),
    );
    w.ok(&["audit", "p.csv", "--rules", "c.toml"]);
}

#[test]
fn verify_rebuilds_a_bundle_with_joined_files() {
    let w = Workdir::new();
    w.write("p.csv", PANEL);
    w.write("rates.csv", RATES);
    w.write("r.toml", &rules(""));
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let r = w.ok(&["verify", "b"]);
    assert!(r.stdout.contains("rebuilt bit for bit"), "{}", r.stdout);
    w.write("rates.csv", &RATES.replace("1.25", "1.3"));
    let line = w.fails(&["verify", "b"], "rates.csv");
    assert!(
        line.contains("not the file the bundle was built from"),
        "{line}"
    );
}

#[test]
fn fiscal_years_from_the_demo_year_end_dates_match_pandas() {
    // The demo's second rules file derives the fiscal year from `year_end` (a year ending in
    // January–May belongs to the previous fiscal year, common practice); handoff.py parses the
    // dates with pandas, recounts the key steps on that period (structure.py) and the firms
    // whose year-end month changed, which must be the planted ones.
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d", "--data-only"]);
    w.ok(&[
        "audit",
        "d/data/velmora_accounts.csv",
        "--rules",
        "d/data/rules_year_end.toml",
        "--report",
        "ye.json",
    ]);
    let out = run_reference(
        "handoff.py",
        &[
            std::path::Path::new("yearend"),
            &w.path("d/data"),
            &w.path("ye.json"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
    let planted = w.json("d/data/planted.json");
    assert!(
        !planted["tables"]["year_end_changes"]
            .as_array()
            .unwrap()
            .is_empty(),
        "the demo plants year-end changes"
    );
}

#[test]
fn a_draft_without_a_year_column_derives_the_fiscal_year_from_the_year_end_dates() {
    // The demo's accounts without their fiscal-year column: `rules draft` finds no column of
    // years, takes the fiscal year from the `year_end` dates, and an audit with the draft
    // recounts, by pandas (handoff.py on the original files), the key steps on that period and
    // the firms whose year-end month changed.
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d", "--data-only"]);
    let raw = std::fs::read_to_string(w.path("d/data/velmora_accounts.csv")).unwrap();
    let at = raw
        .lines()
        .next()
        .unwrap()
        .split(',')
        .position(|c| c == "fiscal_year")
        .unwrap();
    let without: String = raw
        .lines()
        .map(|line| {
            let cells: Vec<&str> = line.split(',').collect();
            let kept: Vec<&str> = [&cells[..at], &cells[at + 1..]].concat();
            kept.join(",") + "\n"
        })
        .collect();
    w.write("dates.csv", &without);
    w.ok(&["rules", "draft", "dates.csv", "--out", "dates.toml"]);
    let draft = std::fs::read_to_string(w.path("dates.toml")).unwrap();
    for want in [
        "entity = \"firm_id\"",
        "period = \"fiscal_year\"",
        "year_end = \"year_end\"",
        "year_end_cutoff = 5",
    ] {
        assert!(draft.contains(want), "draft lacks {want}:\n{draft}");
    }
    w.run(&[
        "audit",
        "dates.csv",
        "--rules",
        "dates.toml",
        "--report",
        "dates.json",
    ]);
    let out = run_reference(
        "handoff.py",
        &[
            std::path::Path::new("yearend"),
            &w.path("d/data"),
            &w.path("dates.json"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
}

/// A joined CSV table's numbers with cells marking a missing number (`NA`, `#N/A`) are read as
/// numbers, as the main file's are, and the report's input notes say so naming the table; a
/// matched column stays as read (the currency code `NA` is a key, not a marker). Worked by
/// hand: firm B's 2021 rate is `NA`, so its converted sales are missing and the others are
/// sales × rate.
#[test]
fn a_joined_tables_numbers_with_missing_markers_are_numbers() {
    let w = Workdir::new();
    w.write("p.csv", &PANEL.replace("XYZ", "NA"));
    w.write(
        "rates.csv",
        "currency,year,rate\nEUR,2020,1.5\nEUR,2021,2\nUSD,2020,1\nUSD,2021,NA\n\
         GBP,2020,#N/A\nNA,2020,0.5\nNA,2021,0.25\n",
    );
    w.write("r.toml", &rules(""));
    let r = w.ok(&["audit", "p.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let notes = report["input"]["notes"].as_array().unwrap();
    assert_eq!(notes.len(), 1, "{notes:?}");
    assert!(
        notes[0].as_str().unwrap().starts_with(
            "joined `rates.csv`, column `rate`: 2 cells marking a missing number (`NA` 1, `#N/A` 1)"
        ),
        "{notes:?}"
    );
    let missing = report["missing"].as_array().unwrap();
    let of = |v: &str| missing.iter().find(|m| m["variable"] == v).unwrap()["missing"].clone();
    assert_eq!(of("rate"), 1);
    assert_eq!(of("sales_usd"), 1);
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert!(panel.contains("\n4,B,2021,USD,60,,\n"), "{panel}");
    assert!(panel.contains("\n5,C,2020,NA,70,0.5,35.0\n"), "{panel}");
}

/// Firm ids with leading zeros are text, in the main file and in a joined table: `00123`,
/// `123` and `0456` are three firms (read as numbers they were two, `00123` and `123` one firm
/// with conflicting years), each matched to its own row of the joined file, and panel.csv
/// writes the ids as they came. Worked by hand.
#[test]
fn firm_ids_with_leading_zeros_stay_distinct() {
    let w = Workdir::new();
    w.write(
        "p.csv",
        "firm,year,x\n00123,2001,1\n00123,2002,2\n123,2001,3\n123,2002,4\n0456,2001,5\n0456,2002,6\n",
    );
    w.write("f.csv", "id,size\n00123,10\n123,20\n0456,30\n");
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n\n\
         [[join]]\nfile = \"f.csv\"\non = [\"firm\"]\nrename = { id = \"firm\" }\n",
    );
    let r = w.ok(&["audit", "p.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(report["panel"]["entities"], 3);
    assert_eq!(report["panel"]["balanced"], true);
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert_eq!(
        panel,
        "source_row,firm,year,x,size\n\
         1,00123,2001,1,10\n\
         2,00123,2002,2,10\n\
         5,0456,2001,5,30\n\
         6,0456,2002,6,30\n\
         3,123,2001,3,20\n\
         4,123,2002,4,20\n"
    );
}
