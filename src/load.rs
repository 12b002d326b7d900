//! Reading the raw panel: CSV or Parquet into a `LazyFrame` with typed keys and the original
//! row number, after checking that the key columns exist and the period holds integers.

use std::path::Path;

use polars::prelude::*;

use crate::config::{InputConfig, InputFormat};
use crate::{Error, Result};

/// The internal column holding each row's original position (1 = first data row); named
/// `source_row` in the outputs (see `pipeline::output_names`).
pub const ROW: &str = "__row";

/// The raw panel, ready for the pipeline.
pub struct Loaded {
    /// Every raw column, the entity as text, the period as Int64, plus the row number.
    pub df: DataFrame,
    /// The raw column names, in file order.
    pub columns: Vec<String>,
    /// The rows read.
    pub rows: u64,
}

/// Read the input named in `cfg` and check its keys.
pub fn load(cfg: &InputConfig) -> Result<Loaded> {
    let mut lf = scan(&cfg.path, cfg.format, Some(INFER_ROWS))?;
    let schema = lf.collect_schema()?;
    let columns: Vec<String> = schema.iter_names().map(|n| n.to_string()).collect();
    if let Some(c) = columns.iter().find(|c| c.starts_with("__")) {
        return Err(Error::MissingColumn {
            file: cfg.path.clone(),
            column: c.clone(),
            context: "names starting with `__` are reserved for panelready; rename the column"
                .into(),
        });
    }
    let missing = |column: &str, context: String| Error::MissingColumn {
        file: cfg.path.clone(),
        column: column.to_string(),
        context,
    };
    if !schema.contains(&cfg.entity) {
        return Err(missing(&cfg.entity, "the entity column".into()));
    }
    if !schema.contains(&cfg.period) {
        return Err(missing(&cfg.period, "the period column".into()));
    }
    for (canonical, raw) in &cfg.rules.file.columns {
        if !schema.contains(raw) {
            return Err(missing(
                raw,
                format!("mapped from `{canonical}` in [columns]"),
            ));
        }
    }
    // Read once. Column types are guessed from the first rows; if a later row does not fit
    // (a decimal in a column of whole numbers, say), read again guessing from every row.
    let df = match lf.with_row_index(ROW, Some(1)).collect() {
        Ok(df) => df,
        Err(_) if cfg.format == InputFormat::Csv => scan(&cfg.path, cfg.format, None)?
            .with_row_index(ROW, Some(1))
            .collect()?,
        Err(e) => return Err(e.into()),
    };
    let period_dtype = df
        .schema()
        .get(&cfg.period)
        .cloned()
        .unwrap_or(DataType::Null);
    check_period(&df, cfg, &period_dtype)?;
    let df = df
        .lazy()
        .with_columns([
            col(cfg.entity.as_str()).cast(DataType::String),
            period_as_int(&cfg.period, &period_dtype),
        ])
        .collect()?;
    Ok(Loaded {
        rows: df.height() as u64,
        df,
        columns,
    })
}

/// Rows used to guess CSV column types before falling back to the whole file.
const INFER_ROWS: usize = 10_000;

fn scan(path: &Path, format: InputFormat, infer: Option<usize>) -> Result<LazyFrame> {
    let pl_path = PlRefPath::try_from_path(path)?;
    if !path.exists() {
        return Err(Error::Io {
            path: path.to_path_buf(),
            source: std::io::Error::from(std::io::ErrorKind::NotFound),
        });
    }
    let lf = match format {
        InputFormat::Csv => LazyCsvReader::new(pl_path)
            .with_has_header(true)
            .with_infer_schema_length(infer)
            .finish()?,
        InputFormat::Parquet => LazyFrame::scan_parquet(pl_path, ScanArgsParquet::default())?,
    };
    Ok(lf)
}

/// Strings are parsed strictly; floats must be whole numbers.
fn period_as_int(period: &str, dtype: &DataType) -> Expr {
    let c = col(period);
    match dtype {
        DataType::String => c.str().strip_chars(lit(NULL)).cast(DataType::Int64),
        _ => c.cast(DataType::Int64),
    }
}

/// Fail with the first row whose period is present but not a whole number.
fn check_period(df: &DataFrame, cfg: &InputConfig, dtype: &DataType) -> Result<()> {
    let c = col(cfg.period.as_str());
    let bad = match dtype {
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
    Err(Error::NonIntegerPeriod {
        file: cfg.path.clone(),
        column: cfg.period.clone(),
        row: row.unwrap_or(0),
        value: value.unwrap_or_else(|| dtype.to_string()),
    })
}
