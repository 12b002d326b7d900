//! Live cross-checks against independent computations in Python (pandas / numpy), pinned in
//! tests/reference/requirements.txt.

use std::path::Path;

use crate::util::{run_reference, Workdir};

/// A workdir holding the demo data and bundle under `d/`.
fn demo() -> Workdir {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    w
}

/// Run a reference script and insist that it found no mismatch.
fn check_reference(script: &str, args: &[&Path]) {
    let out = run_reference(script, args);
    assert!(out.contains(" 0 failed"), "{out}");
}

#[test]
fn derived_ratios_and_lags_match_pandas_on_the_demo_panel() {
    // Definitions: METHODS.md section 7 (Frank & Goyal 2009; Barber & Lyon 1996; Koh & Reeb
    // 2015; Altman 1968; interest cover and growth by common practice), each named again
    // beside its line in ratios.py. Tolerance: relative 1e-9.
    let w = demo();
    check_reference(
        "ratios.py",
        &[
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("d/bundle/panel.csv"),
        ],
    );
}

#[test]
fn structural_audit_matches_pandas_on_the_demo_panel() {
    // Every figure of the structural JSON contract, recomputed by structure.py (pandas, numpy
    // percentiles of type 7, scipy's Welch t-test; Ahrens & Pincus 1981 for gamma and nu).
    let w = demo();
    check_reference(
        "structure.py",
        &[
            Path::new("check"),
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("d/bundle/report.json"),
            Path::new("firm_id"),
            Path::new("fiscal_year"),
        ],
    );
}

#[test]
fn structural_audit_matches_pandas_on_unbalanced_grunfeld() {
    // Grunfeld (1958) data (Kleiber & Zeileis 2010 copy, tests/reference/data), made
    // unbalanced by the rule documented in structure.py, with planted key defects.
    let w = Workdir::new();
    let csv = w.path("grunfeld_unbalanced.csv");
    run_reference("structure.py", &[Path::new("grunfeld-unbalanced"), &csv]);
    w.write(
        "rules.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[audit]\ncompare = [\"invest\", \"value\", \"capital\"]\n[clean]\nduplicates = \"keep-first\"\n",
    );
    w.ok(&[
        "build",
        "grunfeld_unbalanced.csv",
        "--rules",
        "rules.toml",
        "--out",
        "b",
    ]);
    check_reference(
        "structure.py",
        &[
            Path::new("check"),
            &csv,
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
        ],
    );
}

#[test]
fn variable_audit_matches_the_references_on_the_demo_panel() {
    // variables.py: numpy / pandas SDs and within shares (METHODS.md s.1), statsmodels OLS on
    // entity and period dummies for two-way absorption, numpy type-7 percentiles (Hyndman &
    // Fan 1996), scipy's MAD, a pandas recount of unit slips and rule violations, and the
    // generator's planted defects.
    let w = demo();
    check_reference(
        "variables.py",
        &[
            Path::new("check"),
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("d/bundle/report.json"),
            Path::new("firm_id"),
            Path::new("fiscal_year"),
            &w.path("d/data/planted.json"),
        ],
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("d/bundle/report.json")).unwrap())
            .unwrap();
    let absorbed: Vec<(String, String)> = report["variation"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|v| !v["absorbed_by"].is_null())
        .map(|v| {
            (
                v["variable"].as_str().unwrap().to_string(),
                v["absorbed_by"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    // The planted time-invariant columns, the macro series and firm age, and nothing else.
    let want = [
        ("founded", "entity"),
        ("gdp_growth", "period"),
        ("firm_age", "entity+period"),
        ("sector", "entity"),
        ("region", "entity"),
    ];
    assert_eq!(absorbed.len(), want.len(), "{absorbed:?}");
    for (v, by) in want {
        assert!(
            absorbed.contains(&(v.to_string(), by.to_string())),
            "{v} not absorbed by {by}: {absorbed:?}"
        );
    }
}

#[test]
fn firm_age_is_absorbed_by_two_way_effects_on_grunfeld() {
    // Grunfeld (1958) 10-firm data with an invented founding year per firm: age must be
    // flagged as absorbed by entity + period effects, value and capital must not be
    // (statsmodels OLS on firm and year dummies as the reference).
    let w = Workdir::new();
    let csv = w.path("grunfeld_age.csv");
    run_reference("variables.py", &[Path::new("grunfeld-age"), &csv]);
    w.write(
        "rules.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[derive.age]\nexpr = \"year - founded\"\n",
    );
    w.ok(&[
        "build",
        "grunfeld_age.csv",
        "--rules",
        "rules.toml",
        "--out",
        "b",
    ]);
    check_reference(
        "variables.py",
        &[
            Path::new("check"),
            &csv,
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
        ],
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    let by = |name: &str| {
        report["variation"]
            .as_array()
            .unwrap()
            .iter()
            .find(|v| v["variable"] == name)
            .unwrap()["absorbed_by"]
            .clone()
    };
    assert_eq!(by("age"), "entity+period");
    assert_eq!(by("founded"), "entity");
    assert!(by("value").is_null() && by("capital").is_null() && by("invest").is_null());
}

#[test]
fn winsorizing_by_period_and_the_largest_window_match_numpy_and_brute_force() {
    let w = Workdir::new();
    let csv = w.path("g.csv");
    run_reference("structure.py", &[Path::new("grunfeld-unbalanced"), &csv]);
    w.write(
        "rules.toml",
        "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\nduplicates = \"keep-first\"\n\
         winsorize = { variables = [\"value\", \"capital\"], lower = 0.05, upper = 0.95, by = \"period\" }\n\
         balance = \"largest\"\n",
    );
    w.ok(&["build", "g.csv", "--rules", "rules.toml", "--out", "b"]);
    check_reference("cleaning.py", &[&csv, &w.path("b")]);
}

const MODEL_RULES: &str =
    "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\nduplicates = \"keep-first\"\n\
    [model]\noutcome = \"invest\"\nregressors = [\"value\", \"capital\"]\n";

fn model_test<'a>(report: &'a serde_json::Value, prefix: &str) -> &'a serde_json::Value {
    report["model"]["tests"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["name"].as_str().unwrap().starts_with(prefix))
        .unwrap_or_else(|| panic!("no test {prefix}"))
}

#[test]
fn model_readiness_reproduces_published_grunfeld_figures() {
    // Grunfeld 10-firm data (firms 1-10 of tests/reference/data/grunfeld.csv).
    let w = Workdir::new();
    let all =
        std::fs::read_to_string(crate::util::root().join("tests/reference/data/grunfeld.csv"))
            .unwrap();
    let ten: Vec<&str> = all.lines().take(201).collect();
    w.write("g10.csv", &(ten.join("\n") + "\n"));
    w.write("rules.toml", MODEL_RULES);
    w.ok(&["build", "g10.csv", "--rules", "rules.toml", "--out", "b"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    let stat = |p: &str| model_test(&report, p)["statistic"].as_f64().unwrap();
    // Baltagi, Econometric Analysis of Panel Data (2001), Table 4.1 [published, quoted by a
    // secondary source]: LM entity 798.162, Honda 28.252, LM period 6.454, two-way 804.615.
    assert!((stat("Breusch–Pagan LM for entity effects") - 798.162).abs() < 5e-4);
    assert!((stat("Honda") - 28.252).abs() < 5e-4);
    assert!((stat("Breusch–Pagan LM for period effects") - 6.454).abs() < 5e-4);
    assert!((stat("Breusch–Pagan LM for entity and period") - 804.615).abs() < 5e-4);
    // Baltagi, Table 2.1 and text [from memory]: F 49.18 on (9, 188); within slopes 0.110 and
    // 0.310; Swamy–Arora random-effects slopes 0.110 and 0.308; Hausman 2.33.
    assert!((stat("F test") - 49.18).abs() < 5e-3);
    assert_eq!(
        model_test(&report, "F test")["df"],
        serde_json::json!([9.0, 188.0])
    );
    let slopes = report["model"]["slopes"].as_array().unwrap();
    let within: Vec<f64> = slopes
        .iter()
        .map(|s| s["within"].as_f64().unwrap())
        .collect();
    let random: Vec<f64> = slopes
        .iter()
        .map(|s| s["random"].as_f64().unwrap())
        .collect();
    assert!(
        (within[0] - 0.110).abs() < 5e-4 && (within[1] - 0.310).abs() < 5e-4,
        "{within:?}"
    );
    assert!(
        (random[0] - 0.110).abs() < 5e-4 && (random[1] - 0.308).abs() < 5e-4,
        "{random:?}"
    );
    assert!((stat("Hausman") - 2.33).abs() < 5e-3);
    // And every statistic against the live statsmodels / numpy reference.
    check_reference(
        "model.py",
        &[
            &w.path("g10.csv"),
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
            Path::new("invest"),
            Path::new("value"),
            Path::new("capital"),
        ],
    );
}

#[test]
fn model_readiness_matches_the_reference_on_unbalanced_grunfeld() {
    // Late entry, early exit and internal gaps (the rule in structure.py): the Baltagi–Li LM,
    // Baltagi–Chang variance components and gap-aware Wooldridge differences are exercised.
    let w = Workdir::new();
    let csv = w.path("g.csv");
    run_reference("structure.py", &[Path::new("grunfeld-unbalanced"), &csv]);
    w.write("rules.toml", MODEL_RULES);
    w.ok(&["build", "g.csv", "--rules", "rules.toml", "--out", "b"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    assert!(model_test(
        &report,
        "Breusch–Pagan LM for entity effects (Baltagi–Li form)"
    )["p"]
        .is_number());
    check_reference(
        "model.py",
        &[
            &w.path("b/panel.csv"),
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
            Path::new("invest"),
            Path::new("value"),
            Path::new("capital"),
        ],
    );
}
