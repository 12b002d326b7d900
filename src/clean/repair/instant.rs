//! A correction's text for a date-and-time column (a Parquet file's), taken apart by
//! expressions as dates are (`load::IsoDate`): `YYYY-MM-DD HH:MM:SS` with the decimals of a
//! second the column holds, as panel.csv writes such values — a `T` for the space, the
//! seconds or the whole time of day may be left out (ISO 8601). A column with a time zone
//! holds instants: its values need their offset from UTC (`+01:00`, `Z`), again as panel.csv
//! writes them; a column without one holds none.

use polars::prelude::*;

use crate::load::IsoDate;

/// The pattern of a date and time: the date, then an optional time of day (hours, minutes,
/// optional seconds and decimals), then an optional offset.
const FORM: &str = r"^(\d{4}-\d{2}-\d{2})(?:[ T](\d{2}):(\d{2})(?::(\d{2})(?:\.(\d{1,9}))?)?)?(Z|[+-]\d{2}:\d{2})?$";

/// The value of `text` (without surrounding spaces) in a column of type
/// `Datetime(unit, zone)`: missing where the text is not one of the forms above, names a day
/// or time that does not exist, has more decimals of a second than `unit` holds, lacks the
/// offset a column with a time zone needs (or has one a column without a zone cannot take),
/// or lies beyond the 64-bit count of `unit`s from 1970.
pub(super) fn date_time(text: Expr, unit: TimeUnit, zone: Option<&TimeZone>) -> Expr {
    let part = |group: usize| text.clone().str().extract(lit(FORM), group);
    let number = |group: usize| part(group).cast(DataType::Int64);
    let or_zero = |e: Expr| e.fill_null(lit(0i64));
    let date = IsoDate::of(part(1));
    let days = date.date().cast(DataType::Int32).cast(DataType::Int64);
    let (hours, minutes, seconds) = (or_zero(number(2)), or_zero(number(3)), or_zero(number(4)));
    let places = i64::from(places(unit));
    let per_second = 10i64.pow(places as u32);
    // The decimals of a second as a count of `unit`s: `.5` in microseconds is 500,000.
    let decimals = part(5);
    let written = decimals.clone().str().len_chars().cast(DataType::Int64);
    // Ten to the power of the places not written, looked up (more decimals than the unit
    // holds are refused below).
    let short_by = lit(places) - written.clone();
    let scale = (0..=9u32).fold(lit(1i64), |other, k| {
        when(short_by.clone().eq(lit(i64::from(k))))
            .then(lit(10i64.pow(k)))
            .otherwise(other)
    });
    let fraction = or_zero(decimals.clone().cast(DataType::Int64) * scale);
    // The offset in minutes east of UTC: `Z` is none, `+01:00` is 60.
    let offset = part(6);
    let sign = when(offset.clone().str().starts_with(lit("-")))
        .then(lit(-1i64))
        .otherwise(lit(1i64));
    let off_hours = offset
        .clone()
        .str()
        .slice(lit(1), lit(2))
        .cast(DataType::Int64);
    let off_minutes = offset
        .clone()
        .str()
        .slice(lit(4), lit(2))
        .cast(DataType::Int64);
    let is_z = offset.clone().eq(lit("Z")).fill_null(lit(false));
    let east = when(is_z.clone()).then(lit(0i64)).otherwise(or_zero(
        sign * (off_hours.clone() * lit(60i64) + off_minutes.clone()),
    ));
    let seconds_since = days.clone() * lit(86_400i64)
        + hours.clone() * lit(3_600i64)
        + minutes.clone() * lit(60i64)
        + seconds.clone()
        - east * lit(60i64);
    let offset_fits = match zone {
        Some(_) => offset.clone().is_not_null().and(
            is_z.or(off_hours
                .lt_eq(lit(23i64))
                .and(off_minutes.lt_eq(lit(59i64)))),
        ),
        None => offset.is_null(),
    };
    // The count of units as a float, which rounds to 2^63 or beyond wherever the count does
    // not fit in 64 bits (and, harmlessly, within a few microseconds of that edge).
    let as_float = |e: Expr| e.cast(DataType::Float64);
    let units =
        as_float(seconds_since.clone()) * lit(per_second as f64) + as_float(fraction.clone());
    // A text not of the form matches no group: its days are missing.
    let fits = days
        .clone()
        .is_not_null()
        .and(hours.lt_eq(lit(23i64)))
        .and(minutes.lt_eq(lit(59i64)))
        .and(seconds.lt_eq(lit(59i64)))
        .and(written.fill_null(lit(0i64)).lt_eq(lit(places)))
        .and(offset_fits)
        .and(units.abs().lt(lit(2f64.powi(63))))
        .fill_null(lit(false));
    let value = seconds_since * lit(per_second) + fraction;
    when(fits)
        .then(value)
        .otherwise(lit(NULL).cast(DataType::Int64))
        .cast(DataType::Datetime(unit, zone.cloned()))
}

/// The decimals of a second a column of `unit` holds.
fn places(unit: TimeUnit) -> u32 {
    match unit {
        TimeUnit::Milliseconds => 3,
        TimeUnit::Microseconds => 6,
        TimeUnit::Nanoseconds => 9,
    }
}

/// The forms a correction to a date-and-time column takes, for the message refusing one.
pub(super) fn forms(unit: TimeUnit, zone: Option<&TimeZone>) -> String {
    let places = places(unit);
    let zone = match zone {
        Some(z) => format!(" and its offset from UTC (`+01:00`, `Z`; the column's zone is {z})"),
        None => " and no offset from UTC (the column has no time zone)".into(),
    };
    format!(
        "dates and times, `YYYY-MM-DD HH:MM:SS` with up to {places} decimals of a second \
         (a `T` may stand for the space; the seconds or the time of day may be left out){zone}"
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `texts` read for a column of `unit` and `zone`, as counts of units since 1970 (None
    /// where refused).
    fn read(texts: &[&str], unit: TimeUnit, zone: Option<&str>) -> Vec<Option<i64>> {
        let zone = zone.map(zone_named);
        let df = df!("t" => texts).unwrap();
        let out = df
            .lazy()
            .select([date_time(col("t"), unit, zone.as_ref())
                .cast(DataType::Int64)
                .alias("v")])
            .collect()
            .unwrap();
        out.column("v").unwrap().i64().unwrap().iter().collect()
    }

    /// The time zone named `z`.
    fn zone_named(z: &str) -> TimeZone {
        TimeZone::opt_try_new(Some(z)).unwrap().unwrap()
    }

    /// Worked by hand: 2002-03-05 is day 11,751 since 1970-01-01 (32 years of 365 days, 8 leap
    /// days, 63 days of 2002 before 5 March: 11,680 + 8 + 63); 10:30 is 37,800 s. So
    /// 2002-03-05 10:30:00 is 1,015,324,200 s, and at +01:00 an hour less; Python's
    /// `datetime(2002, 3, 5, 10, 30, tzinfo=timezone.utc).timestamp()` gives the same.
    #[test]
    fn dates_and_times_in_the_forms_panel_csv_writes() {
        let s = 1_015_324_200i64;
        let us = TimeUnit::Microseconds;
        assert_eq!(
            read(
                &[
                    "2002-03-05 10:30:00.000000",
                    "2002-03-05T10:30:00",
                    "2002-03-05 10:30",
                    "2002-03-05 10:30:00.5",
                    "2002-03-05",
                    "1969-12-31 23:59:59",
                ],
                us,
                None
            ),
            [
                Some(s * 1_000_000),
                Some(s * 1_000_000),
                Some(s * 1_000_000),
                Some(s * 1_000_000 + 500_000),
                Some((s - 37_800) * 1_000_000),
                Some(-1_000_000),
            ]
        );
        // Refused: a 30 February, an hour 25, a minute 60, seven decimals in microseconds, an
        // offset where the column has no zone, a day first, slashes.
        let refused = [
            "2002-02-30 10:00:00",
            "2002-03-05 25:00:00",
            "2002-03-05 10:60:00",
            "2002-03-05 10:30:00.1234567",
            "2002-03-05 10:30:00+01:00",
            "05.03.2002 10:30",
            "2002/03/05 10:30",
        ];
        assert_eq!(read(&refused, us, None), vec![None; refused.len()]);
        // A column with a zone: the offset is needed and applied.
        let ms = TimeUnit::Milliseconds;
        assert_eq!(
            read(
                &[
                    "2002-03-05 11:30:00.000+01:00",
                    "2002-03-05T10:30:00Z",
                    "2002-03-05 05:00:00-05:30",
                    "2002-03-05 10:30:00",
                    "2002-03-05 10:30:00.1234",
                ],
                ms,
                Some("Europe/Berlin")
            ),
            [Some(s * 1000), Some(s * 1000), Some(s * 1000), None, None]
        );
        // Nanoseconds from 1970 end at 2^63 - 1, 2262-04-11 23:47:16.854775807 (Python's
        // `datetime(2262, 4, 11, 23, 47, 16, tzinfo=timezone.utc).timestamp()` is
        // 9,223,372,036 s): 23:47:16.8 fits, 23:47:16.9 and 2263 do not, nor before 1677.
        let ns = TimeUnit::Nanoseconds;
        let v = read(
            &[
                "2262-04-11 23:47:16.8",
                "2262-04-11 23:47:16.9",
                "2263-01-01",
                "1677-09-21 00:12:44",
                "1677-09-21 00:12:43",
            ],
            ns,
            None,
        );
        assert_eq!(
            v,
            [
                Some(9_223_372_036_800_000_000),
                None,
                None,
                Some(-9_223_372_036_000_000_000),
                None
            ]
        );
    }
}
