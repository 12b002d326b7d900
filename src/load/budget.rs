//! The memory budget: before the panel is read, an estimate of the peak memory holding it
//! takes (rows from the file, columns by type, the derived variables), against the budget
//! `--memory-budget` sets.

use std::path::Path;

use polars::prelude::*;

use crate::config::{InputConfig, InputFormat};
use crate::{Error, Result};

/// Peak memory of a run beyond the panel itself: the program, the engine's threads, the
/// report. Measured on the bench panel at 1 M and 10 M rows (BENCHMARKS.md), with
/// `PEAK_PER_PANEL_BYTE`.
const PEAK_FIXED: f64 = 256.0 * 1024.0 * 1024.0;

/// Peak memory per byte of the panel as held (raw and derived columns, repeating text as
/// codes): the panel, the columns that cleaning replaces while it holds both, the kernels'
/// buffers. Fitted on the bench panel (4 December 2026, peak RSS of `build` beyond
/// `PEAK_FIXED` over the panel as estimated here — 204 bytes a row: 1.05 at 10 M rows (2,303
/// MiB), 1.08 at 20 M (4,456 MiB) and at 100 M (21,237 MiB); with text held as views the
/// same code had 0.98 at 10 M, earlier code up to 1.38) and set above the highest, so that
/// the estimate errs on the safe side (6 % above the peak at 100 M).
const PEAK_PER_PANEL_BYTE: f64 = 1.15;

/// Peak memory per byte of a CSV input's panel as it is read (every column as read, text as
/// views, the row number; no derived variable yet): the file's pages while it is parsed, the
/// parsed chunks, then one column more while each is joined into one chunk (`load::contiguous`).
/// Fitted on the bench panel's CSV file (4 December 2026, peak RSS of `audit` beyond
/// `PEAK_FIXED` over the panel as read here, 180 bytes a row: 1.58 at 10 M rows, 2,979 MiB;
/// 0.87 at 1 M, where the fixed part is most of it) and set above it. Since its whole numbers
/// are read as text (5 December 2026, 196 bytes a row, `founded` as text): 1.52 at 10 M,
/// 3,089 MiB.
const CSV_READ_PER_BYTE: f64 = 1.7;

/// Memory model readiness takes beside the panel, per row and per regressor (the lag of the
/// outcome counted): the sample's values and keys, three estimators' residuals, the first
/// differences of the serial-correlation test. Measured on the bench panel at 10 M rows with
/// period effects (4 December 2026: 127 bytes a row beyond the run without a model with two
/// regressors, 143 with five) and set above.
const MODEL_ROW_BYTES: f64 = 112.0;
const MODEL_REGRESSOR_BYTES: f64 = 16.0;

/// Bytes a row of text held as codes takes (`core::hold_text_as_codes`).
const CODE_BYTES: f64 = 4.0;

/// The text columns other than the keys whose values repeat, which the run will hold as
/// codes: judged as the run judges them (`core::repeats`), on the first, middle and last rows
/// of a Parquet input and on the first rows of a CSV file (the only ones read here).
fn coded_text(
    cfg: &InputConfig,
    lf: &LazyFrame,
    schema: &Schema,
    rows: u64,
) -> Result<Vec<PlSmallStr>> {
    use crate::core::{repeats_in, sample_starts, TEXT_SAMPLE};
    let text: Vec<PlSmallStr> = schema
        .iter()
        .filter(|(name, dtype)| {
            **dtype == DataType::String && **name != cfg.entity && **name != cfg.period
        })
        .map(|(name, _)| name.clone())
        .collect();
    if text.is_empty() {
        return Ok(text);
    }
    let starts = match cfg.format {
        InputFormat::Parquet => sample_starts(rows as usize),
        _ => vec![0],
    };
    let samples = starts
        .iter()
        .map(|start| {
            lf.clone()
                .select(
                    text.iter()
                        .map(|name| col(name.clone()))
                        .collect::<Vec<_>>(),
                )
                .slice(*start as i64, TEXT_SAMPLE as IdxSize)
                .collect()
        })
        .collect::<PolarsResult<Vec<DataFrame>>>()?;
    let mut coded = Vec::new();
    for name in text {
        let mut repeats = true;
        for sample in &samples {
            repeats &= repeats_in(sample.column(&name)?)?;
        }
        if repeats {
            coded.push(name);
        }
    }
    Ok(coded)
}

/// Bytes one value of a column of type `dtype` takes in memory (text: the view and a short
/// string).
fn value_bytes(dtype: &DataType) -> f64 {
    match dtype {
        DataType::Boolean | DataType::Int8 | DataType::UInt8 => 1.0,
        DataType::Int16 | DataType::UInt16 => 2.0,
        DataType::Int32 | DataType::UInt32 | DataType::Float32 | DataType::Date => 4.0,
        DataType::String | DataType::Binary => 24.0,
        _ => 8.0,
    }
}

/// A size for people: `800 bytes`, `12 KiB`, `512 MiB`, `3.9 GiB`.
fn human_bytes(bytes: f64) -> String {
    let k = 1024.0;
    if bytes < k {
        format!("{bytes:.0} bytes")
    } else if bytes < k * k {
        format!("{:.0} KiB", bytes / k)
    } else if bytes < k * k * k {
        format!("{:.0} MiB", bytes / (k * k))
    } else {
        format!("{:.1} GiB", bytes / (k * k * k))
    }
}

/// Stop before reading when holding the panel would take more than `budget` bytes: the rows
/// from the Parquet metadata, or for a CSV file from its size and the length of its first
/// lines; each column's width from its type, the derived variables as numbers, and a declared
/// model's sample beside it; for a CSV file the reading itself too, if it takes more. A compressed CSV file or a spreadsheet is not
/// estimated.
pub(super) fn check_budget(
    cfg: &InputConfig,
    lf: &LazyFrame,
    schema: &Schema,
    budget: u64,
) -> Result<()> {
    let rows = match cfg.format {
        InputFormat::Parquet => {
            let n = lf
                .clone()
                .select([len().cast(DataType::UInt64)])
                .collect()?;
            n.columns()[0].u64()?.get(0).unwrap_or(0)
        }
        InputFormat::Csv => match csv_rows(&cfg.path)? {
            Some(rows) => rows,
            None => return Ok(()),
        },
        InputFormat::Spreadsheet => return Ok(()),
    };
    let derived = cfg.rules.derive.len();
    let coded = coded_text(cfg, lf, schema, rows)?;
    let width: f64 = schema
        .iter()
        .map(|(name, dtype)| {
            if coded.contains(name) {
                CODE_BYTES
            } else {
                value_bytes(dtype)
            }
        })
        .sum::<f64>()
        + 8.0 * derived as f64
        + std::mem::size_of::<IdxSize>() as f64;
    let mut needed = PEAK_FIXED + PEAK_PER_PANEL_BYTE * rows as f64 * width;
    if let Some(model) = &cfg.rules.file.model {
        let k = model.regressors.len() + usize::from(model.lagged_outcome);
        needed += rows as f64 * (MODEL_ROW_BYTES + MODEL_REGRESSOR_BYTES * k as f64);
    }
    if cfg.format == InputFormat::Csv {
        // Reading a CSV file can take more than holding the panel afterwards; its whole
        // numbers but the keys are read as text (`load::whole`).
        let mut keys = vec![cfg.entity.as_str(), cfg.period.as_str()];
        keys.extend(cfg.rules.file.panel.year_end.as_deref());
        let (text_first, _) = super::whole::as_text_first(schema, &keys);
        let as_read: f64 = text_first.iter_values().map(value_bytes).sum::<f64>()
            + std::mem::size_of::<IdxSize>() as f64;
        needed = needed.max(PEAK_FIXED + CSV_READ_PER_BYTE * rows as f64 * as_read);
    }
    if needed > budget as f64 {
        return Err(Error::MemoryBudget {
            file: cfg.path.clone(),
            rows,
            columns: schema.len() + derived,
            needed: human_bytes(needed),
            budget: human_bytes(budget as f64),
        });
    }
    Ok(())
}

/// The data rows of an uncompressed CSV file, estimated from its size and its first lines;
/// none for a compressed file.
fn csv_rows(path: &Path) -> Result<Option<u64>> {
    use std::io::Read;
    let size = std::fs::metadata(path).map_err(Error::io(path))?.len();
    let mut head = Vec::new();
    std::fs::File::open(path)
        .map_err(Error::io(path))?
        .take(1 << 20)
        .read_to_end(&mut head)
        .map_err(Error::io(path))?;
    // gzip and zstd start with these bytes.
    if head.starts_with(&[0x1f, 0x8b]) || head.starts_with(&[0x28, 0xb5, 0x2f, 0xfd]) {
        return Ok(None);
    }
    let lines = head.iter().filter(|b| **b == b'\n').count().max(1) as u64;
    let per_line = head.len() as u64 / lines;
    Ok(Some((size / per_line.max(1)).saturating_sub(1)))
}
