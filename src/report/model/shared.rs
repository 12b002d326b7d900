//! Small types the report names and the rest of the crate shares: verdict levels, how
//! cutoffs are grouped, input and report formats, where a derived variable came from. They
//! live here so that the report model imports nothing of the checks, the rules or the
//! configuration; those modules re-export them.

use serde::{Deserialize, Serialize};

/// One verdict level, ordered from best to worst.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// The check had nothing to examine (no variable, no rule): neither a pass nor evidence.
    #[serde(rename = "not checked")]
    NotChecked,
    /// Nothing to act on.
    Pass,
    /// Look before estimating.
    Warn,
    /// Do not estimate on this panel as it stands.
    Fail,
}

impl Status {
    /// The word used in reports and on the command line.
    pub fn label(self) -> &'static str {
        match self {
            Status::NotChecked => "not checked",
            Status::Pass => "pass",
            Status::Warn => "warn",
            Status::Fail => "fail",
        }
    }
}

/// The verdict of one check family.
#[derive(Debug, Clone, Serialize)]
pub struct CheckVerdict {
    /// The check family (a report section).
    pub check: String,
    /// Its status.
    pub status: Status,
    /// Why, in one line.
    pub reason: String,
}

/// Every check's verdict and the overall one.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    /// The worst status of all checks.
    pub overall: Status,
    /// One line per check family.
    pub checks: Vec<CheckVerdict>,
}

/// How cutoffs are computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CutoffGroups {
    /// One pair of cutoffs over all rows.
    Pooled,
    /// A pair of cutoffs per period.
    Period,
    /// A pair of cutoffs per group of declared columns.
    Groups,
}

/// Input file formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum InputFormat {
    /// Comma-separated values with a header row.
    Csv,
    /// Apache Parquet.
    Parquet,
    /// A spreadsheet workbook (.xlsx, .xlsm, .ods): one sheet, header in the first row.
    Spreadsheet,
}

/// Report output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReportFormat {
    /// Tables for a terminal.
    Terminal,
    /// Markdown.
    Markdown,
    /// JSON.
    Json,
    /// A self-contained HTML page with charts.
    Html,
}

/// Where a derived variable came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Origin {
    /// The user's rules file.
    User,
    /// The built-in standard library.
    Standard,
}
