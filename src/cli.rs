//! Command-line arguments as the user typed them (clap derive). `config` turns these into a
//! validated `Config`; nothing outside `config` and `lib` sees clap types.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};

/// Audit, derive and clean firm-year panels before panel regressions.
#[derive(Debug, Parser)]
#[command(
    name = "panelready",
    version,
    about,
    max_term_width = 100,
    after_help = "Exit codes: 0 ok; 1 `verify` found a file that differs, or `--fail-on` (audit, \
                  build) met its level; 2 any error (usage, input, rules), printed as one line on stderr; 3 an \
                  internal error (a bug), also one line. The README describes the rules file and the bundle."
)]
pub(crate) struct Cli {
    #[command(subcommand)]
    pub(crate) command: CliCommand,
}

#[derive(Debug, Subcommand)]
pub(crate) enum CliCommand {
    /// Derive variables and check the panel; print the readiness report, write nothing.
    Audit(AuditArgs),
    /// Derive, check and clean; write the hand-off bundle to `--out`.
    Build(BuildArgs),
    /// Generate the invented demo panel and run `build` on it.
    Demo(DemoArgs),
    /// Re-run a bundle from its manifest and confirm every output hash (exit 1 if any differ).
    Verify(VerifyArgs),
    /// List the built-in ratio definitions with their formulas, null rules and sources.
    Ratios,
    /// Work with rules files: `rules draft DATA` writes a starter rules file guessed from the
    /// data.
    #[command(subcommand)]
    Rules(RulesCommand),
    /// Compare two vintages of one panel (two raw files or two bundles): firm-years and
    /// entities added and removed, columns added and removed (and those holding the same
    /// values under another name), cells changed beyond a tolerance (exit 1 if anything
    /// changed).
    Compare(CompareArgs),
}

#[derive(Debug, Subcommand)]
pub(crate) enum RulesCommand {
    /// Write a starter rules file guessed from DATA: the entity and period columns (the period
    /// from fiscal-year-end dates where no column of years fits), number codes of categories,
    /// the canonical columns from common raw names (every guess commented), the standard
    /// library, the ratios it can compute, commented [clean] and [model] sections.
    Draft(DraftArgs),
}

#[derive(Debug, Args)]
pub(crate) struct DraftArgs {
    /// The raw panel: CSV, Parquet or a spreadsheet.
    pub(crate) data: PathBuf,

    /// Write the draft to this file (refused if it exists) instead of printing it.
    #[arg(long, value_name = "FILE")]
    pub(crate) out: Option<PathBuf>,

    #[command(flatten)]
    pub(crate) read: ReadArgs,
}

#[derive(Debug, Args)]
pub(crate) struct CompareArgs {
    /// The earlier vintage: a raw CSV / Parquet / spreadsheet file (keys from --rules or
    /// --entity / --period), or a bundle folder written by `build` (it carries its own).
    pub(crate) old: PathBuf,

    /// The later vintage, of the same kind.
    pub(crate) new: PathBuf,

    #[command(flatten)]
    pub(crate) keys: KeyArgs,

    #[command(flatten)]
    pub(crate) read: ReadArgs,

    /// Absolute tolerance: a number changed when |new − old| > ABS + REL · |old|. A bare
    /// number sets every column's; `COLUMN=X` one column's. Repeatable. Default 0.
    #[arg(long = "absolute", value_name = "[COLUMN=]X")]
    pub(crate) absolute: Vec<String>,

    /// Relative tolerance (see --absolute). A bare number sets every column's; `COLUMN=X`
    /// one column's. Repeatable. Default 1e-9.
    #[arg(long = "relative", value_name = "[COLUMN=]X")]
    pub(crate) relative: Vec<String>,

    /// How to print the summary.
    #[arg(long, value_enum, default_value = "terminal")]
    pub(crate) format: ReportFormatArg,

    /// Write the summary to this file instead of printing it (.md, .json, .html, .txt).
    #[arg(long, value_name = "PATH")]
    pub(crate) report: Option<PathBuf>,

    /// Write the change ledger (CSV: entity, period, change, column, old, new, difference).
    #[arg(long, value_name = "PATH")]
    pub(crate) changes: Option<PathBuf>,
}

/// Where the data is and how to read its keys.
#[derive(Debug, Args)]
pub(crate) struct InputArgs {
    /// The raw panel: a CSV, Parquet or spreadsheet file, or a folder of Parquet files
    /// (hive-partitioned or not), one row per firm-year (further files joined onto it are
    /// named in the rules file's [[join]] sections).
    pub(crate) data: PathBuf,

    #[command(flatten)]
    pub(crate) keys: KeyArgs,

    #[command(flatten)]
    pub(crate) read: ReadArgs,

    /// Show no progress on stderr (it is shown only on a terminal anyway).
    #[arg(long)]
    pub(crate) quiet: bool,

    /// Print a table of the stages (reading, key steps, each check, cleaning, writing) on
    /// stderr when the run ends: each one's wall time and, on Linux, the processor time of
    /// every thread in it, the kernel's part of that (page faults, I/O), and the peak resident
    /// memory reached by its end.
    #[arg(long)]
    pub(crate) timings: bool,

    /// Stop before reading the panel when the run would need more memory than SIZE (such as
    /// `8GiB`, `500MB`): an estimate from the input's rows and columns and the derived
    /// variables, since the whole panel is held in memory.
    #[arg(long, value_name = "SIZE")]
    pub(crate) memory_budget: Option<String>,
}

/// The rules file and the panel keys: shared by every command that reads a raw panel.
#[derive(Debug, Clone, Args)]
pub(crate) struct KeyArgs {
    /// The rules file (TOML): panel keys, column mapping, derived variables, cleaning policy.
    #[arg(long, value_name = "FILE")]
    pub(crate) rules: Option<PathBuf>,

    /// The entity (firm) column; overrides `[panel] entity` in the rules file.
    #[arg(long, value_name = "COLUMN")]
    pub(crate) entity: Option<String>,

    /// The period (fiscal year) column, integers; overrides `[panel] period`.
    #[arg(long, value_name = "COLUMN")]
    pub(crate) period: Option<String>,
}

/// How to read a raw file: shared by every command that reads one.
#[derive(Debug, Clone, Args)]
pub(crate) struct ReadArgs {
    /// Read the raw file as this format instead of guessing from its extension (`.csv`, `.csv.gz`,
    /// `.csv.zst`, `.parquet`, `.xlsx`, `.xlsm`, `.ods`).
    #[arg(long, value_enum, value_name = "FORMAT")]
    pub(crate) input_format: Option<InputFormatArg>,

    /// CSV field separator, one character (`;` or `\t`); overrides `[input] delimiter`.
    #[arg(long, value_name = "CHAR")]
    pub(crate) delimiter: Option<String>,

    /// CSV numbers use a decimal comma (`1,5`); needs another delimiter, usually `;`.
    #[arg(long)]
    pub(crate) decimal_comma: bool,

    /// CSV text encoding: utf-8 (default), windows-1252 or latin-1; overrides
    /// `[input] encoding`.
    #[arg(long, value_name = "NAME")]
    pub(crate) encoding: Option<String>,

    /// The sheet of a spreadsheet input (.xlsx, .xlsm, .ods); default the first;
    /// overrides `[input] sheet`.
    #[arg(long, value_name = "NAME")]
    pub(crate) sheet: Option<String>,
}

#[derive(Debug, Args)]
pub(crate) struct AuditArgs {
    #[command(flatten)]
    pub(crate) input: InputArgs,

    /// How to print the readiness report.
    ///
    /// terminal: tables for a person; md: Markdown; json: the full report for programs; html: a
    /// self-contained page with charts.
    #[arg(long, value_enum, default_value = "terminal")]
    pub(crate) format: ReportFormatArg,

    /// Write the report to this file instead of printing it; the format follows the
    /// extension (.md, .json, .html, .txt for the terminal tables).
    #[arg(long, value_name = "PATH")]
    pub(crate) report: Option<PathBuf>,

    /// Exit with code 1 when the overall verdict is at or above this level, so that a data
    /// pipeline can stop on it.
    #[arg(long, value_enum, value_name = "LEVEL")]
    pub(crate) fail_on: Option<FailOnArg>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub(crate) enum FailOnArg {
    Warn,
    Fail,
}

impl FailOnArg {
    pub(crate) fn status(self) -> crate::report::Status {
        match self {
            FailOnArg::Warn => crate::report::Status::Warn,
            FailOnArg::Fail => crate::report::Status::Fail,
        }
    }
}

#[derive(Debug, Args)]
pub(crate) struct BuildArgs {
    #[command(flatten)]
    pub(crate) input: InputArgs,

    /// The folder for the hand-off bundle. Built beside it and moved into place at the end,
    /// so a failed run leaves no partial bundle. An existing bundle there is replaced.
    #[arg(long, value_name = "DIR")]
    pub(crate) out: PathBuf,

    /// Write the cleaned panel as `panel.parquet` only, without the `panel.csv` copy.
    ///
    /// By default both are written, since many colleagues open CSV in a spreadsheet; the CSV
    /// copy of a 10-million-row panel costs about a gigabyte and a few seconds.
    #[arg(long)]
    pub(crate) no_panel_csv: bool,

    /// Exit with code 1 when the overall verdict is at or above this level, after writing
    /// the complete bundle (its report says why), so that a data pipeline can stop on it.
    #[arg(long, value_enum, value_name = "LEVEL")]
    pub(crate) fail_on: Option<FailOnArg>,
}

#[derive(Debug, Args)]
pub(crate) struct DemoArgs {
    /// The folder to write into: the generated data goes to DIR/data, the bundle to DIR/bundle.
    #[arg(long, value_name = "DIR", default_value = "panelready-demo")]
    pub(crate) out: PathBuf,

    /// How many fictional firms to generate (firms × periods at most 100,000,000).
    #[arg(long, value_name = "N", default_value_t = 600)]
    pub(crate) firms: u32,

    /// How many fiscal years the window spans.
    #[arg(long, value_name = "T", default_value_t = 15)]
    pub(crate) periods: u32,

    /// The random seed; the same seed gives byte-identical data.
    #[arg(long, value_name = "S", default_value_t = 2024)]
    pub(crate) seed: u64,

    /// Only generate the data; do not run `build` on it.
    ///
    /// Useful for large benchmark panels (`--firms 500000 --periods 20`).
    #[arg(long)]
    pub(crate) data_only: bool,
}

#[derive(Debug, Args)]
pub(crate) struct VerifyArgs {
    /// The bundle folder written by `build`.
    pub(crate) dir: PathBuf,

    /// The raw input, when it is no longer where the manifest says (another machine or
    /// folder, another name); recognised by its SHA-256.
    #[arg(long, value_name = "PATH")]
    pub(crate) input: Option<PathBuf>,

    /// The rules file, when it is no longer where the manifest says; recognised by its
    /// SHA-256. The files it names (joined tables, the corrections file) are read beside it
    /// and must match the hashes in the manifest.
    #[arg(long, value_name = "PATH")]
    pub(crate) rules: Option<PathBuf>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub(crate) enum InputFormatArg {
    Csv,
    Parquet,
    Spreadsheet,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub(crate) enum ReportFormatArg {
    Terminal,
    Md,
    Json,
    Html,
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn clap_definition_is_consistent() {
        Cli::command().debug_assert();
    }
}
