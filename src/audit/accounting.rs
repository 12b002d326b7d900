//! Accounting rules: named SQL conditions that should hold on every row, each with an action
//! for `build` (flag, null, drop). Compiled against the raw columns before derivation, so
//! that nulled or dropped values never reach a derived ratio.

use std::collections::BTreeSet;

use polars::prelude::*;

use super::verdict::{counted, level_key, line, CheckVerdict, LevelKey, Levels, Status};
use crate::report::{Report, RuleLine, SkippedRule};
use crate::rules::expr::{self, Scope};
use crate::rules::{Origin, Rules, CANONICAL_COLUMNS};
use crate::{Error, Result};

pub use crate::rules::Action;

/// One rule, ready to evaluate.
#[derive(Debug, Clone)]
pub struct CompiledRule {
    /// Its name.
    pub name: String,
    /// Its condition as written.
    pub text: String,
    /// Its action.
    pub action: Action,
    /// The condition.
    pub holds: Expr,
    /// Raw columns set to null by `Action::Null`.
    pub null_columns: Vec<String>,
    /// Other periods' values the condition reads (`lag`, `lead`, `diff`, `growth`).
    pub(crate) shifts: BTreeSet<expr::Shift>,
    /// The raw columns the condition reads.
    pub(crate) reads: BTreeSet<String>,
}

/// Compile every rule; library rules whose columns the data lacks are left out.
pub fn compile(rules: &Rules, raw: &[String]) -> Result<(Vec<CompiledRule>, Vec<SkippedRule>)> {
    let raw_set: BTreeSet<String> = raw.iter().cloned().collect();
    let none = BTreeSet::new();
    let scope = Scope {
        raw: &raw_set,
        mapping: &rules.file.columns,
        derived: &none,
    };
    let mut out = Vec::new();
    let mut skipped = Vec::new();
    for (rule, origin) in &rules.accounting {
        let label = format!("accounting rule `{}`", rule.name);
        let action = rule.action;
        let compiled = match expr::compile(&label, &rule.expr, &scope) {
            Ok(c) => c,
            Err(Error::UnknownColumn { column, .. })
                if *origin == Origin::Standard && CANONICAL_COLUMNS.contains(&column.as_str()) =>
            {
                skipped.push(SkippedRule {
                    name: rule.name.clone(),
                    near: crate::error::near_name(&column, raw.iter().map(String::as_str)),
                    missing: column,
                });
                continue;
            }
            Err(e) => return Err(e),
        };
        let null_columns = match &rule.columns {
            Some(list) => list
                .iter()
                .map(|c| {
                    let resolved = rules.resolve(c);
                    if raw_set.contains(&resolved) {
                        Ok(resolved)
                    } else {
                        Err(Error::UnknownColumn {
                            rule: label.clone(),
                            column: c.clone(),
                            hint: crate::error::near_name(c, raw_set.iter().map(String::as_str))
                                .map_or(String::new(), |near| format!(" ({near})")),
                        })
                    }
                })
                .collect::<Result<_>>()?,
            None => compiled.raw_columns.iter().cloned().collect(),
        };
        out.push(CompiledRule {
            name: rule.name.clone(),
            text: rule.expr.clone(),
            action,
            holds: compiled.expr,
            null_columns,
            shifts: compiled.shifts,
            reads: compiled.raw_columns,
        });
    }
    Ok((out, skipped))
}

/// `rules` with the whole-number steps of their conditions checked against their types' edge
/// (`rules::checked`), the types those of `schema`'s columns.
pub fn checked(rules: &[CompiledRule], schema: &Schema) -> Vec<CompiledRule> {
    let checked = |e: &Expr| crate::rules::checked::checked_integers(e.clone(), schema);
    rules
        .iter()
        .map(|r| CompiledRule {
            holds: checked(&r.holds),
            ..r.clone()
        })
        .collect()
}

/// Add the hidden columns of other periods' values the rules read (gap-aware, by a walk over
/// the sorted panel's entities, as for derived variables); returns the frame and the hidden
/// columns' names.
pub fn with_shifts(
    df: DataFrame,
    rules: &[CompiledRule],
    entity: &str,
    period: &str,
) -> Result<(DataFrame, Vec<String>)> {
    let shifts: BTreeSet<&expr::Shift> = rules.iter().flat_map(|r| r.shifts.iter()).collect();
    if shifts.is_empty() {
        return Ok((df, Vec::new()));
    }
    let mut df = df;
    let read = shifts.iter().map(|s| s.column.as_str());
    crate::derive::in_one_chunk(&mut df, read.chain([entity, period]))?;
    let hidden: Vec<String> = shifts.iter().map(|s| s.hidden_name()).collect();
    let columns: Vec<Expr> = shifts
        .iter()
        .zip(&hidden)
        .map(|(s, name)| {
            crate::derive::nearby(col(s.column.as_str()), entity, period, s.k).alias(name.as_str())
        })
        .collect();
    Ok((df.lazy().with_columns(columns).collect()?, hidden))
}

/// Violations (condition false) and unknowns (condition null) per rule, over the rows
/// `within` marks (every row when None).
pub fn count(
    df: &DataFrame,
    rules: &[CompiledRule],
    within: Option<&BooleanChunked>,
) -> Result<Vec<RuleLine>> {
    if rules.is_empty() {
        return Ok(Vec::new());
    }
    const WITHIN: &str = "__within";
    check(df, rules)?;
    let mut df = df.clone();
    let among = |e: Expr| match within {
        Some(_) => e.and(col(WITHIN)),
        None => e,
    };
    if let Some(w) = within {
        df.with_column(w.clone().with_name(WITHIN.into()).into_column())?;
    }
    let mut aggs = Vec::new();
    for (i, r) in rules.iter().enumerate() {
        aggs.push(
            among(r.holds.clone().not().fill_null(lit(false)))
                .sum()
                .cast(DataType::UInt64)
                .alias(format!("v{i}")),
        );
        aggs.push(
            among(r.holds.clone().is_null())
                .sum()
                .cast(DataType::UInt64)
                .alias(format!("u{i}")),
        );
    }
    let c = match df.clone().lazy().select(aggs).collect() {
        Ok(c) => c,
        // A failure only the values show (a text that will not convert): the rule that
        // fails on its own is named.
        Err(e) => return Err(culprit(&df, rules).unwrap_or(Error::Polars(e))),
    };
    rules
        .iter()
        .enumerate()
        .map(|(i, r)| {
            Ok(RuleLine {
                name: r.name.clone(),
                expr: r.text.clone(),
                action: r.action.label().to_string(),
                violations: c.column(&format!("v{i}"))?.u64()?.get(0).unwrap_or(0),
                unknown: c.column(&format!("u{i}"))?.u64()?.get(0).unwrap_or(0),
                nulls: if r.action == Action::Null {
                    r.null_columns.clone()
                } else {
                    Vec::new()
                },
            })
        })
        .collect()
}

/// Each rule's condition against the panel's column types, before anything is evaluated:
/// a condition that cannot be evaluated (text divided, text compared with a number) or
/// that gives something other than true / false stops the run naming the rule, not with the
/// engine's words alone.
fn check(df: &DataFrame, rules: &[CompiledRule]) -> Result<()> {
    for r in rules {
        let schema = df
            .clone()
            .lazy()
            .select([r.holds.clone().alias("holds")])
            .collect_schema()
            .map_err(|e| Error::evaluation(rule_label(r), &r.text, &e))?;
        match schema.get("holds") {
            Some(DataType::Boolean | DataType::Null) | None => {}
            Some(other) => {
                return Err(Error::RuleExpr {
                    rule: rule_label(r),
                    message: format!(
                        "`{}` gives values of type {other}, not true / false: a rule is a \
                         condition each row must meet",
                        r.text
                    ),
                })
            }
        }
    }
    Ok(())
}

/// The first rule whose condition fails when evaluated on its own, as the error naming it.
fn culprit(df: &DataFrame, rules: &[CompiledRule]) -> Option<Error> {
    rules.iter().find_map(|r| {
        let e = df
            .clone()
            .lazy()
            .select([r.holds.clone()])
            .collect()
            .err()?;
        Some(Error::evaluation(rule_label(r), &r.text, &e))
    })
}

/// `e`, an error naming one of `rules`, as the error naming the first cell that is not a
/// number in a text column that rule reads (of the first of `sources` owning such a column),
/// where there is one; else `e` as it is.
pub(crate) fn located(e: Error, rules: &[CompiledRule], sources: &[crate::load::Source]) -> Error {
    let Error::RuleExpr { rule, .. } = &e else {
        return e;
    };
    let Some(r) = rules.iter().find(|r| rule_label(r) == *rule) else {
        return e;
    };
    let reads: Vec<&String> = r.reads.iter().collect();
    let what = format!("{} (`{}`)", rule_label(r), r.text);
    crate::load::text_among_numbers(sources, &reads, &what).unwrap_or(e)
}

/// How errors name rule `r`.
fn rule_label(r: &CompiledRule) -> String {
    format!("accounting rule `{}`", r.name)
}

/// Where a `null` rule does not hold, set its columns to null. Returns the new frame and a
/// corrections-ledger line (entity, period, column, old, new, reason) for every value blanked,
/// among the rows `within` marks (every row when None): a cell two rules would blank is the
/// first rule's, a cell already missing is not changed.
pub fn apply_nulls(
    df: DataFrame,
    rules: &[CompiledRule],
    entity: &str,
    period: &str,
    within: Option<&BooleanChunked>,
) -> Result<(DataFrame, DataFrame)> {
    let nulling: Vec<(usize, &CompiledRule)> = rules
        .iter()
        .enumerate()
        .filter(|(_, r)| r.action == Action::Null)
        .collect();
    let flag = |i: usize| format!("__null{i}");
    if nulling.is_empty() {
        return Ok((df, crate::clean::repair::empty_ledger(entity, period)?));
    }
    // Evaluate every condition on the values as read, then null.
    let mut helpers: Vec<String> = nulling.iter().map(|(i, _)| flag(*i)).collect();
    let mut flagged = df.lazy().with_columns(
        nulling
            .iter()
            .map(|(i, r)| broken(r).alias(flag(*i)))
            .collect::<Vec<_>>(),
    );
    if let Some(within) = within {
        let name = "__within";
        flagged = flagged.with_column(lit(Series::new(name.into(), within.clone())).alias(name));
        helpers.push(name.to_string());
    }
    let flagged = flagged.collect()?;
    // Each column's rules in order: a cell is the first breaking rule's.
    let mut touched: Vec<(String, Expr)> = Vec::new();
    let mut lines = Vec::new();
    for (i, r) in &nulling {
        let reason = not_holding(&r.name, &r.text);
        for c in &r.null_columns {
            let this = col(flag(*i).as_str());
            let earlier = touched.iter().find(|(name, _)| name == c).map(|(_, e)| e);
            let mut first = this.clone().and(col(c.as_str()).is_not_null());
            if let Some(earlier) = earlier {
                first = first.and(earlier.clone().not());
            }
            if within.is_some() {
                first = first.and(col("__within"));
            }
            lines.push(flagged.clone().lazy().filter(first).select([
                col(entity),
                col(period),
                lit(c.as_str()).alias("column"),
                col(c.as_str()).cast(DataType::String).alias("old"),
                lit(NULL).cast(DataType::String).alias("new"),
                lit(reason.as_str()).alias("reason"),
            ]));
            match touched.iter_mut().find(|(name, _)| name == c) {
                Some((_, any)) => *any = any.clone().or(this),
                None => touched.push((c.clone(), this)),
            }
        }
    }
    let lines = concat(lines, UnionArgs::default())?.collect()?;
    let blanked: Vec<Expr> = touched
        .into_iter()
        .map(|(c, flag)| {
            when(flag)
                .then(lit(NULL))
                .otherwise(col(c.as_str()))
                .alias(c.as_str())
        })
        .collect();
    let df = flagged
        .lazy()
        .with_columns(blanked)
        .drop(cols(helpers))
        .collect()?;
    Ok((df, lines))
}

/// The reason a rule gives in the ledgers where it does not hold.
pub fn not_holding(name: &str, text: &str) -> String {
    format!("rule `{name}` does not hold: {text}")
}

/// Whether a row breaks the rule: its condition is false (unknown is not broken).
fn broken(r: &CompiledRule) -> Expr {
    r.holds.clone().not().fill_null(lit(false))
}

/// Whether each row breaks any `drop` rule (true or false, never null); None without one.
pub fn drop_mask(rules: &[CompiledRule]) -> Option<Expr> {
    rules
        .iter()
        .filter(|r| r.action == Action::Drop)
        .map(broken)
        .reduce(|a, b| a.or(b))
}

/// The first `drop` rule each row breaks, as a reason (null where none).
pub fn drop_reason(rules: &[CompiledRule]) -> Option<Expr> {
    rules
        .iter()
        .filter(|r| r.action == Action::Drop)
        .rev()
        .fold(None, |rest: Option<Expr>, r| {
            let reason = lit(not_holding(&r.name, &r.text));
            Some(
                when(broken(r))
                    .then(reason)
                    .otherwise(rest.unwrap_or(lit(NULL).cast(DataType::String))),
            )
        })
}

/// Accounting-rule violations.
pub const RULE_VIOLATIONS: LevelKey = level_key!("rule_violations", Warn);

/// The accounting rules' verdict line (the rules act before derivation, outside the checks).
pub fn verdict(r: &Report, lv: &Levels) -> Option<CheckVerdict> {
    use Status::*;
    let broken: u64 = r.rules.iter().map(|l| l.violations).sum();
    Some(if r.rules.is_empty() {
        line(
            "Accounting rules",
            NotChecked,
            "no accounting rule applies".into(),
        )
    } else if broken > 0 {
        line(
            "Accounting rules",
            lv.of(&RULE_VIOLATIONS),
            counted(broken, "rule violation", "rule violations"),
        )
    } else {
        line(
            "Accounting rules",
            Pass,
            counted(
                r.rules.len() as u64,
                "rule holds on every row",
                "rules hold on every row",
            ),
        )
    })
}
