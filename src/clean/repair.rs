//! Repairs that change cells, each recorded in the corrections ledger (entity, period,
//! column, old, new, reason): firm-year overrides from a corrections file, applied right after
//! the key steps, and unit slips the detector is sure of (a jump by a power of 1000 that
//! returns the next period), rescaled or set to null as `[repair] unit_slips` says.

use std::path::{Path, PathBuf};

use polars::prelude::*;

use crate::core::{log_ratios, magnitude, PanelCore, Values};
use crate::{Error, Result};

pub use crate::rules::SlipPolicy;

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

/// An empty corrections ledger.
pub fn empty_ledger(entity: &str, period: &str) -> Result<DataFrame> {
    Ok(DataFrame::new(
        0,
        vec![
            Column::new_empty(entity.into(), &DataType::String),
            Column::new_empty(period.into(), &DataType::Int64),
            Column::new_empty("column".into(), &DataType::String),
            Column::new_empty("old".into(), &DataType::String),
            Column::new_empty("new".into(), &DataType::String),
            Column::new_empty("reason".into(), &DataType::String),
        ],
    )?)
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
    let line_of = |filter: Expr| -> Result<Option<u32>> {
        let hit = c
            .rows
            .clone()
            .lazy()
            .filter(filter)
            .select([col("__line").min()])
            .collect()?;
        Ok(hit.column("__line")?.u32()?.get(0))
    };
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
    let unmatched = c
        .rows
        .clone()
        .lazy()
        .join(
            keys,
            [col("entity"), col("period")],
            [col("entity"), col("period")],
            JoinArgs::new(JoinType::Anti),
        )
        .select([col("__line").min()])
        .collect()?;
    if let Some(line) = unmatched.column("__line")?.u32()?.get(0) {
        return Err(bad(
            &c.path,
            format!("line {line}: no row of the data has this entity and period"),
        ));
    }
    let mut ledger = vec![];
    for t in &targets {
        let dtype = schema.get(t.as_str()).cloned().unwrap_or(DataType::String);
        let numeric = dtype.is_primitive_numeric();
        let mine = c
            .rows
            .clone()
            .lazy()
            .filter(col("column").eq(lit(t.as_str())));
        let value = if numeric {
            let text = col("value").str().strip_chars(lit(NULL));
            let text = match c.decimal_comma {
                true => text.str().replace_all(lit(","), lit("."), true),
                false => text,
            };
            text.cast(DataType::Float64)
        } else {
            col("value")
        };
        if numeric {
            let bad_number = mine
                .clone()
                .filter(col("value").is_not_null().and(value.clone().is_null()))
                .select([col("__line").min()])
                .collect()?;
            if let Some(line) = bad_number.column("__line")?.u32()?.get(0) {
                return Err(bad(
                    &c.path,
                    format!("line {line}: `{t}` holds numbers; the value is not one"),
                ));
            }
            // `nan`, `inf`: numbers to the parser, but not values a regression can use.
            let not_finite = mine
                .clone()
                .filter(
                    value
                        .clone()
                        .is_not_null()
                        .and(value.clone().is_finite().not()),
                )
                .select([col("__line").min()])
                .collect()?;
            if let Some(line) = not_finite.column("__line")?.u32()?.get(0) {
                return Err(bad(
                    &c.path,
                    format!(
                        "line {line}: `{t}` takes finite numbers; the value is not one (leave it \
                         empty for a missing value)"
                    ),
                ));
            }
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

/// Repair the unit slips the detector is sure of in `levels`: a jump by a power of 1000 whose
/// next period jumps back by the inverse. Returns the frame (sorted by entity and period) and
/// the ledger lines. Slips without a jump back are left for the report.
pub fn repair_slips(
    df: DataFrame,
    levels: &[String],
    entity: &str,
    period: &str,
    row: &str,
    policy: SlipPolicy,
) -> Result<(DataFrame, DataFrame)> {
    if policy == SlipPolicy::Report || levels.is_empty() {
        return Ok((df, empty_ledger(entity, period)?));
    }
    let mut df = df
        .lazy()
        .sort([entity, period, row], Default::default())
        .collect()?;
    // The detector the audit uses, over the panel core's codes.
    let back = PanelCore::new(&df, entity, period)?.previous_period();
    for (i, v) in levels.iter().enumerate() {
        let x = Values::of(&df, v)?;
        let mags: Int32Chunked = log_ratios(&back, &x)
            .into_iter()
            .map(|r| r.and_then(magnitude))
            .collect();
        df.with_column(mags.into_column().with_name(format!("__mag{i}").into()))?;
    }
    let mut lf = df.lazy();
    let mut ledger = Vec::new();
    let mut fixes = Vec::new();
    for (i, v) in levels.iter().enumerate() {
        let x = col(v.as_str()).cast(DataType::Float64);
        let m = col(format!("__mag{i}").as_str());
        let sure = m
            .clone()
            .is_not_null()
            .and(
                m.clone()
                    .shift(lit(-1))
                    .eq(-m.clone())
                    .fill_null(lit(false)),
            )
            .alias(format!("__sure{i}"));
        lf = lf.with_column(sure);
        let s = col(format!("__sure{i}").as_str());
        let factor = lit(10.0_f64).pow(m.clone().cast(DataType::Float64));
        let new = match policy {
            SlipPolicy::Rescale => x.clone() / factor.clone(),
            _ => lit(NULL).cast(DataType::Float64),
        };
        let size = when(m.clone().abs().eq(lit(6)))
            .then(lit("1000000"))
            .otherwise(lit("1000"));
        let reason = match policy {
            SlipPolicy::Rescale => {
                when(m.clone().gt(lit(0)))
                    .then(lit("unit slip: divided by "))
                    .otherwise(lit("unit slip: multiplied by "))
                    + size
            }
            _ => lit("unit slip: set to null (off by a factor of ") + size + lit(")"),
        };
        ledger.push((i, v.clone(), new.clone(), reason));
        fixes.push(
            when(s)
                .then(new.cast(DataType::Float64))
                .otherwise(x)
                .alias(v.as_str()),
        );
    }
    let marked = lf.collect()?;
    let mut lines = Vec::new();
    for (i, v, new, reason) in ledger {
        lines.push(
            marked
                .clone()
                .lazy()
                .filter(col(format!("__sure{i}").as_str()))
                .select([
                    col(entity),
                    col(period),
                    lit(v.as_str()).alias("column"),
                    col(v.as_str()).cast(DataType::String).alias("old"),
                    new.cast(DataType::String).alias("new"),
                    reason.alias("reason"),
                ]),
        );
    }
    let helpers: Vec<String> = (0..levels.len())
        .flat_map(|i| [format!("__mag{i}"), format!("__sure{i}")])
        .collect();
    let repaired = marked
        .lazy()
        .with_columns(fixes)
        .drop(by_name(helpers.iter().map(String::as_str), true, false))
        .collect()?;
    let ledger = concat(lines, UnionArgs::default())?.collect()?;
    Ok((repaired, ledger))
}
