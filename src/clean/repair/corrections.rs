//! The corrections file: firm-year overrides, each with its reason, read and checked before
//! any data is read, applied right after the key steps, every changed cell in the ledger.

use std::path::{Path, PathBuf};

use polars::prelude::*;

use super::empty_ledger;
use crate::{Error, Result};

/// The corrections file: one override per line.
#[derive(Debug, Clone)]
pub struct Corrections {
    /// Where it was read from.
    pub path: PathBuf,
    /// Its bytes' SHA-256, for the manifest.
    pub sha256: String,
    /// entity, period, column, value (text, empty = null), reason, and `__line` (the line
    /// of the file, the header being line 1).
    pub rows: DataFrame,
    /// Numbers written with a decimal comma (`5,5`), as `[input]` says of the CSV files.
    pub decimal_comma: bool,
}

/// The columns of a corrections file, in order.
pub const CORRECTION_COLUMNS: [&str; 5] = ["entity", "period", "column", "value", "reason"];

fn bad(path: &Path, message: String) -> Error {
    Error::Setting {
        setting: "[repair] corrections",
        message: format!("`{}`: {message}", path.display()),
    }
}

/// Read and check a corrections file (before any data is read), with the CSV settings of
/// `[input]` (delimiter, decimal comma, encoding), as the data's CSV files are read.
pub fn read_corrections(path: &Path, csv: &crate::config::CsvOptions) -> Result<Corrections> {
    let raw = std::fs::read(path).map_err(Error::io(path))?;
    let sha256 = crate::load::sha256_hex(&raw);
    let bytes = match csv.encoding {
        crate::config::Encoding::Windows1252 => {
            let (text, _, _) = encoding_rs::WINDOWS_1252.decode(&raw);
            text.into_owned().into_bytes()
        }
        crate::config::Encoding::Utf8 => raw,
    };
    let delimiter = csv.delimiter;
    let schema: Schema = CORRECTION_COLUMNS
        .iter()
        .map(|c| Field::new((*c).into(), DataType::String))
        .collect();
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_schema(Some(Arc::new(schema)))
        .map_parse_options(|o| o.with_separator(delimiter as u8))
        .into_reader_with_file_handle(std::io::Cursor::new(bytes.clone()))
        .finish()
        .map_err(|e| bad(path, crate::error::one_line(&e.to_string())))?;
    let header = String::from_utf8_lossy(&bytes)
        .lines()
        .next()
        .unwrap_or_default()
        .trim_start_matches('\u{feff}')
        .to_string();
    let names: Vec<&str> = header.split(delimiter).map(str::trim).collect();
    if names != CORRECTION_COLUMNS {
        return Err(bad(
            path,
            format!(
                "the header must be `{}` (found `{header}`)",
                CORRECTION_COLUMNS.join(&delimiter.to_string())
            ),
        ));
    }
    let df = df
        .lazy()
        .with_row_index("__line", Some(2))
        .with_column(
            col("period")
                .str()
                .strip_chars(lit(NULL))
                .cast(DataType::Int64)
                .alias("__period"),
        )
        .collect()?;
    // Every line names an entity, a whole-number period, a column and a reason.
    let problem = df
        .clone()
        .lazy()
        .filter(
            col("entity")
                .is_null()
                .or(col("__period").is_null())
                .or(col("column").is_null())
                .or(col("reason").is_null()),
        )
        .limit(1)
        .collect()?;
    if problem.height() > 0 {
        let line = problem.column("__line")?.u32()?.get(0).unwrap_or(0);
        return Err(bad(
            path,
            format!(
                "line {line}: every line needs an entity, a whole-number period, a column and a \
                 reason (the value may be empty: null)"
            ),
        ));
    }
    let repeated = df
        .clone()
        .lazy()
        .filter(as_struct(vec![col("entity"), col("__period"), col("column")]).is_duplicated())
        .select([col("__line").max()])
        .collect()?;
    if let Some(line) = repeated.column("__line")?.u32()?.get(0) {
        return Err(bad(
            path,
            format!("line {line}: a second override of the same entity, period and column"),
        ));
    }
    let rows = df
        .lazy()
        .drop(by_name(["period"], true, false))
        .rename(["__period"], ["period"], true)
        .collect()?;
    Ok(Corrections {
        path: path.to_path_buf(),
        sha256,
        rows,
        decimal_comma: csv.decimal_comma,
    })
}

/// Apply the overrides to `df` (keys typed as the loader types them); returns the frame and
/// the ledger lines. An override that matches no row, or names a column the data lacks or a
/// key column, or gives a non-number for a numeric column, is an error naming its line.
pub fn apply_corrections(
    mut df: DataFrame,
    c: &Corrections,
    entity: &str,
    period: &str,
) -> Result<(DataFrame, DataFrame)> {
    let schema = df.schema().clone();
    let targets: Vec<String> = {
        let mut v: Vec<String> = c
            .rows
            .column("column")?
            .str()?
            .iter()
            .flatten()
            .map(str::to_string)
            .collect();
        v.sort();
        v.dedup();
        v
    };
    let line_of = |filter: Expr| first_line(c.rows.clone().lazy().filter(filter));
    for t in &targets {
        let forbidden = t.starts_with("__") || t == entity || t == period;
        if forbidden || !schema.contains(t) {
            let line = line_of(col("column").eq(lit(t.as_str())))?.unwrap_or(0);
            return Err(bad(
                &c.path,
                format!(
                    "line {line}: {}",
                    if forbidden {
                        format!("`{t}` cannot be corrected (a key or internal column)")
                    } else {
                        format!("no column `{t}` in the data")
                    }
                ),
            ));
        }
    }
    // Each override must find its firm-year.
    let keys = df
        .clone()
        .lazy()
        .select([col(entity).alias("entity"), col(period).alias("period")])
        .unique(None, UniqueKeepStrategy::Any);
    let unmatched = c.rows.clone().lazy().join(
        keys,
        [col("entity"), col("period")],
        [col("entity"), col("period")],
        JoinArgs::new(JoinType::Anti),
    );
    if let Some(line) = first_line(unmatched)? {
        return Err(bad(
            &c.path,
            format!("line {line}: no row of the data has this entity and period"),
        ));
    }
    let mut ledger = vec![];
    for t in &targets {
        let dtype = schema.get(t.as_str()).cloned().unwrap_or(DataType::String);
        let mine = c
            .rows
            .clone()
            .lazy()
            .filter(col("column").eq(lit(t.as_str())));
        let (value, dtype) = typed_value(&mine, t, dtype, c)?;
        if Some(&dtype) != schema.get(t.as_str()) {
            df = df
                .lazy()
                .with_column(col(t.as_str()).cast(dtype.clone()))
                .collect()?;
        }
        let overrides = mine.select([
            col("entity").alias("__ce"),
            col("period").alias("__cp"),
            value.cast(dtype.clone()).alias("__cv"),
            col("reason").alias("__cr"),
            lit(true).alias("__hit"),
        ]);
        let joined = df
            .clone()
            .lazy()
            .join(
                overrides,
                [col(entity), col(period)],
                [col("__ce"), col("__cp")],
                JoinArgs {
                    maintain_order: MaintainOrderJoin::Left,
                    ..JoinArgs::new(JoinType::Left)
                },
            )
            .collect()?;
        let hit = col("__hit").fill_null(lit(false));
        ledger.push(joined.clone().lazy().filter(hit.clone()).select([
            col(entity),
            col(period),
            lit(t.as_str()).alias("column"),
            col(t.as_str()).cast(DataType::String).alias("old"),
            col("__cv").cast(DataType::String).alias("new"),
            (lit("corrections file: ") + col("__cr")).alias("reason"),
        ]));
        df = joined
            .lazy()
            .with_column(
                when(hit)
                    .then(col("__cv"))
                    .otherwise(col(t.as_str()))
                    .alias(t.as_str()),
            )
            .drop(by_name(
                ["__ce", "__cp", "__cv", "__cr", "__hit"],
                false,
                false,
            ))
            .collect()?;
    }
    let ledger = if ledger.is_empty() {
        empty_ledger(entity, period)?
    } else {
        concat(ledger, UnionArgs::default())?.collect()?
    };
    Ok((df, ledger))
}

/// The first line of the corrections file among `lines` (its rows, filtered), if any.
fn first_line(lines: LazyFrame) -> Result<Option<u32>> {
    let hit = lines.select([col("__line").min()]).collect()?;
    Ok(hit.column("__line")?.u32()?.get(0))
}

/// The overrides' values for column `t` of type `dtype` (`mine`: its lines of the corrections
/// file), as an expression over their text, and the type the column takes: a value the type
/// cannot hold is an error naming its line, but for a column of whole numbers given a
/// fraction, or a number beyond its type's range, which becomes a column of 64-bit
/// floating-point numbers (the cast would cut `1.5` to 1, or make a wide number missing or,
/// in 32-bit floats, infinite, unsaid).
fn typed_value(
    mine: &LazyFrame,
    t: &str,
    dtype: DataType,
    c: &Corrections,
) -> Result<(Expr, DataType)> {
    let line_where = |filter: Expr| first_line(mine.clone().filter(filter));
    let refuse = |line: u32, what: &str| {
        bad(
            &c.path,
            format!("line {line}: `{t}` {what} (leave it empty for a missing value)"),
        )
    };
    let text = col("value").str().strip_chars(lit(NULL));
    let given = col("value").is_not_null();
    if dtype.is_string() {
        return Ok((col("value"), dtype));
    }
    if dtype == DataType::Boolean {
        // `true` or `false` in any case, as the reader takes them.
        let word = text.str().to_lowercase();
        let value = when(word.clone().eq(lit("true")))
            .then(lit(true))
            .when(word.eq(lit("false")))
            .then(lit(false))
            .otherwise(lit(NULL).cast(DataType::Boolean));
        if let Some(line) = line_where(given.and(value.clone().is_null()))? {
            return Err(refuse(line, "holds true / false; the value is neither"));
        }
        return Ok((value, dtype));
    }
    if dtype == DataType::Date {
        let date = crate::load::IsoDate::of(text).date();
        if let Some(line) = line_where(given.and(date.clone().is_null()))? {
            return Err(refuse(
                line,
                &format!("holds values of type {dtype} YYYY-MM-DD; the value is not one"),
            ));
        }
        return Ok((date, dtype));
    }
    if let DataType::Datetime(unit, zone) = &dtype {
        let value = super::instant::date_time(text, *unit, zone.as_ref());
        if let Some(line) = line_where(given.and(value.clone().is_null()))? {
            let forms = super::instant::forms(*unit, zone.as_ref());
            return Err(refuse(
                line,
                &format!("holds {forms}; the value is not one"),
            ));
        }
        return Ok((value, dtype));
    }
    if !dtype.is_primitive_numeric() {
        // Any other type (a time of day, a duration): a value the cast cannot take would
        // become missing.
        if let Some(line) = line_where(given.and(text.clone().cast(dtype.clone()).is_null()))? {
            return Err(refuse(
                line,
                &format!("holds values of type {dtype}; the value is not one"),
            ));
        }
        return Ok((text, dtype));
    }
    let text = match c.decimal_comma {
        true => text.str().replace_all(lit(","), lit("."), true),
        false => text,
    };
    let value = text.cast(DataType::Float64);
    if let Some(line) = line_where(given.clone().and(value.clone().is_null()))? {
        return Err(bad(
            &c.path,
            format!("line {line}: `{t}` holds numbers; the value is not one"),
        ));
    }
    // `nan`, `inf`: numbers to the parser, but not values a regression can use.
    let finite = value.clone().is_finite();
    if let Some(line) = line_where(value.clone().is_not_null().and(finite.not()))? {
        return Err(refuse(line, "takes finite numbers; the value is not one"));
    }
    let kept = value.clone().cast(dtype.clone()).cast(DataType::Float64);
    let lost = match dtype {
        DataType::Float64 => lit(false),
        DataType::Float32 => kept.is_finite().fill_null(lit(false)).not(),
        _ => value.clone().eq(kept).fill_null(lit(false)).not(),
    };
    let wider = line_where(value.clone().is_not_null().and(lost))?.is_some();
    Ok((value, if wider { DataType::Float64 } else { dtype }))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: columns a Parquet file may bring. A 32-bit float given 1e300 (infinite
    /// in 32 bits) becomes 64-bit; a 32-bit integer given a whole number keeps its type; a
    /// date column takes `YYYY-MM-DD` (padded) and refuses any other form, naming the line
    /// (it was read as missing, unsaid).
    #[test]
    fn corrections_to_other_column_types() {
        let df = df!(
            "f" => ["a", "b"],
            "y" => [2001i64, 2001],
            "x32" => [1.5f32, 2.5],
            "i32" => [1i32, 2],
            "d" => [Some(0i32), None],
        )
        .unwrap()
        .lazy()
        .with_column(col("d").cast(DataType::Date))
        .collect()
        .unwrap();
        let corrections = |lines: &[[&str; 3]]| Corrections {
            path: "c.csv".into(),
            sha256: String::new(),
            rows: df!(
                "entity" => lines.iter().map(|l| l[0]).collect::<Vec<_>>(),
                "period" => vec![2001i64; lines.len()],
                "column" => lines.iter().map(|l| l[1]).collect::<Vec<_>>(),
                "value" => lines.iter().map(|l| l[2]).collect::<Vec<_>>(),
                "reason" => vec!["r"; lines.len()],
                "__line" => (2..2 + lines.len() as u32).collect::<Vec<_>>(),
            )
            .unwrap(),
            decimal_comma: false,
        };
        let fine = corrections(&[
            ["a", "x32", "1e300"],
            ["a", "i32", "7"],
            ["b", "d", " 1970-01-03 "],
        ]);
        let (fixed, ledger) = apply_corrections(df.clone(), &fine, "f", "y").unwrap();
        assert_eq!(fixed.column("x32").unwrap().dtype(), &DataType::Float64);
        assert_eq!(
            fixed.column("x32").unwrap().f64().unwrap().get(0),
            Some(1e300)
        );
        assert_eq!(fixed.column("i32").unwrap().dtype(), &DataType::Int32);
        assert_eq!(fixed.column("i32").unwrap().i32().unwrap().get(0), Some(7));
        let days = fixed.column("d").unwrap().cast(&DataType::Int32).unwrap();
        assert_eq!(days.i32().unwrap().get(1), Some(2));
        assert_eq!(ledger.height(), 3);
        let refused = apply_corrections(
            df,
            &corrections(&[["a", "i32", "8"], ["b", "d", "03.01.1970"]]),
            "f",
            "y",
        )
        .unwrap_err()
        .to_string();
        assert!(
            refused
                .contains("line 3: `d` holds values of type date YYYY-MM-DD; the value is not one"),
            "{refused}"
        );
    }
}
