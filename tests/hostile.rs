//! Hostile input: each case asserts the exit code, a one-line message naming the file, row,
//! column or rule where there is one, and that no bundle (not even a partial one) is left.
//! Valid edge data must build a correct bundle.

use crate::util::Workdir;

const KEYS: &str = "[panel]\nentity = \"firm\"\nperiod = \"year\"\n";
const GOOD: &str = "firm,year,assets\nA,2001,10\nA,2002,12\nB,2001,5\nB,2002,6\n";

/// A case that must stop with exit 2 and a message containing every `want`.
struct Bad {
    name: &'static str,
    data: &'static [u8],
    file: &'static str,
    rules: String,
    want: &'static [&'static str],
}

fn bad(name: &'static str, data: &'static [u8], rules: &str, want: &'static [&'static str]) -> Bad {
    Bad {
        name,
        data,
        file: "raw.csv",
        rules: format!("{KEYS}{rules}"),
        want,
    }
}

fn check_bad(case: &Bad) {
    let w = Workdir::new();
    std::fs::write(w.path(case.file), case.data).unwrap();
    w.write("rules.toml", &case.rules);
    let mut messages = Vec::new();
    for cmd in ["build", "audit"] {
        let mut args = vec![cmd, case.file, "--rules", "rules.toml"];
        if cmd == "build" {
            args.extend(["--out", "out"]);
        }
        let r = w.run(&args);
        assert_eq!(
            r.code, 2,
            "{}: {cmd} exit {}\nstdout: {}\nstderr: {}",
            case.name, r.code, r.stdout, r.stderr
        );
        let line = r.stderr.trim_end();
        assert_eq!(
            line.lines().count(),
            1,
            "{}: not one line:\n{line}",
            case.name
        );
        assert!(
            line.starts_with("panelready: error: "),
            "{}: {line}",
            case.name
        );
        for want in case.want {
            assert!(line.contains(want), "{}: lacks {want:?}: {line}", case.name);
        }
        assert!(r.stdout.is_empty(), "{}: printed {}", case.name, r.stdout);
        assert!(!w.path("out").exists(), "{}: left a bundle", case.name);
        let leftovers: Vec<_> = std::fs::read_dir(w.dir.path())
            .unwrap()
            .filter_map(|e| e.ok())
            .map(|e| e.file_name().to_string_lossy().to_string())
            .filter(|n| n.contains("partial"))
            .collect();
        assert!(leftovers.is_empty(), "{}: {leftovers:?}", case.name);
        messages.push(line.to_string());
    }
    assert_eq!(
        messages[0], messages[1],
        "{}: build and audit refuse differently",
        case.name
    );
}

#[test]
fn malformed_csv_stops_with_one_located_line() {
    let cases = [
        bad(
            "header only",
            b"firm,year,assets\n",
            "",
            &["raw.csv", "no data rows"],
        ),
        bad("empty file", b"", "", &["raw.csv"]),
        bad(
            "duplicate column",
            b"firm,year,assets,assets\nA,2001,1,2\n",
            "",
            &["raw.csv", "`assets`", "more than once"],
        ),
        bad(
            "duplicate key column",
            b"firm,year,firm\nA,2001,B\n",
            "",
            &["`firm`", "more than once"],
        ),
        bad(
            "unterminated quote",
            b"firm,year,name\nA,2001,ok\nB,2002,\"never closed\nC,2003,x\n",
            "",
            &["raw.csv", "row 2", "never closed"],
        ),
        bad(
            "latin-1 cell",
            b"firm,year,name\nA,2001,ok\nB,2002,M\xfcller\n",
            "",
            &["raw.csv", "row 2", "column 3", "UTF-8"],
        ),
        bad(
            "text period",
            b"firm,year,assets\nA,2001,1\nA,twenty,2\n",
            "",
            &["raw.csv", "row 2", "`twenty`"],
        ),
        // A date where the period should be points to the setting that derives fiscal years.
        bad(
            "date as period",
            b"firm,year,assets\nA,2001-12-31,1\nB,2002-06-30,2\n",
            "",
            &[
                "raw.csv",
                "row 1",
                "`2001-12-31`",
                "`[panel] year_end = \"year\"`",
            ],
        ),
        // A fiscal-year label (`FY2001`) was refused with nothing said of the year in it.
        bad(
            "year label as period",
            b"firm,year,assets\nA,2001,1\nA,FY2002,1\n",
            "",
            &[
                "raw.csv",
                "row 2 has `FY2002` (a year with other characters around it: write the period as \
                 the year alone, `2002`, in the file)",
            ],
        ),
        bad(
            "decimal period",
            b"firm,year,assets\nA,2001.5,1\n",
            "",
            &["raw.csv", "row 1"],
        ),
        // Periods are consecutive whole numbers, at most 1000 of them in the window: these are
        // a date code, a timestamp-like value and the extremes of 64-bit integers (each made
        // the run panic or exhaust memory before the check).
        bad(
            "date code as period",
            b"firm,year,assets\nA,20010131,1\nA,20020131,2\nB,20010131,3\n",
            "",
            &[
                "raw.csv",
                "`year`",
                "row 1",
                "row 2",
                "10001 periods",
                "at most 1000",
            ],
        ),
        bad(
            "period far apart",
            b"firm,year,assets\nA,1,1\nA,1000000000,2\nB,1,3\nB,2,4\n",
            "",
            &["raw.csv", "`year`", "1000000000 (row 2)"],
        ),
        bad(
            "periods at the integer extremes",
            b"firm,year,assets\nA,-9223372036854775808,1\nA,9223372036854775807,2\nB,0,3\n",
            "",
            &["raw.csv", "`year`", "18446744073709551616 periods"],
        ),
        bad(
            "no entity column",
            b"company,year,assets\nA,2001,1\n",
            "",
            &["raw.csv", "`firm`", "entity"],
        ),
        bad(
            "no period column",
            b"firm,fy,assets\nA,2001,1\n",
            "",
            &["raw.csv", "`year`", "period"],
        ),
        bad(
            "reserved column name",
            b"firm,year,__row\nA,2001,1\n",
            "",
            &["`__row`", "reserved"],
        ),
        // A row with fewer fields than the header was read with its last values missing,
        // nothing said; one with more stopped with the engine's words alone, no row named.
        bad(
            "short row",
            b"firm,year,assets\nA,2001,1\nA,2002\nB,2001,3\n",
            "",
            &["raw.csv", "row 2", "2 fields where the header has 3"],
        ),
        bad(
            "long row",
            b"firm,year,assets\nA,2001,1\nA,2002,1,5\nB,2001,3\n",
            "",
            &["raw.csv", "row 2", "4 fields where the header has 3"],
        ),
        // A file written with `;` and decimal commas, read with commas: its header is one
        // column and its rows two fields. The row was named, not the delimiter it wants.
        bad(
            "semicolons and decimal commas read with commas",
            "\u{feff}firm;year;assets\r\nA;2001;1,5\r\nB;2001;3\r\n".as_bytes(),
            "",
            &[
                "raw.csv",
                "row 1: 2 fields where the header has 1",
                "the header reads as one column, `firm;year;assets`",
                "give `--delimiter ';'`",
            ],
        ),
        bad(
            "line break inside a field not quoted",
            b"firm,year,name,assets\nA,2001,Harbor\nWorks,1\nB,2001,Mill,3\n",
            "",
            &[
                "raw.csv",
                "row 1",
                "3 fields where the header has 4",
                "quoted",
            ],
        ),
        // A cell that made a column of numbers text stopped the rule computing with it with
        // the engine's words about types ("division with 'String' datatypes"); the cell is
        // named instead.
        bad(
            "text in a column of numbers, derived variable",
            b"firm,year,assets\nA,2001,10\nA,2002,-\nB,2001,5\nB,2002,6\n",
            "[derive.x]\nexpr = \"assets / 2\"\n",
            &[
                "raw.csv",
                "row 2, column `assets`: `-` is not a number",
                "derived variable `x` (`assets / 2`)",
            ],
        ),
        bad(
            "text in a column of numbers, accounting rule",
            b"firm,year,assets\nA,2001,10\nA,2002,n.v.\nB,2001,5\nB,2002,6\n",
            "[[rule]]\nname = \"r\"\nexpr = \"assets > 0\"\n",
            &[
                "raw.csv",
                "row 2, column `assets`: `n.v.` is not a number",
                "accounting rule `r` (`assets > 0`)",
            ],
        ),
        // Codes written with a leading zero are read as text on purpose; dividing them
        // stopped with the engine's words about types. The first such code is named, with the
        // cast that computes with it (worked by hand: data row 2 holds `0123`).
        bad(
            "codes with leading zeros in arithmetic",
            b"firm,year,sic\nA,2001,123\nA,2002,0123\nB,2001,456\n",
            "[derive.x]\nexpr = \"sic / 100\"\n",
            &[
                "raw.csv",
                "row 2, column `sic`: `0123` is written with a leading zero",
                "derived variable `x` (`sic / 100`) computes with it",
                "`CAST(sic AS DOUBLE)`",
            ],
        ),
        // A column the header leaves without a name but which holds values cannot be named
        // by a rule and showed in the reports as ``: stopped, its place and value named.
        bad(
            "unnamed column with values",
            b"firm,year,,assets\nA,2001,5,1\nA,2002,6,2\n",
            "",
            &[
                "raw.csv",
                "column 3",
                "without a name",
                "data row 1 holds `5`",
            ],
        ),
        bad(
            "conflicting keys under fail",
            b"firm,year,assets\nA,2001,1\nA,2001,2\n",
            "",
            &[
                "raw.csv",
                "1 entity-period key appears",
                "entity `A`",
                "2001",
            ],
        ),
    ];
    // Year-end dates that no calendar has (Gregorian, common practice; Python's
    // `datetime.date` refuses the same three) were given a fiscal year; 2000-02-29 is a date.
    for (date, good) in [
        ("2002-02-30", false),
        ("1900-02-29", false),
        ("2001-04-31", false),
        ("2000-02-29", true),
    ] {
        let w = Workdir::new();
        w.write(
            "raw.csv",
            &format!("firm,fye,x\nA,2001-12-31,1\nA,2002-12-31,2\nB,{date},3\n"),
        );
        w.write(
            "rules.toml",
            "[panel]\nentity = \"firm\"\nperiod = \"fy\"\nyear_end = \"fye\"\n",
        );
        let args = ["audit", "raw.csv", "--rules", "rules.toml"];
        if good {
            w.ok(&args);
        } else {
            let line = w.fails(&args, "row 3");
            assert!(line.contains(date) && line.contains("not a date"), "{line}");
        }
    }
    for case in &cases {
        if case.name == "conflicting keys under fail" {
            // `audit` reports conflicts instead of stopping; only `build` stops.
            let w = Workdir::new();
            std::fs::write(w.path(case.file), case.data).unwrap();
            w.write("rules.toml", &case.rules);
            for want in case.want {
                w.fails(
                    &["build", case.file, "--rules", "rules.toml", "--out", "out"],
                    want,
                );
            }
            assert!(!w.path("out").exists());
            w.ok(&["audit", case.file, "--rules", "rules.toml"]);
            continue;
        }
        check_bad(case);
    }
}

#[test]
fn settings_the_data_shows_wrong_stop_before_anything_is_written() {
    // Only the data's columns can show these wrong, so they are judged after reading, before
    // any check runs or any file is written.
    let cases = [
        // Each of these was accepted: a winsorized period key changed the keys themselves, a
        // text column was treated or regressed as all missing, the outcome regressed on itself.
        bad(
            "winsorize the period key",
            GOOD.as_bytes(),
            "[clean]\nwinsorize = { variables = [\"year\"], lower = 0.01, upper = 0.99 }\n",
            &["[clean] winsorize", "`year`", "key"],
        ),
        bad(
            "trim text",
            GOOD.as_bytes(),
            "[derive.label]\nexpr = \"CASE WHEN assets > 6 THEN 'big' ELSE 'small' END\"\n\
             [clean]\ntrim = { variables = [\"label\"], lower = 0.01, upper = 0.99 }\n",
            &["[clean] winsorize / trim", "`label`", "not a column of numbers"],
        ),
        bad(
            "model on the outcome itself",
            GOOD.as_bytes(),
            "[model]\noutcome = \"assets\"\nregressors = [\"assets\"]\n",
            &["[model]", "`assets` twice"],
        ),
        bad(
            "model on the entity key",
            GOOD.as_bytes(),
            "[derive.y]\nexpr = \"assets * 2\"\n[model]\noutcome = \"y\"\nregressors = [\"firm\"]\n",
            &["[model]", "`firm`", "entity key"],
        ),
        bad(
            "levels of text",
            b"firm,year,assets,label\nA,2001,10,a\nA,2002,12,b\nB,2001,5,c\nB,2002,6,d\n",
            "[audit]\nlevels = [\"label\"]\n",
            &["[audit] levels", "`label`", "not a column of numbers"],
        ),
        bad(
            "compare text",
            GOOD.as_bytes(),
            "[derive.label]\nexpr = \"CASE WHEN assets > 6 THEN 'big' ELSE 'small' END\"\n\
             [audit]\ncompare = [\"label\"]\n",
            &["[audit] compare", "`label`", "not a column of numbers"],
        ),
        bad(
            "model on text",
            GOOD.as_bytes(),
            "[derive.label]\nexpr = \"CASE WHEN assets > 6 THEN 'big' ELSE 'small' END\"\n\
             [model]\noutcome = \"assets\"\nregressors = [\"label\"]\n",
            &["[model]", "`label`", "not a column of numbers"],
        ),
    ];
    for case in &cases {
        check_bad(case);
    }
    // An amount read as text (a word among its numbers that marks no missing value) was
    // searched for unit slips and passed; now it is not searched, and the check says so.
    let (report, text) =
        audit_csv("firm,year,total_assets\nA,2001,restated\nA,2002,5\nB,2001,7\nB,2002,8\n");
    assert_eq!(report["unit_slips_searched"], 0, "{text}");
    assert!(text.contains("not checked"), "{text}");
}

#[test]
fn bad_rules_stop_before_any_data_is_read_identically_for_audit_and_build() {
    let cases = [
        bad("toml syntax", GOOD.as_bytes(), "[clean\n", &["rules file"]),
        bad(
            "unknown key",
            GOOD.as_bytes(),
            "[clean]\nfrobnicate = 1\n",
            &["rules file"],
        ),
        bad(
            "bad duplicate policy",
            GOOD.as_bytes(),
            "[clean]\nduplicates = \"keep-some\"\n",
            &["duplicates", "keep-some"],
        ),
        bad(
            "bad singleton policy",
            GOOD.as_bytes(),
            "[clean]\ndrop_singletons = \"often\"\n",
            &["drop_singletons"],
        ),
        bad(
            "bad balance",
            GOOD.as_bytes(),
            "[clean]\nbalance = \"tidy\"\n",
            &["balance"],
        ),
        bad(
            "winsorize unknown variable",
            GOOD.as_bytes(),
            "[clean]\nwinsorize = { variables = [\"nosuch\"], lower = 0.01, upper = 0.99 }\n",
            &["nosuch"],
        ),
        bad(
            "winsorize a variable twice",
            GOOD.as_bytes(),
            "[clean]\nwinsorize = { variables = [\"assets\", \"assets\"], lower = 0.01, upper = 0.99 }\n",
            &["winsorize", "`assets` twice"],
        ),
        bad(
            // It was taken: the rows trimmed were those winsorizing had moved to its cutoffs.
            "winsorize and trim one variable",
            GOOD.as_bytes(),
            "[clean]\nwinsorize = { variables = [\"assets\"], lower = 0.01, upper = 0.99 }\n\
             trim = { variables = [\"assets\"], lower = 0.05, upper = 0.95 }\n",
            &["[clean] winsorize / trim", "both name `assets`"],
        ),
        bad(
            "winsorize bad range",
            GOOD.as_bytes(),
            "[clean]\nwinsorize = { variables = [\"assets\"], lower = 0.9, upper = 0.1 }\n",
            &["winsorize"],
        ),
        bad(
            "bad verdict level",
            GOOD.as_bytes(),
            "[verdict]\ngaps = \"maybe\"\n",
            &["[verdict] gaps", "maybe"],
        ),
        bad(
            "unknown verdict finding",
            GOOD.as_bytes(),
            "[verdict]\ngapz = \"fail\"\n",
            &["[verdict]", "`gapz`", "gaps, singletons"],
        ),
        bad(
            "bad threshold",
            GOOD.as_bytes(),
            "[thresholds]\nrobust_z = -1\n",
            &["robust_z"],
        ),
        bad(
            "bad outlier cutoffs",
            GOOD.as_bytes(),
            "[audit]\noutliers = { lower = 0.5, upper = 0.2 }\n",
            &["[audit] outliers"],
        ),
        bad(
            "bad effects",
            GOOD.as_bytes(),
            "[model]\noutcome = \"assets\"\nregressors = [\"assets\"]\neffects = \"firm\"\n",
            &["effects"],
        ),
        bad(
            "model names unknown column",
            GOOD.as_bytes(),
            "[model]\noutcome = \"nosuch\"\nregressors = [\"assets\"]\n",
            &["`nosuch`", "[model]"],
        ),
        Bad {
            name: "unknown library",
            data: GOOD.as_bytes(),
            file: "raw.csv",
            rules: format!("include = [\"premium\"]\n{KEYS}"),
            want: &["`premium`"],
        },
        bad(
            "mapping to a missing column",
            GOOD.as_bytes(),
            "[columns]\ntotal_assets = \"ta\"\n",
            &["`ta`", "total_assets"],
        ),
        bad(
            "bad rule action",
            GOOD.as_bytes(),
            "[[rule]]\nname = \"pos\"\nexpr = \"assets > 0\"\naction = \"explode\"\n",
            &["`pos`"],
        ),
        bad(
            "prefer-max unknown column",
            b"firm,year,assets\nA,2001,1\nA,2001,2\n",
            "[clean]\nduplicates = \"prefer-max:nosuch\"\n",
            &["`nosuch`"],
        ),
    ];
    for case in &cases {
        check_bad(case);
    }
}

/// Raw data that stops the reader (a row with more fields than the header).
const UNREADABLE: &[u8] = b"firm,year,assets\nA,2001,10\nA,2002,12,99,98\n";

#[test]
fn values_of_the_rules_file_are_checked_before_any_file_is_read() {
    // The data file is unreadable, so a rules error can only win if the rules were checked
    // first; each setting below needs no data to be judged wrong.
    let plain = bad("unreadable data", UNREADABLE, "", &["raw.csv"]);
    check_bad(&plain);
    let cases = [
        ("[clean]\nduplicates = \"keep-some\"\n", "keep-some"),
        ("[clean]\ndrop_singletons = \"often\"\n", "drop_singletons"),
        ("[clean]\nbalance = \"tidy\"\n", "[clean] balance"),
        (
            "[clean]\nbalance = { window = [1, 5000000000] }\n",
            "more than 1000 periods",
        ),
        (
            "[clean]\nwinsorize = { variables = [\"assets\"], lower = 0.9, upper = 0.1 }\n",
            "[clean] winsorize",
        ),
        (
            "[clean]\ntrim = { variables = [\"assets\"], by = \"sector\" }\n",
            "[clean] trim",
        ),
        ("[repair]\nunit_slips = \"shrug\"\n", "[repair] unit_slips"),
        ("[panel]\nyear_end_cutoff = 13\n", "year_end_cutoff"),
        ("[verdict]\ngaps = \"maybe\"\n", "[verdict] gaps"),
        ("[verdict]\ngapz = \"fail\"\n", "`gapz`"),
        ("[thresholds]\nattrition_p = 2\n", "attrition_p"),
        ("[thresholds]\nrobust_z = -1\n", "robust_z"),
        // A change of a share cannot pass 1: the check would be off without a word.
        ("[thresholds]\nmissing_jump = 1.5\n", "missing_jump"),
        (
            "[audit]\noutliers = { lower = 0.5, upper = 0.2 }\n",
            "[audit] outliers",
        ),
        (
            "[model]\noutcome = \"assets\"\nregressors = [\"assets\"]\neffects = \"firm\"\n",
            "[model] effects",
        ),
        (
            "[[rule]]\nname = \"pos\"\nexpr = \"assets > 0\"\naction = \"explode\"\n",
            "`pos`",
        ),
        (
            "[[join]]\nfile = \"nowhere.csv\"\non = [\"firm\"]\nunmatched = \"lose\"\n",
            "unmatched",
        ),
        // A value of the wrong shape named the parser's types ("data did not match any
        // variant of untagged enum BalanceSpec"); it names the setting and what it takes.
        (
            "[clean]\nbalance = [2001, 2003]\n",
            "`[clean] balance` is \"keep\", \"largest\" or { window = [FIRST, LAST] }",
        ),
        (
            "[clean]\ndrop_singletons = 3\n",
            "`[clean] drop_singletons` is true, false",
        ),
        (
            "[clean]\nwinsorize = { variables = [\"assets\"], lower = 0.1, upper = 0.9, by = 5 }\n",
            "`by` of a treatment is \"pooled\", \"period\" or a list of columns",
        ),
        (
            "[model]\noutcome = \"assets\"\nregressors = []\neffects = 5\n",
            "`[model] effects` is a list of the key columns",
        ),
    ];
    for (rules, want) in cases {
        // `[panel]` appears twice in one case: merge it into the keys' table.
        let rules = match rules.strip_prefix("[panel]\n") {
            Some(rest) => format!("{KEYS}{rest}"),
            None => format!("{KEYS}{rules}"),
        };
        let case = Bad {
            name: "a bad value with unreadable data",
            data: UNREADABLE,
            file: "raw.csv",
            rules,
            want: &[],
        };
        check_bad(&case);
        let w = Workdir::new();
        std::fs::write(w.path("raw.csv"), UNREADABLE).unwrap();
        w.write("rules.toml", &case.rules);
        let r = w.run(&["audit", "raw.csv", "--rules", "rules.toml"]);
        assert!(
            r.stderr.contains(want) && !r.stderr.contains("raw.csv"),
            "the rules error must come first ({want}): {}",
            r.stderr
        );
    }
}

#[test]
fn bad_expressions_name_the_rule() {
    let rule = |expr: &str| format!("[derive.x]\nexpr = \"{expr}\"\n");
    let cases: Vec<(String, &[&str])> = vec![
        (rule("assets +"), &["`x`", "syntax error"]),
        (rule("assets / nosuch"), &["`x`", "`nosuch`"]),
        (rule("frobnicate(assets)"), &["`x`", "`frobnicate`"]),
        (rule("assets / sum(assets)"), &["`x`", "`sum`", "whole column"]),
        (rule("assets - avg(assets)"), &["`x`", "`avg`"]),
        (rule("max(assets)"), &["`x`", "`max`"]),
        (rule("count(assets)"), &["`x`", "`count`"]),
        (rule("median(assets)"), &["`x`", "`median`"]),
        (
            rule("assets / first_value(assets) OVER (ORDER BY year)"),
            &["`x`", "whole column"],
        ),
        (rule("row_number() OVER ()"), &["`x`", "whole column"]),
        (rule("lag(assets + 1, 1)"), &["`x`", "column name"]),
        (rule("lag(assets, 0)"), &["`x`", "at least 1"]),
        // A lag this long took minutes and all memory before it was bounded.
        (
            rule("lag(assets, 9223372036854775807)"),
            &["`x`", "at most 1000"],
        ),
        (
            rule("lag(lag(assets, 1), 1)"),
            &["`x`", "`lag(lag(assets, 1), 1)`", "another panel function"],
        ),
        (rule("lag(assets, -1)"), &["`x`"]),
        (rule("lag(assets, 1, 2)"), &["`x`"]),
        (rule("assets assets"), &["`x`", "unexpected"]),
        (
            "[derive.x]\nexpr = \"y + 1\"\n[derive.y]\nexpr = \"x + 1\"\n".into(),
            &["cycle"],
        ),
        (rule("t.assets"), &["`x`", "`t.assets`"]),
        (
            "[derive.x]\nexpr = \"assets\"\nnull_when = [{ when = \"nosuch > 0\", reason = \"r\" }]\n"
                .into(),
            &["`x`", "`nosuch`"],
        ),
        (
            // Panel functions are allowed in rules, with the same checks as elsewhere.
            "[[rule]]\nname = \"r1\"\nexpr = \"lag(assets + 1, 1) > 0\"\n".into(),
            &["`r1`", "column name"],
        ),
        (
            "[[rule]]\nname = \"r2\"\nexpr = \"assets > nosuch\"\n".into(),
            &["`r2`", "`nosuch`"],
        ),
        // AND, OR and NOT take conditions, as in SQL (ISO/IEC 9075: their operands are
        // boolean; common practice): numbers were combined bit by bit (3 AND 4 gave 0), and a
        // number with text inside coalesce stopped the engine with an internal error.
        (rule("assets AND year"), &["`x`", "combine conditions", "number"]),
        (rule("(assets > 5) OR 1"), &["`x`", "combine conditions"]),
        (
            rule("CAST(coalesce(NULL, (assets AND 'text')) AS DOUBLE)"),
            &["`x`", "combine conditions"],
        ),
        (rule("NOT assets"), &["`x`", "combine conditions"]),
        (rule("NOT 'text'"), &["`x`", "combine conditions", "text"]),
        (
            "[derive.x]\nexpr = \"assets\"\nnull_when = [{ when = \"assets OR year\", reason = \"r\" }]\n"
                .into(),
            &["`x`", "combine conditions"],
        ),
        (
            "[[rule]]\nname = \"r3\"\nexpr = \"assets AND year\"\n".into(),
            &["`r3`", "combine conditions"],
        ),
        // What only the column types or the values show stopped with the engine's words
        // alone ("data engine: division with 'String' datatypes is not allowed"), no rule
        // named; a condition giving numbers named an internal column.
        (
            rule("assets / firm"),
            &["derived variable `x`: `assets / firm`", "String"],
        ),
        (
            rule("CAST(firm AS DOUBLE)"),
            &["derived variable `x`: `CAST(firm AS DOUBLE)`", "conversion"],
        ),
        (
            "[derive.y]\nexpr = \"firm\"\n[derive.x]\nexpr = \"y * 2\"\n".into(),
            &["derived variable `x`: `y * 2`"],
        ),
        (
            "[[rule]]\nname = \"r4\"\nexpr = \"firm > 1\"\n".into(),
            &["accounting rule `r4`: `firm > 1`", "compare"],
        ),
        (
            "[[rule]]\nname = \"r5\"\nexpr = \"assets\"\n".into(),
            &["accounting rule `r5`: `assets` gives values of type i64, not true / false"],
        ),
        (
            "[[rule]]\nname = \"r6\"\nexpr = \"CAST(firm AS DOUBLE) > 0\"\n".into(),
            &["accounting rule `r6`", "conversion"],
        ),
    ];
    for (rules, want) in cases {
        let case = Bad {
            name: "expression",
            data: GOOD.as_bytes(),
            file: "raw.csv",
            rules: format!("{KEYS}{rules}"),
            want,
        };
        check_bad(&case);
    }
}

/// Conditions combined with AND, OR and NOT, NULL among them, keep SQL's three-valued logic
/// (ISO/IEC 9075; common practice): worked by hand on the four rows of `GOOD`.
#[test]
fn conditions_combine_as_in_sql() {
    let w = Workdir::new();
    w.write("raw.csv", GOOD);
    w.write(
        "rules.toml",
        &format!(
            "{KEYS}[derive.both]\nexpr = \"CASE WHEN (assets > 5) AND NOT (year = 2001) THEN 1 ELSE 0 END\"\n\
             [derive.either]\nexpr = \"CASE WHEN (assets > 11) OR (year = 2001) THEN 1 ELSE 0 END\"\n\
             [derive.unknown]\nexpr = \"CASE WHEN (assets > 100) OR NULL THEN 1 WHEN (assets > 100) AND NULL THEN 2 ELSE 3 END\"\n"
        ),
    );
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
    let text = std::fs::read_to_string(w.path("out/panel.csv")).unwrap();
    let rows: Vec<Vec<&str>> = text.lines().map(|l| l.split(',').collect()).collect();
    let at = |name: &str| rows[0].iter().position(|c| *c == name).unwrap();
    let column = |name: &str| -> Vec<&str> { rows[1..].iter().map(|r| r[at(name)]).collect() };
    // Rows A 2001 (10), A 2002 (12), B 2001 (5), B 2002 (6).
    assert_eq!(column("both"), ["0", "1", "0", "1"]);
    assert_eq!(column("either"), ["1", "1", "1", "0"]);
    // FALSE OR NULL and FALSE AND NULL are NULL and FALSE: neither branch is taken.
    assert_eq!(column("unknown"), ["3", "3", "3", "3"]);
}

#[test]
fn bad_paths_and_arguments_are_one_line_errors() {
    let w = Workdir::new();
    w.write("raw.csv", GOOD);
    w.write("rules.toml", KEYS);
    w.fails(
        &["build", "nosuch.csv", "--rules", "rules.toml", "--out", "o"],
        "nosuch.csv",
    );
    w.fails(
        &["audit", "raw.csv", "--rules", "nosuch.toml"],
        "nosuch.toml",
    );
    w.write("raw.dat", GOOD);
    w.fails(
        &["audit", "raw.dat", "--rules", "rules.toml"],
        "--input-format",
    );
    // The bundle may not overwrite its input, nor a folder that is not a bundle.
    w.fails(
        &["build", "raw.csv", "--rules", "rules.toml", "--out", "."],
        "overwrite the input",
    );
    w.write("full/notes.txt", "mine");
    w.fails(
        &["build", "raw.csv", "--rules", "rules.toml", "--out", "full"],
        "refusing to replace",
    );
    assert_eq!(
        std::fs::read_to_string(w.path("full/notes.txt")).unwrap(),
        "mine"
    );
    // Files of another kind than their names say stopped with the engine's words about the
    // bytes ("The file must end with PAR1", "byte 0xd1 is not UTF-8", "invalid Zip
    // archive"); the kind they seem to be is named, by their first bytes (the formats'
    // specifications: `PAR1`, `PK\3\4`).
    w.write("fake.parquet", "firm,year\nA,2001\n");
    w.fails(
        &["audit", "fake.parquet", "--rules", "rules.toml"],
        "`fake.parquet`: the file looks like text (a CSV file?): give `--input-format csv`",
    );
    w.write("fake.xlsx", "firm,year\nA,2001\n");
    w.fails(
        &["audit", "fake.xlsx", "--rules", "rules.toml"],
        "`fake.xlsx`: the file looks like text (a CSV file?)",
    );
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "made"]);
    let parquet = std::fs::read(w.path("made/panel.parquet")).unwrap();
    std::fs::write(w.path("fake.csv"), &parquet).unwrap();
    w.fails(
        &["audit", "fake.csv", "--rules", "rules.toml"],
        "`fake.csv`: the file looks like a Parquet file: give `--input-format parquet`",
    );
    std::fs::write(w.path("cut.parquet"), &parquet[..parquet.len() / 2]).unwrap();
    w.fails(
        &["audit", "cut.parquet", "--rules", "rules.toml"],
        "`cut.parquet`: the file is cut short",
    );
    // An output in a folder that is not there named the temporary file beside it
    // (`.r.md.partial-1234`: No such file or directory); it names the file and its folder.
    w.fails(
        &[
            "audit",
            "raw.csv",
            "--rules",
            "rules.toml",
            "--report",
            "gone/r.md",
        ],
        "`gone/r.md`: cannot be written: its folder `gone` does not exist",
    );
    w.fails(
        &["rules", "draft", "raw.csv", "--out", "gone/r.toml"],
        "`gone/r.toml`: cannot be written: its folder `gone` does not exist",
    );
    // A folder that is not there, or not a bundle, said "No such file or directory (os
    // error 2)" of a manifest.json the user never named.
    w.fails(
        &["verify", "nosuch-dir"],
        "`nosuch-dir`: no such folder (give the folder `build --out` wrote)",
    );
    w.fails(
        &["verify", "full"],
        "`full`: not a bundle: the folder has no manifest.json",
    );
    // Usage errors were the argument parser's five to seven lines (message, tip, usage, a
    // pointer to --help); they are one line as every other error is, with all of that in it.
    w.fails(
        &["audit", "raw.csv", "--memory-budget", "-1"],
        "unexpected argument '-1' found (tip: to pass '-1' as a value, use '-- -1') (usage: \
         panelready audit [OPTIONS] <DATA>); see --help",
    );
    w.fails(
        &["build", "raw.csv"],
        "the following required arguments were not provided: --out <DIR>",
    );
    w.fails(
        &["audit", "raw.csv", "--format", "xml"],
        "invalid value 'xml' for '--format <FORMAT>' [possible values: terminal, md, json, html]",
    );
    w.fails(&["bogus"], "unrecognized subcommand 'bogus'");
    // Help asked for is still the parser's, on stdout, exit 0.
    let help = w.run(&["audit", "--help"]);
    assert_eq!(help.code, 0);
    assert!(
        help.stdout.contains("Usage: panelready audit"),
        "{}",
        help.stdout
    );
    // A folder without a Parquet file in it was "no such file"; one column named both the
    // entity and the period went on to complain that the firm names are not whole numbers.
    std::fs::create_dir(w.path("empty")).unwrap();
    w.fails(
        &["audit", "empty", "--rules", "rules.toml"],
        "`empty`: a folder with no Parquet file",
    );
    w.fails(
        &["audit", "raw.csv", "--entity", "firm", "--period", "firm"],
        "`--period`: `firm` is the entity column too",
    );
    // A demo of billions of firm-years ran until memory ran out.
    w.fails(
        &["demo", "--out", "d", "--firms", "4000000000", "--data-only"],
        "more than 100000000 firm-years",
    );
    assert!(!w.path("d").exists());
}

#[test]
fn tampered_bundles_are_caught_by_verify() {
    let w = Workdir::new();
    w.write("raw.csv", GOOD);
    w.write("rules.toml", KEYS);
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "b"]);
    w.ok(&["verify", "b"]);
    // An edited output: exit 1 naming it.
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    w.write("b/panel.csv", &panel.replace("12", "13"));
    let r = w.run(&["verify", "b"]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(r.stdout.contains("panel.csv"), "{}", r.stdout);
    // A deleted output: exit 1, named as missing (it read "changed since it was written").
    std::fs::remove_file(w.path("b/report.md")).unwrap();
    let r = w.run(&["verify", "b"]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(
        r.stdout.contains("missing from the bundle: report.md"),
        "{}",
        r.stdout
    );
    // A broken manifest, and an edited input: exit 2, one line.
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "c"]);
    w.write("c/manifest.json", "{ not json");
    w.fails(&["verify", "c"], "manifest");
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "d"]);
    w.write("raw.csv", &GOOD.replace("12", "99"));
    w.fails(&["verify", "d"], "changed since the bundle was built");
}

#[test]
fn valid_edge_data_builds_a_correct_bundle() {
    let with_model = "[model]\noutcome = \"y\"\nregressors = [\"x\"]\n";
    let cases: Vec<(&str, String, String)> =
        vec![
        ("single row", "firm,year,x,y\nA,2001,1,2\n".into(), String::new()),
        (
            "single entity",
            "firm,year,x,y\nA,2001,1,2\nA,2002,2,3\nA,2003,4,4\n".into(),
            with_model.into(),
        ),
        (
            "single period",
            "firm,year,x,y\nA,2001,1,2\nB,2001,2,3\nC,2001,4,4\n".into(),
            with_model.into(),
        ),
        (
            "every value identical, with a model",
            (0..40)
                .map(|i| format!("F{},{},1,1\n", i / 4, 2001 + i % 4))
                .fold("firm,year,x,y\n".to_string(), |a, b| a + &b),
            with_model.into(),
        ),
        (
            "collinear regressors",
            (0..40)
                .map(|i| format!("F{},{},{},{},{}\n", i / 4, 2001 + i % 4, i, 2 * i, i % 7))
                .fold("firm,year,x,z,y\n".to_string(), |a, b| a + &b),
            "[model]\noutcome = \"y\"\nregressors = [\"x\", \"z\"]\n".into(),
        ),
        (
            "inf and nan",
            "firm,year,x,y\nA,2001,inf,2\nA,2002,NaN,3\nB,2001,-inf,1\nB,2002,1e308,5\n".into(),
            String::new(),
        ),
        (
            "huge values",
            "firm,year,x,y\nA,2001,1e300,2\nA,2002,-1e300,3\nB,2001,1e-300,1\nB,2002,0,5\n"
                .into(),
            String::new(),
        ),
        (
            "unicode entity ids",
            "firm,year,x,y\nÅland Öy,2001,1,2\nÅland Öy,2002,2,3\n東海,2001,3,1\n東海,2002,4,5\n"
                .into(),
            String::new(),
        ),
        (
            "sql keywords as column names",
            "firm,year,select,from,y\nA,2001,1,2,3\nA,2002,2,3,4\n".into(),
            "[derive.s]\nexpr = '\"select\" + \"from\"'\n".into(),
        ),
        (
            "a window of exactly 1000 periods",
            "firm,year,x,y\nA,1001,1,2\nA,2000,2,3\nB,1500,3,1\nB,1501,4,5\n".into(),
            String::new(),
        ),
        (
            "formula-looking text",
            "firm,year,note,y\nA,2001,=cmd(),2\nA,2002,+1,3\n".into(),
            String::new(),
        ),
    ];
    for (name, data, rules) in cases {
        let w = Workdir::new();
        w.write("raw.csv", &data);
        w.write("rules.toml", &format!("{KEYS}{rules}"));
        let r = w.run(&["build", "raw.csv", "--rules", "rules.toml", "--out", "b"]);
        assert_eq!(r.code, 0, "{name}: {}", r.stderr);
        let manifest: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(w.path("b/manifest.json")).unwrap())
                .unwrap();
        let rows = &manifest["rows"];
        assert_eq!(
            rows["input"].as_u64().unwrap(),
            rows["kept"].as_u64().unwrap() + rows["rejected"].as_u64().unwrap(),
            "{name}"
        );
        assert_eq!(
            rows["input"].as_u64().unwrap(),
            data.lines().count() as u64 - 1,
            "{name}"
        );
        w.ok(&[
            "audit",
            "raw.csv",
            "--rules",
            "rules.toml",
            "--format",
            "json",
        ]);
    }
}

#[test]
fn files_researchers_really_get_are_read() {
    // The same four firm-years as GOOD, written as a European provider would: semicolons,
    // decimal commas, Windows-1252 text; and the plain file gzip-compressed.
    let w = Workdir::new();
    w.write("plain.csv", "firm,year,assets,name\nA,2001,10.5,Müller\nA,2002,12,Müller\nB,2001,5.25,Ørsted\nB,2002,6,Ørsted\n");
    let euro = "firm;year;assets;name\nA;2001;10,5;M\u{fc}ller\nA;2002;12;M\u{fc}ller\nB;2001;5,25;\u{d8}rsted\nB;2002;6;\u{d8}rsted\n";
    let (latin1, _, _) = encoding_rs::WINDOWS_1252.encode(euro);
    std::fs::write(w.path("euro.csv"), &latin1).unwrap();
    w.write("rules.toml", KEYS);
    w.ok(&[
        "build",
        "plain.csv",
        "--rules",
        "rules.toml",
        "--out",
        "plain",
    ]);
    let want = std::fs::read_to_string(w.path("plain/panel.csv")).unwrap();
    // Without the options: the Latin-1 byte is named with its row and column.
    w.fails(
        &[
            "audit",
            "euro.csv",
            "--rules",
            "rules.toml",
            "--delimiter",
            ";",
        ],
        "row 1, column 4",
    );
    w.ok(&[
        "build",
        "euro.csv",
        "--rules",
        "rules.toml",
        "--out",
        "euro",
        "--delimiter",
        ";",
        "--decimal-comma",
        "--encoding",
        "latin-1",
    ]);
    assert_eq!(
        std::fs::read_to_string(w.path("euro/panel.csv")).unwrap(),
        want
    );
    // The same from `[input]` in the rules file; and verify rebuilds it bit for bit.
    w.write(
        "euro.toml",
        &format!(
            "{KEYS}[input]\ndelimiter = \";\"\ndecimal_comma = true\nencoding = \"windows-1252\"\n"
        ),
    );
    w.ok(&[
        "build",
        "euro.csv",
        "--rules",
        "euro.toml",
        "--out",
        "euro2",
    ]);
    assert_eq!(
        std::fs::read_to_string(w.path("euro2/panel.csv")).unwrap(),
        want
    );
    w.ok(&["verify", "euro2"]);
    // A decimal comma needs another delimiter; a delimiter is one character.
    w.fails(
        &[
            "audit",
            "plain.csv",
            "--rules",
            "rules.toml",
            "--decimal-comma",
        ],
        "decimal_comma",
    );
    w.fails(
        &[
            "audit",
            "plain.csv",
            "--rules",
            "rules.toml",
            "--delimiter",
            ";;",
        ],
        "--delimiter",
    );
    w.fails(
        &[
            "audit",
            "plain.csv",
            "--rules",
            "rules.toml",
            "--encoding",
            "ebcdic",
        ],
        "ebcdic",
    );
    // gzip-compressed CSV, recognised by its extension and its first bytes.
    let status = std::process::Command::new("gzip")
        .args(["-k", "-n"])
        .arg(w.path("plain.csv"))
        .status()
        .expect("gzip is needed for this test");
    assert!(status.success());
    w.ok(&[
        "build",
        "plain.csv.gz",
        "--rules",
        "rules.toml",
        "--out",
        "gz",
    ]);
    assert_eq!(
        std::fs::read_to_string(w.path("gz/panel.csv")).unwrap(),
        want
    );
    // A compressed file's rows are checked against its header as a plain file's are.
    w.write("short.csv", "firm,year,assets\nA,2001,1\nA,2002\n");
    let status = std::process::Command::new("gzip")
        .args(["-k", "-n"])
        .arg(w.path("short.csv"))
        .status()
        .expect("gzip is needed for this test");
    assert!(status.success());
    w.fails(
        &["audit", "short.csv.gz", "--rules", "rules.toml"],
        "`short.csv.gz`, row 2: 2 fields where the header has 3",
    );
    // A row with more fields, which the engine refuses, was named as "row 0, byte 0x8b is
    // not UTF-8": the compressed bytes were read as the text.
    w.write("long.csv", "firm,year,assets\nA,2001,1\nA,2002,1,5\n");
    let status = std::process::Command::new("gzip")
        .args(["-k", "-n"])
        .arg(w.path("long.csv"))
        .status()
        .expect("gzip is needed for this test");
    assert!(status.success());
    w.fails(
        &["audit", "long.csv.gz", "--rules", "rules.toml"],
        "`long.csv.gz`, row 2: 4 fields where the header has 3",
    );
}

/// The engine's Parquet decode setting, which the binary sets unless the user has: a value
/// that is not a whole number stops the run with one line naming the variable, exit 2 and no
/// bundle (the engine itself would stop with an internal error, exit 3); a whole number is
/// kept and the run reads Parquet as usual.
#[test]
fn decode_setting_from_the_environment_must_be_a_whole_number() {
    const VAR: &str = "POLARS_PARQUET_DECODE_TARGET_VALUES_PER_THREAD";
    let w = Workdir::new();
    w.write("raw.csv", GOOD);
    w.write("rules.toml", KEYS);
    w.ok(&[
        "build",
        "raw.csv",
        "--rules",
        "rules.toml",
        "--out",
        "first",
    ]);
    let parquet = [
        "build",
        "first/panel.parquet",
        "--rules",
        "rules.toml",
        "--out",
        "out",
    ];
    for value in ["abc", "-5", ""] {
        w.fails_with(&parquet, &[(VAR, value)], VAR);
        assert!(!w.path("out").exists(), "{value:?}: a bundle was left");
    }
    let r = w.run_with(&parquet, &[(VAR, "1")]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let manifest = std::fs::read_to_string(w.path("out/manifest.json")).unwrap();
    let manifest: serde_json::Value = serde_json::from_str(&manifest).unwrap();
    assert_eq!(manifest["rows"]["kept"], 4);
}

#[test]
fn long_lags_read_exactly_k_periods_back() {
    // Two firms over 2001–2030, firm B without 2015, x = 10 × year + the firm's number: the
    // value k periods back is x − 10k where that period is present, else missing (worked by
    // hand). Lags of up to 8 periods read the rows nearby, longer ones a join: both are held
    // to the same rule.
    let mut data = String::from("firm,year,x\n");
    for (firm, number) in [("A", 1), ("B", 2)] {
        for year in 2001..=2030 {
            if firm == "B" && year == 2015 {
                continue;
            }
            data += &format!("{firm},{year},{}\n", 10 * year + number);
        }
    }
    let w = Workdir::new();
    w.write("raw.csv", &data);
    let ks = [1i64, 8, 9, 12, 29, 30, -3, -10];
    let mut rules = KEYS.to_string();
    for k in ks {
        let call = if k > 0 {
            format!("lag(x, {k})")
        } else {
            format!("lead(x, {})", -k)
        };
        rules += &format!("[derive.s{}]\nexpr = \"{call}\"\n", k + 100);
    }
    w.write("rules.toml", &rules);
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
    let panel = std::fs::read_to_string(w.path("out/panel.csv")).unwrap();
    let mut lines = panel.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let mut checked = 0;
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        let firm = cells[at("firm")];
        let year: i64 = cells[at("year")].parse().unwrap();
        let x: i64 = cells[at("x")].parse().unwrap();
        for k in ks {
            let back = year - k;
            let present = (2001..=2030).contains(&back) && !(firm == "B" && back == 2015);
            let want = if present {
                (x - 10 * k).to_string()
            } else {
                String::new()
            };
            let got = cells[at(&format!("s{}", k + 100))].trim_end_matches(".0");
            assert_eq!(got, want, "{firm} {year}, k = {k}");
            checked += 1;
        }
    }
    assert_eq!(checked, 59 * ks.len());
}

#[test]
fn parquet_columns_of_every_kind_are_read_or_named() {
    use polars::prelude::*;
    let w = Workdir::new();
    let write = |name: &str, extra: Column| four_rows_with(&w, name, extra);
    // Dates (days since 1970-01-01) and times of day as a date-time: read, kept as they are in
    // panel.parquet, written in panel.csv as ISO 8601 text (worked by hand: 2002-01-01 is day
    // 32 × 365 + 8 leap days = 11688, so day 11687 is 2001-12-31). Before, panel.csv could
    // not be written and `build` stopped with the engine's message. Decimals are read as
    // floating-point numbers, noted, so that the checks examine them (they were passed by as
    // text): -2.50 is -2.5, a double in panel.parquet, and the mean of 1.25, -2.5, 0 and 10 is
    // 2.1875.
    let days = Column::new("closed".into(), [11322i32, 11687, 11322, 0])
        .cast(&DataType::Date)
        .unwrap();
    let stamp = Column::new("filed".into(), [0i64, 86_400_000_000, 0, 0])
        .cast(&DataType::Datetime(TimeUnit::Microseconds, None))
        .unwrap();
    let price = Column::new("price".into(), [1.25f64, -2.5, 0.0, 10.0])
        .cast(&DataType::Decimal(10, 2))
        .unwrap();
    for (name, c) in [
        ("dates.parquet", days),
        ("stamps.parquet", stamp),
        ("decimals.parquet", price),
    ] {
        write(name, c);
        let out = format!("out_{name}");
        w.ok(&[
            "build", name, "--entity", "firm", "--period", "year", "--out", &out,
        ]);
        let csv = std::fs::read_to_string(w.path(&format!("{out}/panel.csv"))).unwrap();
        let second: Vec<&str> = csv.lines().nth(2).unwrap().split(',').collect();
        let want = match name {
            "dates.parquet" => "2001-12-31",
            "stamps.parquet" => "1970-01-02 00:00:00.000000",
            _ => "-2.5",
        };
        assert_eq!(second[4], want, "{name}: {csv}");
        if name == "decimals.parquet" {
            let report = w.json(&format!("{out}/report.json"));
            let price = report["variation"]
                .as_array()
                .unwrap()
                .iter()
                .find(|l| l["variable"] == "price")
                .unwrap()
                .clone();
            assert!(
                (price["mean"].as_f64().unwrap() - 2.1875).abs() < 1e-12,
                "{price}"
            );
            let notes = report["input"]["notes"].as_array().unwrap();
            assert!(
                notes[0]
                    .as_str()
                    .unwrap()
                    .contains("`price`: decimal numbers (precision 10"),
                "{notes:?}"
            );
        }
        let back = ParquetReader::new(
            std::fs::File::open(w.path(&format!("{out}/panel.parquet"))).unwrap(),
        )
        .finish()
        .unwrap();
        let original = ParquetReader::new(std::fs::File::open(w.path(name)).unwrap())
            .finish()
            .unwrap();
        let kept = match name {
            "decimals.parquet" => DataType::Float64,
            _ => original.dtypes()[3].clone(),
        };
        assert_eq!(back.dtypes()[4], kept, "{name}");
    }
    // Lists, records and raw bytes are no panel's columns: one line naming the file and column.
    let kinds = [
        (
            "lists.parquet",
            Column::new(
                "tags".into(),
                [
                    Series::new("".into(), [1i64]),
                    Series::new("".into(), [2i64]),
                    Series::new("".into(), [3i64]),
                    Series::new("".into(), [4i64]),
                ],
            ),
            "lists",
        ),
        (
            "bytes.parquet",
            Column::new("blob".into(), [b"a".as_ref(), b"b", b"c", b"d"]),
            "raw bytes",
        ),
    ];
    for (name, c, kind) in kinds {
        let column = c.name().to_string();
        write(name, c);
        for cmd in ["audit", "build"] {
            let mut args = vec![cmd, name, "--entity", "firm", "--period", "year"];
            if cmd == "build" {
                args.extend(["--out", "never"]);
            }
            let line = w.fails(&args, kind);
            assert!(
                line.contains(name) && line.contains(&format!("`{column}`")),
                "{line}"
            );
        }
        assert!(!w.path("never").exists());
    }
    // An unsigned period beyond the largest signed 64-bit integer was read as missing and its
    // row put in the ledger as "period missing"; now it is named.
    let mut df = df!(
        "firm" => ["A", "A"],
        "year" => [u64::MAX, 2002],
        "x" => [1.0, 2.0],
    )
    .unwrap();
    let f = std::fs::File::create(w.path("wide.parquet")).unwrap();
    ParquetWriter::new(f).finish(&mut df).unwrap();
    let line = w.fails(
        &[
            "audit",
            "wide.parquet",
            "--entity",
            "firm",
            "--period",
            "year",
        ],
        "row 1",
    );
    assert!(line.contains("18446744073709551615"), "{line}");
}

#[test]
fn a_hand_over_with_no_row_left_fails_the_verdict() {
    // A balancing window outside the data and an accounting rule every row breaks each leave
    // nothing: the verdict passed such a bundle, every other line judging the panel as read.
    for (name, rules) in [
        ("window", "[clean]\nbalance = { window = [1990, 1995] }\n"),
        (
            "rule",
            "[[rule]]\nname = \"huge\"\nexpr = \"assets > 100\"\naction = \"drop\"\n",
        ),
    ] {
        let w = Workdir::new();
        w.write("raw.csv", GOOD);
        w.write("rules.toml", &format!("{KEYS}{rules}"));
        w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
        let report = w.json("out/report.json");
        let verdict = &report["verdict"];
        assert_eq!(verdict["overall"], "fail", "{name}: {verdict}");
        let line = verdict["checks"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["check"] == "Cleaned panel")
            .unwrap_or_else(|| panic!("{name}: {verdict}"));
        assert!(
            line["reason"]
                .as_str()
                .unwrap()
                .contains("no row is left of the 4 read"),
            "{name}: {line}"
        );
    }
    // A panel with rows left has no such line.
    let w = Workdir::new();
    w.write("raw.csv", GOOD);
    w.write("rules.toml", KEYS);
    let r = w.ok(&[
        "audit",
        "raw.csv",
        "--rules",
        "rules.toml",
        "--format",
        "json",
    ]);
    assert!(!r.stdout.contains("Cleaned panel"), "{}", r.stdout);
}

#[test]
fn derived_numbers_that_are_not_finite_are_missing_with_their_reason() {
    // IEEE 754 (common practice): ln(0) is −∞, ln of a negative number is NaN, 1 / 0 is +∞.
    // Such a derived value was written into the panel and counted "with a value"; now it is
    // missing, with its own reason, and a lag of it is missing too.
    let w = Workdir::new();
    w.write(
        "raw.csv",
        "firm,year,x,y\nA,2001,1,2\nA,2002,2,3\nB,2001,3,5\nB,2002,4,1\n",
    );
    w.write(
        "rules.toml",
        &format!(
            "{KEYS}[derive.z]\nexpr = \"ln(x - 2)\"\n[derive.w]\nexpr = \"x / (y - 5)\"\n\
             [derive.zl]\nexpr = \"lag(z, 1)\"\n"
        ),
    );
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
    let panel = std::fs::read_to_string(w.path("out/panel.csv")).unwrap();
    let rows: Vec<Vec<&str>> = panel
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    // Columns: source_row, firm, year, x, y, z, w, zl.
    let z: Vec<&str> = rows.iter().map(|r| r[5]).collect();
    let wv: Vec<&str> = rows.iter().map(|r| r[6]).collect();
    let zl: Vec<&str> = rows.iter().map(|r| r[7]).collect();
    assert_eq!(z, ["", "", "0.0", "0.6931471805599453"], "{panel}");
    assert_eq!(wv, ["-0.3333333333333333", "-1.0", "", "-1.0"], "{panel}");
    assert_eq!(zl, ["", "", "", "0.0"], "{panel}");
    let report = w.json("out/report.json");
    let reasons = |i: usize| -> Vec<(String, u64)> {
        report["derived"][i]["null_reasons"]
            .as_array()
            .unwrap()
            .iter()
            .map(|r| {
                (
                    r["reason"].as_str().unwrap().to_string(),
                    r["rows"].as_u64().unwrap(),
                )
            })
            .collect()
    };
    let finite = |r: &(String, u64)| r.0.starts_with("not a finite number");
    assert_eq!(reasons(0).iter().find(|r| finite(r)).map(|r| r.1), Some(2));
    assert_eq!(reasons(1).iter().find(|r| finite(r)).map(|r| r.1), Some(1));
    // The lag's nulls are its missing input, not a reason of its own.
    assert!(!reasons(2).iter().any(finite), "{:?}", reasons(2));
    assert_eq!(report["derived"][0]["non_null"], 2);
}

/// A CSV file written by a program that marks a missing number with a word or a sign (`NA`
/// or `.` from statistics programs, `#N/A` from a spreadsheet): the column is numbers with
/// those cells missing, not text that every check passes by, and the input notes say so. Worked by hand:
/// `sales` 1.5, 3, 4.5, 2, 3 and one `NA` — mean 14 / 5 = 2.8, one missing of six; `staff`
/// whole numbers with a `.` and a `#N/A`; `code` text holding `NA` (a region code) stays text.
#[test]
fn numbers_marked_missing_by_other_programs_are_numbers() {
    let (report, _) = audit_csv(
        "firm,year,sales,staff,code\nA,1,1.5,10,NA\nA,2,NA,.,EU\nB,1,3,12,NA\nB,2,4.5,#N/A,EU\nC,1,2,7,AS\nC,2,3,8,AS\n",
    );
    let sales = &report["variation"][0];
    assert_eq!(sales["variable"], "sales");
    assert_eq!(sales["n"], 5);
    assert!(
        (sales["mean"].as_f64().unwrap() - 2.8).abs() < 1e-12,
        "{sales}"
    );
    let missing = report["missing"].as_array().unwrap();
    let of = |v: &str| missing.iter().find(|m| m["variable"] == v).unwrap()["missing"].clone();
    assert_eq!(of("sales"), 1);
    assert_eq!(of("staff"), 2);
    assert_eq!(of("code"), 0);
    let notes = report["input"]["notes"].as_array().unwrap();
    assert_eq!(notes.len(), 2, "{notes:?}");
    assert!(
        notes[0].as_str().unwrap().contains("`sales`: 1 cell "),
        "{notes:?}"
    );
    assert!(
        notes[1].as_str().unwrap().contains("(`.` 1, `#N/A` 1)"),
        "{notes:?}"
    );
    // `code` is text still: no variation figures for it.
    let code = report["variation"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["variable"] == "code")
        .unwrap();
    assert!(code["mean"].is_null(), "{code}");
}

/// Numbers as a spreadsheet exports them — thousands separators inside quotes, a negative
/// amount in parentheses — are numbers, noted in the input notes; they were text, and the
/// report said "No numeric variables". Worked by hand: sales mean (1,234.5 + 2,000 + 950 +
/// 1,100.25) / 4 = 1,321.1875, cost mean (10 + 11 − 12 + 13) / 4 = 5.5.
#[test]
fn numbers_written_for_people_are_numbers() {
    let (report, _) = audit_csv(
        "firm,year,sales,cost\nA,2001,\"1,234.5\",10\nA,2002,\"2,000\",11\nB,2001,950,(12)\nB,2002,\"1,100.25\",13\n",
    );
    let mean = |v: &str| {
        report["variation"]
            .as_array()
            .unwrap()
            .iter()
            .find(|l| l["variable"] == v)
            .unwrap()["mean"]
            .as_f64()
            .unwrap()
    };
    assert!((mean("sales") - 1321.1875).abs() < 1e-12);
    assert!((mean("cost") - 5.5).abs() < 1e-12);
    let notes = report["input"]["notes"].as_array().unwrap();
    assert_eq!(notes.len(), 2, "{notes:?}");
    assert!(notes[0]
        .as_str()
        .unwrap()
        .contains("3 cells with thousands separators"));
    assert!(notes[1]
        .as_str()
        .unwrap()
        .contains("1 cell in parentheses taken as negative"));
    // A percent sign keeps a column text, and the note names the cell that does.
    let (report, _) = audit_csv("firm,year,margin\nA,2001,12\nA,2002,13%\nB,2001,14\nB,2002,15\n");
    assert_eq!(
        report["input"]["notes"][0],
        "column `margin` stays text: most of its first values are numbers, but data row 2 \
         holds `13%`, which is not one"
    );
}

/// Digits grouped by spaces or apostrophes, as European exports write them, are numbers; they
/// were text, silently: the report said "No numeric variables". A column of amounts each with
/// a currency sign stays text, now with a note that names its first cell. Worked by hand:
/// assets mean (1,234.5 + 2,000 + 3,000 + 10,000) / 4 = 4,058.625.
#[test]
fn digits_grouped_by_spaces_are_numbers_and_signed_amounts_are_noted() {
    let (report, _) = audit_csv(
        "firm,year,assets,price\nA,2001,1 234.5,$5\nA,2002,2\u{a0}000,$6\nB,2001,3'000,$7\nB,2002,10 000,$8\n",
    );
    let assets = &report["variation"][0];
    assert_eq!(assets["variable"], "assets");
    assert!(
        (assets["mean"].as_f64().unwrap() - 4058.625).abs() < 1e-12,
        "{assets}"
    );
    assert_eq!(
        report["input"]["notes"],
        serde_json::json!([
            "column `assets`: 4 cells with thousands separators (the first `1 234.5`), the \
             column as numbers",
            "column `price` stays text: its values are numbers written with a currency or \
             percent sign (data row 1 holds `$5`); take the sign out in the file (and say in a \
             label what the unit is) to use them as numbers"
        ])
    );
}

/// Years written with two digits (98, 99, 00, 01) were taken as periods 0 to 99 without a
/// word: 99 and 00 are then 99 periods apart and a lag across them is missing. A period
/// column whose name says years, holding 0 to 99 only with some below 50 and some above,
/// gets a note; years 1 and 2 of a study, and a running count of quarters in a column named
/// `quarter`, do not. Worked by hand.
#[test]
fn two_digit_years_are_noted() {
    let (report, _) = audit_csv("firm,year,x\nA,98,1\nA,99,2\nA,0,3\nA,1,4\nB,99,5\nB,0,6\n");
    assert_eq!(
        report["input"]["notes"],
        serde_json::json!([
            "period column `year` holds 0 to 99: years written with two digits? Write them in \
             full (2001), or `99` and `00` are 99 periods apart, not one, and every lag across \
             them is missing"
        ])
    );
    let (report, _) = audit_csv("firm,year,x\nA,1,1\nA,2,2\nB,1,3\nB,2,4\n");
    assert!(report["input"]["notes"].is_null(), "{}", report["input"]);
    let w = Workdir::new();
    w.write("q.csv", "firm,quarter,x\nA,1,1\nA,2,2\nB,1,3\nB,50,4\n");
    let r = w.ok(&[
        "audit", "q.csv", "--entity", "firm", "--period", "quarter", "--format", "json",
    ]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert!(report["input"]["notes"].is_null(), "{}", report["input"]);
}

/// A number beyond the floats' range beside a marker for a missing one kept the column text
/// (each alone was read); now it is numbers, the infinity and the marker missing and noted.
/// Worked by hand: x has 2 and 3 left, mean 2.5.
#[test]
fn a_number_out_of_range_beside_a_marker_is_a_number() {
    let (report, _) = audit_csv("firm,year,x\nA,1,1e400\nA,2,nan\nB,1,2\nB,2,3\n");
    let x = &report["variation"][0];
    assert_eq!(x["variable"], "x");
    assert_eq!(x["n"], 2, "{x}");
    assert_eq!(x["mean"].as_f64(), Some(2.5), "{x}");
    let notes = report["input"]["notes"].to_string();
    assert!(
        notes.contains("`nan` 1") && notes.contains("infinity 1"),
        "{notes}"
    );
}

/// A check that examined nothing says so: the keys of a file of blank rows only were said
/// to be "present and unique", and a single period's missing values to have "no sharp change
/// between periods". Worked by hand.
#[test]
fn what_was_not_examined_is_not_passed() {
    let status = |report: &serde_json::Value, check: &str| {
        let checks = report["verdict"]["checks"].as_array().unwrap();
        let line = checks.iter().find(|c| c["check"] == check).unwrap();
        (
            line["status"].as_str().unwrap().to_string(),
            line["reason"].as_str().unwrap().to_string(),
        )
    };
    let (blank, _) = audit_csv("firm,year,x\n,,\n,,\n");
    assert_eq!(
        status(&blank, "Keys"),
        (
            "not checked".into(),
            "no key to check: the 2 rows read were all blank".into()
        )
    );
    let (one, _) = audit_csv("firm,year,x\nA,2001,1\nB,2001,2\nC,2001,5\n");
    let (s, reason) = status(&one, "Missing values");
    assert_eq!(s, "pass");
    assert!(reason.contains("a single period, so no change"), "{reason}");
    let (two, _) = audit_csv("firm,year,x\nA,2001,1\nA,2002,2\nB,2001,5\n");
    assert_eq!(status(&two, "Keys").0, "pass");
    let (_, reason) = status(&two, "Missing values");
    assert_eq!(reason, "no sharp change in coverage between periods");
}

/// A delimiter at the end of every line (an export's habit) makes a last column without a
/// name or a value: it was a variable called `` in every check, and two of them stopped the
/// run as a repeated name. Left out and noted. Worked by hand.
#[test]
fn a_delimiter_at_the_end_of_each_line_adds_no_column() {
    for csv in [
        "firm,year,x,\nA,2001,1,\nA,2002,2,\nB,2001,3,\n",
        "firm,year,x,,\nA,2001,1,,\nA,2002,2,,\nB,2001,3,,\n",
        // A row without the delimiter at its end lacks only the field without a name (its
        // `x` missing, it is split and counted; it must not be taken for a short row).
        "firm,year,x,\nA,2001,1,\nA,2002,\nB,2001,3,\n",
    ] {
        let (report, _) = audit_csv(csv);
        let variables: Vec<&str> = report["variation"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v["variable"].as_str().unwrap())
            .collect();
        assert_eq!(variables, ["x"], "{csv}");
        assert_eq!(report["input"]["columns"], 3);
        let notes = report["input"]["notes"].to_string();
        assert!(
            notes.contains("column 4 of the header has no name and no value"),
            "{notes}"
        );
    }
}

/// `audit --format json` of the CSV text `csv` (keys `firm` and `year`) in a fresh folder: the
/// report, and the text it was parsed from.
fn audit_csv(csv: &str) -> (serde_json::Value, String) {
    let w = Workdir::new();
    w.write("raw.csv", csv);
    let r = w.ok(&[
        "audit", "raw.csv", "--entity", "firm", "--period", "year", "--format", "json",
    ]);
    (serde_json::from_str(&r.stdout).unwrap(), r.stdout)
}

/// A quoted CSV header name holding a doubled quote is that name with one quote (RFC 4180:
/// `"net ""adj"" income"` is `net "adj" income`): a rule names it the same way SQL quotes an
/// identifier, the report calls it by its name, and panel.csv writes it quoted again. The
/// engine had kept the quote doubled, so no rule could name the column. Worked by hand: ratio
/// = income / assets on four rows, mean (1/10 + 2/11 + 3/12 + 4/13) / 4. Two header names
/// written alike are a repeated column, named with its one quote.
#[test]
fn a_header_name_with_a_quote_is_read_as_written() {
    let w = Workdir::new();
    w.write(
        "p.csv",
        "firm,year,\"net \"\"adj\"\" income\",assets\nA,2001,1,10\nA,2002,2,11\nB,2001,3,12\nB,2002,4,13\n",
    );
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n\n\
         [derive.ratio]\nexpr = '\"net \"\"adj\"\" income\" / assets'\n",
    );
    let r = w.ok(&["audit", "p.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let variation = report["variation"].as_array().unwrap();
    assert_eq!(variation[0]["variable"], "net \"adj\" income");
    let ratio = variation.iter().find(|v| v["variable"] == "ratio").unwrap();
    let expected = (1.0 / 10.0 + 2.0 / 11.0 + 3.0 / 12.0 + 4.0 / 13.0) / 4.0;
    assert!(
        (ratio["mean"].as_f64().unwrap() - expected).abs() < 1e-12,
        "{ratio}"
    );
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert!(
        panel.starts_with("source_row,firm,year,\"net \"\"adj\"\" income\",assets,ratio\n"),
        "{panel}"
    );
    w.write("twice.csv", "firm,year,\"a\"\"b\",\"a\"\"b\"\nA,2001,1,2\n");
    w.fails(
        &["audit", "twice.csv", "--entity", "firm", "--period", "year"],
        "a\"b",
    );
}

/// Entity names that are one name but for surrounding spaces or letter case are counted and
/// shown in the keys section, and the verdict's Keys line warns (`[verdict] alike_entities`
/// sets its level); the names are kept as they are. Worked by hand: `K1` / `k1 ` and ` Zed` /
/// `ZED` / `zed` are two groups; `B` stands alone.
#[test]
fn entity_names_alike_but_for_spaces_or_case_are_shown() {
    let csv = "firm,year,x\nK1,2001,1\nk1 ,2002,2\nB,2001,3\nB,2002,4\n Zed,2001,5\nzed,2002,6\nZED,2003,7\n";
    let (report, _) = audit_csv(csv);
    assert_eq!(report["panel"]["entities"], 6);
    assert_eq!(report["keys"]["alike_entities"], 2);
    assert_eq!(
        report["keys"]["alike_examples"],
        serde_json::json!([["K1", "k1 "], [" Zed", "ZED", "zed"]])
    );
    let keys = |report: &serde_json::Value| {
        report["verdict"]["checks"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["check"] == "Keys")
            .unwrap()
            .clone()
    };
    let line = keys(&report);
    assert_eq!(line["status"], "warn", "{line}");
    assert!(line["reason"]
        .as_str()
        .unwrap()
        .contains("2 groups of entity names alike"));
    let w = Workdir::new();
    w.write("raw.csv", csv);
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[verdict]\nalike_entities = \"pass\"\n",
    );
    let r = w.ok(&["audit", "raw.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(keys(&report)["status"], "pass");
    // Names that differ otherwise are not alike.
    let (report, _) = audit_csv("firm,year,x\nK1,2001,1\nK1,2002,2\nK2,2001,3\nK2,2002,4\n");
    assert_eq!(report["keys"]["alike_entities"], 0);
    assert_eq!(keys(&report)["status"], "pass");
    // Ids that lost their leading zeros in part of the file (a spreadsheet read them as
    // numbers) were two firms each, unsaid. Worked by hand: `007` / `7` and `0100` / `100`
    // are two groups; `70` and `10` are other firms; `0Q` is not an id of digits, so not `Q`.
    let (report, _) = audit_csv(
        "firm,year,x\n007,2001,1\n7,2002,2\n70,2001,3\n0100,2001,4\n100,2002,5\n10,2001,6\n\
         0Q,2001,7\nQ,2002,8\n",
    );
    assert_eq!(report["keys"]["alike_entities"], 2);
    assert_eq!(
        report["keys"]["alike_examples"],
        serde_json::json!([["0100", "100"], ["007", "7"]])
    );
}

/// A column named by the command line or a rule that the file has only with spaces around it
/// or in other letter case is named in the error beside the one asked for (names still match
/// exactly).
#[test]
fn a_name_the_file_has_but_for_spaces_or_case_is_pointed_to() {
    let w = Workdir::new();
    w.write("spaces.csv", " firm,year,sales \nA,2001,1\nA,2002,2\n");
    w.fails(
        &[
            "audit",
            "spaces.csv",
            "--entity",
            "firm",
            "--period",
            "year",
        ],
        "no column `firm` (the entity column; the file has ` firm`, with spaces around it)",
    );
    w.write("case.csv", "firm,year,Sales\nA,2001,1\nA,2002,2\n");
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[derive.double]\nexpr = \"sales * 2\"\n",
    );
    w.fails(
        &["audit", "case.csv", "--rules", "r.toml"],
        "unknown column `sales` (the file has `Sales`: names match exactly, letter case included)",
    );
    // Nothing near: the message as before.
    w.write("other.csv", "firm,year,turnover\nA,2001,1\nA,2002,2\n");
    let line = w.fails(
        &["audit", "other.csv", "--rules", "r.toml"],
        "unknown column `sales`",
    );
    assert!(!line.contains("the file has"), "{line}");
    // A library ratio left out for an input the file has in other case says so.
    w.write(
        "lib.csv",
        "firm,year,Net_Income,total_assets\nA,2001,1,10\nA,2002,2,11\n",
    );
    w.write(
        "lib.toml",
        "include = [\"standard\"]\n[panel]\nentity = \"firm\"\nperiod = \"year\"\n",
    );
    let r = w.ok(&[
        "audit", "lib.csv", "--rules", "lib.toml", "--format", "json",
    ]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let skipped = report["skipped"].as_array().unwrap();
    let roa = skipped.iter().find(|s| s["name"] == "roa").unwrap();
    assert_eq!(roa["missing"], "net_income");
    assert_eq!(
        roa["near"],
        "the file has `Net_Income`: names match exactly, letter case included"
    );
    let leverage = skipped.iter().find(|s| s["name"] == "leverage").unwrap();
    assert!(leverage.get("near").is_none(), "{leverage}");
    // A joined file's columns too: `on` and `columns` name what it has in other case.
    w.write("rates.csv", "Year,CPI\n2001,1.5\n2002,1.6\n");
    for (join, want) in [
        (
            "on = [\"year\"]",
            "no column `year` (named in `on` of its [[join]] (after `rename`); the file has \
             `Year`: names match exactly, letter case included)",
        ),
        (
            "on = [\"Year\"]\ncolumns = [\"cpi\"]",
            "no column `cpi` (named in `columns` of its [[join]]; the file has `CPI`",
        ),
    ] {
        w.write(
            "join.toml",
            &format!("{KEYS}\n[[join]]\nfile = \"rates.csv\"\n{join}\n"),
        );
        w.fails(&["audit", "raw.csv", "--rules", "join.toml"], want);
    }
}

#[test]
fn names_with_pipes_and_markup_keep_the_tables_whole() {
    // Column and entity names as exports can make them: a `|`, which splits a cell of a
    // Markdown table even inside backticks (GitHub's table syntax, common practice), and
    // HTML, which the page must show as text. Every row of every Markdown table keeps its
    // header's number of cell separators (escaped pipes `\|` not counted); the page holds no
    // unescaped tag from the data.
    let w = Workdir::new();
    let mut csv = String::from("firm,year,<script>x</script>,a|b\n");
    for f in 0..6 {
        for y in 2001..2005 {
            csv.push_str(&format!(
                "<b>F{f}</b>|q,{y},{},{}\n",
                f * y % 7,
                (f + y) % 5
            ));
        }
    }
    w.write("p.csv", &csv);
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[derive.xy]\nexpr = \"\\\"a|b\\\" * 2\"\n\
         label = \"a | label\"\n",
    );
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "b"]);
    let separators = |line: &str| line.replace("\\|", "").matches('|').count();
    for file in ["report.md", "dictionary.md"] {
        let text = std::fs::read_to_string(w.path("b").join(file)).unwrap();
        let mut header = None;
        for line in text.lines() {
            if !line.starts_with('|') {
                header = None;
                continue;
            }
            let n = separators(line);
            let h = *header.get_or_insert(n);
            assert_eq!(n, h, "{file}: a row split by a pipe: {line}");
        }
        assert!(text.contains("a\\|b"), "{file}");
    }
    let page = std::fs::read_to_string(w.path("b/report.html")).unwrap();
    assert!(!page.contains("<script>x"), "unescaped column name");
    assert!(!page.contains("<b>F"), "unescaped entity name");
    assert!(page.contains("&lt;script&gt;x"), "the name shown as text");
}

#[test]
fn a_model_with_nothing_to_explain_is_not_computable() {
    // An outcome with one value, and an outcome the regressors fit exactly (y = 2 x + 3),
    // left residuals of rounding noise (about 1e-16), which the tests read as findings: the
    // period-effects test said "add period effects" and a slope of 1e-15 "moved materially".
    // Worked by hand: in both, every residual is zero in exact arithmetic.
    let w = Workdir::new();
    let rules = "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[model]\noutcome = \"y\"\n\
                 regressors = [\"x\", \"z\"]\n";
    w.write("rules.toml", rules);
    // y = a + b x: (name, a, b, what the warning says).
    for (name, a, b, why) in [
        ("constant", 5.0, 0.0, "takes a single value"),
        ("exact", 3.0, 2.0, "fit the outcome `y` exactly"),
    ] {
        let mut csv = String::from("firm,year,x,z,y\n");
        for f in 0..30 {
            for t in 0..5 {
                let x = ((f * 7 + t * 3) % 11) as f64 / 10.0;
                let z = ((f * 5 + t * t) % 13) as f64;
                csv.push_str(&format!("F{f},{},{x},{z},{}\n", 2001 + t, a + b * x));
            }
        }
        w.write("p.csv", &csv);
        let report = w.audit_json("p.csv", "rules.toml");
        let model = &report["model"];
        let first = model["warnings"][0].as_str().unwrap_or_default();
        assert!(
            first.starts_with("not computable") && first.contains(why),
            "{name}: {model}"
        );
        assert!(
            model["slopes"].as_array().unwrap().is_empty(),
            "{name}: {model}"
        );
        let tests: usize = model["questions"]
            .as_array()
            .unwrap()
            .iter()
            .map(|q| q["tests"].as_array().unwrap().len())
            .sum();
        assert_eq!(tests, 0, "{name}: {model}");
    }
}

/// A CSV export that kept codes' leading zeros by writing each such cell as a spreadsheet
/// formula for text (`="007"`): the firm `="007"` was a firm of its own beside the `007` of
/// other rows and of a joined file, and a period written so stopped the read. Each such cell
/// now holds the text between its quotes, noted per column. Worked by hand: firms 007 (three
/// years) and 0012; sales 1,234.5, 2,000 and 950 (the fourth `=""`, missing), mean
/// 1,394.8333…; sic stays text (codes with leading zeros); staff joins both firms, 10 on three
/// rows and 20 on one, mean 12.5.
#[test]
fn cells_written_as_spreadsheet_formulas_hold_their_text() {
    let w = Workdir::new();
    w.write(
        "raw.csv",
        "firm,year,sales,sic,name\n=\"007\",=\"2001\",=\"1234.5\",=\"0100\",Alpha\n\
         =\"007\",2002,2000,=\"0100\",Alpha\n007,2003,950,0100,Alpha\n\
         =\"0012\",2001,=\"\",=\"2000\",Beta\n",
    );
    w.write("staff.csv", "firm,staff\n007,10\n=\"0012\",20\n");
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[[join]]\nfile = \"staff.csv\"\non = [\"firm\"]\n",
    );
    let r = w.ok(&["audit", "raw.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(report["panel"]["rows"], 4);
    assert_eq!(report["panel"]["entities"], 2);
    assert_eq!(report["panel"]["first_period"], 2001);
    let line = |v: &str| {
        report["variation"]
            .as_array()
            .unwrap()
            .iter()
            .find(|l| l["variable"] == v)
            .unwrap()
            .clone()
    };
    assert_eq!(line("sales")["n"], 3);
    assert!((line("sales")["mean"].as_f64().unwrap() - 4184.5 / 3.0).abs() < 1e-9);
    assert!(line("sic")["mean"].is_null(), "sic is codes, not amounts");
    assert_eq!(line("staff")["mean"], 12.5);
    assert_eq!(report["joins"][0]["panel_rows_unmatched"], 0);
    let notes = report["input"]["notes"].as_array().unwrap();
    assert_eq!(
        notes[0],
        "column `firm`: 3 cells written as a spreadsheet formula for text (the first \
         `=\"007\"`, data row 1) read as the text between its quotes"
    );
    assert!(notes.iter().any(|n| {
        n == "joined `staff.csv`, column `firm`: 1 cell written as a spreadsheet \
                     formula for text (the first `=\"0012\"`) read as the text between its quotes"
    }));
    // `rules draft` reads the cells as `build` does: the years written so are a period
    // (it found no period before).
    let draft = w.ok(&["rules", "draft", "raw.csv"]).stdout;
    assert!(draft.contains("period = \"year\""), "{draft}");
}

#[test]
fn whole_numbers_past_64_bits_stop_with_the_values() {
    // A product of two whole-number amounts past the 64-bit integers' largest value,
    // 9,223,372,036,854,775,807 (2^63 - 1, two's complement: from memory), came out wrapped
    // around: 5e9 * 4e9 as 1,553,255,926,290,448,384 in panel.csv, with nothing said. Worked
    // by hand: 5e9 * 4e9 = 2e19, 4e9 squared = 1.6e19, 9e18 + 9e18 = 1.8e19, all past it; the
    // same expressions on the small rows of this file stay within it.
    const BIG: &[u8] = b"firm,year,a,b\nA,2001,5000000000,4000000000\nA,2002,3,4\n\
                         B,2001,9000000000000000000,9000000000000000000\nB,2002,7,8\n";
    let derive = |expr: &str| format!("[derive.x]\nexpr = \"{expr}\"\n");
    let cases = [
        bad(
            "product",
            BIG,
            &derive("a * b"),
            &[
                "derived variable `x`",
                "5000000000 * 4000000000 is beyond",
                "CAST",
            ],
        ),
        bad(
            "power",
            BIG,
            &derive("POWER(b, 2)"),
            &["`x`", "POWER(4000000000, 2) is beyond"],
        ),
        bad(
            "sum inside a ratio",
            BIG,
            &derive("(a + b) / 2"),
            &["`x`", "9000000000000000000 + 9000000000000000000 is beyond"],
        ),
        bad(
            "null condition",
            BIG,
            "[derive.x]\nexpr = \"a\"\nnull_when = [{ when = \"a * b < 0\", reason = \"r\" }]\n",
            &["`x`", "5000000000 * 4000000000"],
        ),
        bad(
            "accounting rule",
            BIG,
            "[[rule]]\nname = \"p\"\nexpr = \"a * b > 0\"\naction = \"flag\"\n",
            &["accounting rule `p`", "5000000000 * 4000000000 is beyond"],
        ),
    ];
    for case in &cases {
        check_bad(case);
    }
    // Within the range the values are the engine's, as before: 3 * 4, 7 * 8, in whole numbers.
    let w = Workdir::new();
    w.write("small.csv", "firm,year,a,b\nA,2001,3,4\nA,2002,7,8\n");
    w.write("rules.toml", &format!("{KEYS}{}", derive("a * b - 1")));
    w.ok(&["build", "small.csv", "--rules", "rules.toml", "--out", "b"]);
    let panel = std::fs::read_to_string(w.path("b/panel.csv")).unwrap();
    assert!(
        panel.ends_with("1,A,2001,3,4,11\n2,A,2002,7,8,55\n"),
        "{panel}"
    );
}

#[test]
fn corrections_to_dates_and_times_take_the_form_panel_csv_writes() {
    // A correction to a Parquet file's date-and-time column went through the engine's cast
    // of text, which took `2002-03-05T10:30:00` alone: not the `2002-03-05 10:30:00.000000`
    // panel.csv writes, nor any value at all for a column with a time zone, with a message
    // that did not say the form. Worked by hand: 2002-03-05 10:30 UTC is 1,015,324,200 s
    // after 1970 (Python's `datetime(2002, 3, 5, 10, 30, tzinfo=timezone.utc).timestamp()`);
    // 11:30 at +01:00 is the same instant.
    use polars::prelude::*;
    let w = Workdir::new();
    let stamp = |unit: TimeUnit, zone: Option<&str>| {
        let zone = zone.map(|z| TimeZone::opt_try_new(Some(z)).unwrap().unwrap());
        Column::new("filed".into(), [0i64, 0, 0, 0])
            .cast(&DataType::Datetime(unit, zone))
            .unwrap()
    };
    for (name, column, value, want) in [
        (
            "naive.parquet",
            stamp(TimeUnit::Microseconds, None),
            "2002-03-05 10:30:00.000000",
            "2002-03-05 10:30:00.000000",
        ),
        (
            "zoned.parquet",
            stamp(TimeUnit::Milliseconds, Some("Europe/Berlin")),
            "2002-03-05T10:30Z",
            "2002-03-05 11:30:00.000+01:00",
        ),
    ] {
        four_rows_with(&w, name, column);
        w.write(
            "rules.toml",
            &format!("{KEYS}[repair]\ncorrections = \"corr.csv\"\n"),
        );
        // Built with `value` for B's 2001, the panel holds `want` there; the value as
        // panel.csv writes it goes back in as the same value.
        for (given, out) in [(value, "out"), (want, "again")] {
            write_correction(&w, given);
            let out = format!("{out}_{name}");
            w.ok(&["build", name, "--rules", "rules.toml", "--out", &out]);
            let panel = std::fs::read_to_string(w.path(&format!("{out}/panel.csv"))).unwrap();
            assert!(
                panel.contains(&format!("\n3,B,2001,3.0,{want}\n")),
                "{name}, {given}: {panel}"
            );
        }
    }
    // Refused, naming the line and the form: a 30 February; no offset for a zoned column.
    for (name, value, form) in [
        ("naive.parquet", "2002-02-30 10:00", "no offset from UTC"),
        (
            "zoned.parquet",
            "2002-03-05 10:30:00",
            "its offset from UTC",
        ),
    ] {
        write_correction(&w, value);
        let r = w.run(&["build", name, "--rules", "rules.toml", "--out", "refused"]);
        assert_eq!(r.code, 2, "{name}: {}", r.stderr);
        for want in ["line 2", "`YYYY-MM-DD HH:MM:SS`", form] {
            assert!(
                r.stderr.contains(want),
                "{name}: lacks {want}: {}",
                r.stderr
            );
        }
        assert!(!w.path("refused").exists());
    }
}

/// corr.csv with one correction: `value` for column `filed` of B's 2001.
fn write_correction(w: &Workdir, value: &str) {
    w.write(
        "corr.csv",
        &format!("entity,period,column,value,reason\nB,2001,filed,{value},fix\n"),
    );
}

/// A Parquet file `name` of four rows — firms A and B, years 2001 and 2002, `x` 1 to 4 —
/// and the column `extra`.
fn four_rows_with(w: &Workdir, name: &str, extra: polars::prelude::Column) {
    use polars::prelude::*;
    let mut df = df!(
        "firm" => ["A", "A", "B", "B"],
        "year" => [2001i64, 2002, 2001, 2002],
        "x" => [1.0, 2.0, 3.0, 4.0],
    )
    .unwrap();
    df.with_column(extra).unwrap();
    let f = std::fs::File::create(w.path(name)).unwrap();
    ParquetWriter::new(f).finish(&mut df).unwrap();
}
