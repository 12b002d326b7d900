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
