//! The spreadsheet guard: text cells a spreadsheet would run as a formula are made inert in
//! every CSV the tool writes.

use polars::prelude::*;

use crate::Result;

/// Text cells that a spreadsheet would read as a formula (starting with `=`, `+`, `-`, `@`,
/// a tab or a carriage return) get a leading `'`. Numeric columns are untouched, and so is a
/// text column without such a cell: it is not copied (a pass of the engine finds the columns
/// that have one first).
pub fn guard_text(df: &DataFrame) -> Result<DataFrame> {
    let risky = |name: &PlSmallStr| {
        let c = col(name.clone());
        ["=", "+", "-", "@", "\t", "\r"]
            .iter()
            .map(|p| c.clone().str().starts_with(lit(*p)))
            .reduce(|a, b| a.or(b))
            .expect("prefixes are listed")
            .fill_null(lit(false))
    };
    let text: Vec<PlSmallStr> = df
        .schema()
        .iter()
        .filter(|(_, dtype)| **dtype == DataType::String)
        .map(|(name, _)| name.clone())
        .collect();
    if text.is_empty() {
        return Ok(df.clone());
    }
    let any = df
        .clone()
        .lazy()
        .select(
            text.iter()
                .map(|name| risky(name).any(true).alias(name.clone()))
                .collect::<Vec<_>>(),
        )
        .collect()?;
    let mut guards = Vec::new();
    for name in &text {
        if any.column(name)?.bool()?.get(0) == Some(true) {
            let c = col(name.clone());
            guards.push(
                when(risky(name))
                    .then(lit("'") + c.clone())
                    .otherwise(c)
                    .alias(name.clone()),
            );
        }
    }
    if guards.is_empty() {
        return Ok(df.clone());
    }
    Ok(df.clone().lazy().with_columns(guards).collect()?)
}

/// `df` with its dates, times and decimals as text, which the CSV writer the engine is built
/// with does not write: ISO 8601 (`2001-12-31`, `2001-12-31 00:00:00.000000`) and the decimal's
/// own digits. Run after [`guard_text`]: a negative decimal is a number, not a formula.
pub fn dates_as_text(df: DataFrame) -> Result<DataFrame> {
    let spelled: Vec<Expr> = df
        .schema()
        .iter()
        .filter(|(_, dtype)| {
            matches!(
                dtype,
                DataType::Date | DataType::Datetime(..) | DataType::Time | DataType::Decimal(..)
            )
        })
        .map(|(name, _)| col(name.clone()).cast(DataType::String))
        .collect();
    if spelled.is_empty() {
        return Ok(df);
    }
    Ok(df.lazy().with_columns(spelled).collect()?)
}
