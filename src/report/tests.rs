//! Renderer tests: every format shows the same figures from one report.

use super::*;
use crate::config::InputFormat;
use crate::rules::Origin;

fn sample() -> Report {
    let mut r = Report::new(InputSummary {
        path: "in.csv".into(),
        format: InputFormat::Csv,
        rows: 1234,
        columns: 9,
        entity: "firm".into(),
        period: "year".into(),
        sheet: None,
        notes: Vec::new(),
    });
    r.panel = PanelSummary {
        rows: 1201,
        entities: 87,
        periods: 15,
        first_period: Some(2010),
        last_period: Some(2024),
        balanced: false,
        evenness_harmonic: Some(0.8123),
        evenness_squares: Some(0.7654),
    };
    r.keys = KeysSummary {
        missing_key_rows: 3,
        blank_rows: 0,
        exact_duplicate_rows: 7,
        exact_duplicate_keys: 6,
        conflicting_keys: 5,
        conflicting_rows: 10,
        policy: "keep-first".into(),
        examples: vec![KeyExample {
            entity: "VM00017".into(),
            period: 2013,
            rows: 2,
        }],
        year_end_changes: None,
        alike_entities: 0,
        alike_examples: Vec::new(),
    };
    let mut coverage = Coverage {
        singletons: 41,
        ..Coverage::default()
    };
    coverage.shapes = vec![Shape {
        first: 2012,
        last: 2024,
        gap_periods: 2,
        entities: 33,
    }];
    r.findings.push(Box::new(coverage));
    r.findings.push(Box::new(EntryExitFigures {
        entry_exit: vec![EntryExit {
            period: 2011,
            present: 77,
            entrants: Some(6),
            leavers: None,
            reentrants: 2,
        }],
        attrition: vec![AttritionTest {
            variable: "roa".into(),
            n_leavers: 20,
            n_stayers: 60,
            mean_leavers: Some(0.0123),
            mean_stayers: Some(0.0456),
            t: Some(-2.5),
            df: Some(31.2),
            p: Some(0.0179),
        }],
        ..EntryExitFigures::default()
    }));
    r.derived = vec![DerivedSummary {
        name: "size".into(),
        label: "log assets".into(),
        expr: "ln(total_assets)".into(),
        unit: "log".into(),
        source: "x".into(),
        origin: Origin::Standard,
        non_null: 1190,
        nulls: 11,
        null_reasons: vec![NullCount {
            reason: "total assets not positive".into(),
            rows: 11,
        }],
    }];
    r.sample_construction = vec![SampleStep {
        step: "missing keys".into(),
        rows_before: 1234,
        removed: 3,
        rows_after: 1231,
        entities_after: 87,
    }];
    {
        use crate::audit::verdict::{CheckVerdict, Status, Verdict};
        let line = |check: &str, status, reason: &str| CheckVerdict {
            check: check.into(),
            status,
            reason: reason.into(),
        };
        r.verdict = Some(Verdict {
            overall: Status::Fail,
            checks: vec![
                line("Keys", Status::Fail, "5 conflicting keys left unresolved"),
                line(
                    "Entry and exit",
                    Status::Warn,
                    "leavers differ from stayers",
                ),
                line("Missing values", Status::Pass, "no sharp change"),
            ],
        });
    }
    r
}

fn render(format: ReportFormat) -> String {
    let mut buf = Vec::new();
    renderer(format).render(&sample(), &mut buf).unwrap();
    String::from_utf8(buf).unwrap()
}

#[test]
fn every_format_carries_the_same_figures() {
    let json: serde_json::Value = serde_json::from_str(&render(ReportFormat::Json)).unwrap();
    assert_eq!(json["panel"]["entities"], 87);
    assert_eq!(json["panel"]["evenness_harmonic"], 0.8123);
    assert_eq!(json["keys"]["conflicting_keys"], 5);
    assert_eq!(json["coverage"]["singletons"], 41);
    assert_eq!(json["entry_exit"][0]["leavers"], serde_json::Value::Null);
    assert_eq!(json["attrition"][0]["p"], 0.0179);
    assert_eq!(json["derived"][0]["null_reasons"][0]["rows"], 11);
    assert_eq!(json["sample_construction"][0]["rows_after"], 1231);
    for format in [ReportFormat::Terminal, ReportFormat::Markdown] {
        let text = render(format);
        for figure in [
            "1201",
            "87",
            "2010..2024",
            "0.8123",
            "VM00017",
            "41",
            "2012 to 2024, 2 periods missing",
            "77",
            "0.0179",
            "-2.50",
            "1190",
            "total assets not positive: 11",
            "1231",
        ] {
            assert!(text.contains(figure), "{format:?} lacks {figure}:\n{text}");
        }
    }
}

#[test]
fn terminal_tables_fit_in_100_columns() {
    for line in render(ReportFormat::Terminal).lines() {
        assert!(line.chars().count() <= 100, "too wide: {line}");
    }
}

#[test]
fn markdown_opens_with_the_verdict_and_links_each_finding_to_its_section() {
    let text = render(ReportFormat::Markdown);
    let verdict = text.find("Overall verdict").expect("a verdict line");
    let first_section = text.find("\n## ").expect("sections");
    assert!(verdict < first_section, "the verdict comes first:\n{text}");
    for l in text
        .lines()
        .filter(|l| l.starts_with("- ") && l.contains("](#"))
    {
        let anchor = &l[l.find("](#").unwrap() + 3..l.find("):").unwrap()];
        let heading = text
            .lines()
            .filter_map(|h| h.strip_prefix("## "))
            .find(|h| layout::slug(h) == anchor);
        assert!(heading.is_some(), "no section for the link #{anchor}");
    }
}

#[test]
fn html_shows_code_not_backticks_and_keeps_figures_on_one_line() {
    let html = render(ReportFormat::Html);
    let text_only: String = html
        .split('<')
        .map(|piece| piece.split_once('>').map_or(piece, |(_, t)| t))
        .collect();
    assert!(!text_only.contains('`'), "a literal backtick in the page");
    assert!(html.contains("td.n{white-space:nowrap}"));
    assert!(html.contains("id=\"verdict-first\""));
}

#[test]
fn levels_read_with_four_significant_digits() {
    // Worked by hand: four significant digits, none below the units from 1000 on.
    use layout::{is_figure, level, slug};
    assert_eq!(level(135666.8639), "135667");
    assert_eq!(level(3320.3147), "3320");
    assert_eq!(level(329.8395), "329.8");
    assert_eq!(level(5.9696), "5.970");
    assert_eq!(level(0.0147), "0.01470");
    assert_eq!(level(-0.10594108179290836), "-0.1059");
    assert_eq!(level(0.0), "0");
    assert_eq!(level(f64::NAN), "–");
    assert_eq!(level(2e-9), "2.000e-9");
    for figure in [
        "1 / 7.00 / 14.0",
        "< 0.0001",
        "599, 5963",
        "+21.59",
        "–",
        "x 1000",
    ] {
        assert!(is_figure(figure), "{figure}");
    }
    for text in [
        "3 rows missing a key",
        "not identified",
        "yes",
        "2010 to 2017, no gaps",
    ] {
        assert!(!is_figure(text), "{text}");
    }
    assert_eq!(slug("Entry and exit"), "entry-and-exit");
    assert_eq!(slug("Outliers and unit slips"), "outliers-and-unit-slips");
}
