//! Row conservation, as a property: whatever the panel and the cleaning choices, every input
//! row is either in the cleaned panel or in the rejects ledger, exactly once.

use std::collections::BTreeSet;

use panelready::config::{BuildConfig, InputConfig};
use panelready::rules::Rules;
use proptest::prelude::*;

/// A raw row: entity (None = missing), period (None = missing), value.
type Row = (Option<u8>, Option<u8>, i8);

fn csv(rows: &[Row]) -> String {
    let mut out = String::from("firm,year,x\n");
    for (e, p, x) in rows {
        let e = e.map_or(String::new(), |e| format!("F{e}"));
        let p = p.map_or(String::new(), |p| (2000 + p as i32).to_string());
        out.push_str(&format!("{e},{p},{x}\n"));
    }
    out
}

fn ids(text: &str) -> Vec<u64> {
    text.lines()
        .skip(1)
        .filter_map(|l| l.split(',').next()?.parse().ok())
        .collect()
}

/// `rows` with exact copies of some of them appended, written to `p.csv` in a new temporary
/// folder (returned with the file's path).
fn written(rows: &mut Vec<Row>, copies: &[usize]) -> (tempfile::TempDir, std::path::PathBuf) {
    for i in copies {
        if let Some(r) = rows.get(i % rows.len()).copied() {
            rows.push(r);
        }
    }
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("p.csv");
    std::fs::write(&data, csv(rows)).unwrap();
    (dir, data)
}

fn row() -> impl Strategy<Value = Row> {
    (
        prop::option::weighted(0.95, 0u8..5),
        prop::option::weighted(0.95, 0u8..6),
        -10i8..10,
    )
}

proptest! {
    #![proptest_config(crate::util::proptest_config(40))]

    #[test]
    fn every_row_is_kept_or_rejected_exactly_once(
        mut rows in prop::collection::vec(row(), 1..40),
        copies in prop::collection::vec(0usize..40, 0..5),
        policy in prop::sample::select(vec!["keep-first", "keep-last", "drop-all", "prefer-max:x"]),
        singletons in prop::sample::select(vec!["false", "true", "\"entity+period\""]),
        balance in prop::sample::select(vec!["\"keep\"", "\"largest\"", "{ window = [2001, 2003] }"]),
        trim in any::<bool>(),
    ) {
        let (dir, data) = written(&mut rows, &copies);
        let trim = if trim { "trim = { variables = [\"x\"], lower = 0.1, upper = 0.9 }\n" } else { "" };
        let rules = format!(
            "[panel]\nentity = \"firm\"\nperiod = \"year\"\n\
             [[rule]]\nname = \"not_too_low\"\nexpr = \"x > -8\"\naction = \"drop\"\n\
             [clean]\nduplicates = \"{policy}\"\ndrop_singletons = {singletons}\nbalance = {balance}\n{trim}"
        );
        let cfg = BuildConfig {
            input: InputConfig::new(data, Rules::from_text(None, rules).unwrap()).unwrap(),
            out: dir.path().join("out"),
            command_line: "proptest".into(),
            panel_csv: true,
            fail_on: None,
        };
        let manifest = panelready::build(&cfg).unwrap();
        prop_assert_eq!(manifest.rows.input, rows.len() as u64);
        prop_assert_eq!(manifest.rows.input, manifest.rows.kept + manifest.rows.rejected);
        let kept = ids(&std::fs::read_to_string(dir.path().join("out/panel.csv")).unwrap());
        let rejected = ids(&std::fs::read_to_string(dir.path().join("out/rejected.csv")).unwrap());
        let mut all: Vec<u64> = kept.iter().chain(rejected.iter()).copied().collect();
        all.sort();
        prop_assert_eq!(all, (1..=rows.len() as u64).collect::<Vec<_>>());
        let kept: BTreeSet<u64> = kept.into_iter().collect();
        prop_assert!(rejected.iter().all(|r| !kept.contains(r)));
    }

    /// Rules that read only their own row work on the panel with the key steps' dropped rows
    /// still in it (one copy of the panel drops both steps' rows); a rule that reads another
    /// period makes the key steps' drop happen first. Either way the same rows are kept and
    /// rejected, with the same reasons, and each rule counts the same violations (over the
    /// rows the key steps kept only).
    #[test]
    fn rules_see_the_same_rows_whether_the_key_steps_drop_is_done_first_or_with_theirs(
        mut rows in prop::collection::vec(row(), 1..40),
        copies in prop::collection::vec(0usize..40, 0..5),
        policy in prop::sample::select(vec!["keep-first", "keep-last", "drop-all", "prefer-max:x"]),
    ) {
        let (dir, data) = written(&mut rows, &copies);
        let own_row = format!(
            "[panel]\nentity = \"firm\"\nperiod = \"year\"\n[clean]\nduplicates = \"{policy}\"\n\
             [[rule]]\nname = \"not_too_low\"\nexpr = \"x > -6\"\naction = \"drop\"\n\
             [[rule]]\nname = \"not_three\"\nexpr = \"x <> 3\"\naction = \"drop\"\n\
             [[rule]]\nname = \"capped\"\nexpr = \"x < 6\"\naction = \"null\"\ncolumns = [\"x\"]\n\
             [[rule]]\nname = \"not_zero\"\nexpr = \"x <> 0\"\n"
        );
        let other_period = format!(
            "{own_row}[[rule]]\nname = \"reads_the_year_before\"\nexpr = \"lag(x, 1) IS NULL OR x IS NULL OR x > -100\"\n"
        );
        let mut outputs = Vec::new();
        for (i, rules) in [own_row, other_period].into_iter().enumerate() {
            let out = dir.path().join(format!("out{i}"));
            let cfg = BuildConfig {
                input: InputConfig::new(data.clone(), Rules::from_text(None, rules).unwrap()).unwrap(),
                out: out.clone(),
                command_line: "proptest".into(),
                panel_csv: true,
                fail_on: None,
            };
            panelready::build(&cfg).unwrap();
            let report: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
            let counts: Vec<(u64, u64)> = report["rules"]
                .as_array()
                .unwrap()
                .iter()
                .take(4)
                .map(|r| (r["violations"].as_u64().unwrap(), r["unknown"].as_u64().unwrap()))
                .collect();
            outputs.push((
                std::fs::read_to_string(out.join("panel.csv")).unwrap(),
                std::fs::read_to_string(out.join("rejected.csv")).unwrap(),
                counts,
            ));
        }
        prop_assert_eq!(&outputs[0], &outputs[1]);
    }
}

/// Hand-worked: a `drop` rule that reads the year before is judged on the panel before any
/// rule drops a row (A's third year is compared with its second, which the rule itself
/// drops); a row breaking two rules is named by the first.
#[test]
fn a_rule_reading_the_year_before_drops_with_its_own_reason() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("p.csv");
    std::fs::write(&data, "f,y,x\nA,1,5\nA,2,1\nA,3,9\nB,1,4\nB,2,4\nB,2,4\n").unwrap();
    let rules = "[panel]\nentity = \"f\"\nperiod = \"y\"\n\
        [[rule]]\nname = \"no_fall\"\nexpr = \"lag(x, 1) IS NULL OR x >= lag(x, 1)\"\naction = \"drop\"\n\
        [[rule]]\nname = \"small\"\nexpr = \"x < 9\"\naction = \"drop\"\n";
    let out = dir.path().join("out");
    let cfg = BuildConfig {
        input: InputConfig::new(data, Rules::from_text(None, rules.into()).unwrap()).unwrap(),
        out: out.clone(),
        command_line: "test".into(),
        panel_csv: true,
        fail_on: None,
    };
    panelready::build(&cfg).unwrap();
    let panel = std::fs::read_to_string(out.join("panel.csv")).unwrap();
    assert_eq!(panel, "source_row,f,y,x\n1,A,1,5\n4,B,1,4\n5,B,2,4\n");
    let ledger = std::fs::read_to_string(out.join("rejected.csv")).unwrap();
    let lines: Vec<&str> = ledger.lines().skip(1).collect();
    assert_eq!(
        lines,
        [
            "2,accounting rules,\"rule `no_fall` does not hold: lag(x, 1) IS NULL OR x >= lag(x, 1)\",,A,2,1",
            "3,accounting rules,rule `small` does not hold: x < 9,,A,3,9",
            "6,exact copies,exact copy of an earlier row (related_row),5,B,2,4",
        ],
        "{ledger}"
    );
}
