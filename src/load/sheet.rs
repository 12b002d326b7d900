//! Spreadsheet input (.xlsx, .xlsm, .ods) through calamine: one sheet, the header in its
//! first row with two cells or more filled (a title and blank rows above it passed over,
//! noted), one firm-year per row below. A column of numbers becomes numbers
//! (whatever their display format: thousands separators, percentages and decimals are only
//! formatting), a date cell becomes its date as text `YYYY-MM-DD`, a column with any text
//! becomes text; text cells that look like numbers in a
//! column of numbers are read as numbers and reported, and so are text cells holding a marker
//! for a missing number (`n/a`, `NA`, `.`: read as missing, as in a CSV file). The columns
//! named as text (the entity) are text whatever their cells: a firm id `01001` typed as text
//! and `1001` typed as a number stay two ids. Merged cells are refused. A formula cell with no
//! value is read as missing and noted.

use std::path::Path;

use calamine::{open_workbook_auto, Data, ExcelDateTime, Reader};
use polars::prelude::*;

use crate::{Error, Result};

/// A sheet read into a frame, with what the reader had to decide.
pub struct Sheet {
    /// The sheet as columns.
    pub df: DataFrame,
    /// The sheet's name.
    pub name: String,
    /// What was converted or left out, one sentence each.
    pub notes: Vec<String>,
}

/// Spreadsheet column letters of a 0-based index: 0 -> A, 26 -> AA.
fn letters(mut col: u32) -> String {
    let mut out = Vec::new();
    loop {
        out.push(b'A' + (col % 26) as u8);
        if col < 26 {
            break;
        }
        col = col / 26 - 1;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

fn unreadable(path: &Path, at: String, message: impl Into<String>) -> Error {
    Error::Unreadable {
        file: path.to_path_buf(),
        at,
        message: message.into(),
    }
}

/// A spreadsheet date as `YYYY-MM-DD`, in the workbook's date system: days since 1899-12-30,
/// or since 1904-01-01 in a workbook that says so (as older Mac workbooks do); a time of day
/// is dropped.
fn iso_date(d: &ExcelDateTime) -> String {
    let (year, month, day, ..) = d.to_ymd_hms_milli();
    format!("{year:04}-{month:02}-{day:02}")
}

enum Cell {
    Missing,
    Number(f64),
    NumberLike(f64),
    /// Text holding a number with thousands separators or in parentheses (`1,234.5`, `(12)`).
    Written(f64),
    /// Text marking a missing number (`n/a`).
    Marker,
    Text(String),
}

fn cell(d: &Data) -> Cell {
    match d {
        Data::Empty | Data::Error(_) => Cell::Missing,
        Data::Int(i) => Cell::Number(*i as f64),
        Data::Float(f) => Cell::Number(*f),
        Data::Bool(b) => Cell::Number(if *b { 1.0 } else { 0.0 }),
        Data::DateTime(d) if d.is_datetime() => Cell::Text(iso_date(d)),
        Data::DateTime(d) => Cell::Number(d.as_f64()),
        Data::String(s) | Data::DateTimeIso(s) | Data::DurationIso(s) => {
            let t = s.trim();
            if t.is_empty() {
                Cell::Missing
            } else if super::markers::is_marker(t) {
                Cell::Marker
            } else if super::markers::leading_zero(t) {
                // A code typed with its leading zeros (`0100`) is text, not the number 100.
                Cell::Text(s.clone())
            } else {
                match t.parse::<f64>() {
                    Ok(x) if x.is_finite() => Cell::NumberLike(x),
                    _ => match super::markers::written_for_people(t) {
                        Some(x) => Cell::Written(x),
                        None => Cell::Text(s.clone()),
                    },
                }
            }
        }
    }
}

/// The cell `d` as text, as the sheet shows it (a whole number without a decimal point).
fn as_text(d: &Data) -> Option<String> {
    match d {
        Data::Empty | Data::Error(_) => None,
        Data::Float(f) if f.fract() == 0.0 && f.abs() < 9.0e15 => Some(format!("{}", *f as i64)),
        Data::String(s) if s.trim().is_empty() => None,
        Data::DateTime(d) if d.is_datetime() => Some(iso_date(d)),
        other => Some(other.to_string()),
    }
}

/// Read `sheet` (or the first sheet) of the workbook at `path`; the columns named in `text`
/// as text.
pub fn read(path: &Path, sheet: Option<&str>, text: &[&str]) -> Result<Sheet> {
    if !path.is_file() {
        return Err(Error::NoInput {
            file: path.to_path_buf(),
        });
    }
    let mut book = open_workbook_auto(path).map_err(|e| {
        let kind = super::sniff::other_kind(path, crate::config::InputFormat::Spreadsheet);
        unreadable(path, String::new(), kind.unwrap_or_else(|| e.to_string()))
    })?;
    let names = book.sheet_names();
    let name = match sheet {
        Some(s) if names.iter().any(|n| n == s) => s.to_string(),
        Some(s) => {
            return Err(unreadable(
                path,
                String::new(),
                format!("no sheet `{s}` (sheets: {})", names.join(", ")),
            ))
        }
        None => names
            .first()
            .cloned()
            .ok_or_else(|| unreadable(path, String::new(), "the workbook has no sheet"))?,
    };
    if let calamine::Sheets::Xlsx(x) = &mut book {
        if let Some(Ok(merged)) = x.worksheet_merge_cells(&name) {
            if let Some(first) = merged.first() {
                let at = |(r, c): (u32, u32)| format!("{}{}", letters(c), r + 1);
                return Err(unreadable(
                    path,
                    format!(", sheet `{name}`"),
                    format!(
                        "merged cells at {}:{}{}; unmerge them and give every row its own values",
                        at(first.start),
                        at(first.end),
                        if merged.len() > 1 {
                            format!(" (and {} more merged ranges)", merged.len() - 1)
                        } else {
                            String::new()
                        }
                    ),
                ));
            }
        }
    }
    let range = book
        .worksheet_range(&name)
        .map_err(|e| unreadable(path, format!(", sheet `{name}`"), e.to_string()))?;
    let Some((row0, col0)) = range.start() else {
        return Err(Error::EmptySheet {
            file: path.to_path_buf(),
            sheet: name,
        });
    };
    let all: Vec<&[Data]> = range.rows().collect();
    // Rows above the header with fewer than two cells filled — a title, a note, a blank row —
    // are passed over: a panel's header names at least the entity and the period.
    let filled = |r: &[Data]| r.iter().filter(|c| as_text(c).is_some()).count();
    let skip = all.iter().position(|r| filled(r) >= 2).unwrap_or(0);
    let header_row = row0 + skip as u32;
    let header_cells = all.get(skip).copied().unwrap_or(&[]);
    let mut header = Vec::with_capacity(header_cells.len());
    // Columns under an empty header cell with nothing in them (a spacer column), left out.
    let mut spacers = Vec::new();
    for (j, h) in header_cells.iter().enumerate() {
        let at = format!(
            ", sheet `{name}`, cell {}{}",
            letters(col0 + j as u32),
            header_row + 1
        );
        let text = match h {
            Data::String(s) if !s.trim().is_empty() => s.trim().to_string(),
            Data::Empty => {
                let below = all.get(skip + 1..).unwrap_or_default();
                let filled = below.iter().position(|r| {
                    r.get(j)
                        .is_some_and(|c| as_text(c).is_some() || matches!(c, Data::Error(_)))
                });
                if let Some(i) = filled {
                    let row = header_row as usize + 2 + i;
                    return Err(unreadable(
                        path,
                        at,
                        format!(
                            "the header cell is empty, but the column holds values (the first \
                             in sheet row {row}): give it a name"
                        ),
                    ));
                }
                spacers.push(j);
                header.push(String::new());
                continue;
            }
            other => other.to_string(),
        };
        if header.contains(&text) {
            return Err(Error::DuplicateColumn {
                file: path.to_path_buf(),
                column: text,
            });
        }
        header.push(text);
    }
    let body: Vec<&[Data]> = all.get(skip + 1..).unwrap_or_default().to_vec();
    if body.is_empty() {
        return Err(Error::NoRows {
            file: path.to_path_buf(),
        });
    }
    let mut notes = Vec::new();
    // A formula whose value the file does not hold (as programs that write workbooks without
    // computing them leave it) reads as an empty cell, as does one whose result is empty text
    // (the file does not tell them apart): counted from the sheet's formulas, read only when
    // the body has an empty cell.
    let blank = |c: &Data| as_text(c).is_none() && !matches!(c, Data::Error(_));
    let empty = body.iter().any(|r| r.iter().any(blank));
    let formulas = match empty {
        true => book.worksheet_formula(&name).ok(),
        false => None,
    };
    let body_row0 = header_row + 1;
    let unsaved = |j: usize| -> (usize, Option<usize>) {
        let Some(formulas) = &formulas else {
            return (0, None);
        };
        let mut rows = body.iter().enumerate().filter(|(i, r)| {
            r.get(j).is_none_or(blank)
                && formulas
                    .get_value((body_row0 + *i as u32, col0 + j as u32))
                    .is_some_and(|f| !f.trim().is_empty())
        });
        let first = rows.next().map(|(i, _)| i);
        (first.map_or(0, |_| 1 + rows.count()), first)
    };
    if skip > 0 {
        let title = all[..skip].iter().flat_map(|r| r.iter()).find_map(as_text);
        let rows = match skip {
            1 => format!("sheet row {header_row}"),
            _ => format!("sheet rows {} to {header_row}", row0 + 1),
        };
        notes.push(format!(
            "{rows}, above the header, passed over: fewer than two cells filled{}",
            title.map_or(String::new(), |t| format!(" (the first: `{t}`)"))
        ));
    }
    for j in &spacers {
        notes.push(format!(
            "column {} of the sheet has no name and no value in any row: left out",
            letters(col0 + *j as u32)
        ));
    }
    let mut columns = Vec::with_capacity(header.len());
    for (j, name_j) in header.iter().enumerate() {
        if spacers.contains(&j) {
            continue;
        }
        if text.contains(&name_j.as_str()) {
            let values: Vec<Option<String>> =
                body.iter().map(|r| r.get(j).and_then(as_text)).collect();
            columns.push(Column::new(name_j.as_str().into(), values));
            continue;
        }
        let cells: Vec<Cell> = body
            .iter()
            .map(|r| r.get(j).map_or(Cell::Missing, cell))
            .collect();
        let errors = body
            .iter()
            .filter(|r| matches!(r.get(j), Some(Data::Error(_))))
            .count();
        if errors > 0 {
            notes.push(format!(
                "column `{name_j}`: {} with a spreadsheet error (such as #DIV/0!) read as missing",
                super::markers::how_many_cells(errors)
            ));
        }
        let sheet_row = |i: usize| header_row as usize + 2 + i;
        if let (n, Some(first)) = unsaved(j) {
            notes.push(format!(
                "column `{name_j}`: {} with a formula and no value (the first in sheet row {}) read as missing: the formula's result is empty, or the workbook was written by a program that does not compute formulas (open and save it in a spreadsheet program to store their values)",
                super::markers::how_many_cells(n),
                sheet_row(first)
            ));
        }
        let first_text = cells.iter().position(|c| matches!(c, Cell::Text(_)));
        let typed_as_text = cells
            .iter()
            .filter(|c| matches!(c, Cell::NumberLike(_)))
            .count();
        let numbers = cells
            .iter()
            .filter(|c| matches!(c, Cell::Number(_)))
            .count();
        // Text written for people reads as a number too, noted apart.
        let written = cells
            .iter()
            .filter(|c| matches!(c, Cell::Written(_)))
            .count();
        let number_like = typed_as_text + written;
        let markers = cells.iter().filter(|c| matches!(c, Cell::Marker)).count();
        if first_text.is_none() && markers > 0 && numbers + number_like > 0 {
            let marked = body.iter().filter_map(|r| match r.get(j) {
                Some(Data::String(v)) if super::markers::is_marker(v) => Some(v.as_str()),
                _ => None,
            });
            notes.push(format!(
                "column `{name_j}`: {}",
                super::markers::markers_read_as_missing(marked)
            ));
        }
        let column = match first_text {
            // Markers alone, with no number, are text (a column of `NA`s says nothing).
            None if markers > 0 && numbers + number_like == 0 => {
                text_column(name_j, &cells, &body, j)
            }
            None => {
                if typed_as_text > 0 && numbers > 0 {
                    let first = cells
                        .iter()
                        .position(|c| matches!(c, Cell::NumberLike(_)))
                        .unwrap_or(0);
                    notes.push(format!(
                        "column `{name_j}`: {} of text that reads as a number (the first in sheet row {}) read as numbers",
                        super::markers::how_many_cells(typed_as_text),
                        sheet_row(first)
                    ));
                }
                if let Some(first) = cells.iter().position(|c| matches!(c, Cell::Written(_))) {
                    notes.push(format!(
                        "column `{name_j}`: {} of text with thousands separators or in \
                         parentheses for a negative number (the first in sheet row {}) read as \
                         numbers",
                        super::markers::how_many_cells(written),
                        sheet_row(first)
                    ));
                }
                let values: Vec<Option<f64>> = cells
                    .iter()
                    .map(|c| match c {
                        Cell::Number(x) | Cell::NumberLike(x) | Cell::Written(x) => Some(*x),
                        _ => None,
                    })
                    .collect();
                let whole = values
                    .iter()
                    .flatten()
                    .all(|x| x.fract() == 0.0 && x.abs() < 9.0e15);
                if whole {
                    Column::new(
                        name_j.as_str().into(),
                        values
                            .iter()
                            .map(|v| v.map(|x| x as i64))
                            .collect::<Vec<Option<i64>>>(),
                    )
                } else {
                    Column::new(name_j.as_str().into(), values)
                }
            }
            Some(t) => {
                // Text that is a number but for a currency or percent sign, in most cells
                // holding text: the sign decides the unit, so the column stays text (the CSV
                // reader's test, on the column's text cells).
                let text: StringChunked = body
                    .iter()
                    .map(|r| match r.get(j) {
                        Some(Data::String(v)) if !v.trim().is_empty() => Some(v.as_str()),
                        _ => None,
                    })
                    .collect();
                if let Some((row, v)) = super::markers::signed_amounts(&text, false) {
                    notes.push(format!(
                        "column `{name_j}` stays text: its values are numbers written with a \
                         currency or percent sign (sheet row {} holds `{v}`); take the sign out \
                         (and say in a label what the unit is) to use them as numbers",
                        sheet_row(row - 1)
                    ));
                } else if numbers + number_like > 0 {
                    notes.push(format!(
                        "column `{name_j}` mixes numbers and text (the first text in sheet row {}): read as text",
                        sheet_row(t)
                    ));
                }
                text_column(name_j, &cells, &body, j)
            }
        };
        columns.push(column);
    }
    let df = DataFrame::new(body.len(), columns)?;
    Ok(Sheet { df, name, notes })
}

/// Column `j` of `body` as text, its cells as the sheet holds them.
fn text_column(name: &str, cells: &[Cell], body: &[&[Data]], j: usize) -> Column {
    let values: Vec<Option<String>> = cells
        .iter()
        .zip(body)
        .map(|(c, r)| match c {
            Cell::Missing => None,
            Cell::Text(s) => Some(s.clone()),
            _ => r.get(j).map(|d| d.to_string()),
        })
        .collect();
    Column::new(name.into(), values)
}

#[cfg(test)]
mod tests {
    use super::letters;

    #[test]
    fn date_serials_read_as_iso_dates() {
        // Spreadsheet serials against Python's datetime: in the 1900 system 1899-12-30 plus
        // 61, 44561 and 45351 days is 1900-03-01, 2021-12-31 and 2024-02-29; in the 1904
        // system 1904-01-01 plus 0 and 43099 days is 1904-01-01 and 2021-12-31.
        use calamine::{ExcelDateTime, ExcelDateTimeType::DateTime};
        let date =
            |serial, is_1904| super::iso_date(&ExcelDateTime::new(serial, DateTime, is_1904));
        assert_eq!(date(61.0, false), "1900-03-01");
        assert_eq!(date(44561.0, false), "2021-12-31");
        assert_eq!(date(45351.75, false), "2024-02-29");
        assert_eq!(date(0.0, true), "1904-01-01");
        assert_eq!(date(43099.0, true), "2021-12-31");
    }

    #[test]
    fn column_letters() {
        // Spreadsheet column naming, worked by hand: Z is the 26th, AA the 27th, ZZ the 702nd.
        assert_eq!(letters(0), "A");
        assert_eq!(letters(25), "Z");
        assert_eq!(letters(26), "AA");
        assert_eq!(letters(27), "AB");
        assert_eq!(letters(701), "ZZ");
        assert_eq!(letters(702), "AAA");
    }
}
