//! Text a spreadsheet wrote as a formula. To keep a code's leading zeros (`007`) or a long
//! number's digits through a spreadsheet, exports write such a cell as the formula `="007"`;
//! a CSV file then holds those six characters, and the firm `="007"` meets no `007` in
//! another file, nor in the same file where it was written plainly. A CSV cell of that form
//! is read as the text between the quotes (`=""` as missing), and the input notes say how
//! many in each column and the first. What the cells then hold is read as any other text:
//! a column of numbers becomes numbers (the marker pass), one of codes with leading zeros
//! stays text.

use polars::prelude::*;

use super::markers::how_many_cells;
use crate::Result;

/// Whether a text cell is `="…"`: starts with `="` and ends with `"`, three characters or
/// more.
fn is_formula(c: Expr) -> Expr {
    c.clone()
        .str()
        .starts_with(lit("=\""))
        .and(c.clone().str().ends_with(lit("\"")))
        .and(c.str().len_bytes().gt_eq(lit(3u32)))
}

/// `df` with every text cell written `="…"` in the columns of text replaced by what its
/// quotes hold, and a note for each column that had one; `row` names the column of data row
/// numbers, when there is one, for the first such cell.
pub(crate) fn formula_text(df: DataFrame, row: Option<&str>) -> Result<(DataFrame, Vec<String>)> {
    let text: Vec<PlSmallStr> = df
        .schema()
        .iter()
        .filter(|(_, dtype)| **dtype == DataType::String)
        .map(|(name, _)| name.clone())
        .collect();
    if text.is_empty() {
        return Ok((df, Vec::new()));
    }
    // One pass counts every text column's formula cells.
    let counts = df
        .clone()
        .lazy()
        .select(
            text.iter()
                .map(|name| {
                    is_formula(col(name.clone()))
                        .sum()
                        .cast(DataType::UInt64)
                        .alias(name.clone())
                })
                .collect::<Vec<_>>(),
        )
        .collect()?;
    let mut found = Vec::new();
    for name in &text {
        let n = counts.column(name)?.u64()?.get(0).unwrap_or(0);
        if n > 0 {
            found.push((name.clone(), n));
        }
    }
    if found.is_empty() {
        return Ok((df, Vec::new()));
    }
    let mut notes = Vec::with_capacity(found.len());
    for (name, n) in &found {
        let c = col(name.clone());
        let mut first = vec![c
            .clone()
            .filter(is_formula(c.clone()))
            .first()
            .alias("value")];
        if let Some(row) = row {
            first.push(
                col(row)
                    .filter(is_formula(c.clone()))
                    .first()
                    .cast(DataType::UInt64)
                    .alias("row"),
            );
        }
        let first = df.clone().lazy().select(first).collect()?;
        let value = first.column("value")?.str()?.get(0).unwrap_or_default();
        let at = match first.column("row").ok() {
            Some(r) => r
                .u64()?
                .get(0)
                .map_or(String::new(), |r| format!(", data row {r}")),
            None => String::new(),
        };
        notes.push(format!(
            "column `{name}`: {} written as a spreadsheet formula for text (the first `{value}`{at}) \
             read as the text between its quotes",
            how_many_cells(*n as usize)
        ));
    }
    let unwrapped: Vec<Expr> = found
        .iter()
        .map(|(name, _)| {
            let c = col(name.clone());
            let inner = c
                .clone()
                .str()
                .strip_prefix(lit("=\""))
                .str()
                .strip_suffix(lit("\""));
            when(is_formula(c.clone()))
                .then(
                    when(inner.clone().eq(lit("")))
                        .then(lit(NULL).cast(DataType::String))
                        .otherwise(inner),
                )
                .otherwise(c)
                .alias(name.clone())
        })
        .collect();
    let df = df.lazy().with_columns(unwrapped).collect()?;
    Ok((df, notes))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_cells_are_read_as_the_text_they_hold() {
        // Worked by hand: `="007"` holds `007`, `=""` nothing; a cell that only looks alike
        // (`=007`, `"007"`, `=x"`) is left as it is, and so is a column without one.
        let df = df!(
            "__row" => [1u64, 2, 3, 4, 5],
            "firm" => ["=\"007\"", "007", "=\"0100\"", "=\"\"", "=007"],
            "name" => ["a", "\"007\"", "=x\"", "b", "c"],
            "x" => [1.0, 2.0, 3.0, 4.0, 5.0],
        )
        .unwrap();
        let (df, notes) = formula_text(df, Some("__row")).unwrap();
        let firm: Vec<Option<&str>> = df.column("firm").unwrap().str().unwrap().iter().collect();
        assert_eq!(
            firm,
            [Some("007"), Some("007"), Some("0100"), None, Some("=007")]
        );
        let name: Vec<Option<&str>> = df.column("name").unwrap().str().unwrap().iter().collect();
        assert_eq!(
            name,
            [
                Some("a"),
                Some("\"007\""),
                Some("=x\""),
                Some("b"),
                Some("c")
            ]
        );
        assert_eq!(
            notes,
            [
                "column `firm`: 3 cells written as a spreadsheet formula for text (the first \
              `=\"007\"`, data row 1) read as the text between its quotes"
            ]
        );
    }
}
