//! The report's data: every figure the readiness report shows, as typed, documented structs.
//! Field names are the JSON contract of `report.json`.

use polars::prelude::*;
use serde::Serialize;

use super::{distinct, Findings};
use crate::Result;

mod outcome;
mod shared;
mod structure;
mod variables;

pub use outcome::*;
pub use shared::*;
pub use structure::*;
pub use variables::*;

/// Every figure the readiness report shows. Field names are the JSON contract
/// (`report::Json` writes them in this order).
#[derive(Debug)]
pub struct Report {
    /// The panelready version that made the report.
    pub tool_version: String,
    /// What was read.
    pub input: InputSummary,
    /// The panel the checks ran on (after the key steps).
    pub panel: PanelSummary,
    /// Missing and duplicate keys in the input.
    pub keys: KeysSummary,
    /// Each check's figures, in the order the checks ran (`audit::registry`); in
    /// `report.json` their entries stand here, each under its own field names.
    pub findings: Findings,
    /// Accounting rules and their violations.
    pub rules: Vec<RuleLine>,
    /// Each derived variable with its null counts by reason.
    pub derived: Vec<DerivedSummary>,
    /// Library ratios left out because the data lacks an input.
    pub skipped: Vec<SkippedRule>,
    /// From raw rows to final rows, one line per step.
    pub sample_construction: Vec<SampleStep>,
    /// Outlier treatment applied by `build`, one line per variable.
    pub treatment: Vec<TreatLine>,
    /// The balancing window chosen by `build`, if any.
    pub balance: Option<BalanceLine>,
    /// The cleaned panel written by `build` (absent for `audit`).
    pub cleaned: Option<Cleaned>,
    /// Diagnostics for the model declared in `[model]` (on the cleaned panel for `build`).
    pub model: Option<ModelReport>,
    /// Pass, warn or fail per check family, and overall.
    pub verdict: Option<Verdict>,
    /// Repairs applied before the checks (`build` and `audit` alike), if any was asked for
    /// (left out of `report.json` when none was).
    pub repairs: Option<Repairs>,
    /// Further raw files joined onto the panel (`[[join]]`), each with its match report
    /// (left out of `report.json` when there are none).
    pub joins: Vec<JoinLine>,
}

impl Report {
    /// A report with no figures yet, for the pipeline and the checks to fill.
    pub fn new(input: InputSummary) -> Report {
        Report {
            tool_version: env!("CARGO_PKG_VERSION").to_string(),
            input,
            panel: PanelSummary::default(),
            keys: KeysSummary::default(),
            findings: Findings::default(),
            rules: Vec::new(),
            derived: Vec::new(),
            skipped: Vec::new(),
            sample_construction: Vec::new(),
            treatment: Vec::new(),
            balance: None,
            cleaned: None,
            model: None,
            verdict: None,
            repairs: None,
            joins: Vec::new(),
        }
    }
}

/// The input file.
#[derive(Debug, Clone, Serialize)]
pub struct InputSummary {
    /// The file name (the manifest has the full path).
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
    /// The sheet read, for a spreadsheet input.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    /// What reading the input had to decide (spreadsheet conversions), one sentence each.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
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
    /// Evenness of the periods per entity, harmonic: harmonic over arithmetic mean of
    /// observations per entity (Ahrens & Pincus 1981, their γ); 1 when balanced, low when some
    /// entities have few periods.
    pub evenness_harmonic: Option<f64>,
    /// Evenness of the periods per entity, squares: N² / (n Σ T_i²) (Ahrens & Pincus 1981,
    /// their ν); 1 when balanced, low when entity sizes vary widely.
    pub evenness_squares: Option<f64>,
}

/// Missing and duplicate keys.
#[derive(Debug, Clone, Default, Serialize)]
pub struct KeysSummary {
    /// Rows whose entity or period is missing (blank rows aside).
    pub missing_key_rows: u64,
    /// Rows with every cell empty (a spreadsheet's empty row, a CSV file's trailing `,,,`):
    /// in the ledger, but no key problem.
    pub blank_rows: u64,
    /// Rows identical in every column to an earlier row (removed; the first is kept).
    pub exact_duplicate_rows: u64,
    /// Keys that had such copies.
    pub exact_duplicate_keys: u64,
    /// Keys that appear on rows with different values.
    pub conflicting_keys: u64,
    /// Rows carrying those keys.
    pub conflicting_rows: u64,
    /// The policy applied to conflicting keys.
    pub policy: String,
    /// The first few conflicting keys.
    pub examples: Vec<KeyExample>,
    /// Groups of entities whose names are one name but for surrounding spaces or letter case
    /// (`K1` and `k1 `): most likely one firm keyed two ways, split into two entities.
    pub alike_entities: u64,
    /// The first few such groups, each as its names.
    pub alike_examples: Vec<Vec<String>>,
    /// With the period derived from a fiscal-year-end date: entities whose year-end month
    /// changed (a change can put two rows into one fiscal year: conflicting keys).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub year_end_changes: Option<YearEndChanges>,
}

/// Fiscal-year-end changes, when the period comes from a year-end date.
#[derive(Debug, Clone, Default, Serialize)]
pub struct YearEndChanges {
    /// The date column.
    pub column: String,
    /// Year ends in this month or earlier count to the previous fiscal year.
    pub cutoff_month: u32,
    /// Entities whose year-end month changed at least once.
    pub entities: u64,
    /// The first few of them.
    pub examples: Vec<String>,
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
    /// A column of the file that is that input's name but for spaces or letter case, said for
    /// people ("the file has `Sales`: …"), if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub near: Option<String>,
}

/// Repairs applied right after the key steps; every changed cell is in `corrections.csv`.
#[derive(Debug, Clone, Serialize)]
pub struct Repairs {
    /// The corrections file, if one was applied (its name).
    pub corrections_file: Option<String>,
    /// Cells the corrections file changed.
    pub corrected_cells: u64,
    /// `[repair] unit_slips`: report, rescale or null.
    pub unit_slips: String,
    /// Unit slips repaired (a jump by a power of 1000 that returns the next period).
    pub unit_slips_repaired: u64,
}

/// How one joined table matched the panel. Its rows balance:
/// `rows = rows_used + rows_unmatched + missing_keys + exact_copies + repeated_keys`, and every
/// row but the used ones is in the rejects ledger under the table's file name.
#[derive(Debug, Clone, Serialize)]
pub struct JoinLine {
    /// The file's name.
    pub file: String,
    /// "entity-period table", "entity table", "period table", "group-period table", ...
    pub kind: String,
    /// The columns matched, as named in the panel.
    pub on: Vec<String>,
    /// The columns brought in.
    pub columns: Vec<String>,
    /// Rows read from the file.
    pub rows: u64,
    /// Rows that matched at least one panel row.
    pub rows_used: u64,
    /// Rows that matched no panel row.
    pub rows_unmatched: u64,
    /// Rows with an empty key column.
    pub missing_keys: u64,
    /// Rows that exactly repeat an earlier row.
    pub exact_copies: u64,
    /// Rows whose key repeats an earlier row with other values (dropped by keep-first).
    pub repeated_keys: u64,
    /// Panel rows when joined.
    pub panel_rows: u64,
    /// Panel rows without a matching row in the file.
    pub panel_rows_unmatched: u64,
    /// Distinct keys (`on`) of the panel.
    pub panel_keys: u64,
    /// Distinct panel keys without a matching row in the file.
    pub panel_keys_unmatched: u64,
    /// Up to five unmatched panel keys, `a / b` for two columns.
    pub examples: Vec<String>,
    /// What happened to unmatched panel rows: "keep" (empty columns) or "drop" (ledger).
    pub unmatched: String,
    /// The column whose unmatched names are compared: the entity, or the one group column of
    /// a table on a group (and the period) when it holds text; empty when none is.
    pub alike_column: String,
    /// The file's unmatched names in that column that are an unmatched panel name but for
    /// spaces, letter case or leading zeros (`k1 ` against `K1`): most likely one firm (or
    /// one group) keyed two ways.
    pub alike_unmatched: u64,
    /// The first such pair: the file's name, then the panel's.
    pub alike_example: Vec<String>,
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

    /// The line for a step that left `rows` rows of `entities` entities.
    pub fn counted(steps: &[SampleStep], step: &str, rows: u64, entities: u64) -> SampleStep {
        let before = steps.last().map_or(0, |s| s.rows_after);
        SampleStep {
            step: step.into(),
            rows_before: before,
            removed: before - rows,
            rows_after: rows,
            entities_after: entities,
        }
    }
}
