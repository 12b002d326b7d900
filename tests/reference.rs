//! Live cross-checks against independent computations in Python (pandas / numpy), pinned in
//! tests/reference/requirements.txt.

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
