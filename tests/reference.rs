//! Live cross-checks against independent computations in Python (pandas / numpy), pinned in
//! tests/reference/requirements.txt.

use std::path::Path;

use crate::util::{run_reference, Workdir};

#[test]
fn derived_ratios_and_lags_match_pandas_on_the_demo_panel() {
    // Definitions: METHODS.md section 7 (Frank & Goyal 2009; Barber & Lyon 1996; Koh & Reeb
    // 2015; Altman 1968; interest cover and growth by common practice), each named again
    // beside its line in ratios.py. Tolerance: relative 1e-9.
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let out = run_reference(
        "ratios.py",
        &[
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("d/bundle/panel.csv"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
}

#[test]
fn structural_audit_matches_pandas_on_the_demo_panel() {
    // Every figure of the structural JSON contract, recomputed by structure.py (pandas, numpy
    // percentiles of type 7, scipy's Welch t-test; Ahrens & Pincus 1981 for gamma and nu).
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let out = run_reference(
        "structure.py",
        &[
            Path::new("check"),
            &w.path("d/data/velmora_accounts.csv"),
            &w.path("d/bundle/report.json"),
            Path::new("firm_id"),
            Path::new("fiscal_year"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
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
    let out = run_reference(
        "structure.py",
        &[
            Path::new("check"),
            &csv,
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
}

#[test]
fn variable_audit_matches_the_references_on_the_demo_panel() {
    // variables.py: numpy / pandas SDs and within shares (METHODS.md s.1), statsmodels OLS on
    // entity and period dummies for two-way absorption, numpy type-7 percentiles (Hyndman &
    // Fan 1996), scipy's MAD, a pandas recount of unit slips and rule violations, and the
    // generator's planted defects.
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let out = run_reference(
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
    assert!(out.contains(" 0 failed"), "{out}");
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
    let out = run_reference(
        "variables.py",
        &[
            Path::new("check"),
            &csv,
            &w.path("b/report.json"),
            Path::new("firm"),
            Path::new("year"),
        ],
    );
    assert!(out.contains(" 0 failed"), "{out}");
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
    let out = run_reference("cleaning.py", &[&csv, &w.path("b")]);
    assert!(out.contains(" 0 failed"), "{out}");
}
