//! Derived-variable expressions: SQL expression syntax parsed by sqlparser (the parser polars
//! itself uses), with our gap-aware panel functions rewritten into hidden shifted columns and
//! names resolved, then handed to polars' SQL expression translator.

use std::collections::{BTreeMap, BTreeSet};
use std::ops::ControlFlow;

use polars::prelude::{DataType, Expr, PolarsError};
use sqlparser::ast::{
    visit_expressions_mut, Expr as SqlExpr, FunctionArg, FunctionArgExpr, FunctionArguments, Ident,
    UnaryOperator, Value,
};
use sqlparser::dialect::GenericDialect;
use sqlparser::parser::Parser;

use crate::{Error, Result};

/// The panel functions we add to SQL; each looks k periods back (or ahead) in the same entity.
pub const PANEL_FUNCTIONS: [&str; 4] = ["lag", "lead", "diff", "growth"];

/// SQL functions that read the whole column (aggregates, windows, row numbering, array and
/// table functions): a derived variable is computed row by row, so these would mix every
/// firm's values into each row. Refused by name.
const WHOLE_COLUMN_FUNCTIONS: [&str; 39] = [
    "avg",
    "corr",
    "count",
    "covar_pop",
    "covar_samp",
    "covar",
    "first",
    "last",
    "max",
    "median",
    "min",
    "quantile_cont",
    "quantile_disc",
    "stdev",
    "stddev",
    "stdev_samp",
    "stddev_samp",
    "string_agg",
    "listagg",
    "group_concat",
    "sum",
    "total",
    "var",
    "variance",
    "var_samp",
    "array_agg",
    "unnest",
    "dense_rank",
    "first_value",
    "last_value",
    "rank",
    "row_number",
    "columns",
    "mean",
    "std",
    "n_unique",
    "mode",
    "read_csv",
    "read_parquet",
];

/// What names an expression may use.
pub(crate) struct Scope<'a> {
    /// Columns of the data as read.
    pub(crate) raw: &'a BTreeSet<String>,
    /// Canonical name -> raw column, from `[columns]`.
    pub(crate) mapping: &'a BTreeMap<String, String>,
    /// Names of derived variables that will exist.
    pub(crate) derived: &'a BTreeSet<String>,
}

/// A column shifted by `k` periods within its entity (k > 0 looks back, k < 0 looks ahead).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) struct Shift {
    /// The column shifted (raw or derived, already resolved).
    pub(crate) column: String,
    /// Periods back (positive) or ahead (negative).
    pub(crate) k: i64,
}

/// How a hidden shifted column's name starts (no input column may start with `__`).
const SHIFT_PREFIX: &str = "__shift";

impl Shift {
    /// The call as a rules file writes it: `lag(x, 2)`, `lead(x, 1)`.
    fn as_typed(&self) -> String {
        match self.k {
            k if k < 0 => format!("lead({}, {})", self.column, -k),
            k => format!("lag({}, {k})", self.column),
        }
    }

    /// The hidden column that holds the shifted values.
    pub(crate) fn hidden_name(&self) -> String {
        format!("{SHIFT_PREFIX}{}__{}", self.k, self.column)
    }
}

/// An expression ready to evaluate.
#[derive(Debug, Clone)]
pub(crate) struct Compiled {
    /// The polars expression.
    pub(crate) expr: Expr,
    /// Derived variables it reads (directly or through a panel function).
    pub(crate) derived_deps: BTreeSet<String>,
    /// Shifted columns it reads.
    pub(crate) shifts: BTreeSet<Shift>,
    /// Raw columns it reads (resolved names).
    pub(crate) raw_columns: BTreeSet<String>,
}

/// Translate one expression of rule `rule`.
pub(crate) fn compile(rule: &str, text: &str, scope: &Scope) -> Result<Compiled> {
    let mut ast = parse(rule, text)?;
    let functions = polars::sql::keywords::all_functions();
    let mut derived_deps = BTreeSet::new();
    let mut shifts = BTreeSet::new();
    let mut raw_columns = BTreeSet::new();
    let flow = visit_expressions_mut(&mut ast, |e| {
        match e {
            SqlExpr::Identifier(id) => match resolve(&id.value, scope) {
                Some((name, is_derived)) => {
                    if is_derived {
                        derived_deps.insert(name.clone());
                    } else {
                        raw_columns.insert(name.clone());
                    }
                    *id = Ident::with_quote('"', name);
                }
                None => {
                    let names = scope.raw.iter().map(String::as_str);
                    return ControlFlow::Break(Error::UnknownColumn {
                        rule: rule.to_string(),
                        column: id.value.clone(),
                        hint: crate::error::near_name(&id.value, names)
                            .map_or(String::new(), |near| format!(" ({near})")),
                    });
                }
            },
            SqlExpr::CompoundIdentifier(parts) => {
                let column = parts.iter().map(|p| p.value.as_str()).collect::<Vec<_>>();
                return ControlFlow::Break(Error::UnknownColumn {
                    rule: rule.to_string(),
                    column: column.join("."),
                    hint: String::new(),
                });
            }
            SqlExpr::Function(f) => {
                let name = f.name.to_string().to_lowercase();
                if f.over.is_some() || WHOLE_COLUMN_FUNCTIONS.contains(&name.as_str()) {
                    return ControlFlow::Break(Error::RuleExpr {
                        rule: rule.to_string(),
                        message: format!(
                            "`{name}` reads the whole column: a derived variable is computed row \
                             by row (for another period of the same firm use lag, lead, diff or \
                             growth; for row-wise extremes greatest or least)"
                        ),
                    });
                }
                if PANEL_FUNCTIONS.contains(&name.as_str()) {
                    // Inner panel functions, already rewritten, are written back as typed.
                    let call = shifts
                        .iter()
                        .fold(f.to_string().replace('"', ""), |call: String, s: &Shift| {
                            call.replace(&s.hidden_name(), &s.as_typed())
                        });
                    match panel_call(rule, &name, &call, &f.args) {
                        Ok((replacement, shift)) => {
                            shifts.insert(shift);
                            *e = replacement;
                        }
                        Err(err) => return ControlFlow::Break(err),
                    }
                } else if !functions.contains(&name.as_str()) {
                    return ControlFlow::Break(Error::UnknownFunction {
                        rule: rule.to_string(),
                        function: name,
                    });
                }
            }
            _ => {}
        }
        ControlFlow::Continue(())
    });
    if let ControlFlow::Break(err) = flow {
        return Err(err);
    }
    let expr = polars::sql::sql_expr(ast.to_string()).map_err(|e| Error::RuleExpr {
        rule: rule.to_string(),
        message: e.to_string().replace('\n', " "),
    })?;
    let expr = conditions_only(expr, rule);
    Ok(Compiled {
        expr,
        derived_deps,
        shifts,
        raw_columns,
    })
}

/// AND, OR and NOT combine conditions: each operand must be true or false (or NULL), as SQL
/// has it. The engine would otherwise take two numbers bit by bit (`3 AND 4` is 0), and a
/// number with text can make it fail outright; so each operand passes through a check of its
/// type, made when the engine plans the expression (before any value is computed), which stops
/// the run with the rule's name.
fn conditions_only(expr: Expr, rule: &str) -> Expr {
    use polars::prelude::{BooleanFunction, DataTypeExpr, FunctionExpr, Operator};
    use std::sync::Arc;
    let guard = |operand: Expr| -> Expr {
        let rule = rule.to_string();
        operand.map(Ok, move |_, field| match field.dtype() {
            DataType::Boolean | DataType::Null => Ok(field.clone()),
            other => Err(PolarsError::InvalidOperation(
                format!(
                    "{rule}: AND, OR and NOT combine conditions (true or false), not {} values; \
                     compare first (such as `x > 0` or `x = 1`)",
                    kind(other)
                )
                .into(),
            )),
        })
    };
    expr.map_expr(|e| match e {
        Expr::BinaryExpr { left, op, right }
            if matches!(
                op,
                Operator::And
                    | Operator::Or
                    | Operator::Xor
                    | Operator::LogicalAnd
                    | Operator::LogicalOr
            ) =>
        {
            Expr::BinaryExpr {
                left: Arc::new(guard(Arc::unwrap_or_clone(left))),
                op,
                right: Arc::new(guard(Arc::unwrap_or_clone(right))),
            }
        }
        // The SQL translator writes NOT x as x cast to true/false, then negated: a number
        // would pass as "not zero", so the check goes on what is cast.
        Expr::Function {
            input,
            function: FunctionExpr::Boolean(BooleanFunction::Not),
        } => Expr::Function {
            input: input
                .into_iter()
                .map(|operand| match operand {
                    Expr::Cast {
                        expr,
                        dtype: DataTypeExpr::Literal(DataType::Boolean),
                        options,
                    } => Expr::Cast {
                        expr: Arc::new(guard(Arc::unwrap_or_clone(expr))),
                        dtype: DataTypeExpr::Literal(DataType::Boolean),
                        options,
                    },
                    other => guard(other),
                })
                .collect(),
            function: FunctionExpr::Boolean(BooleanFunction::Not),
        },
        other => other,
    })
}

/// `expr`, which must give true or false (or NULL): anything else stops the run when the
/// engine plans it, with `what` (the condition named) and the type it gives.
pub(crate) fn a_condition(expr: Expr, what: String) -> Expr {
    expr.map(Ok, move |_, field| match field.dtype() {
        DataType::Boolean | DataType::Null => Ok(field.clone()),
        other => Err(PolarsError::InvalidOperation(
            format!(
                "{what} gives {} values, not true / false: write a condition (such as `x > 0` \
                 or `x = 1`)",
                kind(other)
            )
            .into(),
        )),
    })
}

/// A data type in words, for the messages about rules.
fn kind(dtype: &DataType) -> &'static str {
    if dtype.is_primitive_numeric() {
        "number"
    } else if dtype.is_string() {
        "text"
    } else if dtype.is_temporal() {
        "date or time"
    } else {
        "other"
    }
}

fn parse(rule: &str, text: &str) -> Result<SqlExpr> {
    let syntax = |message: String| Error::RuleSyntax {
        rule: rule.to_string(),
        expr: text.to_string(),
        message,
    };
    let mut parser = Parser::new(&GenericDialect)
        .try_with_sql(text)
        .map_err(|e| syntax(e.to_string()))?;
    let expr = parser.parse_expr().map_err(|e| syntax(e.to_string()))?;
    let rest = parser.peek_token();
    if rest.token != sqlparser::tokenizer::Token::EOF {
        return Err(syntax(format!(
            "unexpected `{}` after the expression",
            rest.token
        )));
    }
    Ok(expr)
}

/// Derived names first, then raw columns, then canonical names mapped in `[columns]`.
fn resolve(name: &str, scope: &Scope) -> Option<(String, bool)> {
    if scope.derived.contains(name) {
        return Some((name.to_string(), true));
    }
    if scope.raw.contains(name) {
        return Some((name.to_string(), false));
    }
    scope
        .mapping
        .get(name)
        .filter(|raw| scope.raw.contains(*raw))
        .map(|raw| (raw.clone(), false))
}

/// Rewrite `lag(x, k)`, `lead(x, k)`, `diff(x, k)` or `growth(x, k)` whose `x` is already
/// resolved into SQL over the hidden shifted column.
fn panel_call(
    rule: &str,
    name: &str,
    call: &str,
    args: &FunctionArguments,
) -> Result<(SqlExpr, Shift)> {
    let bad = |message: &str| Error::PanelFunction {
        rule: rule.to_string(),
        call: call.to_string(),
        message: message.to_string(),
    };
    let args: Vec<&SqlExpr> = match args {
        FunctionArguments::List(list) => list
            .args
            .iter()
            .map(|a| match a {
                FunctionArg::Unnamed(FunctionArgExpr::Expr(e)) => Ok(e),
                _ => Err(bad("arguments must be a column and a whole number")),
            })
            .collect::<Result<_>>()?,
        _ => return Err(bad("expected a column and a whole number in parentheses")),
    };
    let column = match args.first() {
        // An inner panel function has already become its hidden shifted column.
        Some(SqlExpr::Identifier(id)) if id.value.starts_with(SHIFT_PREFIX) => {
            return Err(bad(
                "the first argument must be a column, not another panel function: write \
                 lag(x, 2) for lag(lag(x, 1), 1), or derive the inner one as a variable of its \
                 own",
            ))
        }
        Some(SqlExpr::Identifier(id)) => id.value.clone(),
        _ => return Err(bad("the first argument must be a column name")),
    };
    let k = match args.get(1) {
        None => 1,
        Some(SqlExpr::Value(v)) => match &v.value {
            Value::Number(s, _) => s.parse::<i64>().ok().filter(|k| *k >= 1),
            _ => None,
        }
        .ok_or_else(|| bad("the number of periods must be a whole number of at least 1"))
        .and_then(|k| match k {
            k if k > super::MAX_WINDOW_PERIODS => Err(bad(&format!(
                "the number of periods must be at most {} (the most periods a panel's window \
                 holds)",
                super::MAX_WINDOW_PERIODS
            ))),
            k => Ok(k),
        })?,
        Some(SqlExpr::UnaryOp {
            op: UnaryOperator::Minus,
            ..
        }) => {
            return Err(bad(
                "the number of periods must be at least 1; use lead or lag",
            ))
        }
        Some(_) => return Err(bad("the number of periods must be a whole number")),
    };
    if args.len() > 2 {
        return Err(bad("takes a column and a number of periods"));
    }
    let shift = Shift {
        column: column.clone(),
        k: if name == "lead" { -k } else { k },
    };
    let h = shift.hidden_name();
    let sql = match name {
        "lag" | "lead" => format!("\"{h}\""),
        "diff" => format!("(\"{column}\" - \"{h}\")"),
        _ => format!("(CASE WHEN \"{h}\" > 0 THEN \"{column}\" / \"{h}\" - 1 END)"),
    };
    let replacement = Parser::new(&GenericDialect)
        .try_with_sql(&sql)
        .and_then(|mut p| p.parse_expr())
        .expect("generated SQL parses");
    Ok((replacement, shift))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scope_parts() -> (BTreeSet<String>, BTreeMap<String, String>, BTreeSet<String>) {
        let raw = ["assets", "ni", "firm", "year"].map(String::from).into();
        let mapping = [("total_assets".to_string(), "assets".to_string())].into();
        let derived = ["size".to_string()].into();
        (raw, mapping, derived)
    }

    #[test]
    fn resolves_canonical_names_and_records_shifts() {
        let (raw, mapping, derived) = scope_parts();
        let scope = Scope {
            raw: &raw,
            mapping: &mapping,
            derived: &derived,
        };
        let c = compile("r", "ni / lag(total_assets, 2) + lead(size)", &scope).unwrap();
        let shifts: Vec<_> = c.shifts.iter().map(Shift::hidden_name).collect();
        assert_eq!(shifts, ["__shift2__assets", "__shift-1__size"]);
        assert_eq!(c.derived_deps, ["size".to_string()].into());
    }

    #[test]
    fn errors_name_the_rule_and_the_token() {
        let (raw, mapping, derived) = scope_parts();
        let scope = Scope {
            raw: &raw,
            mapping: &mapping,
            derived: &derived,
        };
        let cases = [
            ("ni / nosuch", "r: unknown column `nosuch`"),
            ("frobnicate(ni)", "r: unknown function `frobnicate`"),
            ("ni / (assets", "r: syntax error"),
            ("lag(ni + 1, 1)", "the first argument must be a column name"),
            ("lag(ni, 0)", "at least 1"),
            ("lag(ni, 1001)", "at most 1000"),
            ("lag(ni, 9223372036854775807)", "at most 1000"),
            ("diff(lag(ni, 1), 1)", "`diff(lag(ni, 1), 1)`: the first argument must be a column, not another panel function"),
            ("lag(lead(ni))", "not another panel function"),
            ("ni assets", "unexpected `assets`"),
            ("ni / sum(ni)", "`sum` reads the whole column"),
            ("ni - avg(ni)", "`avg` reads the whole column"),
            ("max(ni)", "`max` reads the whole column"),
            (
                "ni / abs(ni) OVER (PARTITION BY firm)",
                "`abs` reads the whole column",
            ),
            (
                "row_number() OVER ()",
                "`row_number` reads the whole column",
            ),
        ];
        for (text, want) in cases {
            let err = compile("r", text, &scope).unwrap_err().to_string();
            assert!(err.contains(want), "{text}: {err}");
            assert!(!err.contains('\n'), "{text}: multi-line error {err}");
        }
    }
}
