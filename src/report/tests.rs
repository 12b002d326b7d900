//! Renderer tests: every format shows the same figures from one report.

use super::*;
use crate::config::InputFormat;

fn sample() -> Report {
    Report {
        tool_version: "0.0.0".into(),
        input: InputSummary {
            path: "in.csv".into(),
            format: InputFormat::Csv,
            rows: 1234,
            columns: 9,
            entity: "firm".into(),
            period: "year".into(),
        },
        panel: PanelSummary {
            rows: 1201,
            entities: 87,
            periods: 15,
            first_period: Some(2010),
            last_period: Some(2024),
            balanced: false,
        },
        keys: KeysSummary {
            missing_key_rows: 3,
            exact_duplicate_rows: 7,
            conflicting_keys: 5,
            conflicting_rows: 10,
            policy: "keep-first".into(),
            examples: vec![KeyExample {
                entity: "VM00017".into(),
                period: 2013,
                rows: 2,
            }],
        },
        derived: vec![DerivedSummary {
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
        }],
        skipped: vec![],
        sample_construction: vec![SampleStep {
            step: "missing keys".into(),
            rows_before: 1234,
            removed: 3,
            rows_after: 1231,
            entities_after: 87,
        }],
    }
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
    assert_eq!(json["keys"]["conflicting_keys"], 5);
    assert_eq!(json["derived"][0]["null_reasons"][0]["rows"], 11);
    assert_eq!(json["sample_construction"][0]["rows_after"], 1231);
    for format in [ReportFormat::Terminal, ReportFormat::Markdown] {
        let text = render(format);
        for figure in [
            "1201",
            "87",
            "2010..2024",
            "VM00017",
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
