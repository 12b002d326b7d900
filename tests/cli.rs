//! Command-line behaviour: keys, gap-aware panel functions, errors and exit codes.

use crate::util::{Run, Workdir};

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
    // Hand-worked expectations: the lag at A's first year and across the 2003 gap is empty;
    // derived columns come in the order the rules file declares them.
    assert_eq!(
        panel_rows(&w),
        [
            "source_row,company,yr,ta_thousands,ta_lag,log_ta",
            &format!("1,A,2001,10,,{}", 10f64.ln()),
            &format!("2,A,2002,20,10,{}", 20f64.ln()),
            &format!("3,A,2004,40,,{}", 40f64.ln()),
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
fn rule_errors_exit_2_with_one_line_naming_the_derived_variable() {
    let w = Workdir::new();
    w.write("raw.csv", DATA);
    let cases = [
        (
            "[derive.bad]\nexpr = \"ta_thousands / nosuch\"\n",
            "derived variable `bad`: unknown column `nosuch`",
        ),
        (
            "[derive.bad]\nexpr = \"ta_thousands / (2\"\n",
            "derived variable `bad`: syntax error",
        ),
        (
            "[derive.bad]\nexpr = \"wobble(ta_thousands)\"\n",
            "derived variable `bad`: unknown function `wobble`",
        ),
        (
            "[derive.a]\nexpr = \"b + 1\"\n[derive.b]\nexpr = \"a + 1\"\n",
            "derived variables `a` -> `b` -> `a`",
        ),
        (
            "[derive.bad]\nexpr = \"lag(ta_thousands, -1)\"\n",
            "derived variable `bad`: `lag(ta_thousands, -1)`",
        ),
        // A null_when that is not a condition stopped with the engine's "invalid series
        // dtype: expected `Boolean`", naming the value's expression as if it were at fault.
        (
            "[derive.bad]\nexpr = \"ta_thousands * 2\"\n\
             null_when = [{ when = \"ta_thousands\", reason = \"r\" }]\n",
            "derived variable `bad`: `ta_thousands * 2`: its null_when `ta_thousands` gives \
             number values, not true / false",
        ),
        // Our own check inside the engine's plan named the variable twice.
        (
            "[derive.bad]\nexpr = \"CASE WHEN ta_thousands AND 1 THEN 1 ELSE 0 END\"\n",
            "derived variable `bad`: `CASE WHEN ta_thousands AND 1 THEN 1 ELSE 0 END`: AND, OR \
             and NOT combine conditions",
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
    // Hand-worked: row 2 breaks `positive` (dropped), row 3 breaks `cap` and `ceiling` (x set
    // to null, by `cap`, the first), row 5 breaks `positive` and `cap` (dropped as it was read:
    // every rule reads the values before any acts).
    let w = Workdir::new();
    w.write(
        "p.csv",
        "f,y,x,cap\nA,1,5,10\nA,2,-1,10\nB,1,50,10\nB,2,7,10\nC,1,-30,-40\n",
    );
    let rules = "[panel]\nentity = \"f\"\nperiod = \"y\"\n\
        [[rule]]\nname = \"positive\"\nexpr = \"x > 0\"\naction = \"drop\"\n\
        [[rule]]\nname = \"cap\"\nexpr = \"x <= cap\"\naction = \"null\"\ncolumns = [\"x\"]\n\
        [[rule]]\nname = \"small\"\nexpr = \"x < 20\"\n\
        [[rule]]\nname = \"ceiling\"\nexpr = \"x < 40\"\naction = \"null\"\ncolumns = [\"x\"]\n";
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
    assert!(
        ledger.contains("5,accounting rules,rule `positive` does not hold: x > 0,,C,1,-30,-40"),
        "{ledger}"
    );
    // Every cell a rule blanked, once, with its old value.
    let corrections = std::fs::read_to_string(w.path("out/corrections.csv")).unwrap();
    assert_eq!(
        corrections,
        "f,y,column,old,new,reason\nB,1,x,50,,rule `cap` does not hold: x <= cap\n"
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/report.json")).unwrap()).unwrap();
    let broken: Vec<u64> = report["rules"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["violations"].as_u64().unwrap())
        .collect();
    assert_eq!(broken, [2, 2, 1, 1]);
    let dictionary = std::fs::read_to_string(w.path("out/dictionary.md")).unwrap();
    assert!(
        dictionary.contains(
            "set to null where rule `cap` does not hold (1 rows, each in corrections.csv)"
        ),
        "{dictionary}"
    );
    assert!(
        !dictionary.contains("`ceiling` does not hold"),
        "{dictionary}"
    );
    w.write("bad.toml", "[panel]\nentity = \"f\"\nperiod = \"y\"\n[[rule]]\nname = \"r1\"\nexpr = \"x > 0\"\naction = \"delete\"\n");
    w.fails(
        &["audit", "p.csv", "--rules", "bad.toml"],
        "accounting rule `r1`: action `delete`",
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
    // `build --fail-on` writes the whole bundle, records the verdict, then exits 1.
    let build = |level: &str, out: &str| {
        let mut args = vec!["build", "gap.csv", "--out", out, "--fail-on", level];
        args.extend(keys);
        w.run(&args).code
    };
    assert_eq!((build("warn", "b1"), build("fail", "b2")), (1, 0));
    for out in ["b1", "b2"] {
        let manifest: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(w.path(&format!("{out}/manifest.json"))).unwrap(),
        )
        .unwrap();
        assert_eq!(manifest["verdict"], "warn");
        assert!(w.path(&format!("{out}/panel.parquet")).exists());
    }
    w.fails(
        &[
            "audit", "ok.csv", "--entity", "f", "--period", "y", "--report", "r.pdf",
        ],
        "name a .md, .json, .html or .txt file",
    );
}

#[test]
fn a_regressor_absorbed_by_entity_effects_is_named_and_kept_where_identified() {
    // `founded` never changes within a firm: the within estimator does not identify it, pooled
    // OLS and random effects do (METHODS.md s.3).
    let w = Workdir::new();
    // Four firms over five years, `x` varying within each; `third` gives the third column.
    let panel = |name: &str, third: &dyn Fn(usize, usize) -> usize| -> String {
        let mut csv = format!("f,y,x,{name},out\n");
        for (i, f) in ["A", "B", "C", "D"].iter().enumerate() {
            for y in 1..=5 {
                let x = (i * 7 + y * 3) % 11;
                csv.push_str(&format!("{f},{y},{x},{},{}\n", third(i, x), x * 2 + y + i));
            }
        }
        csv
    };
    w.write("p.csv", &panel("founded", &|i, _| 1990 + i));
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
            .contains("`founded` is not identified by the within estimator")),
        "{warnings:?}"
    );
    let slopes = report["model"]["slopes"].as_array().unwrap();
    let names: Vec<&str> = slopes
        .iter()
        .map(|s| s["variable"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["x", "founded"]);
    assert!(slopes[1]["within"].is_null(), "{slopes:?}");
    assert!(slopes[1]["pooled"].is_number(), "{slopes:?}");
    assert_eq!(
        report["model"]["not_identified_within"],
        serde_json::json!(["founded"])
    );
    assert_eq!(report["verdict"]["overall"], "fail");
    let why = |report: &serde_json::Value, check: &str| -> String {
        let lines = report["verdict"]["checks"].as_array().unwrap();
        let line = lines.iter().find(|c| c["check"] == check).unwrap();
        format!("{} {}", line["status"], line["reason"])
    };
    assert!(
        why(&report, "Model readiness").contains("not identified by the within estimator: founded")
    );
    assert!(
        why(&report, "Absorbed by fixed effects").contains("absorbed by fixed effects: founded")
    );
    // `twice` = 2 x exactly (worked by hand): no estimator identifies it, and it is no fixed
    // effects' doing (it varies within every firm). The absorption check blamed it.
    w.write("q.csv", &panel("twice", &|_, x| 2 * x));
    w.write(
        "q.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[model]\noutcome = \"out\"\nregressors = [\"x\", \"twice\"]\n",
    );
    w.ok(&["build", "q.csv", "--rules", "q.toml", "--out", "q"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("q/report.json")).unwrap()).unwrap();
    assert_eq!(
        report["model"]["not_identified"],
        serde_json::json!(["twice"])
    );
    assert!(why(&report, "Model readiness").contains("identified by no estimator: twice"));
    let absorbed = why(&report, "Absorbed by fixed effects");
    assert!(
        !absorbed.contains("twice") && absorbed.starts_with("\"pass\""),
        "{absorbed}"
    );
}

/// A panel that triggers every finding the verdict knows, hand-planted: a gap (F01), a
/// singleton (F02), an exact copy (F03 2002), a conflicting key (F04 2002), a missing key,
/// leavers far above stayers in `z`, a time-invariant regressor (`founded`), a nearly
/// absorbed `w`, a coverage break in `m` (missing before 2004), a column `e` with no value, a
/// ×1000 slip in F05's assets in 2003, a broken accounting rule, and 30 entities (few
/// clusters).
fn every_finding() -> String {
    let mut out = String::from("firm,year,assets,x,y,z,w,m,founded,e\n");
    for i in 1..=30u32 {
        let leaves = i > 20;
        let years: Vec<u32> = match i {
            1 => vec![2001, 2002, 2004, 2005, 2006],
            2 => vec![2001],
            _ if leaves => (2001..=2004).collect(),
            _ => (2001..=2006).collect(),
        };
        for t in years {
            let noise = ((i * 37 + t * 11) % 17) as f64;
            let mut assets = 100.0 + i as f64 + noise;
            if i == 5 && t == 2003 {
                assets *= 1000.0;
            }
            if i == 6 && t == 2002 {
                assets = -1.0;
            }
            let z = if leaves { 100.0 + noise } else { noise };
            let w = 1000.0 * i as f64 + noise * 1e-3;
            let m = if t >= 2004 {
                format!("{noise}")
            } else {
                String::new()
            };
            let x = noise * (t as f64 - 2000.0);
            let y = 2.0 * x + noise;
            let line = format!("F{i:02},{t},{assets},{x},{y},{z},{w},{m},{},\n", 1950 + i);
            out.push_str(&line);
            if (i, t) == (3, 2002) {
                out.push_str(&line);
            }
            if (i, t) == (4, 2002) {
                out.push_str(&format!(
                    "F04,2002,{assets},{x},{},{z},{w},{m},1954,\n",
                    y + 1.0
                ));
            }
        }
    }
    // F02 keyed a second way: an entity name alike but for spaces and case.
    out.push_str("f02 ,2003,1,1,1,1,1,1,1952,\n");
    out.push_str(",2003,1,1,1,1,1,1,1,\n");
    out
}

#[test]
fn every_verdict_level_sets_its_finding() {
    let w = Workdir::new();
    w.write("raw.csv", &every_finding());
    let keys = [
        ("conflicting_keys", "Keys", ""),
        ("key_repairs", "Keys", "duplicates = \"keep-first\"\n"),
        ("alike_entities", "Keys", ""),
        ("gaps", "Coverage", ""),
        ("singletons", "Coverage", ""),
        ("attrition", "Entry and exit", ""),
        ("absorbed_regressor", "Absorbed by fixed effects", ""),
        ("nearly_absorbed", "Absorbed by fixed effects", ""),
        ("empty_variables", "Missing values", ""),
        ("missing_breaks", "Missing values", ""),
        ("unit_slips", "Outliers and unit slips", ""),
        ("rule_violations", "Accounting rules", ""),
        ("model_warnings", "Model readiness", ""),
    ];
    // Every finding with a level is here: a new one needs its case above.
    let declared: Vec<&str> = panelready::audit::verdict::level_keys()
        .iter()
        .map(|k| k.name)
        .collect();
    let listed: Vec<&str> = keys.iter().map(|k| k.0).collect();
    assert_eq!(listed, declared);
    for (key, check, clean) in keys {
        let mut verdict = String::from("[verdict]\n");
        for (other, _, _) in keys {
            let level = if other == key { "fail" } else { "pass" };
            verdict.push_str(&format!("{other} = \"{level}\"\n"));
        }
        w.write(
            "rules.toml",
            &format!(
                "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\n{clean}\
                 [audit]\ncompare = [\"z\"]\nlevels = [\"assets\"]\n\
                 [[rule]]\nname = \"assets_positive\"\nexpr = \"assets > 0\"\n\
                 [model]\noutcome = \"y\"\nregressors = [\"x\", \"founded\"]\n{verdict}"
            ),
        );
        let r = w.run(&[
            "audit",
            "raw.csv",
            "--rules",
            "rules.toml",
            "--format",
            "json",
            "--fail-on",
            "fail",
        ]);
        assert_eq!(r.code, 1, "{key}: {}", r.stderr);
        let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        let checks = report["verdict"]["checks"].as_array().unwrap();
        let status = |name: &str| {
            checks
                .iter()
                .find(|c| c["check"] == name)
                .map(|c| c["status"].as_str().unwrap().to_string())
                .unwrap_or_default()
        };
        assert_eq!(status(check), "fail", "{key}: {checks:?}");
        // The same finding at "pass" leaves nothing failing but what the key drives.
        let also = if key == "absorbed_regressor" {
            "Model readiness"
        } else {
            check
        };
        for c in checks {
            let name = c["check"].as_str().unwrap();
            if name != check && name != also {
                assert_ne!(c["status"], "fail", "{key} failed {name}: {checks:?}");
            }
        }
    }
}

#[test]
fn audit_rejects_exactly_the_rules_files_build_rejects() {
    let w = Workdir::new();
    w.write(
        "raw.csv",
        "firm,year,a\nA,2001,1\nA,2002,2\nB,2001,3\nB,2002,4\n",
    );
    let clean_values = [
        "duplicates = \"keep-first\"",
        "duplicates = \"nonsense\"",
        "drop_singletons = true",
        "drop_singletons = \"sometimes\"",
        "balance = \"largest\"",
        "balance = \"wobbly\"",
        "balance = { window = [2001, 2002] }",
        "winsorize = { variables = [\"a\"], lower = 0.01, upper = 0.99 }",
        "winsorize = { variables = [\"nosuch\"], lower = 0.01, upper = 0.99 }",
        "trim = { variables = [\"a\"], lower = 0.2, upper = 0.1 }",
    ];
    // Both commands on the same rules: both refuse with the same line, or both accept.
    // Returns whether they refused.
    let both = |rules: String, label: &str| -> bool {
        w.write("rules.toml", &rules);
        let audit = w.run(&["audit", "raw.csv", "--rules", "rules.toml"]);
        let build = w.run(&["build", "raw.csv", "--rules", "rules.toml", "--out", "b"]);
        assert_eq!(
            audit.code == 2,
            build.code == 2,
            "{label}: {} / {}",
            audit.stderr,
            build.stderr
        );
        assert_eq!(audit.stderr, build.stderr, "{label}");
        audit.code == 2
    };
    for value in clean_values {
        both(
            format!("[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\n{value}\n"),
            value,
        );
    }
    // Joined files: the same settings and errors for both commands.
    w.write("t.csv", "firm,sector\nA,x\nB,y\nB,z\n");
    let joins = [
        "on = [\"firm\"]\nduplicates = \"keep-first\"",
        "on = [\"firm\"]",
        "on = [\"firm\"]\nduplicates = \"last\"",
        "on = [\"firm\"]\nduplicates = \"keep-first\"\nunmatched = \"skip\"",
        "on = [\"nosuch\"]",
        "on = [\"firm\"]\nduplicates = \"keep-first\"\ncolumns = [\"a\"]",
    ];
    for (i, join) in joins.iter().enumerate() {
        let refused = both(
            format!(
                "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[[join]]\nfile = \"t.csv\"\n{join}\n"
            ),
            join,
        );
        // The first is accepted (B's repeated key kept first); every other one is an error.
        assert_eq!(refused, i > 0, "{join}");
    }
}

#[test]
fn a_check_that_examined_nothing_says_not_checked_and_lags_raise_no_break() {
    // No variable to compare between leavers and stayers (no derived variable but a lag,
    // which is null at every entry), no level variable, no accounting rule: three checks had
    // nothing to examine. The lag is null by construction in the window's first period: no
    // missing-value break there (hand-worked: 40% missing in 2001 would otherwise jump to 0).
    let w = Workdir::new();
    let mut csv = String::from("firm,year,x\n");
    for f in ["A", "B", "C", "D", "E"] {
        for y in 2001..=2004 {
            csv.push_str(&format!("{f},{y},{}\n", y - 2000 + f.len()));
        }
    }
    w.write("p.csv", &csv);
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[audit]\ncompare = []\n\
         [derive.x_lag]\nexpr = \"lag(x, 1)\"\n[derive.x_growth]\nexpr = \"growth(x, 2)\"\n",
    );
    let r = w.ok(&["audit", "p.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let status = |name: &str| {
        report["verdict"]["checks"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["check"] == name)
            .unwrap()["status"]
            .clone()
    };
    assert_eq!(status("Entry and exit"), "not checked");
    assert_eq!(status("Outliers and unit slips"), "not checked");
    assert_eq!(status("Accounting rules"), "not checked");
    // The lag and the growth rate have no value at any entity's first period: said beside
    // their dashes when they are compared.
    w.write(
        "s.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[audit]\ncompare = [\"x_lag\", \"x\"]\n\
         [derive.x_lag]\nexpr = \"lag(x, 1)\"\n",
    );
    let text = w.ok(&["audit", "p.csv", "--rules", "s.toml"]).stdout;
    assert!(
        text.contains("No value at any entity's first period (–): `x_lag`."),
        "{text}"
    );
    assert_eq!(report["verdict"]["overall"], "pass");
    assert_eq!(report["missing_breaks"], serde_json::json!([]));
    // The same panel with a real break: x missing from 2003 on is still flagged.
    let broken = csv
        .lines()
        .map(|l| {
            if l.contains(",2003,") || l.contains(",2004,") {
                let mut parts: Vec<&str> = l.split(',').collect();
                parts[2] = "";
                parts.join(",")
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    w.write("q.csv", &(broken + "\n"));
    let r = w.ok(&["audit", "q.csv", "--rules", "r.toml", "--format", "json"]);
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let breaks: Vec<(String, i64)> = report["missing_breaks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| {
            (
                b["variable"].as_str().unwrap().to_string(),
                b["period"].as_i64().unwrap(),
            )
        })
        .collect();
    assert!(breaks.contains(&("x".to_string(), 2003)), "{breaks:?}");
    // ...while the lags' first periods still raise none.
    assert!(
        !breaks.iter().any(|(v, p)| v != "x" && *p <= 2003),
        "{breaks:?}"
    );
}

/// Each check's verdict line, by check name, from an `audit --format json` report.
fn statuses(report: &serde_json::Value) -> Vec<(String, String)> {
    report["verdict"]["checks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let name = c["check"].as_str().unwrap().to_string();
            (name, c["status"].as_str().unwrap().to_string())
        })
        .collect()
}

#[test]
fn checks_that_no_row_reached_say_not_checked() {
    // A drop rule every row breaks: the key steps and the rule examined the 6 rows read, every
    // check after them examined none. Before, an empty panel passed Coverage ("no gaps and no
    // singletons"), the absorption and the unit-slip search.
    let w = Workdir::new();
    w.write(
        "p.csv",
        "firm,year,assets,x
A,2001,1,5
A,2002,2,6
B,2001,3,7
B,2002,4,8
C,2001,5,9
C,2002,6,1
",
    );
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[audit]\nlevels = [\"assets\"]\n\
         [[rule]]\nname = \"never\"\nexpr = \"assets < 0\"\naction = \"drop\"\n",
    );
    let report = w.audit_json("p.csv", "r.toml");
    let want = [
        ("Keys", "pass"),
        ("Coverage", "not checked"),
        ("Entry and exit", "not checked"),
        ("Absorbed by fixed effects", "not checked"),
        ("Missing values", "not checked"),
        ("Outliers and unit slips", "not checked"),
        ("Accounting rules", "warn"),
        ("Cleaned panel", "fail"),
    ];
    let want: Vec<(String, String)> = want
        .iter()
        .map(|(c, s)| (c.to_string(), s.to_string()))
        .collect();
    assert_eq!(statuses(&report), want);
    let reason = &report["verdict"]["checks"][1]["reason"];
    assert!(
        reason
            .as_str()
            .unwrap()
            .contains("the 6 rows read were all removed"),
        "{reason}"
    );
}

#[test]
fn residual_tests_on_too_few_periods_are_not_computable() {
    // Three firms over two years: no pair of firms shares the 3 periods a correlation needs,
    // and no firm has two consecutive first differences. The cross-firm test read 0 and "no
    // evidence" having used no pair; the serial-correlation test was left out unsaid.
    let w = Workdir::new();
    w.write(
        "p.csv",
        "firm,year,y,x\nA,2001,1,5\nA,2002,2,6\nB,2001,3,7\nB,2002,5,8\nC,2001,5,9\nC,2002,6,1\n",
    );
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n\
         [model]\noutcome = \"y\"\nregressors = [\"x\"]\n",
    );
    let report = w.audit_json("p.csv", "r.toml");
    let model = &report["model"];
    let errors = model["questions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|q| q["key"] == "independent_errors")
        .unwrap();
    assert!(errors["tests"].as_array().unwrap().is_empty(), "{errors}");
    assert!(
        errors["answer"]
            .as_str()
            .unwrap()
            .starts_with("not computable"),
        "{errors}"
    );
    let warnings: Vec<&str> = model["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    for want in [
        "not computable: the Wooldridge test for serial correlation, since only 3 first \
         differences over consecutive periods exist, fewer than the 4 it needs",
        "not computable: the Pesaran CD test, since no two entities share 3 periods",
    ] {
        assert!(warnings.contains(&want), "{warnings:?}");
    }
}

#[test]
fn unit_slips_are_not_searched_without_consecutive_periods() {
    // Every firm observed every other year: no row has its entity's period before, so no
    // change exists to search (counted by hand: 0 pairs). With the years made consecutive,
    // each of the 3 firms has 2 changes, 6 in all, and a slip planted in B is found.
    let w = Workdir::new();
    let rows = |step: i64, slip: f64| {
        let mut csv = String::from("firm,year,assets\n");
        for (i, f) in ["A", "B", "C"].iter().enumerate() {
            for k in 0..3i64 {
                let planted = if *f == "B" && k == 1 { slip } else { 1.0 };
                let assets = (100 + i as i64 * 10 + k) as f64 * planted;
                csv.push_str(&format!("{f},{},{assets}\n", 2001 + k * step));
            }
        }
        csv
    };
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[audit]\nlevels = [\"assets\"]\n",
    );
    for (step, slip, pairs, status) in [(2, 1000.0, 0, "not checked"), (1, 1000.0, 6, "warn")] {
        w.write("p.csv", &rows(step, slip));
        let report = w.audit_json("p.csv", "r.toml");
        assert_eq!(report["unit_slips_pairs"], pairs, "step {step}");
        let line = statuses(&report)
            .into_iter()
            .find(|(c, _)| c == "Outliers and unit slips")
            .unwrap();
        assert_eq!(line.1, status, "step {step}");
        let text = w.ok(&["audit", "p.csv", "--rules", "r.toml"]).stdout;
        assert_eq!(
            text.contains("Unit slips not searched: no entity is observed in two consecutive"),
            pairs == 0,
            "{text}"
        );
    }
}

#[test]
fn a_robust_z_without_spread_is_not_computable() {
    // An indicator with 7 zeros in 10 values: its median is 0 and so is its MAD (7 of the 10
    // absolute deviations are 0; worked by hand), so every 1 would have an infinite robust z:
    // not computable, shown as a dash and null, where before it counted 0. `x` has spread
    // (values 1 to 10: median 5.5, MAD 2.5 × 1.4826 = 3.7065, no |value − 5.5| above 5 ×
    // that) and keeps its count, 0.
    let w = Workdir::new();
    let mut csv = String::from("firm,year,flag,x\n");
    for i in 0..10 {
        let f = ["A", "B"][i / 5];
        csv.push_str(&format!(
            "{f},{},{},{}\n",
            2001 + i % 5,
            u8::from(i >= 7),
            i + 1
        ));
    }
    w.write("p.csv", &csv);
    let args = ["audit", "p.csv", "--entity", "firm", "--period", "year"];
    let r = w.ok(&[&args[..], &["--format", "json"]].concat());
    let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let line = |v: &str| {
        report["outliers"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["variable"] == v)
            .unwrap()
            .clone()
    };
    assert_eq!(line("flag")["mad"], 0.0);
    assert!(line("flag")["robust_z_beyond"].is_null());
    assert_eq!(line("x")["robust_z_beyond"], 0);
    let text = w.ok(&args).stdout;
    assert!(
        text.contains("Robust z not computable (–): `flag` (a MAD of zero"),
        "{text}"
    );
}

/// The README's `[verdict]` block lists every finding with a level, in order, with its
/// default: the levels are declared in the code of the checks, so a new one must reach the
/// README too.
#[test]
fn the_readme_lists_every_verdict_level_with_its_default() {
    let readme =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap();
    let block: Vec<(String, String)> = readme
        .lines()
        .skip_while(|l| !l.starts_with("[verdict]"))
        .skip(1)
        .take_while(|l| !l.trim().is_empty())
        .map(|l| {
            let (name, rest) = l.split_once('=').unwrap();
            let level = rest.split('"').nth(1).unwrap();
            (name.trim().to_string(), level.to_string())
        })
        .collect();
    let declared: Vec<(String, String)> = panelready::audit::verdict::level_keys()
        .iter()
        .map(|k| (k.name.to_string(), k.default.label().to_string()))
        .collect();
    assert_eq!(block, declared);
}

/// A small panel written as Parquet: one file, a folder of parts, a hive-partitioned folder.
fn parquet_layouts(w: &Workdir) {
    use polars::prelude::*;
    let write = |df: &mut DataFrame, path: std::path::PathBuf| {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        let f = std::fs::File::create(path).unwrap();
        ParquetWriter::new(f).finish(df).unwrap();
    };
    let firms = ["A", "A", "A", "B", "B", "C", "C", "C"];
    let years = [2001i64, 2002, 2003, 2001, 2003, 2001, 2002, 2003];
    let assets = [10.0, 11.0, 12.5, 7.0, 7.5, 3.0, 2.0, 4.0];
    let mut whole = df!("firm" => firms, "year" => years, "assets" => assets).unwrap();
    write(&mut whole, w.path("one.parquet"));
    write(&mut whole.slice(0, 5), w.path("parts/part-0.parquet"));
    write(&mut whole.slice(5, 3), w.path("parts/part-1.parquet"));
    for year in [2001i64, 2002, 2003] {
        let mut part = whole
            .clone()
            .lazy()
            .filter(col("year").eq(lit(year)))
            .drop(cols(["year"]))
            .collect()
            .unwrap();
        write(&mut part, w.path(&format!("hive/year={year}/data.parquet")));
    }
}

#[test]
fn a_folder_of_parquet_files_reads_as_one_panel() {
    let w = Workdir::new();
    parquet_layouts(&w);
    let audit = |data: &str| -> serde_json::Value {
        let r = w.ok(&[
            "audit", data, "--entity", "firm", "--period", "year", "--format", "json",
        ]);
        serde_json::from_str(&r.stdout).unwrap()
    };
    let one = audit("one.parquet");
    for folder in ["parts", "hive"] {
        let r = audit(folder);
        assert_eq!(r["input"]["rows"], 8, "{folder}");
        assert_eq!(r["input"]["format"], "parquet", "{folder}");
        for figures in ["panel", "keys", "coverage", "entry_exit", "survival"] {
            assert_eq!(r[figures], one[figures], "{folder}: {figures}");
        }
    }
    // A bundle built from a folder verifies: the folder's hash covers each of its files.
    w.ok(&[
        "build", "parts", "--entity", "firm", "--period", "year", "--out", "b",
    ]);
    w.ok(&["verify", "b"]);
    std::fs::remove_file(w.path("parts/part-1.parquet")).unwrap();
    let r = w.run(&["verify", "b"]);
    assert_ne!(r.code, 0, "verify passed on a changed folder: {}", r.stdout);
}

/// `cmd` (`audit`, or `build` into `b`) on `file` with keys `firm` and `year` and
/// `--memory-budget budget`.
fn with_budget(w: &Workdir, cmd: &str, file: &str, budget: &str) -> Run {
    let mut args = vec![
        cmd,
        file,
        "--entity",
        "firm",
        "--period",
        "year",
        "--memory-budget",
        budget,
    ];
    if cmd == "build" {
        args.extend(["--out", "b"]);
    }
    w.run(&args)
}

#[test]
fn a_memory_budget_too_small_stops_before_reading() {
    let w = Workdir::new();
    parquet_layouts(&w);
    let run = |cmd: &str, budget: &str| with_budget(&w, cmd, "one.parquet", budget);
    for cmd in ["audit", "build"] {
        let r = run(cmd, "1KiB");
        assert_eq!(r.code, 2, "{cmd}: {}", r.stderr);
        let line = r.stderr.trim_end();
        assert_eq!(line.lines().count(), 1, "{line}");
        assert!(
            line.contains("one.parquet") && line.contains("8 rows"),
            "{line}"
        );
        assert!(line.contains("memory budget of 1 KiB"), "{line}");
        assert!(!w.path("b").exists());
    }
    // A budget that holds it lets the run go on; a size that is not one is refused.
    assert_eq!(run("audit", "1GiB").code, 0);
    let r = run("audit", "lots");
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--memory-budget"), "{}", r.stderr);
}

/// The budget's estimate counts repeating text as the run holds it, as codes (4 bytes a row
/// instead of a 24-byte view and string): two Parquet files of 100,000 rows alike but for one
/// text column, repeating in one and distinct on every row in the other, are estimated at
/// about 256 MiB + 1.15 × 100,000 × 48 bytes (261.3 MiB) and × 68 bytes (263.5 MiB) — the
/// constants of `src/load/budget.rs`, worked by hand — so a budget of 262 MiB lets one through
/// only. The same rows as CSV files are read with every column as read, text as views: both
/// are estimated by the reading, 256 MiB + 1.7 × 100,000 × 68 bytes (267.0 MiB), so 266 MiB
/// stops both and 268 MiB lets both through.
#[test]
fn the_memory_budget_counts_repeating_text_as_codes() {
    use polars::prelude::*;
    let w = Workdir::new();
    for (file, text) in [("repeating", false), ("distinct", true)] {
        let mut csv = String::from("firm,year,note,x\n");
        for i in 0..100_000 {
            let note = if text {
                format!("N{i:05}")
            } else {
                "Mills0".to_string()
            };
            csv.push_str(&format!("F{:05},{},{note},1.5\n", i / 10, 2001 + i % 10));
        }
        w.write(&format!("{file}.csv"), &csv);
        let mut df = CsvReadOptions::default()
            .try_into_reader_with_file_path(Some(w.path(&format!("{file}.csv"))))
            .unwrap()
            .finish()
            .unwrap();
        let parquet = std::fs::File::create(w.path(&format!("{file}.parquet"))).unwrap();
        ParquetWriter::new(parquet).finish(&mut df).unwrap();
    }
    let run = |file: &str, budget: &str| with_budget(&w, "audit", file, budget);
    assert_eq!(run("repeating.parquet", "262MiB").code, 0);
    let r = run("distinct.parquet", "262MiB");
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains("memory budget of 262 MiB"),
        "{}",
        r.stderr
    );
    for file in ["repeating.csv", "distinct.csv"] {
        let r = run(file, "266MiB");
        assert_eq!(r.code, 2, "{file}: {}", r.stderr);
        assert!(r.stderr.contains("needs about 267 MiB"), "{}", r.stderr);
        assert_eq!(run(file, "268MiB").code, 0, "{file}");
    }
    // A declared model adds its sample beside the panel: with a derived `y` (8 bytes a row
    // more) the panel is 256 MiB + 1.15 × 100,000 × 56 bytes (262.1 MiB); the model of `y` on
    // `x` adds 100,000 × (112 + 16 × 1) bytes (12.2 MiB): 274.3 MiB, worked by hand from the
    // constants of `src/load/budget.rs`.
    let derive = "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[derive.y]\nexpr = \"x * 2\"\n";
    w.write("plain.toml", derive);
    w.write(
        "model.toml",
        &format!("{derive}[model]\noutcome = \"y\"\nregressors = [\"x\"]\n"),
    );
    let budgeted = |rules: &str, budget: &str| {
        w.run(&[
            "audit",
            "repeating.parquet",
            "--rules",
            rules,
            "--memory-budget",
            budget,
        ])
    };
    assert_eq!(budgeted("plain.toml", "263MiB").code, 0);
    let r = budgeted("model.toml", "263MiB");
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("needs about 274 MiB"), "{}", r.stderr);
    assert_eq!(budgeted("model.toml", "275MiB").code, 0);
}

/// The binary turns transparent huge pages off for its own process (see `small_pages_only` in
/// `src/main.rs`). Read from the kernel's own account of the process, `THP_enabled` in
/// `/proc/PID/status` (Linux 5.0 and later; proc(5)), while the run waits on a rules file that
/// is a named pipe, so that it is alive and past its start when looked at.
#[cfg(target_os = "linux")]
#[test]
fn transparent_huge_pages_are_off_for_the_run() {
    use std::io::Write;
    use std::os::unix::fs::OpenOptionsExt;
    use std::time::{Duration, Instant};

    let w = Workdir::new();
    w.write("panel.csv", DATA);
    let pipe = w.path("rules.toml");
    let made = std::process::Command::new("mkfifo").arg(&pipe).status();
    assert!(made.expect("mkfifo").success());
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_panelready"))
        .args(["audit", "panel.csv", "--rules", "rules.toml", "--quiet"])
        .current_dir(w.dir.path())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("run panelready");
    // Opening the pipe for writing without blocking succeeds once the run has opened it for
    // reading, and the run then waits there for the rules.
    let start = Instant::now();
    let mut writer = loop {
        match std::fs::OpenOptions::new()
            .write(true)
            .custom_flags(libc::O_NONBLOCK)
            .open(&pipe)
        {
            Ok(f) => break f,
            Err(_) if start.elapsed() < Duration::from_secs(60) => {
                assert!(child.try_wait().unwrap().is_none(), "the run ended early");
                std::thread::sleep(Duration::from_millis(20));
            }
            Err(e) => panic!("the run never opened its rules file: {e}"),
        }
    };
    let status = std::fs::read_to_string(format!("/proc/{}/status", child.id())).unwrap();
    writer.write_all(RULES.as_bytes()).unwrap();
    drop(writer);
    let ended = child.wait_with_output().unwrap();
    assert_eq!(
        ended.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&ended.stderr)
    );
    let line = status
        .lines()
        .find(|l| l.starts_with("THP_enabled:"))
        .expect("the kernel reports THP_enabled (Linux 5.0 or later)");
    assert_eq!(line.split_whitespace().nth(1), Some("0"), "{line}");
}

/// `--timings` against the kernel's own account of the finished run (getrusage(2), through
/// Python's `os.wait4` in `tests/reference/usage.py`): the table's peak is the process's
/// largest resident set, its processor and kernel seconds are no more than the kernel counted,
/// every stage's kernel part is within its processor time, and the stages add up to the total.
#[cfg(target_os = "linux")]
#[test]
fn timings_agree_with_the_kernels_account_of_the_run() {
    use std::path::Path;
    let w = Workdir::new();
    // 400,000 firm-years, so that the run takes memory and processor time of its own (the
    // table leaves out the start and the exit).
    let mut data = String::from("company,yr,ta_thousands\n");
    for firm in 0..40_000 {
        for yr in 2001..2011 {
            data.push_str(&format!(
                "F{firm},{yr},{}\n",
                10 + (firm * 7 + yr * 13) % 991
            ));
        }
    }
    w.write("raw.csv", &data);
    w.write("rules.toml", RULES);
    let out = crate::util::run_reference(
        "usage.py",
        &[
            w.dir.path(),
            Path::new(env!("CARGO_BIN_EXE_panelready")),
            Path::new("build"),
            Path::new("raw.csv"),
            Path::new("--rules"),
            Path::new("rules.toml"),
            Path::new("--out"),
            Path::new("out"),
            Path::new("--quiet"),
            Path::new("--timings"),
        ],
    );
    assert!(out.contains("stages; peak"), "{out}");
}

#[test]
fn the_largest_balanced_window_is_a_panel_not_a_single_period() {
    // Five firms seen in 2001 only, two in 2001 and 2002. Counted by hand: 2001 alone keeps 7
    // firms (7 rows), 2001..2002 keeps 2 (4 rows), 2002 alone 2 (2 rows). The most rows were a
    // single period, a cross-section with nothing left for a within estimate; a window of two
    // periods or more comes first now. With every firm seen once, a single period is all
    // there is.
    let w = Workdir::new();
    let mut csv = String::from("firm,year,x\n");
    for f in ["A", "B", "C", "D", "E"] {
        csv.push_str(&format!("{f},2001,1\n"));
    }
    for f in ["F", "G"] {
        csv.push_str(&format!("{f},2001,2\n{f},2002,3\n"));
    }
    w.write("p.csv", &csv);
    w.write(
        "r.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\nbalance = \"largest\"\n",
    );
    let balance = |w: &Workdir| {
        let report = w.audit_json("p.csv", "r.toml");
        let b = &report["balance"];
        (b["first"].clone(), b["last"].clone(), b["rows"].clone())
    };
    assert_eq!(balance(&w), (2001.into(), 2002.into(), 4.into()));
    w.write("p.csv", "firm,year,x\nA,2001,1\nB,2001,2\nC,2002,3\n");
    assert_eq!(balance(&w), (2001.into(), 2001.into(), 2.into()));
}

#[test]
fn a_model_variable_with_no_value_is_named_as_what_empties_the_sample() {
    // Worked by hand: `e` is empty in all 12 firm-years, so no row has every model variable.
    // The report said only "too few rows (0) for 0 entities and 2 regressors".
    let w = Workdir::new();
    let mut csv = String::from("firm,year,y,x,e,g\n");
    for f in ["A", "B", "C", "D"] {
        for t in 1..=3 {
            csv.push_str(&format!("{f},{},{},{},,\n", 2000 + t, t * 2 + f.len(), t));
        }
    }
    w.write("p.csv", &csv);
    let warnings = |regressors: &str| -> Vec<String> {
        w.write(
            "r.toml",
            &format!(
                "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[model]\noutcome = \"y\"\n\
                 regressors = {regressors}\n"
            ),
        );
        let r = w.ok(&["audit", "p.csv", "--rules", "r.toml", "--format", "json"]);
        let report: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        report["model"]["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .map(|w| w.as_str().unwrap().to_string())
            .collect()
    };
    assert!(warnings(r#"["x", "e"]"#).contains(
        &"not computable: `e` has no value in any firm-year, so the estimation sample is \
          empty and no diagnostic was computed"
            .to_string()
    ));
    assert!(warnings(r#"["e", "x", "g"]"#)
        .iter()
        .any(|w| w.starts_with("not computable: `e`, `g` have no value in any firm-year")));
}
