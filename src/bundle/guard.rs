//! The spreadsheet guard: text cells a spreadsheet would run as a formula are made inert in
//! every CSV the tool writes.

use polars::prelude::*;

use crate::Result;

/// Text cells that a spreadsheet would read as a formula (starting with `=`, `+`, `-`, `@`,
/// a tab or a carriage return) get a leading `'`. Numeric columns are untouched.
pub fn guard_text(df: &DataFrame) -> Result<DataFrame> {
    let schema = df.schema();
    let guards: Vec<Expr> = schema
        .iter()
        .filter(|(_, dtype)| **dtype == DataType::String)
        .map(|(name, _)| {
            let c = col(name.clone());
            let risky = ["=", "+", "-", "@", "\t", "\r"]
                .iter()
                .map(|p| c.clone().str().starts_with(lit(*p)))
                .reduce(|a, b| a.or(b))
                .expect("prefixes are listed");
            when(risky.fill_null(lit(false)))
                .then(lit("'") + c.clone())
                .otherwise(c)
                .alias(name.clone())
        })
        .collect();
    if guards.is_empty() {
        return Ok(df.clone());
    }
    Ok(df.clone().lazy().with_columns(guards).collect()?)
}
