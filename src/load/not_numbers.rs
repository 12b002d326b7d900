//! Text where a rule computes with numbers. A column with a cell the reader could not take
//! for a number (`1,5` in a file with decimal points, `-` or `n.a.` for a missing value) is
//! read as text, and an expression that divides or compares it fails in the engine with its
//! types alone ("division with 'String' datatypes"). The cell that made the column text is
//! what the user has to fix: its row, column and value are named instead.

use std::path::Path;

use polars::prelude::*;

use super::ROW;
use crate::Error;

/// The error naming the first cell (in the file's order) of `columns` of `df` held as text
/// whose value is not a number, if there is one: in `file`, read by `what` (a rule and its
/// expression). Only a column of numbers for the most part is looked at (at least as many
/// cells numbers as not): a column of names or codes is text by nature, and the expression,
/// not a cell, is what is wrong. Columns `df` lacks or holds as numbers are passed over.
pub(crate) fn text_among_numbers<'a>(
    df: &DataFrame,
    columns: impl IntoIterator<Item = &'a String>,
    file: &Path,
    what: &str,
) -> Option<Error> {
    let schema = df.schema();
    let mut first: Option<(u64, String, String)> = None;
    for name in columns {
        if schema.get(name.as_str()) != Some(&DataType::String) {
            continue;
        }
        let Ok(Some((row, value))) = first_not_a_number(df, name) else {
            continue;
        };
        if first.as_ref().is_none_or(|(r, _, _)| row < *r) {
            first = Some((row, name.clone(), value));
        }
    }
    let (row, column, value) = first?;
    Some(Error::Unreadable {
        file: file.to_path_buf(),
        at: format!(", row {row}, column `{column}`"),
        message: format!(
            "`{}` is not a number, and {what} computes with the column: write numbers as \
             digits (with `--decimal-comma` for `1,5`) and missing values as empty cells or NA",
            shown(&value)
        ),
    })
}

/// The row number and value of the first row of `df` (by [`ROW`]) where the text column
/// `name` holds something other than blanks that does not read as a number, when at least as
/// many of its cells do.
fn first_not_a_number(df: &DataFrame, name: &str) -> PolarsResult<Option<(u64, String)>> {
    let text = col(name).str().strip_chars(lit(NULL));
    let filled = text.clone().neq(lit(""));
    let number = text.cast(DataType::Float64).is_not_null();
    let bad = filled.clone().and(number.clone().not());
    let counts = df
        .clone()
        .lazy()
        .select([
            number.sum().cast(DataType::UInt64).alias("numbers"),
            bad.clone().sum().cast(DataType::UInt64).alias("others"),
        ])
        .collect()?;
    let count = |c: &str| -> PolarsResult<u64> { Ok(counts.column(c)?.u64()?.get(0).unwrap_or(0)) };
    let (numbers, others) = (count("numbers")?, count("others")?);
    if others == 0 || numbers < others {
        return Ok(None);
    }
    let found = df
        .clone()
        .lazy()
        .select([col(ROW), col(name)])
        .filter(bad)
        .sort([ROW], SortMultipleOptions::default())
        .limit(1)
        .collect()?;
    if found.height() == 0 {
        return Ok(None);
    }
    let row = found.column(ROW)?.cast(&DataType::UInt64)?.u64()?.get(0);
    let value = found.column(name)?.str()?.get(0).map(str::to_string);
    Ok(row.zip(value))
}

/// A cell's value for a one-line message: line breaks and tabs as spaces, at most 40
/// characters.
fn shown(value: &str) -> String {
    let flat: String = value
        .chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect();
    match flat.char_indices().nth(40) {
        Some((at, _)) => format!("{}...", &flat[..at]),
        None => flat,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: the first row in the file's order (not the frame's) whose value is
    /// neither blank nor a number, among the text columns named; numbers written as text,
    /// blanks, numeric columns and a column of names (one number in five) are passed over.
    #[test]
    fn the_first_cell_that_is_not_a_number() {
        let df = df!(
            ROW => [4u32, 2, 3, 1, 5],
            "a" => [Some("1,5"), Some(" 2.5 "), Some("-"), None, Some("8")],
            "b" => [Some("7"), Some("n.a."), Some("  "), Some("1e3"), None],
            "x" => [1.0, 2.0, 3.0, 4.0, 5.0],
            "name" => ["Harbor", "Mill", "7", "Quay", "Dock"]
        )
        .unwrap();
        let names: Vec<String> = ["a", "b", "x", "absent"].map(String::from).to_vec();
        let e = text_among_numbers(&df, &names, Path::new("f.csv"), "rule `r` (`a / x`)")
            .unwrap()
            .to_string();
        assert_eq!(
            e,
            "`f.csv`, row 2, column `b`: `n.a.` is not a number, and rule `r` (`a / x`) \
             computes with the column: write numbers as digits (with `--decimal-comma` for \
             `1,5`) and missing values as empty cells or NA"
        );
        let only_a = text_among_numbers(&df, &names[..1], Path::new("f.csv"), "r").unwrap();
        assert!(
            only_a.to_string().contains("row 3, column `a`: `-`"),
            "{only_a}"
        );
        assert!(text_among_numbers(&df, &names[2..], Path::new("f.csv"), "r").is_none());
        let numbers = df!(ROW => [1u32], "a" => ["3.25"]).unwrap();
        assert!(text_among_numbers(&numbers, &names[..1], Path::new("f.csv"), "r").is_none());
        // Names with a number among them: text by nature, no cell named.
        let name = ["name".to_string()];
        assert!(text_among_numbers(&df, &name, Path::new("f.csv"), "r").is_none());
    }

    /// Worked by hand: a long or multi-line value is shown on one line, cut at 40 characters.
    #[test]
    fn values_on_one_line() {
        assert_eq!(shown("a\nb\tc"), "a b c");
        let long = "é".repeat(45);
        assert_eq!(shown(&long), format!("{}...", "é".repeat(40)));
    }
}
