//! Both winsorizing paths against each other.

use super::*;

/// `df` (entity `f`, period `y`) with `v` winsorized by period at the percentiles `(lower,
/// upper)`, on the panel core's codes or (`core` false) by the engine's group-by; with
/// `record`, the corrections-ledger lines too.
fn by_period(
    df: &DataFrame,
    v: &str,
    (lower, upper): (f64, f64),
    record: bool,
    core: bool,
) -> Treated {
    let columns = [v.to_string()];
    let k = Keys {
        file: std::path::Path::new("p.csv"),
        entity: "f",
        period: "y",
        columns: &columns,
    };
    let t = Treatment {
        method: Method::Winsorize,
        variables: vec![v.into()],
        lower,
        upper,
        by: CutoffGroups::Period,
        groups: Vec::new(),
    };
    let codes = core.then(|| PanelCore::new(df, "f", "y").unwrap());
    t.apply(df.clone(), &k, codes.as_ref(), record).unwrap()
}

/// Winsorizing by period on the panel core's codes and by the engine's group-by (the path
/// taken when no core codes the rows) move the same values to the same cutoffs and list
/// the same cells; the typed path itself is checked against numpy in tests/reference.
#[test]
fn both_paths_list_the_same_cells() {
    let n = 400;
    let df = df!(
        "f" => (0..n).map(|i| format!("F{:03}", i / 8)).collect::<Vec<_>>(),
        "y" => (0..n as i64).map(|i| 2001 + i % 8).collect::<Vec<_>>(),
        "x" => (0..n).map(|i| (i % 23 != 0).then(|| ((i * 7919) % 211) as f64 / 3.0)).collect::<Vec<_>>(),
    )
    .unwrap();
    let typed = by_period(&df, "x", (0.05, 0.9), true, true);
    let engine = by_period(&df, "x", (0.05, 0.9), true, false);
    // A dry run lists nothing.
    assert!(by_period(&df, "x", (0.05, 0.9), false, true)
        .changed
        .is_empty());
    // The cutoffs agree to rounding (selection against the engine's interpolation).
    let close = |a: Option<f64>, b: Option<f64>| match (a, b) {
        (Some(a), Some(b)) => (a - b).abs() <= 1e-12 * a.abs().max(1.0),
        (a, b) => a.is_none() && b.is_none(),
    };
    let x = |p: &DataFrame| -> Vec<Option<f64>> {
        p.column("x").unwrap().f64().unwrap().iter().collect()
    };
    let (xa, xb) = (x(&typed.panel), x(&engine.panel));
    assert!(xa.iter().zip(&xb).all(|(a, b)| close(*a, *b)));
    // The same cells, whatever order each path lists them in, with the same old values.
    let sorted = |d: &DataFrame| d.sort(["f", "y"], Default::default()).unwrap();
    let whole = |p: &LedgerPart| p.slice(0, p.rows.height()).unwrap();
    let (a, b) = (
        sorted(&whole(&typed.changed[0])),
        sorted(&whole(&engine.changed[0])),
    );
    assert!(a.height() > 0);
    for c in ["f", "y", "column", "old", "reason"] {
        assert!(
            a.column(c).unwrap().equals(b.column(c).unwrap()),
            "{c}: {a}\n{b}"
        );
    }
    let new = |d: &DataFrame| -> Vec<Option<f64>> {
        let n = d.column("new").unwrap().cast(&DataType::Float64).unwrap();
        n.f64().unwrap().iter().collect()
    };
    assert!(new(&a).iter().zip(&new(&b)).all(|(a, b)| close(*a, *b)));
    let line = &typed.lines[0];
    assert_eq!((line.below + line.above) as usize, a.height());
    assert!(line.below > 0 && line.above > 0);
}

/// A column of whole numbers (a head count) becomes floats when winsorized, but the old
/// values the ledger lists are the file's: `7`, not `7.0`, on both paths. Worked by hand:
/// each listed old value is the row's original whole number, written as it.
#[test]
fn whole_numbers_keep_their_old_values_whole() {
    let n = 200;
    let df = df!(
        "f" => (0..n).map(|i| format!("F{:03}", i / 5)).collect::<Vec<_>>(),
        "y" => (0..n as i64).map(|i| 2001 + i % 5).collect::<Vec<_>>(),
        "staff" => (0..n as i64).map(|i| (i * 7919) % 157).collect::<Vec<_>>(),
    )
    .unwrap();
    for treated in [
        by_period(&df, "staff", (0.05, 0.95), true, true),
        by_period(&df, "staff", (0.05, 0.95), true, false),
    ] {
        let part = &treated.changed[0];
        let lines = part.slice(0, part.rows.height()).unwrap();
        assert!(lines.height() > 0);
        let keys = lines.select(["f", "y"]).unwrap();
        let olds = lines.column("old").unwrap().str().unwrap().clone();
        for (r, old) in olds.iter().enumerate() {
            let (f, y) = (
                keys.column("f").unwrap().str().unwrap().get(r).unwrap(),
                keys.column("y").unwrap().i64().unwrap().get(r).unwrap(),
            );
            let at = (0..n).find(|i| format!("F{:03}", i / 5) == f && 2001 + (*i as i64) % 5 == y);
            let want = (at.unwrap() as i64 * 7919) % 157;
            assert_eq!(old, Some(want.to_string().as_str()), "{f} {y}");
        }
    }
}
