//! Numbers written for people. Programs write a missing number into a CSV file as a word or
//! a sign — `NA`, `.`, `nan`, `#N/A` and `#DIV/0!` (spreadsheets),
//! `NULL` (databases) — and spreadsheets export numbers as they show them, with thousands
//! separators (`1,234.5`; `1 234,5` and `1'234.5` in European exports) and negative amounts
//! in parentheses (`(1,234)`, accounts' way). The
//! engine, meeting any of these, reads the whole column as text, which every check then passes
//! by. A column whose cells are all numbers but for such cells is read as numbers (markers as
//! missing), and the report's input notes say how many cells of each kind. A dash, which
//! accounts often write for zero, is not a marker: a column holding one stays text; so does a
//! column with a percent sign or a currency symbol, whose unit a guess would decide.

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

/// A number as the reader would have read it.
#[derive(Clone, Copy)]
enum Number {
    Whole(i64),
    Decimal(f64),
}

/// How a number was written: as the reader reads numbers, with spaces around it or a plus
/// sign (` 5`, `+5`: fixed-width exports pad numbers, and the reader then keeps the whole
/// column as text), with thousands separators (`1,234.5`), or in parentheses for a negative
/// one (`(1,234)`, accounts' way).
#[derive(Clone, Copy, PartialEq)]
enum Written {
    Plain,
    Padded,
    /// A whole number beyond the 64-bit integers (a 20-digit code or amount), which stops the
    /// reader: read as a float.
    Wide,
    Grouped,
    Parenthesized,
}

/// One cell of a candidate column.
enum Cell {
    Missing,
    Marker,
    Number(Number, Written),
}

/// Whether `text` is a code written with leading zeros (`0100`, `007`): digits only, more
/// than one, the first a zero.
pub(super) fn leading_zero(text: &str) -> bool {
    let t = text.trim();
    t.len() > 1 && t.starts_with('0') && t.bytes().all(|b| b.is_ascii_digit())
}

/// Whether `text` could be a code (digits only) or marks a missing one (`NA`).
fn code_or_marker(text: &str) -> bool {
    let t = text.trim();
    (!t.is_empty() && t.bytes().all(|b| b.is_ascii_digit())) || is_marker(t)
}

/// The columns of `sample` (a file's first rows, every column as text) but those in `keep`
/// that hold codes written with leading zeros — every value digits only (or a marker for a
/// missing one), at least one with a leading zero — each with its first such value and its data row. The reader would read them
/// as whole numbers and drop the zeros (`0100` and `100` one code).
pub(super) fn leading_zero_codes(
    sample: &DataFrame,
    keep: &[&str],
) -> Result<Vec<super::CodeColumn>> {
    let mut found = Vec::new();
    for c in sample.columns() {
        let name = c.name().as_str();
        if keep.contains(&name) || c.dtype() != &DataType::String {
            continue;
        }
        let values = c.str()?;
        if !values.iter().flatten().all(code_or_marker) {
            continue;
        }
        let first = values
            .iter()
            .enumerate()
            .find_map(|(i, v)| v.filter(|v| leading_zero(v)).map(|v| (i + 1, v.trim())));
        if let Some((row, value)) = first {
            found.push((name.to_string(), row, value.to_string()));
        }
    }
    Ok(found)
}

/// Whether `text` is a marker for a missing number (`NA`, `#N/A`, `.`, ...).
pub(super) fn is_marker(text: &str) -> bool {
    let t = text.trim();
    MARKERS.iter().any(|m| t.eq_ignore_ascii_case(m))
}

/// A note when the entity column holds markers for a missing value (`NA` as R writes a
/// missing text): those cells are read as entities of that name, as any other text in the
/// entity is, and only an empty cell is a missing entity. Rows are skipped by their first
/// byte, which no marker's is for most ids.
pub(super) fn entity_markers(df: &DataFrame, entity: &str) -> Result<Option<String>> {
    let Ok(DataType::String) = df.column(entity).map(|c| c.dtype().clone()) else {
        return Ok(None);
    };
    let ids = df.column(entity)?.str()?;
    let marked: Vec<&str> = ids
        .iter()
        .flatten()
        .filter(|v| may_be_marker(v) && is_marker(v))
        .collect();
    if marked.is_empty() {
        return Ok(None);
    }
    let (cells, listed) = counted_markers(marked.into_iter());
    Ok(Some(format!(
        "column `{entity}` (the entity): {} ({listed}) with a marker other programs write for \
         a missing value, read as entities of that name; leave a cell empty for a missing \
         entity, whose row then goes to the ledger",
        how_many_cells(cells)
    )))
}

/// Whether `text` may be a marker by its first byte (one of those of [`MARKERS`], any
/// case): most entity ids are passed over by one comparison.
fn may_be_marker(text: &str) -> bool {
    let first = text.trim_start().as_bytes().first();
    matches!(
        first.map(u8::to_ascii_lowercase),
        Some(b'n' | b'#' | b'.' | b'-' | b'+' | b'i')
    )
}

/// The marker cells `marked` (as written) counted: how many, and each marker with how often
/// in order of first appearance ("`NA` 1, `.` 1").
fn counted_markers<'a>(marked: impl Iterator<Item = &'a str>) -> (usize, String) {
    let mut seen: Vec<(&str, usize)> = Vec::new();
    for v in marked.map(str::trim) {
        match seen.iter_mut().find(|(s, _)| *s == v) {
            Some((_, n)) => *n += 1,
            None => seen.push((v, 1)),
        }
    }
    let listed: Vec<String> = seen.iter().map(|(s, n)| format!("`{s}` {n}")).collect();
    (seen.iter().map(|(_, n)| n).sum(), listed.join(", "))
}

/// The note's words for the marker cells `marked` (as written): how many, each marker with
/// how often in order of first appearance — "2 cells marking a missing number (`NA` 1, `.` 1)
/// read as missing".
pub(super) fn markers_read_as_missing<'a>(marked: impl Iterator<Item = &'a str>) -> String {
    let (cells, listed) = counted_markers(marked);
    format!(
        "{} marking a missing number ({listed}) read as missing",
        how_many_cells(cells)
    )
}

/// `value` as a note shows it: at most 40 characters.
fn shortened(value: &str) -> String {
    match value.char_indices().nth(40) {
        Some((end, _)) => format!("{}…", &value[..end]),
        None => value.to_string(),
    }
}

/// "1 cell", "2 cells".
pub(super) fn how_many_cells(n: usize) -> String {
    match n {
        1 => "1 cell".into(),
        n => format!("{n} cells"),
    }
}

/// What `text` is: a marker, a number and how it is written, or (None) neither. With
/// `decimal_comma`, `1,5` is one and a half, as the reader takes it, and `1.234,5` is grouped.
fn cell(text: Option<&str>, decimal_comma: bool) -> Option<Cell> {
    let Some(text) = text else {
        return Some(Cell::Missing);
    };
    let t = text.trim();
    if is_marker(t) {
        return Some(Cell::Marker);
    }
    if let Some(n) = plain(t, decimal_comma) {
        let digits = t.strip_prefix(['-', '+']).unwrap_or(t);
        let written =
            if matches!(n, Number::Decimal(_)) && digits.bytes().all(|b| b.is_ascii_digit()) {
                Written::Wide
            } else if t.len() == text.len() && !t.starts_with('+') {
                Written::Plain
            } else {
                Written::Padded
            };
        return Some(Cell::Number(n, written));
    }
    if let Some(n) = grouped(t, decimal_comma) {
        return Some(Cell::Number(n, Written::Grouped));
    }
    let inner = t.strip_prefix('(')?.strip_suffix(')')?.trim();
    if inner.starts_with(['-', '+']) {
        return None;
    }
    let n = plain(inner, decimal_comma).or_else(|| grouped(inner, decimal_comma))?;
    let negative = match n {
        Number::Whole(v) => Number::Whole(v.checked_neg()?),
        Number::Decimal(v) => Number::Decimal(-v),
    };
    Some(Cell::Number(negative, Written::Parenthesized))
}

/// `t` as the reader reads a number: a whole number, or a decimal (with a comma for the point
/// under `decimal_comma`).
fn plain(t: &str, decimal_comma: bool) -> Option<Number> {
    if let Ok(v) = t.parse::<i64>() {
        return Some(Number::Whole(v));
    }
    let t = if decimal_comma {
        std::borrow::Cow::Owned(t.replace(',', "."))
    } else {
        std::borrow::Cow::Borrowed(t)
    };
    // Rust's parser takes words for infinities and NaN; those are markers or text. A number
    // beyond the floats' range (`1e400`) is an infinity, as the reader reads it, which the
    // pass over values that are not finite then notes and makes missing.
    match t.parse::<f64>() {
        Ok(v) if !v.is_nan() && t.bytes().any(|b| b.is_ascii_digit()) => Some(Number::Decimal(v)),
        _ => None,
    }
}

/// Thousands separators besides the comma (the point under `decimal_comma`), whichever the
/// decimal mark: a space, a no-break space, a narrow no-break space and a thin space (the
/// grouping ISO 80000-1 recommends, and what French and Nordic exports write), an apostrophe
/// and a right single quotation mark (Swiss exports). Common practice.
const OTHER_SEPARATORS: [char; 6] = [' ', '\u{a0}', '\u{202f}', '\u{2009}', '\'', '\u{2019}'];

/// `t` as a number with thousands separators: a sign, then one to three digits and groups of
/// exactly three after a separator (a comma, a point under `decimal_comma`, or one of
/// [`OTHER_SEPARATORS`]; one kind in a number), then perhaps the decimal point and digits
/// (`-1,234,567.5`; `1.234,5`; `1 234 567,5`; `1'234.5`).
fn grouped(t: &str, decimal_comma: bool) -> Option<Number> {
    let point = if decimal_comma { ',' } else { '.' };
    let main = if decimal_comma { '.' } else { ',' };
    let separator = t
        .chars()
        .find(|c| *c == main || OTHER_SEPARATORS.contains(c))?;
    let (sign, body) = match t.strip_prefix('-') {
        Some(rest) => ("-", rest),
        None => ("", t.strip_prefix('+').unwrap_or(t)),
    };
    let (whole, fraction) = match body.split_once(point) {
        Some((whole, fraction)) => (whole, Some(fraction)),
        None => (body, None),
    };
    let groups: Vec<&str> = whole.split(separator).collect();
    let digits = |g: &str| !g.is_empty() && g.bytes().all(|b| b.is_ascii_digit());
    let well_grouped = groups.len() >= 2
        && groups[0].len() <= 3
        && groups.iter().all(|g| digits(g))
        && groups[1..].iter().all(|g| g.len() == 3);
    if !well_grouped || fraction.is_some_and(|f| !digits(f)) {
        return None;
    }
    let whole = format!("{sign}{}", groups.concat());
    match fraction {
        None => whole.parse::<i64>().ok().map(Number::Whole),
        Some(f) => format!("{whole}.{f}")
            .parse::<f64>()
            .ok()
            .map(Number::Decimal),
    }
}

/// Signs that make a number an amount in a unit: the currencies an export most often writes
/// beside a number, and the percent sign (common practice).
const UNIT_SIGNS: [char; 5] = ['$', '€', '£', '¥', '%'];

/// The data row and value of the first of `values` written with a currency or percent sign,
/// when most of its first values are numbers once the sign is taken off (`$1,200`, `12%`,
/// `-€5`) and some carry one; None otherwise. A guess at the unit would decide what the
/// number means (a share or a percentage, which currency), so such a column is only noted.
pub(super) fn signed_amounts(values: &StringChunked, decimal_comma: bool) -> Option<(usize, &str)> {
    mostly_numbers_when(values, |v| unit_signed(v, decimal_comma))
}

/// Whether `v` is a number once a currency or percent sign is taken off it (`$1,200`,
/// `12%`, `-€5`): None when it is not a number even so, else whether it had such a sign.
fn unit_signed(v: &str, decimal_comma: bool) -> Option<bool> {
    let t = v.trim();
    let (sign, body) = match t.strip_prefix('-') {
        Some(rest) => ("-", rest.trim_start()),
        None => ("", t),
    };
    let stripped = body
        .trim_start_matches(UNIT_SIGNS)
        .trim_end_matches(UNIT_SIGNS)
        .trim();
    let number = format!("{sign}{stripped}");
    matches!(cell(Some(&number), decimal_comma), Some(Cell::Number(..)))
        .then_some(stripped.len() != body.len())
}

/// `t` as a number written for people — with thousands separators, or in parentheses for a
/// negative one — as a CSV column of them is read (with a decimal point); None for any other
/// text, a plain number included.
pub(super) fn written_for_people(t: &str) -> Option<f64> {
    match cell(Some(t), false)? {
        Cell::Number(n, Written::Grouped | Written::Parenthesized) => Some(match n {
            Number::Whole(v) => v as f64,
            Number::Decimal(v) => v,
        }),
        _ => None,
    }
}

/// The data row and value of the first of `values` that is a number with a decimal comma
/// (`1,5`) and not one with a decimal point, when most of its first values are numbers read
/// with a decimal comma; None otherwise, and always under `decimal_comma`.
fn comma_decimals(values: &StringChunked, decimal_comma: bool) -> Option<(usize, &str)> {
    if decimal_comma {
        return None;
    }
    mostly_numbers_when(values, |v| {
        matches!(cell(Some(v), true), Some(Cell::Number(..)))
            .then(|| !matches!(cell(Some(v), false), Some(Cell::Number(..))))
    })
}

/// The data row and value of the first of `values` of a kind, when most of its first values
/// are numbers read another way and some are of that kind: `read(v)` is None for a value
/// that is not a number read so, else whether it is of the kind.
fn mostly_numbers_when(
    values: &StringChunked,
    read: impl Fn(&str) -> Option<bool>,
) -> Option<(usize, &str)> {
    let first: Vec<Option<bool>> = values.iter().flatten().take(LOOK).map(&read).collect();
    let numbers = first.iter().filter(|c| c.is_some()).count();
    let of_kind = first.iter().filter(|c| **c == Some(true)).count();
    if of_kind == 0 || 2 * numbers < first.len() {
        return None;
    }
    values
        .iter()
        .enumerate()
        .find_map(|(i, v)| v.filter(|v| read(v) == Some(true)).map(|v| (i + 1, v)))
}

/// `df` with each text column not in `keep` that holds numbers (plain, with thousands
/// separators or in parentheses) and markers only — at least one number, and at least one
/// marker or number the reader does not read — read as numbers (whole numbers as integers, as
/// the reader would have read them), and a note for each column so read. A column of markers
/// alone stays text (nothing says it holds numbers).
pub(crate) fn numbers_with_markers(
    df: DataFrame,
    keep: &[&str],
    decimal_comma: bool,
) -> Result<(DataFrame, Vec<String>)> {
    numbers_with_markers_and(df, keep, None, decimal_comma)
}

/// [`numbers_with_markers`], and the column `period`, which holds whole numbers or nothing,
/// read as whole numbers even when every cell is a marker or empty: every period missing,
/// whose rows then go to the ledger as rows with empty periods do.
pub(super) fn numbers_with_markers_and(
    mut df: DataFrame,
    keep: &[&str],
    period: Option<&str>,
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
        // Codes written with leading zeros (`0100`) are text, not numbers.
        if values.iter().flatten().any(leading_zero) && values.iter().flatten().all(code_or_marker)
        {
            continue;
        }
        let first: Vec<Option<Cell>> = values
            .iter()
            .flatten()
            .take(LOOK)
            .map(|v| cell(Some(v), decimal_comma))
            .collect();
        // Every cell, or none at the first that is neither a number nor a marker.
        let cells = first.iter().all(Option::is_some).then(|| {
            values
                .iter()
                .map(|v| cell(v, decimal_comma))
                .collect::<Option<Vec<Cell>>>()
        });
        let Some(cells) = cells.flatten() else {
            // Mostly numbers among its first values, yet text: say which cell keeps it so.
            let numbers = first
                .iter()
                .filter(|c| matches!(c, Some(Cell::Number(..))))
                .count();
            if numbers > 0 && 2 * numbers >= first.len() {
                let stray = values.iter().enumerate().find_map(|(i, v)| {
                    v.filter(|v| cell(Some(v), decimal_comma).is_none())
                        .map(|v| (i + 1, v))
                });
                if let Some((row, value)) = stray {
                    let value = shortened(value);
                    notes.push(format!(
                        "column `{name}` stays text: most of its first values are numbers, but \
                         data row {row} holds `{value}`, which is not one"
                    ));
                }
            } else if let Some((row, value)) = comma_decimals(&values, decimal_comma) {
                notes.push(format!(
                    "column `{name}` stays text: its values are numbers with a decimal comma \
                     (data row {row} holds `{}`); give `--decimal-comma` (or `[input] \
                     decimal_comma = true`) to read them as numbers, in a file whose fields \
                     another character than a comma separates (usually `;`)",
                    shortened(value)
                ));
            } else if let Some((row, value)) = signed_amounts(&values, decimal_comma) {
                notes.push(format!(
                    "column `{name}` stays text: its values are numbers written with a currency \
                     or percent sign (data row {row} holds `{}`); take the sign out in the file \
                     (and say in a label what the unit is) to use them as numbers",
                    shortened(value)
                ));
            }
            continue;
        };
        let markers = cells.iter().filter(|c| matches!(c, Cell::Marker)).count();
        let numbers = cells
            .iter()
            .filter(|c| matches!(c, Cell::Number(..)))
            .count();
        // Cells written in `way`, and the first such as written.
        let written = |way: Written| {
            let mut found = values
                .iter()
                .zip(&cells)
                .filter(|(_, c)| matches!(c, Cell::Number(_, w) if *w == way));
            let first = found.next().and_then(|(v, _)| v);
            (usize::from(first.is_some()) + found.count(), first)
        };
        let (padded, first_padded) = written(Written::Padded);
        let (wide, first_wide) = written(Written::Wide);
        let (grouped, first_grouped) = written(Written::Grouped);
        let (bracketed, first_bracketed) = written(Written::Parenthesized);
        // A text column of plain numbers only comes of a read that took every column as
        // text (after one that a wide number stopped): numbers, as the reader reads them.
        if numbers == 0 && (markers == 0 || period != Some(name.as_str())) {
            continue;
        }
        let mut parts = Vec::new();
        if markers > 0 {
            let marked = values
                .iter()
                .zip(&cells)
                .filter_map(|(v, c)| v.filter(|_| matches!(c, Cell::Marker)));
            parts.push(markers_read_as_missing(marked));
        }
        if let Some(first) = first_padded {
            parts.push(format!(
                "{} with spaces around the number or a plus sign (the first `{first}`)",
                how_many_cells(padded)
            ));
        }
        if let Some(first) = first_wide {
            parts.push(format!(
                "{} with a whole number beyond the 64-bit integers (the first `{}`) read as \
                 floating-point numbers, exact to about 15 significant digits",
                how_many_cells(wide),
                first.trim()
            ));
        }
        if let Some(first) = first_grouped {
            parts.push(format!(
                "{} with thousands separators (the first `{}`)",
                how_many_cells(grouped),
                first.trim()
            ));
        }
        if let Some(first) = first_bracketed {
            parts.push(format!(
                "{} in parentheses taken as negative (the first `{}`)",
                how_many_cells(bracketed),
                first.trim()
            ));
        }
        if !parts.is_empty() {
            notes.push(format!(
                "column `{name}`: {}, the column as numbers",
                parts.join("; ")
            ));
        }
        let whole = !cells
            .iter()
            .any(|c| matches!(c, Cell::Number(Number::Decimal(_), _)));
        let column = if whole {
            let v: Int64Chunked = cells
                .iter()
                .map(|c| match c {
                    Cell::Number(Number::Whole(v), _) => Some(*v),
                    _ => None,
                })
                .collect();
            v.with_name(name.clone()).into_column()
        } else {
            let v: Float64Chunked = cells
                .iter()
                .map(|c| match c {
                    Cell::Number(Number::Whole(v), _) => Some(*v as f64),
                    Cell::Number(Number::Decimal(v), _) => Some(*v),
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
mod tests;
