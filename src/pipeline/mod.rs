//! The one-way flow shared by `audit` and `build`, one module per stage: read (`read.rs`)
//! -> key steps and joins (`keys.rs`) -> repairs (`repairs.rs`) -> accounting rules
//! (`rules.rs`) -> derived variables (`derived.rs`) -> the checks' options (`options.rs`) ->
//! checks -> cleaning (`cleaning.rs`) and the cleaned panel's figures (`cleaned.rs`) ->
//! verdict -> outputs (`outputs.rs`). The rules' values are typed first (`settings.rs`);
//! the panel passes between the stages as a `Sample` (`sample.rs`).

use polars::prelude::*;

use crate::assemble;
use crate::audit::model::{Effects, ModelSpec};
use crate::audit::{self, accounting, Context, Options, Settings};
use crate::clean::balance::{self, Balance};
use crate::clean::treat::{Method, Treatment};
use crate::clean::{self, repair, DuplicatePolicy, Keys, SingletonPolicy};
use crate::config::InputConfig;
use crate::derive::Plan;
use crate::load::{self, ROW};
use crate::progress::Progress;
use crate::report::{Cleaned, Findings, InputSummary, Report, SampleStep, VariationFigures};
use crate::rules::{Rules, LEVEL_COLUMNS};
use crate::{Error, Result};

mod cleaned;
mod cleaning;
mod derived;
mod dictionary;
mod keys;
mod options;
mod outputs;
mod read;
mod repairs;
mod rules;
mod sample;
mod settings;

use cleaned::cleaned_figures;
use dictionary::dictionary;
use keys::key_steps;
use read::Read;
use sample::Sample;
use settings::{level_columns, typed, Typed};

/// `audit` is a dry run of `build`: the same steps on the same rules, nothing written. The one
/// difference: where the duplicate policy is `fail`, `audit` keeps the conflicting rows and
/// reports them instead of stopping.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// A dry run that reports conflicting keys instead of stopping on them.
    Audit,
    /// Apply the rules file's cleaning policy, stopping where it says `fail`.
    Build,
}

/// The result of a run, before anything is written.
pub struct Prepared {
    /// The report.
    pub report: Report,
    /// The panel: `source_row`, raw columns, derived columns; sorted by entity, period.
    pub panel: DataFrame,
    /// The rejects ledger, in the order of `rejected_order`.
    pub rejected: DataFrame,
    /// The ledger's rows by `source_row` (the order `rejected.csv` is written in, gathered a
    /// slice at a time as it is written); None when `rejected` is in that order already.
    pub rejected_order: Option<IdxCa>,
    /// The corrections ledger, part by part: every cell a step changed (entity, period,
    /// column, old, new, reason).
    pub corrections: Vec<repair::LedgerPart>,
    /// The corrections file's name and hash, if one was applied.
    pub corrections_file: Option<(std::path::PathBuf, String)>,
    /// One entry per column of the panel, for `dictionary.md`.
    pub dictionary: Vec<DictionaryEntry>,
    /// Rows of the main file in the rejects ledger (the ledger also holds joined tables'
    /// rows): rows read = panel rows + these.
    pub rejected_main: u64,
    /// The joined tables, for the manifest.
    pub joined_files: Vec<JoinedFile>,
}

/// A joined table as the manifest records it.
#[derive(Debug, Clone)]
pub struct JoinedFile {
    /// Where it was read from.
    pub path: std::path::PathBuf,
    /// Its bytes' SHA-256.
    pub sha256: String,
    /// Rows read.
    pub rows: u64,
    /// Its rows in the rejects ledger (all but the rows that matched the panel).
    pub ledger_rows: u64,
}

/// One variable of the data dictionary.
#[derive(Debug, Clone, serde::Serialize)]
pub struct DictionaryEntry {
    /// The column.
    pub name: String,
    /// Its label from the rules file, if any.
    pub label: String,
    /// How it came about: a raw column (with its canonical name) or a derived expression.
    pub definition: String,
    /// Its unit, where known.
    pub unit: String,
    /// The source of its definition, where known.
    pub source: String,
    /// Share missing in the cleaned panel.
    pub missing_share: Option<f64>,
    /// Outlier treatment and accounting-rule nulls applied, in words.
    pub treatment: String,
    /// Its type in the panel, in words (`whole number`, `number`, `text`, `date`, ...).
    #[serde(rename = "type")]
    pub kind: String,
    /// Where its values lie in the cleaned panel, for a variable the checks describe and for
    /// the keys (not `source_row`; not text whose values nearly all differ).
    pub values: Option<ColumnValues>,
}

/// Where a column's values lie in the cleaned panel: a number's extremes and quartiles, a
/// text's distinct values and most common one (the Variation section's figures).
#[derive(Debug, Clone, serde::Serialize)]
pub struct ColumnValues {
    /// Rows with a value.
    pub n: u64,
    /// The smallest value, the quartiles and the largest value (numbers).
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub spread: Option<crate::report::Spread>,
    /// Distinct values and the most common one (text held as codes).
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub text: Option<crate::report::TextValues>,
    /// The entity key's distinct values: the entities.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub entities: Option<u64>,
    /// The period key's periods observed, the first and the last.
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub periods: Option<PeriodsObserved>,
}

/// The periods the period key holds in the cleaned panel.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct PeriodsObserved {
    /// Distinct periods.
    pub periods: u64,
    /// The first period.
    pub first: i64,
    /// The last period.
    pub last: i64,
}

/// Run the pipeline on one input: the stages in order, each in its own module.
pub fn prepare(input: &InputConfig, mode: Mode, progress: &Progress) -> Result<Prepared> {
    prepare_with(input, mode, progress, || {})
}

/// [`prepare`], calling `after_reading` once the input is read (`build` starts hashing the
/// input file then).
pub fn prepare_with(
    input: &InputConfig,
    mode: Mode,
    progress: &Progress,
    after_reading: impl FnOnce(),
) -> Result<Prepared> {
    progress.stage("reading the input");
    // Every value of the rules file is checked before any file is read, by both commands.
    let typed = typed(input, mode)?;
    let mut read = read::read(input, &typed, progress)?;
    after_reading();
    let rules = &input.rules;
    let columns = read.columns.clone();

    progress.stage("key steps");
    let plan = Plan::new(rules, &columns)?;
    let (accounting_rules, skipped_rules) = accounting::compile(rules, &columns)?;
    let raw_columns = read.loaded.columns.clone();
    let keys = Keys {
        file: &input.path,
        entity: &input.entity,
        period: &input.period,
        columns: &raw_columns,
    };
    let df = std::mem::take(&mut read.loaded.df);
    let (mut sample, found) = key_steps(df, &keys, &typed.policy, &read.tables, progress)?;

    let levels = level_columns(rules, &columns, sample.panel.schema(), input)?;
    let repaired = repairs::repair(
        &mut sample,
        read.corrections.as_ref(),
        typed.slips,
        &levels,
        input,
        progress,
    )?;

    progress.stage("accounting rules");
    let (rule_lines, blanked) =
        rules::accounting_rules(&mut sample, &accounting_rules, &keys, &read.tables, input)?;

    progress.stage("derived variables");
    // Nothing after this point evaluates an expression on the panel but the derived
    // variables: repeating text is held as codes from here on (what they read once they are
    // made), and spelled out again where rows leave for the ledger or a file.
    let keys_and_inputs: Vec<String> = [input.entity.clone(), input.period.clone()]
        .into_iter()
        .chain(plan.reads())
        .collect();
    crate::core::hold_text_as_codes(&mut sample.panel, &keys_and_inputs)?;
    let (mut panel, derived) = derived::derive(
        std::mem::take(&mut sample.panel),
        &plan,
        &columns,
        &raw_columns,
        &read.tables,
        input,
    )?;
    crate::core::hold_text_as_codes(&mut panel, &keys_and_inputs[..2])?;

    let mut report = Report::new(input_summary(input, &read.loaded, &read.tables));
    report.keys = found.keys;
    report.keys.year_end_changes = read.loaded.year_end_changes.clone();
    report.joins = found.joins;
    report.repairs = repaired.summary;
    report.derived = derived;
    report.skipped = plan.skipped.clone();
    report.skipped.extend(skipped_rules);
    report.rules = rule_lines;
    let options = options::options(
        &panel,
        &plan,
        &columns,
        levels,
        typed.settings,
        typed.effects,
        input,
    )?;
    let treatments =
        options::treatments(typed.treatments, &panel, &options.categorical, rules, input)?;

    // The checks describe the panel as read (after the key steps, repairs, rules and
    // derivation).
    progress.stage("panel core");
    let ctx = Context::new(&panel, &input.entity, &input.period, options.clone())?
        .with_progress(progress);
    progress.stage("check: panel at a glance");
    report.panel = audit::panel_summary(&ctx)?;
    (report.keys.alike_entities, report.keys.alike_examples) = audit::alike_entities(&ctx)?;
    for check in audit::registry() {
        progress.stage(&format!("check: {}", check.name()));
        report.findings.push(check.run(&ctx)?);
    }

    progress.stage("cleaning");
    // The panel as read is let go (its replaced columns freed); its keys and codes stay for
    // the cleaned panel's figures.
    let before = ctx.into_keys();
    sample.panel = panel;
    let cleaning = cleaning::clean(
        &mut sample,
        treatments,
        typed.balance,
        typed.singletons,
        &keys,
        &before,
        mode == Mode::Build,
    )?;
    report.treatment = cleaning.treatment;
    report.balance = cleaning.balance;
    let (cleaned, model) = cleaned_figures(
        &before,
        &sample.panel,
        &report,
        &cleaning.treated,
        input,
        options,
        progress,
    )?;
    report.cleaned = Some(cleaned);
    if model.is_some() {
        report.model = model;
    }
    report.sample_construction = std::mem::take(&mut sample.steps);
    report.verdict = Some(audit::verdict::judge(&report, &typed.levels));

    // Every cell a step changed: the repairs', the rules' blanks, winsorizing's.
    let corrections = [repaired.ledger, blanked]
        .into_iter()
        .map(repair::LedgerPart::lines)
        .chain(cleaning.changed)
        .collect();
    outputs::outputs(
        sample,
        report,
        read,
        &plan,
        repairs::ledger(corrections),
        found.join_ledgers,
        input,
    )
}

/// The report's description of the input.
fn input_summary(
    input: &InputConfig,
    loaded: &load::Loaded,
    tables: &[crate::assemble::Table],
) -> InputSummary {
    // A joined table's notes name it.
    let joined = tables.iter().flat_map(|t| {
        let name = t.name();
        t.notes.iter().map(move |n| format!("joined `{name}`, {n}"))
    });
    InputSummary {
        // The file name only: the report must not depend on where the bundle was built from
        // (the manifest records the full path).
        path: input
            .path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| input.path.display().to_string()),
        format: input.format,
        rows: loaded.rows,
        columns: loaded.columns.len() as u64,
        entity: input.entity.clone(),
        period: input.period.clone(),
        sheet: loaded.sheet.clone(),
        notes: loaded.notes.iter().cloned().chain(joined).collect(),
    }
}

/// The files a failing expression may have read a text cell from, to name it: the main file
/// (its columns `own`, held in `frame` beside their row numbers), then each joined table.
fn sources<'a>(
    input: &'a InputConfig,
    frame: &'a DataFrame,
    own: &'a [String],
    tables: &'a [crate::assemble::Table],
) -> Vec<crate::load::Source<'a>> {
    let main = crate::load::Source {
        file: &input.path,
        frame,
        columns: own,
        format: input.format,
    };
    std::iter::once(main)
        .chain(tables.iter().map(|t| t.source()))
        .collect()
}
