//! Command-line behaviour: keys, gap-aware panel functions, errors and exit codes.

use crate::util::Workdir;

const RULES: &str = r#"
[panel]
entity = "company"
period = "yr"

[columns]
total_assets = "ta_thousands"

[derive.ta_lag]
expr = "lag(total_assets, 1)"

[derive.log_ta]
expr = "ln(total_assets)"
null_when = [{ when = "total_assets <= 0", reason = "assets not positive" }]

[clean]
duplicates = "keep-first"
"#;

// Firm A: 2001, 2002, 2004 (a gap at 2003); firm B: 2002 only; one row with no firm.
const DATA: &str = "company,yr,ta_thousands\nA,2001,10\nA,2002,20\nA,2004,40\nB,2002,-5\n,2003,7\n";

fn panel_rows(w: &Workdir) -> Vec<String> {
    let text = std::fs::read_to_string(w.path("out/panel.csv")).unwrap();
    text.lines().map(str::to_string).collect()
}

#[test]
fn build_maps_columns_and_lags_respect_gaps() {
    let w = Workdir::new();
    w.write("raw.csv", DATA);
    w.write("rules.toml", RULES);
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
    // Hand-worked expectations: the lag at A's first year and across the 2003 gap is empty.
    assert_eq!(
        panel_rows(&w),
        [
            "source_row,company,yr,ta_thousands,log_ta,ta_lag",
            &format!("1,A,2001,10,{},", 10f64.ln()),
            &format!("2,A,2002,20,{},10", 20f64.ln()),
            &format!("3,A,2004,40,{},", 40f64.ln()),
            "4,B,2002,-5,,",
        ]
    );
    let rejected = std::fs::read_to_string(w.path("out/rejected.csv")).unwrap();
    let lines: Vec<&str> = rejected.lines().collect();
    assert_eq!(
        lines[0],
        "source_row,step,reason,related_row,company,yr,ta_thousands"
    );
    assert_eq!(lines[1], "5,missing keys,entity missing,,,2003,7");
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(manifest["rows"]["input"], 5);
    assert_eq!(manifest["rows"]["kept"], 4);
    assert_eq!(manifest["rows"]["rejected"], 1);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/report.json")).unwrap()).unwrap();
    let log_ta = report["derived"]
        .as_array()
        .unwrap()
        .iter()
        .find(|d| d["name"] == "log_ta")
        .unwrap();
    assert_eq!(log_ta["null_reasons"][0]["reason"], "assets not positive");
    assert_eq!(log_ta["null_reasons"][0]["rows"], 1);
}

#[test]
fn keys_from_the_command_line_and_parquet_input() {
    let w = Workdir::new();
    w.write("raw.csv", DATA);
    w.write("rules.toml", RULES);
    w.ok(&["build", "raw.csv", "--rules", "rules.toml", "--out", "out"]);
    let r = w.ok(&[
        "audit",
        "out/panel.parquet",
        "--entity",
        "company",
        "--period",
        "yr",
        "--format",
        "json",
    ]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert_eq!(report["panel"]["rows"], 4);
    assert_eq!(report["panel"]["entities"], 2);
    assert_eq!(report["input"]["format"], "parquet");
}

#[test]
fn rule_errors_exit_2_with_one_line_naming_the_rule() {
    let w = Workdir::new();
    w.write("raw.csv", DATA);
    let cases = [
        (
            "[derive.bad]\nexpr = \"ta_thousands / nosuch\"\n",
            "rule `bad`: unknown column `nosuch`",
        ),
        (
            "[derive.bad]\nexpr = \"ta_thousands / (2\"\n",
            "rule `bad`: syntax error",
        ),
        (
            "[derive.bad]\nexpr = \"wobble(ta_thousands)\"\n",
            "rule `bad`: unknown function `wobble`",
        ),
        (
            "[derive.a]\nexpr = \"b + 1\"\n[derive.b]\nexpr = \"a + 1\"\n",
            "rules `a` -> `b` -> `a`",
        ),
        (
            "[derive.bad]\nexpr = \"lag(ta_thousands, -1)\"\n",
            "rule `bad`: `lag(ta_thousands, -1)`",
        ),
    ];
    for (rules, want) in cases {
        w.write(
            "bad.toml",
            &format!("[panel]\nentity = \"company\"\nperiod = \"yr\"\n{rules}"),
        );
        w.fails(
            &["build", "raw.csv", "--rules", "bad.toml", "--out", "out"],
            want,
        );
        assert!(!w.path("out").exists(), "a failed build left output behind");
        w.fails(&["audit", "raw.csv", "--rules", "bad.toml"], want);
    }
}

#[test]
fn input_errors_name_the_file_row_and_column() {
    let w = Workdir::new();
    w.write("frac.csv", "company,yr,x\nA,2001,1\nA,2001.5,2\n");
    w.fails(
        &["audit", "frac.csv", "--entity", "company", "--period", "yr"],
        "`frac.csv`: period column `yr` must hold integers; row 2 has `2001.5`",
    );
    w.write("text.csv", "company,yr,x\nA,2001,1\nA,FY02,2\n");
    w.fails(
        &["audit", "text.csv", "--entity", "company", "--period", "yr"],
        "row 2 has `FY02`",
    );
    w.fails(
        &["audit", "text.csv", "--entity", "firm", "--period", "yr"],
        "no column `firm`",
    );
    w.fails(
        &["audit", "text.csv", "--period", "yr"],
        "no `entity` column",
    );
    w.fails(
        &["audit", "nothere.csv", "--entity", "a", "--period", "b"],
        "nothere.csv",
    );
    w.write("data.txt", "a,b\n");
    w.fails(
        &["audit", "data.txt", "--entity", "a", "--period", "b"],
        "--input-format",
    );
    w.write("conflict.csv", "company,yr,x\nA,2001,1\nA,2001,2\n");
    w.write("r.toml", "[panel]\nentity = \"company\"\nperiod = \"yr\"\n");
    w.fails(
        &["build", "conflict.csv", "--rules", "r.toml", "--out", "o"],
        "entity `A`, period 2001",
    );
    w.write(
        "r2.toml",
        "[panel]\nentity = \"company\"\nperiod = \"yr\"\n[clean]\nduplicates = \"newest\"\n",
    );
    w.fails(
        &["build", "conflict.csv", "--rules", "r2.toml", "--out", "o"],
        "duplicates = \"newest\"` is not a policy",
    );
    w.write(
        "r3.toml",
        "[panel]\nentity = \"company\"\nperiod = \"yr\"\n[columns]\ntotal_assets = \"ta\"\n",
    );
    w.fails(
        &["audit", "conflict.csv", "--rules", "r3.toml"],
        "no column `ta` (mapped from `total_assets`",
    );
}

#[test]
fn build_refuses_to_overwrite_its_input_or_a_foreign_folder() {
    let w = Workdir::new();
    w.write("data/raw.csv", DATA);
    w.write("rules.toml", RULES);
    w.fails(
        &[
            "build",
            "data/raw.csv",
            "--rules",
            "rules.toml",
            "--out",
            "data",
        ],
        "would overwrite the input",
    );
    w.write("notes/keep.txt", "mine");
    w.fails(
        &[
            "build",
            "data/raw.csv",
            "--rules",
            "rules.toml",
            "--out",
            "notes",
        ],
        "refusing to replace it",
    );
    assert_eq!(
        std::fs::read_to_string(w.path("notes/keep.txt")).unwrap(),
        "mine"
    );
    // A previous bundle is replaced as a whole.
    w.ok(&[
        "build",
        "data/raw.csv",
        "--rules",
        "rules.toml",
        "--out",
        "out",
    ]);
    w.ok(&[
        "build",
        "data/raw.csv",
        "--rules",
        "rules.toml",
        "--out",
        "out",
    ]);
    assert_eq!(
        std::fs::read_to_string(w.path("data/raw.csv")).unwrap(),
        DATA,
        "input modified"
    );
}

#[test]
fn ratios_lists_the_library() {
    let w = Workdir::new();
    let r = w.ok(&["ratios"]);
    for name in [
        "size",
        "leverage",
        "roa",
        "rd_assets",
        "working_capital_assets",
        "interest_cover",
    ] {
        assert!(r.stdout.contains(name), "{name} missing:\n{}", r.stdout);
    }
    assert!(r.stdout.contains("Altman (1968)"));
    let r = w.run(&["frobnicate"]);
    assert_eq!(r.code, 2);
}

#[test]
fn singleton_drops_land_in_the_ledger() {
    // Hand-worked (Correia 2015): under entity + period effects every row of this panel is a
    // singleton sooner or later; with entity effects only, C alone is.
    let w = Workdir::new();
    w.write("p.csv", "f,y,x\nA,1,1\nA,2,2\nB,2,3\nB,3,4\nC,3,5\n");
    for (mode, kept, rejected) in [("\"entity+period\"", 0, 5), ("true", 4, 1), ("false", 5, 0)] {
        w.write(
            "r.toml",
            &format!(
                "[panel]\nentity = \"f\"\nperiod = \"y\"\n[clean]\ndrop_singletons = {mode}\n"
            ),
        );
        w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "out"]);
        let m: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(w.path("out/manifest.json")).unwrap())
                .unwrap();
        assert_eq!(
            (
                m["rows"]["kept"].as_u64().unwrap(),
                m["rows"]["rejected"].as_u64().unwrap()
            ),
            (kept, rejected),
            "{mode}"
        );
        let ledger = std::fs::read_to_string(w.path("out/rejected.csv")).unwrap();
        assert_eq!(
            ledger.matches(",singletons,").count() as u64,
            rejected,
            "{mode}:\n{ledger}"
        );
    }
    w.write(
        "r.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[clean]\ndrop_singletons = \"always\"\n",
    );
    w.fails(
        &["build", "p.csv", "--rules", "r.toml", "--out", "out"],
        "drop_singletons = \"always\"",
    );
}

#[test]
fn accounting_rules_flag_null_and_drop() {
    // Hand-worked: row 2 breaks `positive` (dropped), row 3 breaks `cap` (x set to null).
    let w = Workdir::new();
    w.write(
        "p.csv",
        "f,y,x,cap\nA,1,5,10\nA,2,-1,10\nB,1,50,10\nB,2,7,10\n",
    );
    let rules = "[panel]\nentity = \"f\"\nperiod = \"y\"\n\
        [[rule]]\nname = \"positive\"\nexpr = \"x > 0\"\naction = \"drop\"\n\
        [[rule]]\nname = \"cap\"\nexpr = \"x <= cap\"\naction = \"null\"\ncolumns = [\"x\"]\n\
        [[rule]]\nname = \"small\"\nexpr = \"x < 20\"\n";
    w.write("r.toml", rules);
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "out"]);
    let panel = std::fs::read_to_string(w.path("out/panel.csv")).unwrap();
    assert_eq!(
        panel,
        "source_row,f,y,x,cap\n1,A,1,5,10\n3,B,1,,10\n4,B,2,7,10\n"
    );
    let ledger = std::fs::read_to_string(w.path("out/rejected.csv")).unwrap();
    assert!(
        ledger.contains("2,accounting rules,rule `positive` does not hold: x > 0,,A,2,-1,10"),
        "{ledger}"
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/report.json")).unwrap()).unwrap();
    let broken: Vec<u64> = report["rules"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["violations"].as_u64().unwrap())
        .collect();
    assert_eq!(broken, [1, 1, 1]);
    let dictionary = std::fs::read_to_string(w.path("out/dictionary.md")).unwrap();
    assert!(
        dictionary.contains("set to null where rule `cap` does not hold (1 rows)"),
        "{dictionary}"
    );
    w.write("bad.toml", "[panel]\nentity = \"f\"\nperiod = \"y\"\n[[rule]]\nname = \"r1\"\nexpr = \"x > 0\"\naction = \"delete\"\n");
    w.fails(
        &["audit", "p.csv", "--rules", "bad.toml"],
        "rule `r1`: action `delete`",
    );
}

#[test]
fn verdict_and_fail_on_guard_a_pipeline() {
    let w = Workdir::new();
    // A clean balanced panel passes; a conflicting key fails; a gap warns.
    w.write("ok.csv", "f,y,x\nA,1,1\nA,2,2\nB,1,3\nB,2,5\n");
    w.write("conflict.csv", "f,y,x\nA,1,1\nA,1,2\nB,1,3\nB,2,5\n");
    w.write("gap.csv", "f,y,x\nA,1,1\nA,3,2\nB,1,3\nB,2,5\nB,3,4\n");
    let keys = ["--entity", "f", "--period", "y"];
    let run = |file: &str, level: &str| {
        let mut args = vec!["audit", file, "--fail-on", level];
        args.extend(keys);
        w.run(&args).code
    };
    assert_eq!((run("ok.csv", "warn"), run("ok.csv", "fail")), (0, 0));
    assert_eq!((run("gap.csv", "warn"), run("gap.csv", "fail")), (1, 0));
    assert_eq!(
        (run("conflict.csv", "warn"), run("conflict.csv", "fail")),
        (1, 1)
    );
    let mut args = vec!["audit", "conflict.csv", "--report", "r.json"];
    args.extend(keys);
    let r = w.ok(&args);
    assert!(r.stdout.contains("overall verdict: fail"), "{}", r.stdout);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("r.json")).unwrap()).unwrap();
    assert_eq!(report["verdict"]["overall"], "fail");
    let keys_line = report["verdict"]["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["check"] == "Keys")
        .unwrap();
    assert_eq!(keys_line["status"], "fail");
    w.fails(
        &[
            "audit", "ok.csv", "--entity", "f", "--period", "y", "--report", "r.pdf",
        ],
        "name a .md, .json, .html or .txt file",
    );
}

#[test]
fn a_regressor_absorbed_by_entity_effects_is_named_and_left_out() {
    // `founded` never changes within a firm: under entity effects it is not identified.
    let w = Workdir::new();
    let mut csv = String::from("f,y,x,founded,out\n");
    for (i, f) in ["A", "B", "C", "D"].iter().enumerate() {
        for y in 1..=5 {
            let x = (i * 7 + y * 3) % 11;
            csv.push_str(&format!("{f},{y},{x},{},{}\n", 1990 + i, x * 2 + y + i));
        }
    }
    w.write("p.csv", &csv);
    w.write(
        "r.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[model]\noutcome = \"out\"\nregressors = [\"x\", \"founded\"]\n",
    );
    w.ok(&["build", "p.csv", "--rules", "r.toml", "--out", "o"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("o/report.json")).unwrap()).unwrap();
    let warnings = report["model"]["warnings"].as_array().unwrap();
    assert!(
        warnings.iter().any(|w| w
            .as_str()
            .unwrap()
            .contains("`founded` is a linear combination")),
        "{warnings:?}"
    );
    let slopes: Vec<&str> = report["model"]["slopes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["variable"].as_str().unwrap())
        .collect();
    assert_eq!(slopes, ["x"]);
    assert_eq!(report["verdict"]["overall"], "fail");
}
