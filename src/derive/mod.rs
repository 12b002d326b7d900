//! Derived variables: order the rules by their dependencies, add gap-aware shifted columns
//! (the row of period t - k of the same entity, found by a walk over the sorted panel),
//! evaluate each rule with its null conditions, and count how many nulls each reason produced.

use std::collections::{BTreeMap, BTreeSet};
use std::sync::atomic::AtomicU64;
use std::sync::Arc;

use polars::prelude::*;

use crate::report::SkippedRule;
use crate::rules::expr::{self, Compiled, Scope, Shift};
use crate::rules::{DeriveRule, Origin, Rules, CANONICAL_COLUMNS};
use crate::{Error, Result};

mod nearby;
mod nulls;
mod settle;

pub(crate) use nearby::{in_one_chunk, nearby};
use settle::settled;

/// Rows of each derived float variable made missing for not being finite while the plan's
/// frame was collected: a value, no null condition true (the counts [`Plan::null_counts`]
/// reads).
pub type NotFinite = BTreeMap<String, Arc<AtomicU64>>;

/// The reason counted when a value is null and no declared condition explains it.
pub const INPUT_MISSING: &str = "an input is missing (or the earlier period is absent)";

/// Why a derived value is missing though every column it reads has a value and no condition
/// holds: the expression itself gives none there.
pub const NO_VALUE: &str = "no value from the expression though every input is present (a \
                            growth from a value of zero or less, a remainder of a division by \
                            zero, a CASE without ELSE, NULLIF)";

/// Why a derived number that is not finite is missing instead.
pub const NOT_FINITE: &str = "not a finite number (a division by zero, a logarithm of zero or \
                              less, a square root of a negative number, an infinite input)";

/// One derived variable, compiled.
#[derive(Debug, Clone)]
pub struct Planned {
    /// Its name (the output column).
    pub name: String,
    /// Its rule as written.
    pub rule: DeriveRule,
    /// User or library.
    pub origin: Origin,
    value: Compiled,
    conditions: Vec<(String, Compiled)>,
}

/// Every derived variable in evaluation order, and the library rules left out.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Variables in dependency order.
    pub vars: Vec<Planned>,
    /// Library ratios whose inputs the data lacks.
    pub skipped: Vec<SkippedRule>,
}

impl Plan {
    /// Compile and order the rules against the columns the data has.
    pub fn new(rules: &Rules, raw: &[String]) -> Result<Plan> {
        let raw: BTreeSet<String> = raw.iter().cloned().collect();
        for name in rules.derive.keys() {
            check_name(name, &raw)?;
        }
        let mut skipped: Vec<SkippedRule> = Vec::new();
        loop {
            let derived: BTreeSet<String> = rules
                .derive
                .keys()
                .filter(|n| !skipped.iter().any(|s| &s.name == *n))
                .cloned()
                .collect();
            let scope = Scope {
                raw: &raw,
                mapping: &rules.file.columns,
                derived: &derived,
            };
            let mut compiled = Vec::new();
            let mut newly_skipped = None;
            for name in rules.derive.keys().filter(|n| derived.contains(*n)) {
                let (rule, origin) = &rules.derive[name];
                match compile_rule(name, rule, &scope) {
                    Ok((value, conditions)) => compiled.push(Planned {
                        name: name.clone(),
                        rule: rule.clone(),
                        origin: *origin,
                        value,
                        conditions,
                    }),
                    Err(Error::UnknownColumn { column, .. })
                        if *origin == Origin::Standard
                            && (CANONICAL_COLUMNS.contains(&column.as_str())
                                || rules.derive.contains_key(&column)) =>
                    {
                        newly_skipped = Some(SkippedRule {
                            name: name.clone(),
                            near: crate::error::near_name(&column, raw.iter().map(String::as_str)),
                            missing: column,
                        });
                        break;
                    }
                    Err(e) => return Err(e),
                }
            }
            match newly_skipped {
                Some(s) => skipped.push(s),
                None => {
                    return Ok(Plan {
                        vars: order(compiled)?,
                        skipped,
                    })
                }
            }
        }
    }

    /// For each derived variable, how many periods back and ahead it reads, through panel
    /// functions directly or through the derived variables it uses: such a variable is null
    /// by construction in the window's first (or last) periods.
    pub fn reach(&self) -> BTreeMap<String, (i64, i64)> {
        let mut reach: BTreeMap<String, (i64, i64)> = BTreeMap::new();
        for var in &self.vars {
            let mut r = (0i64, 0i64);
            for c in var.compiled() {
                for s in &c.shifts {
                    let (b, a) = reach.get(&s.column).copied().unwrap_or((0, 0));
                    r.0 = r.0.max(b + s.k.max(0));
                    r.1 = r.1.max(a + (-s.k).max(0));
                }
                for d in &c.derived_deps {
                    let (b, a) = reach.get(d).copied().unwrap_or((0, 0));
                    r = (r.0.max(b), r.1.max(a));
                }
            }
            reach.insert(var.name.clone(), r);
        }
        reach
    }

    /// The columns of the data the derived variables read (in their values, panel functions
    /// and null conditions).
    pub fn reads(&self) -> BTreeSet<String> {
        self.vars
            .iter()
            .flat_map(Planned::compiled)
            .flat_map(|c| c.raw_columns.iter().cloned())
            .collect()
    }

    /// Add every derived column (and the hidden shifted columns they read) to `lf`.
    /// Returns the frame, the hidden column names, to drop after counting, and the counts of
    /// rows made missing for not being finite (filled in as the frame is collected).
    ///
    /// `lf` is sorted by entity, period and row (as the key steps leave the panel); a shifted
    /// column is found by one walk over each entity's rows ([`nearby`]): the value at exactly
    /// period t − k, from the first of its rows where a key repeats.
    pub fn apply(
        &self,
        mut lf: LazyFrame,
        entity: &str,
        period: &str,
    ) -> (LazyFrame, Vec<String>, NotFinite) {
        let mut hidden: Vec<String> = Vec::new();
        let mut not_finite = NotFinite::new();
        // The variables level by level (a variable's level is one above the highest of the
        // derived variables it reads): the columns of one level go into one step, which the
        // engine evaluates in parallel; their shifted inputs into one step before it.
        for level in self.levels() {
            let mut shifted = Vec::new();
            for var in &level {
                let shifts: BTreeSet<&Shift> =
                    var.compiled().flat_map(|c| c.shifts.iter()).collect();
                for shift in shifts {
                    let name = shift.hidden_name();
                    if hidden.contains(&name) {
                        continue;
                    }
                    shifted.push(
                        nearby(col(shift.column.as_str()), entity, period, shift.k)
                            .alias(name.as_str()),
                    );
                    hidden.push(name);
                }
            }
            if !shifted.is_empty() {
                lf = lf.with_columns(shifted);
            }
            // Whole-number steps checked against their type's edge (the columns' types are
            // known once the level's inputs are in the plan).
            let schema = lf.collect_schema().ok();
            let checked = |e: Expr| match &schema {
                Some(schema) => crate::rules::checked::checked_integers(e, schema),
                None => e,
            };
            // A number that is not finite (a division by zero, the logarithm of zero) is
            // missing, with its own reason: which variables are numbers, the engine says.
            let exprs: Vec<Expr> = level
                .iter()
                .map(|var| checked(var.value.expr.clone()))
                .collect();
            let plain: Vec<Expr> = level
                .iter()
                .zip(&exprs)
                .map(|(var, expr)| expr.clone().alias(var.name.as_str()))
                .collect();
            let types = lf
                .clone()
                .with_columns(plain)
                .collect_schema()
                .map(|schema| {
                    level
                        .iter()
                        .map(|var| schema.get(var.name.as_str()).cloned())
                        .collect::<Vec<_>>()
                })
                .unwrap_or_else(|_| vec![None; level.len()]);
            let mut values: Vec<Expr> = Vec::new();
            for ((var, dtype), expr) in level.iter().zip(types).zip(exprs) {
                // A lag or lead is its column's value as it stands (a derived one already
                // finite): no second look, which would evaluate the shift again.
                let copied = matches!(expr, Expr::Column(_));
                let value = if dtype.as_ref().is_some_and(DataType::is_float) && !copied {
                    // Its rows made missing in place, the not-finite ones counted on the way.
                    let count = Arc::new(AtomicU64::new(0));
                    not_finite.insert(var.name.clone(), count.clone());
                    settled(expr, var.any_condition().map(checked), count)
                } else {
                    match var.any_condition().map(checked) {
                        Some(cond) => when(cond).then(lit(NULL)).otherwise(expr),
                        None => expr,
                    }
                };
                values.push(value.alias(var.name.as_str()));
            }
            lf = lf.with_columns(values);
        }
        (lf, hidden, not_finite)
    }

    /// The keys and the columns the variables' lags and leads read (raw or derived), for
    /// [`in_one_chunk`].
    pub fn shifted_columns<'a>(&'a self, entity: &'a str, period: &'a str) -> Vec<&'a str> {
        let shifts = self
            .vars
            .iter()
            .flat_map(Planned::compiled)
            .flat_map(|c| &c.shifts);
        let mut names: Vec<&str> = shifts.map(|s| s.column.as_str()).collect();
        if !names.is_empty() {
            names.extend([entity, period]);
        }
        names
    }

    /// The variables grouped by level, in evaluation order within each: level 0 reads no
    /// derived variable; level k + 1 reads one of level k and none of a higher level.
    fn levels(&self) -> Vec<Vec<&Planned>> {
        let mut level_of: BTreeMap<&str, usize> = BTreeMap::new();
        let mut levels: Vec<Vec<&Planned>> = Vec::new();
        for var in &self.vars {
            let level = var
                .compiled()
                .flat_map(|c| c.derived_deps.iter())
                .filter_map(|d| level_of.get(d.as_str()).map(|l| l + 1))
                .max()
                .unwrap_or(0);
            level_of.insert(var.name.as_str(), level);
            if levels.len() <= level {
                levels.resize_with(level + 1, Vec::new);
            }
            levels[level].push(var);
        }
        levels
    }
}

impl Planned {
    /// Its value's expression and its null conditions', compiled.
    pub(crate) fn compiled(&self) -> impl Iterator<Item = &Compiled> {
        std::iter::once(&self.value).chain(self.conditions.iter().map(|(_, c)| c))
    }

    fn any_condition(&self) -> Option<Expr> {
        self.conditions
            .iter()
            .map(|(_, c)| c.expr.clone().fill_null(lit(false)))
            .reduce(|a, b| a.or(b))
    }
}

fn compile_rule(
    name: &str,
    rule: &DeriveRule,
    scope: &Scope,
) -> Result<(Compiled, Vec<(String, Compiled)>)> {
    let label = format!("derived variable `{name}`");
    let value = expr::compile(&label, &rule.expr, scope)?;
    let conditions = rule
        .null_when
        .iter()
        .map(|n| {
            let mut c = expr::compile(&label, &n.when, scope)?;
            c.expr = expr::a_condition(c.expr, format!("its null_when `{}`", n.when));
            Ok((n.reason.clone(), c))
        })
        .collect::<Result<_>>()?;
    Ok((value, conditions))
}

fn check_name(name: &str, raw: &BTreeSet<String>) -> Result<()> {
    let bad = |message: &str| Error::RuleName {
        rule: format!("derived variable `{name}`"),
        message: message.to_string(),
    };
    let mut chars = name.chars();
    let starts_well = chars
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_');
    if !starts_well || !chars.all(|c| c.is_ascii_alphanumeric() || c == '_') {
        return Err(bad(
            "a derived name must be letters, digits and `_`, not starting with a digit",
        ));
    }
    if name.starts_with("__") {
        return Err(bad("names starting with `__` are reserved"));
    }
    if raw.contains(name) {
        return Err(bad("a raw column already has this name"));
    }
    Ok(())
}

/// Topological order, declaration order among equals: each round takes the first variable in
/// the rules' order whose inputs are all done; a cycle is an error naming it.
fn order(vars: Vec<Planned>) -> Result<Vec<Planned>> {
    let deps = |v: &Planned| -> BTreeSet<String> {
        let mut d: BTreeSet<String> = v.value.derived_deps.clone();
        for (_, c) in &v.conditions {
            d.extend(c.derived_deps.iter().cloned());
        }
        d
    };
    let mut pending: Vec<(BTreeSet<String>, Planned)> =
        vars.into_iter().map(|v| (deps(&v), v)).collect();
    let mut out = Vec::new();
    while !pending.is_empty() {
        let waiting: BTreeSet<String> = pending.iter().map(|(_, v)| v.name.clone()).collect();
        let Some(next) = pending
            .iter()
            .position(|(d, _)| d.iter().all(|n| !waiting.contains(n)))
        else {
            let remaining: BTreeMap<String, (BTreeSet<String>, Planned)> = pending
                .into_iter()
                .map(|(d, v)| (v.name.clone(), (d, v)))
                .collect();
            return Err(Error::Cycle {
                rules: find_cycle(&remaining),
            });
        };
        out.push(pending.remove(next).1);
    }
    Ok(out)
}

fn find_cycle(remaining: &BTreeMap<String, (BTreeSet<String>, Planned)>) -> Vec<String> {
    let mut path: Vec<String> = vec![remaining.keys().next().cloned().unwrap_or_default()];
    loop {
        let last = path.last().cloned().unwrap_or_default();
        let next = remaining[&last]
            .0
            .iter()
            .find(|n| remaining.contains_key(*n))
            .cloned()
            .unwrap_or_default();
        if let Some(start) = path.iter().position(|n| *n == next) {
            let mut cycle = path[start..].to_vec();
            cycle.push(next);
            return cycle;
        }
        path.push(next);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rules(text: &str) -> Rules {
        Rules::from_text(None, text.to_string()).unwrap()
    }

    fn derive(rules: &Rules, df: DataFrame) -> DataFrame {
        let raw: Vec<String> = df
            .get_column_names()
            .iter()
            .map(|c| c.to_string())
            .collect();
        let plan = Plan::new(rules, &raw).unwrap();
        let (lf, _, _) = plan.apply(df.lazy(), "firm", "year");
        lf.collect().unwrap()
    }

    #[test]
    fn lag_is_null_across_a_gap_and_at_the_first_period() {
        // Firm a has years 1, 2, 4 (a gap at 3); firm b has year 2 only. Hand-worked.
        let df = df!(
            "firm" => ["a", "a", "a", "b"],
            "year" => [1i64, 2, 4, 2],
            "x" => [10.0, 20.0, 40.0, 7.0],
        )
        .unwrap();
        let r = rules(
            r#"
            [derive.x_lag]
            expr = "lag(x, 1)"
            [derive.x_lag2]
            expr = "lag(x, 2)"
            [derive.x_lead]
            expr = "lead(x)"
            [derive.x_diff]
            expr = "diff(x, 1)"
            [derive.x_growth]
            expr = "growth(x, 1)"
            "#,
        );
        let out = derive(&r, df);
        let get = |c: &str| -> Vec<Option<f64>> {
            out.column(c).unwrap().f64().unwrap().iter().collect()
        };
        assert_eq!(get("x_lag"), [None, Some(10.0), None, None]);
        assert_eq!(get("x_lag2"), [None, None, Some(20.0), None]);
        assert_eq!(get("x_lead"), [Some(20.0), None, None, None]);
        assert_eq!(get("x_diff"), [None, Some(10.0), None, None]);
        assert_eq!(get("x_growth"), [None, Some(1.0), None, None]);
    }

    #[test]
    fn null_conditions_are_counted_by_reason() {
        let df = df!(
            "firm" => ["a", "a", "b", "b"],
            "year" => [1i64, 2, 1, 2],
            "ta" => [Some(100.0), Some(-5.0), None, Some(50.0)],
        )
        .unwrap();
        let r = rules(
            r#"
            include = ["standard"]
            [columns]
            total_assets = "ta"
            "#,
        );
        let raw: Vec<String> = ["firm", "year", "ta"].map(String::from).into();
        let plan = Plan::new(&r, &raw).unwrap();
        let names: Vec<&str> = plan.vars.iter().map(|v| v.name.as_str()).collect();
        assert_eq!(names, ["size"], "only size has all its inputs");
        assert!(plan.skipped.iter().any(|s| s.name == "leverage"));
        let (lf, _, not_finite) = plan.apply(df.lazy(), "firm", "year");
        let out = lf.collect().unwrap();
        let size: Vec<Option<f64>> = out.column("size").unwrap().f64().unwrap().iter().collect();
        assert_eq!(size, [Some(100f64.ln()), None, None, Some(50f64.ln())]);
        let s = &plan.null_counts(&out, &not_finite).unwrap()[0];
        assert_eq!((s.non_null, s.nulls), (2, 2));
        assert_eq!(s.null_reasons[0].rows, 1, "total assets not positive");
        assert_eq!(s.null_reasons[1].rows, 1, "input missing");
    }

    /// Where a key repeats (an `audit` that reports conflicting keys) a lag and a lead take
    /// the first of its rows, and a variable they read is evaluated once: its rows not finite
    /// counted once (the join this replaced evaluated it again for each lag, and counted 3 of
    /// 1 here). Worked by hand: r = 1 / x over a (years 1, 1, 2, 3) and b (year 1).
    #[test]
    fn repeated_keys_shift_the_first_row_and_count_once() {
        let df = df!(
            "firm" => ["a", "a", "a", "a", "b"],
            "year" => [1i64, 1, 2, 3, 1],
            "x" => [Some(2.0), Some(4.0), Some(0.0), Some(5.0), None],
        )
        .unwrap();
        let r = rules(
            "[derive.r]\nexpr = \"1 / x\"\n[derive.r_lag]\nexpr = \"lag(r, 1)\"\n\
             [derive.r_lead]\nexpr = \"lead(r, 1)\"\n[derive.x_lag]\nexpr = \"lag(x, 2)\"\n",
        );
        let raw: Vec<String> = ["firm", "year", "x"].map(String::from).into();
        let plan = Plan::new(&r, &raw).unwrap();
        let (lf, _, not_finite) = plan.apply(df.lazy(), "firm", "year");
        let out = lf.collect().unwrap();
        let get = |c: &str| -> Vec<Option<f64>> {
            out.column(c).unwrap().f64().unwrap().iter().collect()
        };
        assert_eq!(get("r"), [Some(0.5), Some(0.25), None, Some(0.2), None]);
        assert_eq!(get("r_lag"), [None, None, Some(0.5), None, None]);
        assert_eq!(get("r_lead"), [None, None, Some(0.2), None, None]);
        assert_eq!(get("x_lag"), [None, None, None, Some(2.0), None]);
        let counts = plan.null_counts(&out, &not_finite).unwrap();
        let r = counts.iter().find(|s| s.name == "r").unwrap();
        assert_eq!((r.non_null, r.nulls), (3, 2));
        let rows = |reason: &str| {
            r.null_reasons
                .iter()
                .find(|n| n.reason == reason)
                .map_or(0, |n| n.rows)
        };
        assert_eq!((rows(NOT_FINITE), rows(INPUT_MISSING)), (1, 1));
    }

    /// A value the expression does not give though its inputs are there is not counted as an
    /// input missing. Worked by hand: m = n % d (whole numbers; a remainder of a division by
    /// zero is missing) and c = CASE WHEN n > 2 THEN 1 END (no ELSE) over n = 1, 2, 3, missing,
    /// d = 0, 2, 0, 1, and lag(n, 1) over years 1, 2, 4, 5: m gives none on 2 rows with inputs,
    /// 1 without; c none on 2 with, 1 without; the lag misses its earlier period twice.
    #[test]
    fn no_value_with_every_input_present_has_its_own_reason() {
        let df = df!(
            "firm" => ["a", "a", "a", "a"],
            "year" => [1i64, 2, 4, 5],
            "n" => [Some(1i64), Some(2), Some(3), None],
            "d" => [0i64, 2, 0, 1],
        )
        .unwrap();
        let r = rules(
            "[derive.m]\nexpr = \"n % d\"\n[derive.c]\nexpr = \"CASE WHEN n > 2 THEN 1 END\"\n\
             [derive.l]\nexpr = \"lag(n, 1)\"\n",
        );
        let raw: Vec<String> = ["firm", "year", "n", "d"].map(String::from).into();
        let plan = Plan::new(&r, &raw).unwrap();
        let (lf, _, not_finite) = plan.apply(df.lazy(), "firm", "year");
        let out = lf.collect().unwrap();
        let counts = plan.null_counts(&out, &not_finite).unwrap();
        let reasons = |name: &str| -> Vec<(String, u64)> {
            let s = counts.iter().find(|s| s.name == name).unwrap();
            s.null_reasons
                .iter()
                .map(|n| (n.reason.clone(), n.rows))
                .collect()
        };
        let two_one = vec![(NO_VALUE.to_string(), 2), (INPUT_MISSING.to_string(), 1)];
        assert_eq!(reasons("m"), two_one);
        assert_eq!(reasons("c"), two_one);
        assert_eq!(reasons("l"), [(INPUT_MISSING.to_string(), 2)]);
    }

    #[test]
    fn dependencies_order_and_cycles() {
        let raw: Vec<String> = ["firm", "year", "x"].map(String::from).into();
        let r = rules("[derive.b]\nexpr = \"a * 2\"\n[derive.a]\nexpr = \"x + 1\"\n");
        let plan = Plan::new(&r, &raw).unwrap();
        let names: Vec<&str> = plan.vars.iter().map(|v| v.name.as_str()).collect();
        assert_eq!(names, ["a", "b"]);
        let r = rules("[derive.b]\nexpr = \"a\"\n[derive.a]\nexpr = \"lag(b, 1)\"\n");
        let err = Plan::new(&r, &raw).unwrap_err().to_string();
        assert_eq!(
            err,
            "derived variables `a` -> `b` -> `a` depend on each other in a cycle"
        );
    }

    /// Levels: a variable sits one above the highest derived variable it reads, directly, in
    /// a null condition or through a panel function; the others share level 0.
    #[test]
    fn variables_are_grouped_by_what_they_read() {
        let raw: Vec<String> = ["firm", "year", "x"].map(String::from).into();
        let r = rules(
            "[derive.c]\nexpr = \"lag(b, 1)\"\n[derive.b]\nexpr = \"a * 2\"\n\
             [derive.a]\nexpr = \"x + 1\"\n[derive.d]\nexpr = \"x\"\n\
             [derive.e]\nexpr = \"x\"\nnull_when = [{ when = \"b > 0\", reason = \"r\" }]\n",
        );
        let plan = Plan::new(&r, &raw).unwrap();
        let levels: Vec<Vec<&str>> = plan
            .levels()
            .iter()
            .map(|l| l.iter().map(|v| v.name.as_str()).collect())
            .collect();
        assert_eq!(levels, [vec!["a", "d"], vec!["b"], vec!["c", "e"]]);
    }
}
