//! The one-way flow shared by `audit` and `build`: load -> key steps -> derive -> checks.

use polars::prelude::*;

use crate::assemble;
use crate::audit::model::{Effects, ModelSpec};
use crate::audit::{self, accounting, Check, Context, CutoffGroups, Options, Settings};
use crate::clean::balance::{self, Balance};
use crate::clean::treat::{Method, Treatment};
use crate::clean::{self, repair, DuplicatePolicy, Keys, SingletonPolicy};
use crate::config::InputConfig;
use crate::derive::{Layout, Plan};
use crate::load::{self, ROW};
use crate::progress::Progress;
use crate::report::{Cleaned, InputSummary, Report, SampleStep};
use crate::rules::{Rules, LEVEL_COLUMNS};
use crate::{Error, Result};

mod cleaned;
mod dictionary;
mod settings;

use cleaned::cleaned_figures;
use dictionary::dictionary;
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
    /// The rejects ledger, sorted by `source_row`.
    pub rejected: DataFrame,
    /// The corrections ledger: every cell a repair changed (entity, period, column, old, new,
    /// reason).
    pub corrections: DataFrame,
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
}

/// Run the pipeline on one input.
pub fn prepare(input: &InputConfig, mode: Mode, progress: &Progress) -> Result<Prepared> {
    progress.stage("reading the input");
    let rules = &input.rules;
    // Every value of the rules file is checked before any file is read, by both commands.
    let Typed {
        policy,
        singletons,
        balance,
        slips: slip_policy,
        levels: verdict_levels,
        settings,
        effects,
        treatments,
    } = typed(input, mode)?;
    let corrections = match &rules.file.repair.corrections {
        Some(name) => {
            let base = assemble::rules_dir(rules);
            Some(repair::read_corrections(&base.join(name))?)
        }
        None => None,
    };
    // Joined tables are read and checked before the main file.
    let tables = assemble::read_tables(rules, &input.csv, &input.entity, &input.period)?;
    let joined_columns: Vec<String> = tables.iter().flat_map(|t| t.brought.clone()).collect();
    let loaded = load::load(input, &joined_columns)?;
    // The panel's columns: the main file's, then each joined table's.
    let columns: Vec<String> = loaded
        .columns
        .iter()
        .chain(&joined_columns)
        .cloned()
        .collect();
    if let DuplicatePolicy::PreferMax(c) | DuplicatePolicy::PreferMin(c) = &policy {
        if !loaded.columns.contains(c) {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[clean] duplicates`".into(),
            });
        }
    }
    progress.stage("key steps");
    let plan = Plan::new(rules, &columns)?;
    let (accounting_rules, skipped_rules) = accounting::compile(rules, &columns)?;
    let keys = Keys {
        file: &input.path,
        entity: &input.entity,
        period: &input.period,
        columns: &loaded.columns,
    };
    let resolved = clean::resolve_keys(loaded.df, &keys, &policy)?;

    let mut steps = resolved.steps;
    let mut ledger_parts = resolved.rejected;
    let mut kept = resolved.kept;

    // Further tables joined onto the panel, each with its match report.
    let mut join_lines = Vec::new();
    let mut join_ledgers = Vec::new();
    for t in &tables {
        progress.stage(&format!("joining {}", t.name()));
        let joined = assemble::join(kept, t, &keys)?;
        kept = joined.panel;
        if let Some(removed) = joined.dropped {
            ledger_parts.push(removed);
            steps.push(SampleStep::after(
                &steps,
                &format!("join {}: rows without a match", t.name()),
                &kept,
                &input.entity,
            )?);
        }
        join_ledgers.push(joined.ledger);
        join_lines.push(joined.line);
    }

    // Repairs right after the key steps, so that rules and derived variables see them.
    let levels = level_columns(rules, &columns, input)?;
    let mut corrected = Vec::new();
    let (mut corrected_cells, mut slips_repaired) = (0u64, 0u64);
    if let Some(c) = &corrections {
        progress.stage("corrections file");
        let (df, lines) = repair::apply_corrections(kept, c, &input.entity, &input.period)?;
        kept = df;
        corrected_cells = lines.height() as u64;
        steps.push(SampleStep::after(
            &steps,
            &format!("corrections file: {} cells changed", lines.height()),
            &kept,
            &input.entity,
        )?);
        corrected.push(lines);
    }
    if slip_policy != repair::SlipPolicy::Report {
        progress.stage("unit slips repaired");
        let (df, lines) = repair::repair_slips(
            kept,
            &levels,
            &input.entity,
            &input.period,
            ROW,
            slip_policy,
        )?;
        kept = df;
        slips_repaired = lines.height() as u64;
        steps.push(SampleStep::after(
            &steps,
            &format!(
                "unit slips {}: {} cells",
                if slip_policy == repair::SlipPolicy::Rescale {
                    "rescaled"
                } else {
                    "set to null"
                },
                lines.height()
            ),
            &kept,
            &input.entity,
        )?);
        corrected.push(lines);
    }
    let corrections_ledger = if corrected.is_empty() {
        repair::empty_ledger(&input.entity, &input.period)?
    } else {
        concat(
            corrected.into_iter().map(|d| d.lazy()).collect::<Vec<_>>(),
            UnionArgs::default(),
        )?
        .collect()?
    };

    // Accounting rules act before derivation, so no derived ratio uses a value they reject.
    progress.stage("accounting rules");
    // Rules with panel functions read other periods through hidden columns, added first.
    let (with_shifts, hidden) =
        accounting::with_shifts(kept, &accounting_rules, &input.entity, &input.period)?;
    let rule_lines = accounting::count(&with_shifts, &accounting_rules)?;
    kept = with_shifts;
    {
        kept = accounting::apply_nulls(kept, &accounting_rules)?;
        let drop = accounting::drop_reason(&accounting_rules);
        let drops = drop.is_some();
        kept = kept
            .lazy()
            .with_column(
                drop.unwrap_or(lit(NULL).cast(DataType::String))
                    .alias("__rule_drop"),
            )
            .drop(cols(hidden))
            .collect()?;
        if drops {
            let (rest, removed) =
                clean::drop_where(kept, col("__rule_drop"), "accounting rules", &keys)?;
            kept = rest;
            ledger_parts.push(removed);
            steps.push(SampleStep::after(
                &steps,
                "accounting rules",
                &kept,
                &input.entity,
            )?);
        }
        kept = kept.drop("__rule_drop")?;
    }

    let layout = if resolved.keys.conflicting_keys == 0 || policy != DuplicatePolicy::Report {
        Layout::SortedUnique
    } else {
        Layout::Any
    };
    progress.stage("derived variables");
    // Sorted by entity, period and row since the key steps: joins keep the panel's order,
    // repairs and rules only filter or change cells.
    let sorted = kept.lazy();
    let (lf, hidden) = plan.apply(sorted, &input.entity, &input.period, layout);
    let with_hidden = lf.collect()?;
    let derived = plan.null_counts(&with_hidden)?;
    let mut order = vec![col(ROW)];
    order.extend(columns.iter().map(|c| col(c.as_str())));
    order.extend(plan.vars.iter().map(|v| col(v.name.as_str())));
    let mut panel = with_hidden.lazy().drop(cols(hidden)).select(order);
    if layout == Layout::Any {
        // The joins of the lag columns may reorder rows; sorted lags keep the order.
        panel = panel.sort(
            [input.entity.as_str(), input.period.as_str(), ROW],
            Default::default(),
        );
    }
    let panel = panel.collect()?;

    let mut report = Report::new(InputSummary {
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
        notes: loaded.notes.clone(),
    });
    report.keys = resolved.keys;
    report.joins = join_lines;
    report.keys.year_end_changes = loaded.year_end_changes.clone();
    if corrections.is_some() || slip_policy != repair::SlipPolicy::Report {
        report.repairs = Some(crate::report::Repairs {
            corrections_file: corrections
                .as_ref()
                .and_then(|c| c.path.file_name().map(|n| n.to_string_lossy().to_string())),
            corrected_cells,
            unit_slips: match slip_policy {
                repair::SlipPolicy::Report => "report",
                repair::SlipPolicy::Rescale => "rescale",
                repair::SlipPolicy::Null => "null",
            }
            .into(),
            unit_slips_repaired: slips_repaired,
        });
    }
    report.derived = derived;
    report.skipped = plan.skipped.clone();
    report.skipped.extend(skipped_rules);
    report.rules = rule_lines;
    let resolve = |c: &String| rules.resolve(c);
    let compare: Vec<String> = match &rules.file.audit.compare {
        Some(list) => list.iter().map(resolve).collect(),
        None => plan.vars.iter().map(|v| v.name.clone()).collect(),
    };
    for c in &compare {
        if panel.schema().get(c.as_str()).is_none() {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[audit] compare`".into(),
            });
        }
    }
    let model = match (&rules.file.model, effects) {
        (Some(m), Some(effects)) => {
            let names: Vec<String> = std::iter::once(&m.outcome)
                .chain(m.regressors.iter())
                .map(resolve)
                .collect();
            for c in &names {
                if panel.schema().get(c.as_str()).is_none() {
                    return Err(Error::MissingColumn {
                        file: input.path.clone(),
                        column: c.clone(),
                        context: "named in `[model]`".into(),
                    });
                }
            }
            Some(ModelSpec {
                outcome: names[0].clone(),
                regressors: names[1..].to_vec(),
                lagged_outcome: m.lagged_outcome,
                effects,
            })
        }
        _ => None,
    };
    let categorical: Vec<String> = rules
        .file
        .panel
        .categorical
        .iter()
        .flatten()
        .map(|c| rules.resolve(c))
        .collect();
    for c in &categorical {
        if !columns.contains(c) {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[panel] categorical`".into(),
            });
        }
    }
    for c in &settings.group_columns {
        if panel.schema().get(c.as_str()).is_none() {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[audit] outliers` by".into(),
            });
        }
    }
    let options = Options {
        compare,
        levels,
        exclude: vec![ROW.to_string()],
        categorical: categorical.clone(),
        settings,
        model,
        reach: plan.reach(),
    };
    // The treatment settings are checked before any check runs.
    let columns: Vec<String> = panel
        .get_column_names()
        .iter()
        .map(|c| c.to_string())
        .collect();
    let treatments = treatments
        .into_iter()
        .map(|t| t.resolve(|v| resolve(&v.to_string()), &columns))
        .collect::<Result<Vec<_>>>()?;
    if let Some(c) = treatments
        .iter()
        .flat_map(|t| &t.variables)
        .find(|v| categorical.contains(v))
    {
        return Err(Error::Setting {
            setting: "[clean] winsorize / trim",
            message: format!(
                "`{c}` is declared categorical in `[panel] categorical`: codes are never \
                 winsorized or trimmed"
            ),
        });
    }
    // The report describes the panel as read (after the key steps and derivation).
    let ctx = Context::new(&panel, &input.entity, &input.period, options.clone())?;
    for check in audit::registry() {
        if check.cleaned_only() {
            continue;
        }
        progress.stage(&format!("check: {}", check.name()));
        check.run(&ctx, &mut report)?;
    }
    progress.stage("cleaning");

    // Then `build` cleans, in a fixed order: outliers, balancing, singletons. The panel as
    // read is let go (its replaced columns freed); its keys and codes stay for the cleaned
    // panel's figures.
    let before = ctx.into_keys();
    let mut panel = panel;
    let mut treated: Vec<String> = Vec::new();
    {
        for t in treatments {
            treated.extend(t.variables.iter().cloned());
            // Per-period cutoffs on the panel core's codes while the rows are those it codes.
            let core = (panel.height() == before.rows).then(|| before.core());
            let (rest, removed, lines) = t.apply(panel, &keys, core)?;
            panel = rest;
            report.treatment.extend(lines);
            if let Some(removed) = removed {
                ledger_parts.push(removed);
                steps.push(SampleStep::after(&steps, "trim", &panel, &input.entity)?);
            }
        }
        let (rest, removed, line) = balance::apply(panel, balance, &keys)?;
        panel = rest;
        report.balance = line;
        if let Some(removed) = removed {
            ledger_parts.push(removed);
            steps.push(SampleStep::after(&steps, "balance", &panel, &input.entity)?);
        }
        let (rest, removed) = clean::drop_singletons(panel, singletons, &keys)?;
        panel = rest;
        if let Some(removed) = removed {
            ledger_parts.push(removed);
            steps.push(SampleStep::after(
                &steps,
                "singletons",
                &panel,
                &input.entity,
            )?);
        }
        let (cleaned, model) =
            cleaned_figures(&before, &panel, &report, &treated, input, options, progress)?;
        report.cleaned = Some(cleaned);
        if model.is_some() {
            report.model = model;
        }
    }
    report.sample_construction = steps;
    report.verdict = Some(audit::verdict::judge(&report, &verdict_levels));

    let mut ledger_parts = ledger_parts.into_iter();
    let mut rejected = ledger_parts
        .next()
        .expect("the key steps always return ledger parts");
    for part in ledger_parts {
        rejected.vstack_mut(&part)?;
    }
    let rejected_main = rejected.height() as u64;
    let mut rejected = if tables.is_empty() {
        rejected.lazy().sort([ROW], Default::default()).collect()?
    } else {
        assemble::ledger(rejected, &report.input.path, join_ledgers)?
    };
    let mut taken: Vec<String> = columns.clone();
    taken.extend(plan.vars.iter().map(|v| v.name.clone()));
    for (internal, base) in [
        (ROW, "source_row"),
        (clean::STEP, "step"),
        (clean::REASON, "reason"),
        (clean::RELATED, "related_row"),
        (assemble::FILE, "source_file"),
    ] {
        let name = output_name(base, &taken);
        if internal == ROW {
            panel.rename(internal, name.as_str().into())?;
        }
        if rejected.schema().contains(internal) {
            rejected.rename(internal, name.as_str().into())?;
        }
    }
    let dictionary = dictionary(&panel, &report, input, &loaded.columns);
    let joined_files = tables
        .iter()
        .zip(&report.joins)
        .map(|(t, line)| JoinedFile {
            path: t.path.clone(),
            sha256: t.sha256.clone(),
            rows: t.rows,
            ledger_rows: line.rows - line.rows_used,
        })
        .collect();
    Ok(Prepared {
        report,
        panel,
        rejected,
        corrections: corrections_ledger,
        corrections_file: corrections.map(|c| (c.path, c.sha256)),
        dictionary,
        rejected_main,
        joined_files,
    })
}

/// The output name for a bookkeeping column: `base`, or `base_2`, `base_3`, ... when the
/// data already has a column of that name.
fn output_name(base: &str, taken: &[String]) -> String {
    std::iter::once(base.to_string())
        .chain((2..).map(|n| format!("{base}_{n}")))
        .find(|c| !taken.contains(c))
        .expect("some suffix is free")
}
