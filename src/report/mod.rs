//! The readiness report: one typed `Report` filled by the pipeline and the checks, and one
//! renderer per output format behind the `Render` trait. Renderers never compute.

mod json;
mod markdown;
mod terminal;

use std::io::Write;

use polars::prelude::*;
use serde::Serialize;

use crate::config::{InputFormat, ReportFormat};
use crate::rules::Origin;
use crate::Result;

pub use json::Json;
pub use markdown::Markdown;
pub use terminal::Terminal;

/// Every figure the readiness report shows. Field names are the JSON contract.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// The panelready version that made the report.
    pub tool_version: String,
    /// What was read.
    pub input: InputSummary,
    /// The panel the checks ran on (after the key steps).
    pub panel: PanelSummary,
    /// Missing and duplicate keys in the input.
    pub keys: KeysSummary,
    /// Each derived variable with its null counts by reason.
    pub derived: Vec<DerivedSummary>,
    /// Library ratios left out because the data lacks an input.
    pub skipped: Vec<SkippedRule>,
    /// From raw rows to final rows, one line per step.
    pub sample_construction: Vec<SampleStep>,
}

/// The input file.
#[derive(Debug, Clone, Serialize)]
pub struct InputSummary {
    /// The path as given.
    pub path: String,
    /// CSV or Parquet.
    pub format: InputFormat,
    /// Rows read.
    pub rows: u64,
    /// Columns read.
    pub columns: u64,
    /// The entity column.
    pub entity: String,
    /// The period column.
    pub period: String,
}

/// Panel at a glance.
#[derive(Debug, Clone, Default, Serialize)]
pub struct PanelSummary {
    /// Rows (entity-period observations).
    pub rows: u64,
    /// Distinct entities.
    pub entities: u64,
    /// Distinct periods observed.
    pub periods: u64,
    /// First period observed.
    pub first_period: Option<i64>,
    /// Last period observed.
    pub last_period: Option<i64>,
    /// Every entity observed in every period of first..last, once.
    pub balanced: bool,
}

/// Missing and duplicate keys.
#[derive(Debug, Clone, Default, Serialize)]
pub struct KeysSummary {
    /// Rows whose entity or period is missing.
    pub missing_key_rows: u64,
    /// Rows identical in every column to an earlier row (collapsed to one).
    pub exact_duplicate_rows: u64,
    /// Keys that appear on rows with different values.
    pub conflicting_keys: u64,
    /// Rows carrying those keys.
    pub conflicting_rows: u64,
    /// The policy applied to conflicting keys.
    pub policy: String,
    /// The first few conflicting keys.
    pub examples: Vec<KeyExample>,
}

/// One conflicting key.
#[derive(Debug, Clone, Serialize)]
pub struct KeyExample {
    /// The entity.
    pub entity: String,
    /// The period.
    pub period: i64,
    /// How many rows carry it.
    pub rows: u64,
}

/// One derived variable.
#[derive(Debug, Clone, Serialize)]
pub struct DerivedSummary {
    /// Output column name.
    pub name: String,
    /// Human label.
    pub label: String,
    /// The expression as written.
    pub expr: String,
    /// Unit.
    pub unit: String,
    /// Source of the definition.
    pub source: String,
    /// User rules file or the built-in library.
    pub origin: Origin,
    /// Rows with a value.
    pub non_null: u64,
    /// Rows without one.
    pub nulls: u64,
    /// Nulls by reason; the reasons add up to `nulls`.
    pub null_reasons: Vec<NullCount>,
}

/// Nulls of one reason.
#[derive(Debug, Clone, Serialize)]
pub struct NullCount {
    /// The reason, as declared in the rule.
    pub reason: String,
    /// Rows.
    pub rows: u64,
}

/// A library ratio left out.
#[derive(Debug, Clone, Serialize)]
pub struct SkippedRule {
    /// The ratio.
    pub name: String,
    /// The input it lacks.
    pub missing: String,
}

/// One line of the sample-construction table.
#[derive(Debug, Clone, Serialize)]
pub struct SampleStep {
    /// The step.
    pub step: String,
    /// Rows before it.
    pub rows_before: u64,
    /// Rows it removed.
    pub removed: u64,
    /// Rows after it.
    pub rows_after: u64,
    /// Distinct entities after it.
    pub entities_after: u64,
}

impl SampleStep {
    /// The first line: rows as read.
    pub fn start(df: &DataFrame, entity: &str) -> Result<SampleStep> {
        let rows = df.height() as u64;
        Ok(SampleStep {
            step: "rows read".into(),
            rows_before: rows,
            removed: 0,
            rows_after: rows,
            entities_after: distinct(df, entity)?,
        })
    }

    /// The line for a step that left `df`.
    pub fn after(
        steps: &[SampleStep],
        step: &str,
        df: &DataFrame,
        entity: &str,
    ) -> Result<SampleStep> {
        let before = steps.last().map_or(0, |s| s.rows_after);
        let after = df.height() as u64;
        Ok(SampleStep {
            step: step.into(),
            rows_before: before,
            removed: before - after,
            rows_after: after,
            entities_after: distinct(df, entity)?,
        })
    }
}

/// Distinct non-null values of a column.
pub(crate) fn distinct(df: &DataFrame, column: &str) -> Result<u64> {
    let n = df
        .clone()
        .lazy()
        .select([col(column).drop_nulls().n_unique().cast(DataType::UInt64)])
        .collect()?;
    Ok(n.column(column)?.u64()?.get(0).unwrap_or(0))
}

/// A report renderer: formats a `Report`, computes nothing.
pub trait Render {
    /// Write the report.
    fn render(&self, report: &Report, wtr: &mut dyn Write) -> std::io::Result<()>;
}

/// The renderer for a format.
pub fn renderer(format: ReportFormat) -> Box<dyn Render> {
    match format {
        ReportFormat::Terminal => Box::new(Terminal),
        ReportFormat::Markdown => Box::new(Markdown),
        ReportFormat::Json => Box::new(Json),
    }
}

/// Rows that share one shape across renderers: (label, value) pairs per section.
pub(crate) fn glance_rows(r: &Report) -> Vec<(&'static str, String)> {
    let p = &r.panel;
    let window = match (p.first_period, p.last_period) {
        (Some(a), Some(b)) => format!("{a}..{b}"),
        _ => "none".into(),
    };
    vec![
        ("rows", p.rows.to_string()),
        ("entities", p.entities.to_string()),
        ("periods observed", p.periods.to_string()),
        ("window", window),
        ("balanced", if p.balanced { "yes" } else { "no" }.into()),
    ]
}

/// Key findings as (label, value) pairs.
pub(crate) fn key_rows(r: &Report) -> Vec<(&'static str, String)> {
    let k = &r.keys;
    vec![
        (
            "rows missing entity or period",
            k.missing_key_rows.to_string(),
        ),
        (
            "exact copies of an earlier row",
            k.exact_duplicate_rows.to_string(),
        ),
        (
            "keys on rows with different values",
            k.conflicting_keys.to_string(),
        ),
        ("rows carrying those keys", k.conflicting_rows.to_string()),
        ("policy for those keys", k.policy.clone()),
    ]
}

/// How a derived variable's nulls break down, in words.
pub(crate) fn null_breakdown(d: &DerivedSummary) -> String {
    let parts: Vec<String> = d
        .null_reasons
        .iter()
        .filter(|n| n.rows > 0)
        .map(|n| format!("{}: {}", n.reason, n.rows))
        .collect();
    if parts.is_empty() {
        "none".into()
    } else {
        parts.join("; ")
    }
}

#[cfg(test)]
mod tests;
