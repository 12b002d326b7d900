//! Numbers with missing-value markers. Programs write a missing number into a CSV file as a
//! word or a sign — `NA` (R), `.` (Stata, SAS), `nan` (Python), `#N/A` and `#DIV/0!`
//! (spreadsheets), `NULL` (databases) — and the engine, meeting text, reads the whole column
//! as text, which every check then passes by. A column whose cells are all numbers but for
//! such markers is read as numbers with those cells missing, and the report's input notes say
//! how many cells of which marker. A dash, which accounts often write for zero, is not a
//! marker: a column holding one stays text.

use polars::prelude::*;

use crate::Result;

/// The markers, compared without case or surrounding spaces: common practice, close to the
/// strings pandas' CSV reader takes for missing by default, with `.` and the spreadsheet
/// errors. An infinity is one too: not a number a regression can use (a division by zero
/// upstream).
const MARKERS: [&str; 16] = [
    "na",
    "n/a",
    "n.a.",
    "#n/a",
    "nan",
    "-nan",
    "null",
    ".",
    "inf",
    "-inf",
    "+inf",
    "infinity",
    "-infinity",
    "#div/0!",
    "#value!",
    "#num!",
];

/// Values looked at first: a column whose first values include one that is neither a number
/// nor a marker is left as text without a pass over the rest.
const LOOK: usize = 1_000;

/// One cell of a candidate column.
enum Cell {
    Missing,
    Marker,
    Whole(i64),
    Number(f64),
}

/// What `text` is: a marker, a whole number, a number, or (None) neither. With
/// `decimal_comma`, `1,5` is one and a half, as the reader takes it.
fn cell(text: Option<&str>, decimal_comma: bool) -> Option<Cell> {
    let Some(text) = text else {
        return Some(Cell::Missing);
    };
    let t = text.trim();
    if MARKERS.iter().any(|m| t.eq_ignore_ascii_case(m)) {
        return Some(Cell::Marker);
    }
    if let Ok(v) = t.parse::<i64>() {
        return Some(Cell::Whole(v));
    }
    let t = if decimal_comma {
        std::borrow::Cow::Owned(t.replace(',', "."))
    } else {
        std::borrow::Cow::Borrowed(t)
    };
    // Rust's parser takes words for infinities and NaN; those are markers above or text.
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() && t.bytes().any(|b| b.is_ascii_digit()) => Some(Cell::Number(v)),
        _ => None,
    }
}

/// `df` with each text column not in `keep` that holds numbers and markers only, at least one
/// of each, read as numbers (whole numbers as integers, as the reader would have read them),
/// and a note for each column so read.
pub(crate) fn numbers_with_markers(
    mut df: DataFrame,
    keep: &[&str],
    decimal_comma: bool,
) -> Result<(DataFrame, Vec<String>)> {
    let text: Vec<PlSmallStr> = df
        .schema()
        .iter()
        .filter(|(name, dtype)| **dtype == DataType::String && !keep.contains(&name.as_str()))
        .map(|(name, _)| name.clone())
        .collect();
    let mut notes = Vec::new();
    for name in text {
        let values = df.column(&name)?.str()?.clone();
        let first = values.iter().flatten().take(LOOK);
        if !first
            .map(|v| cell(Some(v), decimal_comma))
            .all(|c| c.is_some())
        {
            continue;
        }
        // Every cell, or none at the first that is neither a number nor a marker.
        let Some(cells) = values
            .iter()
            .map(|v| cell(v, decimal_comma))
            .collect::<Option<Vec<Cell>>>()
        else {
            continue;
        };
        let markers = cells.iter().filter(|c| matches!(c, Cell::Marker)).count();
        let numbers = cells
            .iter()
            .filter(|c| matches!(c, Cell::Whole(_) | Cell::Number(_)))
            .count();
        if markers == 0 || numbers == 0 {
            continue;
        }
        // Each marker as written, with how often, in order of first appearance.
        let mut seen: Vec<(&str, usize)> = Vec::new();
        for (v, c) in values.iter().zip(&cells) {
            if let (Some(v), Cell::Marker) = (v, c) {
                let v = v.trim();
                match seen.iter_mut().find(|(s, _)| *s == v) {
                    Some((_, n)) => *n += 1,
                    None => seen.push((v, 1)),
                }
            }
        }
        let listed: Vec<String> = seen.iter().map(|(s, n)| format!("`{s}` {n}")).collect();
        notes.push(format!(
            "column `{name}`: {markers} cells marking a missing number ({}) read as missing, the \
             column as numbers",
            listed.join(", ")
        ));
        let whole = !cells.iter().any(|c| matches!(c, Cell::Number(_)));
        let column = if whole {
            let v: Int64Chunked = cells
                .iter()
                .map(|c| match c {
                    Cell::Whole(v) => Some(*v),
                    _ => None,
                })
                .collect();
            v.with_name(name.clone()).into_column()
        } else {
            let v: Float64Chunked = cells
                .iter()
                .map(|c| match c {
                    Cell::Whole(v) => Some(*v as f64),
                    Cell::Number(v) => Some(*v),
                    _ => None,
                })
                .collect();
            v.with_name(name.clone()).into_column()
        };
        df.with_column(column)?;
    }
    Ok((df, notes))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: `x` holds numbers and three markers; `n` whole numbers and `.`; `t`
    /// text; `d` numbers and a dash (zero in accounts, not a marker); `m` markers only.
    #[test]
    fn numbers_with_markers_are_numbers_with_those_cells_missing() {
        let df = df!(
            "id" => ["A", "A", "B", "B"],
            "x" => [Some("1.5"), Some("NA"), Some(" #N/A "), Some("nan")],
            "n" => [Some("3"), Some("."), None, Some("-4")],
            "t" => ["Mills", "NA", "Docks", "Mills"],
            "d" => ["1.5", "-", "2", "3"],
            "m" => ["NA", "NA", ".", "NA"],
        )
        .unwrap();
        let (df, notes) = numbers_with_markers(df, &["id"], false).unwrap();
        let x: Vec<Option<f64>> = df.column("x").unwrap().f64().unwrap().iter().collect();
        assert_eq!(x, [Some(1.5), None, None, None]);
        let n: Vec<Option<i64>> = df.column("n").unwrap().i64().unwrap().iter().collect();
        assert_eq!(n, [Some(3), None, None, Some(-4)]);
        for text in ["id", "t", "d", "m"] {
            assert_eq!(
                df.column(text).unwrap().dtype(),
                &DataType::String,
                "{text}"
            );
        }
        assert_eq!(
            notes,
            [
                "column `x`: 3 cells marking a missing number (`NA` 1, `#N/A` 1, `nan` 1) read \
                 as missing, the column as numbers",
                "column `n`: 1 cells marking a missing number (`.` 1) read as missing, the \
                 column as numbers",
            ]
        );
        // A decimal comma, as the reader takes it.
        let df = df!("x" => ["1,5", "NA"]).unwrap();
        let (df, _) = numbers_with_markers(df, &[], true).unwrap();
        let x: Vec<Option<f64>> = df.column("x").unwrap().f64().unwrap().iter().collect();
        assert_eq!(x, [Some(1.5), None]);
    }
}
