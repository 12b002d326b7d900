//! `rules draft` on a file keyed by fiscal-year-end dates: the column of dates to derive
//! the fiscal year from, and a name for it.

use polars::prelude::*;

use super::Guess;
use crate::rules::name_suggests;

/// Names that suggest a fiscal-year-end date (common practice in accounts files).
const YEAR_END_HINTS: [&str; 4] = ["yearend", "fye", "end", "date"];

/// The month up to which a year end belongs to the previous fiscal year, as `[panel]
/// year_end_cutoff` defaults.
pub(super) const YEAR_END_CUTOFF: i64 = 5;

/// The year and month of a date written `YYYY-MM-DD` (the form `[panel] year_end` reads),
/// with a day from 1 to 31 (the loader checks the month's length).
pub(super) fn year_month(text: &str) -> Option<(i64, i64)> {
    let b = text.trim().as_bytes();
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let number = |r: std::ops::Range<usize>| -> Option<i64> {
        let part = std::str::from_utf8(&b[r]).ok()?;
        part.bytes()
            .all(|c| c.is_ascii_digit())
            .then(|| part.parse().ok())?
    };
    let (year, month, day) = (number(0..4)?, number(5..7)?, number(8..10)?);
    ((1..=12).contains(&month) && (1..=31).contains(&day)).then_some((year, month))
}

/// A column of fiscal-year-end dates, where no column of years is found: text (or dates)
/// of which at least 99% of the values are dates `YYYY-MM-DD` between 1900 and 2100, in two
/// or more fiscal years; a name hint first. With it, the fiscal year of each row: the date's
/// year, less one when it ends in month [`YEAR_END_CUTOFF`] or earlier.
pub(super) fn guess_year_end(df: &DataFrame) -> Option<(Guess, Int64Chunked)> {
    let mut best: Option<(bool, Guess, Int64Chunked)> = None;
    for name in df.get_column_names() {
        let c = df.column(name).ok()?;
        if !matches!(c.dtype(), DataType::String | DataType::Date) {
            continue;
        }
        let text = c.cast(&DataType::String).ok()?;
        let dates: Vec<Option<(i64, i64)>> = text
            .str()
            .ok()?
            .iter()
            .map(|v| v.and_then(year_month))
            .collect();
        let present = text.len() - text.null_count();
        let read = dates.iter().flatten().count();
        if present == 0 || (read as f64) < 0.99 * present as f64 {
            continue;
        }
        let fiscal: Int64Chunked = dates
            .iter()
            .map(|d| d.map(|(y, m)| y - i64::from(m <= YEAR_END_CUTOFF)))
            .collect();
        let (Some(lo), Some(hi)) = (fiscal.min(), fiscal.max()) else {
            continue;
        };
        if lo == hi || lo < 1900 || hi > 2100 {
            continue;
        }
        let hint = name_suggests(name, &YEAR_END_HINTS);
        let guess = Guess {
            column: name.to_string(),
            why: format!(
                "dates written YYYY-MM-DD in {read} of {present} rows with a value, fiscal \
                 years {lo}..{hi}{}",
                if hint {
                    "; the name suggests a year end"
                } else {
                    ""
                }
            ),
            repeats: 0,
        };
        if best.as_ref().is_none_or(|(h, _, _)| hint && !h) {
            best = Some((hint, guess, fiscal));
        }
    }
    best.map(|(_, g, f)| (g, f))
}

/// A column name not in `df`: `fiscal_year`, or that with a number after it.
pub(super) fn unused_name(df: &DataFrame) -> String {
    let taken = |n: &str| df.get_column_names().iter().any(|c| c.as_str() == n);
    std::iter::once("fiscal_year".to_string())
        .chain((2..).map(|i| format!("fiscal_year_{i}")))
        .find(|n| !taken(n))
        .unwrap_or_default()
}
