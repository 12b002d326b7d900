//! Check tests on tiny hand-worked panels.

use polars::prelude::*;

use super::*;
use crate::report::Report;

fn report_for(df: &DataFrame, compare: &[&str]) -> Report {
    let mut report = blank();
    let options = Options {
        compare: compare.iter().map(|s| s.to_string()).collect(),
        ..Options::default()
    };
    let ctx = Context::new(df, "f", "y", options).unwrap();
    report.panel = panel_summary(&ctx).unwrap();
    report.findings = run_all(&ctx).unwrap();
    report
}

fn cov(r: &Report) -> &crate::report::Coverage {
    r.findings.get().unwrap()
}

fn turnover(r: &Report) -> &crate::report::EntryExitFigures {
    r.findings.get().unwrap()
}

fn blank() -> Report {
    Report::new(crate::report::InputSummary {
        path: "t.csv".into(),
        format: crate::config::InputFormat::Csv,
        rows: 0,
        columns: 2,
        entity: "f".into(),
        period: "y".into(),
        sheet: None,
        notes: Vec::new(),
    })
}

#[test]
fn ahrens_pincus_hand_example() {
    // T_i = (3, 2, 1) gives gamma = 9/11 and nu = 6/7 (Ahrens & Pincus 1981; worked by hand).
    let df = df!("f" => ["a", "a", "a", "b", "b", "c"], "y" => [1i64, 2, 3, 1, 2, 1]).unwrap();
    let r = report_for(&df, &[]);
    assert!((r.panel.evenness_harmonic.unwrap() - 9.0 / 11.0).abs() < 1e-12);
    assert!((r.panel.evenness_squares.unwrap() - 6.0 / 7.0).abs() < 1e-12);
    assert_eq!(cov(&r).singletons, 1);
    assert_eq!(cov(&r).per_entity.median, 2.0);
}

#[test]
fn iterated_two_way_singletons_remove_every_row() {
    // (A,1), (A,2), (B,2), (B,3), (C,3): C is a singleton; dropping it leaves period 3 with
    // one row, and so on until nothing is left (Correia 2015; worked by hand).
    let df = df!("f" => ["A", "A", "B", "B", "C"], "y" => [1i64, 2, 2, 3, 3]).unwrap();
    let r = report_for(&df, &[]);
    assert_eq!(cov(&r).singletons, 1);
    assert_eq!(cov(&r).singletons_two_way, 5);
}

#[test]
fn gaps_spells_entry_exit_and_survival() {
    // Window 1..4. a: 1,2,4 (gap at 3, back at 4); b: 1..4; c: 2,3 (enters 2, leaves 3).
    let df = df!(
        "f" => ["a", "a", "a", "b", "b", "b", "b", "c", "c"],
        "y" => [1i64, 2, 4, 1, 2, 3, 4, 2, 3],
    )
    .unwrap();
    let r = report_for(&df, &[]);
    let c = cov(&r);
    assert_eq!(
        (c.entities_with_gaps, c.gap_periods, c.longest_gap, c.spells),
        (1, 1, 1, 4)
    );
    let lines: Vec<_> = turnover(&r)
        .entry_exit
        .iter()
        .map(|l| (l.period, l.present, l.entrants, l.leavers, l.reentrants))
        .collect();
    assert_eq!(
        lines,
        [
            (1, 2, None, Some(0), 0),
            (2, 3, Some(1), Some(0), 0),
            (3, 2, Some(0), Some(1), 0),
            (4, 2, Some(0), None, 1),
        ]
    );
    // Cohort 1 (a, b): observed at k = 0, 1, 2, 3 -> 2, 2, 1, 2 of 2. Cohort 2 (c): 1, 1, 0.
    assert_eq!(turnover(&r).survival[0].shares, [1.0, 1.0, 0.5, 1.0]);
    assert_eq!(turnover(&r).survival[1].shares, [1.0, 1.0, 0.0]);
    assert_eq!(
        (
            turnover(&r).attrition_groups.leavers,
            turnover(&r).attrition_groups.stayers
        ),
        (1, 2)
    );
}

#[test]
fn welch_t_and_df_by_hand() {
    // x = 1, 2, 3, 4 (mean 2.5, var 5/3); y = 2, 4, 6, 8, 10 (mean 6, var 10). By hand:
    // se^2 = 5/12 + 2 = 29/12; t = -3.5 / sqrt(29/12); df = (29/12)^2 / ((5/12)^2/3 + 4/4).
    let (t, df, p) = welch(2.5, 5.0 / 3.0, 4.0, 6.0, 10.0, 5.0).unwrap();
    assert!((t - (-3.5 / (29.0f64 / 12.0).sqrt())).abs() < 1e-12);
    let want_df = (29.0f64 / 12.0).powi(2) / ((5.0f64 / 12.0).powi(2) / 3.0 + 1.0);
    assert!((df - want_df).abs() < 1e-12);
    assert!(p > 0.0 && p < 0.1, "{p}");
    assert!(
        welch(1.0, 0.0, 1.0, 2.0, 1.0, 5.0).is_none(),
        "one leaver is too few"
    );
}

#[test]
fn pesaran_cd_hand_example() {
    // e1 = e2 = (1, -1, 1, -1), e3 = (1, 1, -1, -1): rho12 = 1, rho13 = rho23 = 0, so
    // CD = sqrt(2 / (3 * 2)) * sqrt(4) * 1 (Pesaran 2004; worked by hand).
    let s = |v: [f64; 4]| v.iter().map(|x| Some(*x)).collect::<Vec<_>>();
    let cd = model::cd_statistic(&[
        s([1.0, -1.0, 1.0, -1.0]),
        s([1.0, -1.0, 1.0, -1.0]),
        s([1.0, 1.0, -1.0, -1.0]),
    ]);
    assert!((cd - (2.0f64 / 6.0).sqrt() * 2.0).abs() < 1e-12, "{cd}");
    // Two entities sharing 2 periods: no pair is used, the statistic is not computable (it
    // came out 0, "no evidence", having examined nothing).
    let short = model::cd_statistic(&[
        vec![Some(1.0), Some(-1.0), None],
        vec![Some(2.0), Some(1.0), Some(3.0)],
    ]);
    assert!(short.is_nan(), "{short}");
}

#[test]
fn every_verdict_key_is_declared_once() {
    // Each check declares its own `[verdict]` keys: two findings must not share one.
    let keys = verdict::level_keys();
    let mut names: Vec<&str> = keys.iter().map(|k| k.name).collect();
    names.sort_unstable();
    names.dedup();
    assert_eq!(names.len(), keys.len(), "{keys:?}");
}

#[test]
fn key_frames_count_each_key_once() {
    // a: 2001, 2001 (a copy), 2002, 2005 -> 3 keys, steps -, 1, 3; spells 2, longest gap 2,
    // gaps 2. b: 2003 alone. Worked by hand.
    let df = df!(
        "f" => ["a", "a", "a", "a", "b"],
        "y" => [2001i64, 2001, 2002, 2005, 2003],
    )
    .unwrap();
    let ctx = Context::new(&df, "f", "y", Options::default()).unwrap();
    let years: Vec<Option<i64>> = ctx
        .keys
        .column("y")
        .unwrap()
        .i64()
        .unwrap()
        .iter()
        .collect();
    assert_eq!(years, [Some(2001), Some(2002), Some(2005), Some(2003)]);
    let e = &ctx.entities;
    let col = |n: &str| -> Vec<i64> {
        e.column(n)
            .unwrap()
            .i64()
            .unwrap()
            .into_no_null_iter()
            .collect()
    };
    assert_eq!(col(names::N), [3, 1]);
    assert_eq!(
        (col(names::FIRST), col(names::LAST)),
        (vec![2001, 2003], vec![2005, 2003])
    );
    assert_eq!(col(names::SPELLS), [2, 1]);
    assert_eq!(col(names::LONGEST), [2, 0]);
    assert_eq!(col(names::GAPS), [2, 0]);
    let ids: Vec<Option<&str>> = e.column("f").unwrap().str().unwrap().iter().collect();
    assert_eq!(ids, [Some("a"), Some("b")]);
}

/// The variation line of `v`, the one variable of `df` besides the keys `f` and `y`, its text
/// held as codes (it must repeat enough to be).
fn categorical_line(mut df: DataFrame, v: &str, options: Options) -> crate::report::VariationLine {
    crate::core::hold_text_as_codes(&mut df, &["f".to_string()]).unwrap();
    let column = df.column(v).unwrap();
    assert!(crate::core::is_coded(column.dtype()) || column.dtype().is_integer());
    let ctx = Context::new(&df, "f", "y", options).unwrap();
    super::variation::categorical(&ctx).unwrap().remove(0)
}

#[test]
fn a_text_variable_counts_its_values_and_the_first_of_the_most_common() {
    // Worked by hand: 126 rows; `Docks` on rows 0, 3, …, 123 and `Mills` on rows 1, 4, …,
    // 124 (42 each, a tie: `Docks` comes first), `Quay` once, the rest missing: 3 distinct
    // values in 85 rows.
    let f: Vec<String> = (0..126).map(|i| format!("F{:02}", i / 7)).collect();
    let y: Vec<i64> = (0..126).map(|i| 2001 + i % 7).collect();
    let sector: Vec<Option<&str>> = (0..126)
        .map(|i| match (i % 3, i) {
            (0, _) => Some("Docks"),
            (1, _) => Some("Mills"),
            (_, 2) => Some("Quay"),
            _ => None,
        })
        .collect();
    let df = df!("f" => f, "y" => y, "sector" => sector).unwrap();
    let line = categorical_line(df, "sector", Options::default());
    let t = line.text_values.clone().unwrap();
    assert_eq!((line.variable.as_str(), line.n), ("sector", 85));
    assert_eq!(
        t,
        crate::report::TextValues {
            distinct: 3,
            most_common: "Docks".into(),
            most_common_rows: 42,
            // Every firm's seven rows hold both `Docks` and `Mills`.
            entities_changing: 18,
        }
    );
    // Worked by hand: 30 firms of three years; a firm k with k % 3 = 0 holds `A`, `A` and a
    // missing value (no change), k % 3 = 1 `A`, `B`, `A` (a change), k % 3 = 2 a missing
    // value, then `C`, `C` (no change): 10 entities change.
    let f: Vec<String> = (0..90).map(|i| format!("F{:02}", i / 3)).collect();
    let y: Vec<i64> = (0..90).map(|i| 2001 + i % 3).collect();
    let sector: Vec<Option<&str>> = (0..90)
        .map(|i| match ((i / 3) % 3, i % 3) {
            (0, 2) | (2, 0) => None,
            (0, _) | (1, 0) | (1, 2) => Some("A"),
            (1, _) => Some("B"),
            _ => Some("C"),
        })
        .collect();
    let df = df!("f" => f, "y" => y, "sector" => sector).unwrap();
    let t = categorical_line(df, "sector", Options::default())
        .text_values
        .unwrap();
    assert_eq!((t.distinct, t.entities_changing), (3, 10));
    // Worked by hand: an industry code declared categorical, 20 firms of two years: firms
    // with an even number hold 2834, the odd ones 3571, and F07 moves from 3571 to 6021 in its
    // second year. Distinct 3; 2834 on 20 rows (3571 on 19); one entity changes.
    let f: Vec<String> = (0..40).map(|i| format!("F{:02}", i / 2)).collect();
    let y: Vec<i64> = (0..40).map(|i| 2001 + i % 2).collect();
    let sic: Vec<i64> = (0..40)
        .map(|i| match (i / 2, i % 2) {
            (7, 1) => 6021,
            (k, _) if k % 2 == 0 => 2834,
            _ => 3571,
        })
        .collect();
    let df = df!("f" => f, "y" => y, "sic" => sic).unwrap();
    let options = Options {
        categorical: vec!["sic".into()],
        ..Options::default()
    };
    let line = categorical_line(df, "sic", options);
    assert_eq!(
        line.text_values,
        Some(crate::report::TextValues {
            distinct: 3,
            most_common: "2834".into(),
            most_common_rows: 20,
            entities_changing: 1,
        })
    );
    assert!(line.absorbed_by.is_none());
}
