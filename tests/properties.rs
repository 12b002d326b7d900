//! Properties that cannot be tuned to: arbitrary bytes into the CSV loader, expressions
//! generated from the SQL grammar into the rules translator, and random small panels
//! (constant and collinear columns included) through every check and estimator — no panic,
//! only results or one-line errors, and every row accounted for.

use std::io::Write;

use panelready::config::{BuildConfig, InputConfig};
use panelready::rules::Rules;
use proptest::prelude::*;

fn rules(text: &str) -> Rules {
    Rules::from_text(None, text.to_string()).unwrap()
}

const KEYS: &str = "[panel]\nentity = \"firm\"\nperiod = \"year\"\n";

/// An SQL expression over the columns `a`, `b`, `firm`, `year`, from a small grammar with deep
/// nesting: literals, names, arithmetic, comparisons, CASE, casts, scalar functions, our panel
/// functions (well and badly called), aggregates and windows (which must be refused).
fn expression() -> impl Strategy<Value = String> {
    let leaf = prop_oneof![
        Just("a".to_string()),
        Just("b".to_string()),
        Just("year".to_string()),
        Just("nosuch".to_string()),
        Just("NULL".to_string()),
        (-1000i32..1000).prop_map(|n| n.to_string()),
        (-1e6f64..1e6).prop_map(|x| format!("{x:.3}")),
        Just("'text'".to_string()),
        Just("1e308".to_string()),
    ];
    leaf.prop_recursive(8, 64, 3, |inner| {
        prop_oneof![
            (
                inner.clone(),
                prop::sample::select(vec![
                    "+", "-", "*", "/", "%", "<", "<=", "=", "<>", "AND", "OR"
                ]),
                inner.clone()
            )
                .prop_map(|(l, op, r)| format!("({l} {op} {r})")),
            inner.clone().prop_map(|e| format!("-({e})")),
            inner.clone().prop_map(|e| format!("NOT ({e})")),
            (inner.clone(), inner.clone(), inner.clone())
                .prop_map(|(c, t, e)| format!("CASE WHEN {c} THEN {t} ELSE {e} END")),
            (
                prop::sample::select(vec![
                    "ln",
                    "abs",
                    "sqrt",
                    "exp",
                    "coalesce",
                    "greatest",
                    "least",
                    "round",
                    "sum",
                    "avg",
                    "max",
                    "count",
                    "first_value",
                    "frobnicate",
                    "upper"
                ]),
                inner.clone(),
                inner.clone()
            )
                .prop_map(|(f, x, y)| format!("{f}({x}, {y})")),
            (
                prop::sample::select(vec!["lag", "lead", "diff", "growth"]),
                prop::sample::select(vec!["a", "b", "year", "(a + 1)", "nosuch"]),
                -2i32..4
            )
                .prop_map(|(f, c, k)| format!("{f}({c}, {k})")),
            inner.clone().prop_map(|e| format!("CAST({e} AS DOUBLE)")),
            inner
                .clone()
                .prop_map(|e| format!("sum({e}) OVER (PARTITION BY firm)")),
            inner.prop_map(|e| format!("{e} IS NULL")),
        ]
    })
}

proptest! {
    #![proptest_config(crate::util::proptest_config(200))]

    #[test]
    fn generated_expressions_compile_or_fail_with_one_line(expr in expression()) {
        let dir = tempfile::tempdir().unwrap();
        let data = dir.path().join("p.csv");
        std::fs::write(&data, "firm,year,a,b\nA,2001,1,2\nA,2002,3,4\nB,2001,5,6\n").unwrap();
        let text = format!("{KEYS}[derive.x]\nexpr = {}\n", toml_string(&expr));
        let cfg = InputConfig::new(data, rules(&text)).unwrap();
        let progress = panelready::progress::Progress::new(true, false);
        match panelready::pipeline::prepare(&cfg, panelready::pipeline::Mode::Audit, &progress) {
            Ok(p) => prop_assert_eq!(p.panel.height(), 3),
            Err(e) => {
                let msg = e.to_string();
                prop_assert!(!msg.contains('\n'), "multi-line error: {}", msg);
            }
        }
    }
}

fn toml_string(s: &str) -> String {
    format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""))
}

proptest! {
    #![proptest_config(crate::util::proptest_config(120))]

    #[test]
    fn arbitrary_bytes_into_the_csv_loader_never_panic(
        header in prop::sample::select(vec!["firm,year,x\n", "firm;year;x\n", "\"firm\",year,x\n", ""]),
        body in prop::collection::vec(any::<u8>(), 0..400),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let data = dir.path().join("p.csv");
        let mut f = std::fs::File::create(&data).unwrap();
        f.write_all(header.as_bytes()).unwrap();
        f.write_all(&body).unwrap();
        drop(f);
        let cfg = InputConfig::new(data, rules(KEYS)).unwrap();
        let progress = panelready::progress::Progress::new(true, false);
        match panelready::pipeline::prepare(&cfg, panelready::pipeline::Mode::Audit, &progress) {
            Ok(p) => prop_assert_eq!(
                p.report.input.rows,
                p.panel.height() as u64 + p.rejected.height() as u64
            ),
            Err(e) => {
                let msg = e.to_string();
                prop_assert!(!msg.contains('\n'), "multi-line error: {}", msg);
            }
        }
    }
}

/// A small panel: up to 6 entities × 5 periods with holes; `x` random, `c` constant, `k` a
/// multiple of `x` (collinear), `f` fixed per entity, `t` the period (absorbed by period
/// effects), `y` random.
fn panel() -> impl Strategy<Value = String> {
    prop::collection::vec(
        (0u8..6, 0u8..5, -50i16..50, -50i16..50, any::<bool>()),
        1..40,
    )
    .prop_map(|rows| {
        let mut out = String::from("firm,year,x,c,k,f,t,y\n");
        for (e, p, x, y, hole) in rows {
            let x = if hole { String::new() } else { x.to_string() };
            let k = x
                .parse::<f64>()
                .map(|v| (2.0 * v).to_string())
                .unwrap_or_default();
            out.push_str(&format!(
                "F{e},{},{x},7,{k},{},{p},{y}\n",
                2001 + p as i32,
                e * 3,
            ));
        }
        out
    })
}

proptest! {
    #![proptest_config(crate::util::proptest_config(60))]

    #[test]
    fn random_small_panels_pass_every_check_and_estimator(
        data in panel(),
        effects in prop::sample::select(vec!["entity", "entity+period"]),
        regressors in prop::sample::select(vec![
            "[\"x\"]", "[\"x\", \"c\"]", "[\"x\", \"k\"]", "[\"x\", \"f\", \"t\"]", "[\"c\"]",
        ]),
        lagged in any::<bool>(),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("p.csv");
        std::fs::write(&path, &data).unwrap();
        let text = format!(
            "{KEYS}[clean]\nduplicates = \"keep-first\"\n\
             winsorize = {{ variables = [\"x\"], lower = 0.1, upper = 0.9, by = \"period\" }}\n\
             [derive.g]\nexpr = \"growth(x, 1)\"\n\
             [model]\noutcome = \"y\"\nregressors = {regressors}\neffects = \"{effects}\"\n\
             lagged_outcome = {lagged}\n"
        );
        let input = InputConfig::new(path, rules(&text)).unwrap();
        let cfg = BuildConfig {
            input,
            out: dir.path().join("b"),
            command_line: "test".into(),
            panel_csv: true,
            fail_on: None,
        };
        let manifest = panelready::build(&cfg).unwrap();
        prop_assert_eq!(manifest.rows.input, manifest.rows.kept + manifest.rows.rejected);
        prop_assert_eq!(manifest.rows.input, data.lines().count() as u64 - 1);
    }
}
