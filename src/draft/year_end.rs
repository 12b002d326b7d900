//! `rules draft` on a file keyed by fiscal-year-end dates: the column of dates to derive
//! the fiscal year from, and a name for it.

use polars::prelude::*;

use super::Guess;
use crate::load::IsoDate;
use crate::rules::name_suggests;

/// Names that suggest a fiscal-year-end date (common practice in accounts files).
const YEAR_END_HINTS: [&str; 4] = ["yearend", "fye", "end", "date"];

/// The month up to which a year end belongs to the previous fiscal year, as `[panel]
/// year_end_cutoff` defaults.
pub(super) const YEAR_END_CUTOFF: i64 = 5;

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
        // The dates as `[panel] year_end` reads them (`load::IsoDate`, the loader's test).
        let date = IsoDate::of(
            col(name.clone())
                .cast(DataType::String)
                .str()
                .strip_chars(lit(NULL)),
        );
        let before_cutoff = when(date.month.lt_eq(lit(YEAR_END_CUTOFF)))
            .then(lit(1i64))
            .otherwise(lit(0i64));
        let read = df
            .clone()
            .lazy()
            .select([when(date.well_formed)
                .then(date.year - before_cutoff)
                .otherwise(lit(NULL).cast(DataType::Int64))
                .alias("fiscal")])
            .collect()
            .ok()?;
        let fiscal = read.column("fiscal").ok()?.i64().ok()?.clone();
        let present = c.len() - c.null_count();
        let read = fiscal.len() - fiscal.null_count();
        if present == 0 || (read as f64) < 0.99 * present as f64 {
            continue;
        }
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
