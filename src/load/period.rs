//! The period column: read as whole numbers (`period_as_int`, `check_period`), at most
//! `rules::MAX_WINDOW_PERIODS` of them from the first to the last (`check_window`, which
//! notes years written with two digits), or derived
//! from a fiscal-year-end date (`fiscal_year`).

use polars::prelude::*;

use super::{first_row, ROW};
use crate::config::InputConfig;
use crate::{Error, Result};

/// The days of `month` in `year` of the Gregorian calendar: February has 29 in a year
/// divisible by 4, except centuries not divisible by 400 (common practice).
fn days_in_month(year: Expr, month: Expr) -> Expr {
    let divisible = |n: i64| (year.clone() % lit(n)).eq(lit(0i64));
    let leap = divisible(4).and(divisible(100).not()).or(divisible(400));
    when(month.clone().eq(lit(2i64)))
        .then(when(leap).then(lit(29i64)).otherwise(lit(28i64)))
        .when(
            [4i64, 6, 9, 11]
                .map(|m| month.clone().eq(lit(m)))
                .into_iter()
                .reduce(Expr::or)
                .expect("four months"),
        )
        .then(lit(30i64))
        .otherwise(lit(31i64))
}

/// A text `YYYY-MM-DD` taken apart by expressions (the engine is built without its date
/// parser): whether it is a day of the Gregorian calendar, and its year, month and day as
/// their digits say (to be read only where it is one).
pub(crate) struct IsoDate {
    pub(crate) well_formed: Expr,
    pub(crate) year: Expr,
    pub(crate) month: Expr,
    pub(crate) day: Expr,
}

impl IsoDate {
    /// The parts of `text` (without surrounding spaces).
    pub(crate) fn of(text: Expr) -> IsoDate {
        // `len` characters from `start` of a YYYY-MM-DD date.
        let part = |start: i32, len: i32| text.clone().str().slice(lit(start), lit(len));
        let [year, month, day] =
            [(0, 4), (5, 2), (8, 2)].map(|(s, l)| part(s, l).cast(DataType::Int64));
        let well_formed = text
            .clone()
            .str()
            .len_chars()
            .eq(lit(10u32))
            .and(part(4, 1).eq(lit("-")))
            .and(part(7, 1).eq(lit("-")))
            .and(year.clone().is_not_null())
            .and(
                month
                    .clone()
                    .gt_eq(lit(1))
                    .and(month.clone().lt_eq(lit(12))),
            )
            .and(
                day.clone().gt_eq(lit(1)).and(
                    day.clone()
                        .lt_eq(days_in_month(year.clone(), month.clone())),
                ),
            )
            .fill_null(lit(false));
        IsoDate {
            well_formed,
            year,
            month,
            day,
        }
    }

    /// The date as the engine's date type (days since 1970-01-01), missing where the text is
    /// not a date: the days from the civil date by counting 400-year eras of 146,097 days from
    /// a year that starts in March (H. Hinnant, "chrono-Compatible Low-Level Date
    /// Algorithms", `days_from_civil`, from memory; the test below checks it by hand). Years
    /// are shifted by one era so that every division is of non-negative numbers
    /// (`0000-01-01` included).
    pub(crate) fn date(self) -> Expr {
        let march = self.month.clone().lt_eq(lit(2i64));
        let y = self.year - when(march.clone()).then(lit(1i64)).otherwise(lit(0i64)) + lit(400i64);
        let era = y.clone().floor_div(lit(400i64));
        let yoe = y - era.clone() * lit(400i64);
        let m = when(march)
            .then(self.month.clone() + lit(9i64))
            .otherwise(self.month - lit(3i64));
        let doy = (lit(153i64) * m + lit(2i64)).floor_div(lit(5i64)) + self.day - lit(1i64);
        let doe = yoe.clone() * lit(365i64) + yoe.clone().floor_div(lit(4i64))
            - yoe.floor_div(lit(100i64))
            + doy;
        let days = (era - lit(1i64)) * lit(146_097i64) + doe - lit(719_468i64);
        when(self.well_formed)
            .then(days.cast(DataType::Int32).cast(DataType::Date))
            .otherwise(lit(NULL).cast(DataType::Date))
    }
}

/// Derive the period column (`cfg.period`) from a fiscal-year-end date column of text
/// `YYYY-MM-DD`: the date's year, less one when its month is `cutoff` or earlier (common
/// practice: a year ending January–May belongs to the previous fiscal year). A date that is not
/// of that form is an error naming its row. Also counts entities whose year-end month changed.
pub(super) fn fiscal_year(
    df: DataFrame,
    mut columns: Vec<String>,
    cfg: &InputConfig,
    date: &str,
    cutoff: u32,
) -> Result<(
    DataFrame,
    Vec<String>,
    Option<crate::report::YearEndChanges>,
)> {
    let text = col(date)
        .cast(DataType::String)
        .str()
        .strip_chars(lit(NULL));
    let IsoDate {
        well_formed,
        year,
        month,
        ..
    } = IsoDate::of(text.clone());
    let marked = df
        .lazy()
        .with_columns([
            text.clone().alias("__ye_text"),
            well_formed.alias("__ye_ok"),
            month.clone().alias("__ye_month"),
        ])
        .collect()?;
    let bad = marked
        .clone()
        .lazy()
        .filter(col("__ye_text").is_not_null().and(col("__ye_ok").not()))
        .select([col(ROW), col("__ye_text")])
        .limit(1)
        .collect()?;
    if bad.height() > 0 {
        return Err(Error::Unreadable {
            file: cfg.path.clone(),
            at: first_row(&bad)?,
            message: format!(
                "`{date}` (named in `[panel] year_end`) holds `{}`, not a date YYYY-MM-DD",
                bad.column("__ye_text")?.str()?.get(0).unwrap_or("")
            ),
        });
    }
    let fiscal = when(col("__ye_ok"))
        .then(
            year - when(col("__ye_month").lt_eq(lit(cutoff as i64)))
                .then(lit(1i64))
                .otherwise(lit(0i64)),
        )
        .otherwise(lit(NULL).cast(DataType::Int64));
    let out = marked
        .lazy()
        .with_column(fiscal.alias(cfg.period.as_str()))
        .collect()?;
    let changed = out
        .clone()
        .lazy()
        .filter(
            col("__ye_month")
                .is_not_null()
                .and(col(cfg.entity.as_str()).is_not_null()),
        )
        .group_by([col(cfg.entity.as_str()).cast(DataType::String).alias("__e")])
        .agg([col("__ye_month").n_unique().alias("__months")])
        .filter(col("__months").gt(lit(1)))
        .sort(["__e"], Default::default())
        .collect()?;
    let examples: Vec<String> = changed
        .column("__e")?
        .str()?
        .iter()
        .flatten()
        .take(5)
        .map(str::to_string)
        .collect();
    let out = out.drop_many(["__ye_text", "__ye_ok", "__ye_month"]);
    columns.push(cfg.period.clone());
    Ok((
        out,
        columns,
        Some(crate::report::YearEndChanges {
            column: date.to_string(),
            cutoff_month: cutoff,
            entities: changed.height() as u64,
            examples,
        }),
    ))
}

/// Strings are parsed strictly; floats must be whole numbers.
pub(super) fn period_as_int(period: &str, dtype: &DataType) -> Expr {
    let c = col(period);
    match dtype {
        DataType::String => c.str().strip_chars(lit(NULL)).cast(DataType::Int64),
        _ => c.cast(DataType::Int64),
    }
}

/// Fail when the periods (whole numbers by now) span more than a panel's window may hold,
/// naming the rows of the first and the last period; else the notes on them (years written
/// with two digits).
pub(super) fn check_window(df: &DataFrame, cfg: &InputConfig) -> Result<Vec<String>> {
    let periods = df.column(&cfg.period)?.i64()?;
    let (Some(first), Some(last)) = (periods.min(), periods.max()) else {
        return Ok(Vec::new());
    };
    let window = i128::from(last) - i128::from(first) + 1;
    let most = crate::rules::MAX_WINDOW_PERIODS;
    if window <= i128::from(most) {
        return Ok(two_digit_years(&cfg.period, first, last)
            .into_iter()
            .collect());
    }
    let row_of = |value: i64| -> Result<u64> {
        let hit = df
            .clone()
            .lazy()
            .filter(col(cfg.period.as_str()).eq(lit(value)))
            .select([col(ROW).cast(DataType::UInt64)])
            .limit(1)
            .collect()?;
        Ok(hit.columns()[0].u64()?.get(0).unwrap_or(0))
    };
    Err(Error::PeriodWindow {
        file: cfg.path.clone(),
        column: cfg.period.clone(),
        first,
        first_row: row_of(first)?,
        last,
        last_row: row_of(last)?,
        periods: window,
        most,
    })
}

/// Names of a period column that say it holds years (common practice in accounts files).
const YEAR_NAMES: [&str; 5] = ["year", "yr", "fy", "jahr", "annee"];

/// A note when the period column's name says it holds years and every period is from 0 to
/// 99, some below 50 and some above: years written with two digits across a century's turn,
/// which sort and lag wrongly there (`99` and `00` are 99 periods apart, not one). Two-digit
/// years on one side of the turn (`05` to `15`) are consecutive whole numbers all the same.
fn two_digit_years(name: &str, first: i64, last: i64) -> Option<String> {
    let yearly = crate::rules::name_suggests(name, &YEAR_NAMES);
    (yearly && (0..50).contains(&first) && (50..=99).contains(&last)).then(|| {
        format!(
            "period column `{name}` holds {first} to {last}: years written with two digits? \
             Write them in full (2001), or `99` and `00` are 99 periods apart, not one, and \
             every lag across them is missing"
        )
    })
}

/// Fail with the first row whose period is present but not a whole number.
pub(super) fn check_period(df: &DataFrame, cfg: &InputConfig, dtype: &DataType) -> Result<()> {
    let c = col(cfg.period.as_str());
    let bad = match dtype {
        // Beyond the largest signed 64-bit integer the cast would make the period missing.
        DataType::UInt64 => c.clone().gt(lit(i64::MAX as u64)).fill_null(lit(false)),
        d if d.is_integer() => return Ok(()),
        DataType::Null => return Ok(()),
        d if d.is_float() => c.clone().is_not_null().and(
            c.clone()
                .neq(c.clone().floor())
                .or(c.clone().is_nan())
                .or(c.clone().abs().gt(lit(9.0e15))),
        ),
        DataType::String => c.clone().is_not_null().and(
            c.clone()
                .str()
                .strip_chars(lit(NULL))
                .cast(DataType::Int64)
                .is_null(),
        ),
        _ => lit(true),
    };
    let first = df
        .clone()
        .lazy()
        .filter(bad)
        .select([col(ROW), c.cast(DataType::String).alias("value")])
        .limit(1)
        .collect()?;
    if first.height() == 0 {
        return Ok(());
    }
    let row = first.column(ROW)?.cast(&DataType::UInt64)?.u64()?.get(0);
    let value = first.column("value")?.str()?.get(0).map(str::to_string);
    let dated = matches!(dtype, DataType::Date | DataType::Datetime(..))
        || value.as_deref().is_some_and(looks_like_a_date);
    let year = value.as_deref().and_then(year_inside).map(str::to_string);
    Err(Error::NonIntegerPeriod {
        file: cfg.path.clone(),
        column: cfg.period.clone(),
        row: row.unwrap_or(0),
        value: value.unwrap_or_else(|| dtype.to_string()),
        hint: if dated {
            format!(
                " (a date: `[panel] year_end = \"{}\"` derives fiscal years from it, into a \
                 period column of another name)",
                cfg.period
            )
        } else if let Some(year) = year {
            format!(
                " (a year with other characters around it: write the period as the year alone, \
                 `{year}`, in the file)"
            )
        } else {
            String::new()
        },
    })
}

/// The year in a period written with other characters around it (`FY2001`, `2001a`): its one
/// run of four digits, when that is all the digits it has.
fn year_inside(value: &str) -> Option<&str> {
    let t = value.trim();
    let start = t.find(|c: char| c.is_ascii_digit())?;
    let digits = t[start..]
        .find(|c: char| !c.is_ascii_digit())
        .map_or(t.len(), |n| start + n);
    let rest_has_digits = t[digits..].bytes().any(|b| b.is_ascii_digit());
    (digits - start == 4 && !rest_has_digits && t.len() > 4).then(|| &t[start..digits])
}

/// Whether `value` starts as a date does, `YYYY-MM-DD` (a timestamp after it or not).
fn looks_like_a_date(value: &str) -> bool {
    let b = value.trim().as_bytes();
    b.len() >= 10
        && b[..10].iter().enumerate().all(|(i, c)| match i {
            4 | 7 => *c == b'-',
            _ => c.is_ascii_digit(),
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: one run of four digits among other characters is the year; a year
    /// alone, two runs of digits (`2001/02`, which year?), a decimal or a short run is not.
    #[test]
    fn the_year_inside_a_period_label() {
        assert_eq!(year_inside("FY2001"), Some("2001"));
        assert_eq!(year_inside(" 2001a "), Some("2001"));
        assert_eq!(year_inside("fiscal 1999 "), Some("1999"));
        for none in ["2001", "2001/02", "2002.5", "FY01", "Q1 2001", "20011"] {
            assert_eq!(year_inside(none), None, "{none}");
        }
    }

    /// Worked by hand: days since 1970-01-01 (the engine's dates). 2000-01-01 is 30 years of
    /// 365 days and 7 leap days (1972–1996) on, 10,957; 2000-03-01 is 31 + 29 more (2000 is a
    /// leap year, divisible by 400); 1900-01-01 is 70 years and 17 leap days (1904–1968)
    /// before, and 1900-03-01 31 + 28 after it (1900 is not: a century not divisible by
    /// 400). A 29 February of a year that is not a leap year, a month 13, a day 0 and other
    /// forms are not dates.
    #[test]
    fn dates_as_days_since_1970() {
        let texts = [
            "1970-01-01",
            "1970-01-03",
            "1969-12-31",
            "2000-01-01",
            "2000-02-29",
            "2000-03-01",
            "1900-01-01",
            "1900-03-01",
            "2024-12-31",
            "1900-02-29",
            "2023-02-29",
            "2023-13-01",
            "2023-04-00",
            "2023-04-31",
            "23-04-01",
            "2023/04/01",
            "2023-4-1",
        ];
        let df = df!("t" => texts).unwrap();
        let out = df
            .lazy()
            .select([IsoDate::of(col("t")).date().cast(DataType::Int32)])
            .collect()
            .unwrap();
        let days: Vec<Option<i32>> = out.column("t").unwrap().i32().unwrap().iter().collect();
        let want = [
            Some(0),
            Some(2),
            Some(-1),
            Some(10_957),
            Some(10_957 + 31 + 28),
            Some(10_957 + 31 + 29),
            Some(-25_567),
            Some(-25_567 + 31 + 28),
            // 2024-01-01: 54 years of 365 days and 13 leap days (1972–2020); 2024 is one.
            Some(54 * 365 + 13 + 365),
            None,
            None,
            None,
            None,
            None,
            None,
            None,
            None,
        ];
        assert_eq!(days, want);
    }
}
