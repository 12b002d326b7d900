//! Text where a rule computes with numbers. A column with a cell the reader could not take
//! for a number (`1,5` in a file with decimal points, `-` or `n.a.` for a missing value) is
//! read as text, and an expression that divides or compares it fails in the engine with its
//! types alone ("division with 'String' datatypes"). The cell that made the column text is
//! what the user has to fix: its row, column and value are named instead. A column of codes
//! written with leading zeros (`0100`) is text on purpose; there the cast that computes with
//! it is named. The cell may be in the main file or in a joined table, whichever brought the
//! column.

use std::path::Path;

use polars::prelude::*;

use super::ROW;
use crate::config::InputFormat;
use crate::Error;

/// A file whose columns a rule may compute with: the frame holding them beside [`ROW`] (its
/// row in the file), which of its columns are the file's own, and its format (what a number
/// and a missing value are written as differs).
pub(crate) struct Source<'a> {
    pub file: &'a Path,
    pub frame: &'a DataFrame,
    pub columns: &'a [String],
    pub format: InputFormat,
}

/// The error naming the first cell (in the file's order) held as text whose value is not a
/// number, among the columns `reads` of the first of `sources` that has such a cell: read by
/// `what` (a rule and its expression). Only a column of numbers for the most part is looked
/// at (at least as many cells numbers as not): a column of names or codes is text by nature,
/// and the expression, not a cell, is what is wrong. Columns a source lacks, does not own or
/// holds as numbers are passed over.
pub(crate) fn text_among_numbers(
    sources: &[Source],
    reads: &[&String],
    what: &str,
) -> Option<Error> {
    sources.iter().find_map(|s| {
        let own = reads.iter().copied().filter(|c| s.columns.contains(c));
        in_source(s, own, what)
    })
}

/// [`text_among_numbers`] in one source, over the `columns` it owns.
fn in_source<'a>(
    source: &Source,
    columns: impl IntoIterator<Item = &'a String>,
    what: &str,
) -> Option<Error> {
    let df = source.frame;
    let schema = df.schema();
    // The first cell that is not a number, else the first column of numbers held as text.
    let mut first: Option<(u64, String, String)> = None;
    let mut as_text: Option<(u64, String, String, bool)> = None;
    for name in columns {
        if schema.get(name.as_str()) != Some(&DataType::String) {
            continue;
        }
        match first_not_a_number(df, name) {
            Ok(Some(Found::NotANumber(row, value)))
                if first.as_ref().is_none_or(|(r, _, _)| row < *r) =>
            {
                first = Some((row, name.clone(), value));
            }
            Ok(Some(Found::NumbersAsText(row, value, zero))) => {
                as_text.get_or_insert((row, name.clone(), value, zero));
            }
            _ => {}
        }
    }
    let file = source.file.to_path_buf();
    let Some((row, column, value)) = first else {
        let (row, column, value, zero) = as_text?;
        let held = if zero {
            format!(
                "`{}` is written with a leading zero, so the column is read as text (the codes \
                 `0100` and `100` stay two)",
                shown(&value)
            )
        } else {
            format!("the column holds numbers as text (`{}`)", shown(&value))
        };
        // The column as the expression would name it: quoted unless a plain name.
        let plain = column.starts_with(|c: char| c.is_ascii_alphabetic() || c == '_')
            && column
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || c == '_');
        let named = if plain {
            column.clone()
        } else {
            format!("\"{}\"", column.replace('"', "\"\""))
        };
        return Some(Error::Unreadable {
            file,
            at: format!(", row {row}, column `{column}`"),
            message: format!(
                "{held}, and {what} computes with it: write `CAST({named} AS DOUBLE)` in the \
                 expression to compute with its values as numbers"
            ),
        });
    };
    let advice = match source.format {
        InputFormat::Csv => {
            "write numbers as digits (with `--decimal-comma` for `1,5`) and missing values as \
             empty cells or NA"
        }
        InputFormat::Spreadsheet => {
            "enter numbers as numbers, not text, and leave the cells of missing values empty"
        }
        InputFormat::Parquet => "store numbers as a number type and missing values as nulls",
    };
    Some(Error::Unreadable {
        file,
        at: format!(", row {row}, column `{column}`"),
        message: format!(
            "`{}` is not a number, and {what} computes with the column: {advice}",
            shown(&value)
        ),
    })
}

/// What makes a text column unfit to compute with: its row number and value.
enum Found {
    /// The first cell (by [`ROW`]) that is neither blank nor a number, when at least as many
    /// cells are numbers.
    NotANumber(u64, String),
    /// Every filled cell a number: the first written with a leading zero (true), else the
    /// first filled one (false).
    NumbersAsText(u64, String, bool),
}

/// What makes the text column `name` of `df` unfit to compute with, if it is mostly numbers.
fn first_not_a_number(df: &DataFrame, name: &str) -> PolarsResult<Option<Found>> {
    let text = col(name).str().strip_chars(lit(NULL));
    let filled = text.clone().neq(lit(""));
    let number = text.clone().cast(DataType::Float64).is_not_null();
    let bad = filled.clone().and(number.clone().not());
    let zero = text.str().contains(lit("^0[0-9]+$"), true);
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
    if numbers == 0 || numbers < others {
        return Ok(None);
    }
    // The first bad cell; with none, the first code with a leading zero before the first
    // filled cell.
    let (keep, order) = if others > 0 {
        (bad, vec![col(ROW)])
    } else {
        (filled, vec![zero.clone().not(), col(ROW)])
    };
    let found = df
        .clone()
        .lazy()
        .select([col(ROW), col(name), zero.alias("__zero")])
        .filter(keep)
        .sort_by_exprs(order, SortMultipleOptions::default())
        .limit(1)
        .collect()?;
    if found.height() == 0 {
        return Ok(None);
    }
    let row = found.column(ROW)?.cast(&DataType::UInt64)?.u64()?.get(0);
    let value = found.column(name)?.str()?.get(0).map(str::to_string);
    let leading = found.column("__zero")?.bool()?.get(0).unwrap_or(false);
    Ok(row.zip(value).map(|(row, value)| {
        if others > 0 {
            Found::NotANumber(row, value)
        } else {
            Found::NumbersAsText(row, value, leading)
        }
    }))
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
    /// neither blank nor a number, among the text columns named; blanks, numeric columns and
    /// a column of names (one number in five) are passed over.
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
        let all: Vec<String> = ["a", "b", "x", "name"].map(String::from).to_vec();
        let source = |frame, format| Source {
            file: Path::new("f.csv"),
            frame,
            columns: &all,
            format,
        };
        let names: Vec<String> = ["a", "b", "x", "absent"].map(String::from).to_vec();
        fn reads(n: &[String]) -> Vec<&String> {
            n.iter().collect()
        }
        let found = |frame, n: &[String], what| {
            text_among_numbers(&[source(frame, InputFormat::Csv)], &reads(n), what)
        };
        let e = found(&df, &names, "rule `r` (`a / x`)")
            .unwrap()
            .to_string();
        assert_eq!(
            e,
            "`f.csv`, row 2, column `b`: `n.a.` is not a number, and rule `r` (`a / x`) \
             computes with the column: write numbers as digits (with `--decimal-comma` for \
             `1,5`) and missing values as empty cells or NA"
        );
        let only_a = found(&df, &names[..1], "r").unwrap();
        assert!(
            only_a.to_string().contains("row 3, column `a`: `-`"),
            "{only_a}"
        );
        assert!(found(&df, &names[2..], "r").is_none());
        // Numbers held as text are named as such (the test below), not as a cell.
        let numbers = df!(ROW => [1u32], "a" => ["3.25"]).unwrap();
        let held = found(&numbers, &names[..1], "r").unwrap().to_string();
        assert!(held.contains("holds numbers as text (`3.25`)"), "{held}");
        // Names with a number among them: text by nature, no cell named.
        let name = ["name".to_string()];
        assert!(found(&df, &name, "r").is_none());
        // A file that is not CSV is not pointed to a CSV setting.
        let parquet = text_among_numbers(&[source(&df, InputFormat::Parquet)], &reads(&names), "r");
        let parquet = parquet.unwrap().to_string();
        assert!(
            parquet.ends_with(
                "computes with the column: store numbers as a number type and missing values \
                 as nulls"
            ),
            "{parquet}"
        );
    }

    /// Worked by hand: a column of numbers held as text (every filled cell a number) is named
    /// by its first code with a leading zero (row 4, though row 1 comes first), else by its
    /// first filled cell, with the cast that computes with it (its name quoted when not a
    /// plain one); a cell that is not a number, in any column read, is named before either.
    #[test]
    fn numbers_held_as_text() {
        let df = df!(
            ROW => [3u32, 4, 1, 2],
            "sic" => [Some("5"), Some("0100"), Some("12"), None],
            "net worth" => [None, Some("7"), None, Some("8")],
            "bad" => [Some("1"), Some("2"), Some("3"), Some("x")]
        )
        .unwrap();
        let all: Vec<String> = ["sic", "net worth", "bad"].map(String::from).to_vec();
        let source = [Source {
            file: Path::new("f.csv"),
            frame: &df,
            columns: &all,
            format: InputFormat::Csv,
        }];
        let named = |i: &[usize]| {
            let reads: Vec<&String> = i.iter().map(|&i| &all[i]).collect();
            text_among_numbers(&source, &reads, "r")
                .unwrap()
                .to_string()
        };
        assert_eq!(
            named(&[0]),
            "`f.csv`, row 4, column `sic`: `0100` is written with a leading zero, so the column \
             is read as text (the codes `0100` and `100` stay two), and r computes with it: \
             write `CAST(sic AS DOUBLE)` in the expression to compute with its values as numbers"
        );
        let worth = named(&[1]);
        assert!(
            worth.starts_with(
                "`f.csv`, row 2, column `net worth`: the column holds numbers as text (`8`)"
            ) && worth.contains("`CAST(\"net worth\" AS DOUBLE)`"),
            "{worth}"
        );
        assert!(
            named(&[0, 1, 2]).starts_with("`f.csv`, row 2, column `bad`: `x` is not a number"),
            "{}",
            named(&[0, 1, 2])
        );
    }

    /// Worked by hand: the first source owning a column read with a bad cell is the one
    /// named, whatever its rows; a column a source does not own is not looked at there.
    #[test]
    fn the_file_that_owns_the_column() {
        let main = df!(ROW => [1u32, 2], "a" => [1.0, 2.0], "b" => ["x", "3"]).unwrap();
        let joined = df!(ROW => [1u32, 2], "c" => ["4", "y"]).unwrap();
        let (own_main, own_joined) = (
            ["a".to_string(), "b".to_string()],
            ["c".to_string(), "b".to_string()],
        );
        let sources = [
            Source {
                file: Path::new("main.csv"),
                frame: &main,
                columns: &own_main[..1],
                format: InputFormat::Csv,
            },
            Source {
                file: Path::new("t.csv"),
                frame: &joined,
                columns: &own_joined,
                format: InputFormat::Csv,
            },
        ];
        let (a, b, c) = ("a".to_string(), "b".to_string(), "c".to_string());
        let e = text_among_numbers(&sources, &[&a, &c], "r")
            .unwrap()
            .to_string();
        assert!(e.starts_with("`t.csv`, row 2, column `c`: `y`"), "{e}");
        // `b` is in the main frame but owned by the joined table, which lacks it.
        assert!(text_among_numbers(&sources, &[&a, &b], "r").is_none());
    }

    /// Worked by hand: a long or multi-line value is shown on one line, cut at 40 characters.
    #[test]
    fn values_on_one_line() {
        assert_eq!(shown("a\nb\tc"), "a b c");
        let long = "é".repeat(45);
        assert_eq!(shown(&long), format!("{}...", "é".repeat(40)));
    }
}
