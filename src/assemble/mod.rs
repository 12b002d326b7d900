//! Several raw files into one panel: further tables (`[[join]]`) read and checked before the
//! main file, then joined onto the panel after its key steps, each with a match report. Rows
//! of a joined table that match no panel row, and the copies and repeats it had to drop, go to
//! the rejects ledger under the table's file name.

use std::path::{Path, PathBuf};

use polars::prelude::*;

use crate::clean::{self, Keys, REASON, RELATED, STEP};
use crate::config::CsvOptions;
use crate::load::ROW;
use crate::report::JoinLine;
use crate::rules::{JoinSpec, RepeatedKeys, Rules, Unmatched};
use crate::{Error, Result};

mod join;
mod sorted;

pub use join::{join, ledger, Joined};

/// The internal column holding the file a ledger row came from (`source_file` in the output).
pub const FILE: &str = "__file";

/// A joined table, read and checked, its keys unique.
pub struct Table {
    /// Where it was read from.
    pub path: PathBuf,
    /// Its bytes' SHA-256, for the manifest.
    pub sha256: String,
    /// The columns matched, as named in the panel.
    pub on: Vec<String>,
    /// The columns brought in, as named in the panel.
    pub brought: Vec<String>,
    /// Rows read.
    pub rows: u64,
    /// One row per key: `ROW` (its row in the file), the `on` columns, the brought columns.
    df: DataFrame,
    /// Rows set aside while reading (missing key, exact copy, repeated key): `ROW`, the `on`
    /// columns, `STEP`, `REASON`, `RELATED`.
    set_aside: DataFrame,
    missing_keys: u64,
    exact_copies: u64,
    repeated_keys: u64,
    drop_unmatched: bool,
    /// Its format.
    format: crate::config::InputFormat,
    /// What reading it had to decide (numbers with missing-value markers), one sentence each.
    pub notes: Vec<String>,
}

impl Table {
    /// The file's name, as the report and the ledger give it.
    pub fn name(&self) -> String {
        self.path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| self.path.display().to_string())
    }

    /// Its columns brought in, for naming a cell of one that is not a number.
    pub(crate) fn source(&self) -> crate::load::Source<'_> {
        crate::load::Source {
            file: &self.path,
            frame: &self.df,
            columns: &self.brought,
            format: self.format,
        }
    }
}

/// What kind of table `on` makes it, in the report's words.
fn kind(on: &[String], entity: &str, period: &str) -> &'static str {
    let has = |c: &str| on.iter().any(|o| o == c);
    match (has(entity), has(period), on.len()) {
        (true, true, 2) => "entity-period table",
        (true, false, 1) => "entity table",
        (false, true, 1) => "period table",
        (false, true, _) => "group-period table",
        (true, _, _) => "entity table with groups",
        _ => "group table",
    }
}

/// The folder names in the rules file are relative to.
pub fn rules_dir(rules: &Rules) -> PathBuf {
    rules
        .path
        .as_deref()
        .and_then(Path::parent)
        .map(Path::to_path_buf)
        .unwrap_or_default()
}

fn setting(message: String) -> Error {
    Error::Setting {
        setting: "[[join]]",
        message,
    }
}

/// Read every `[[join]]` table of the rules file, before the main file is read.
pub fn read_tables(
    rules: &Rules,
    csv: &CsvOptions,
    entity: &str,
    period: &str,
) -> Result<Vec<Table>> {
    let base = rules_dir(rules);
    rules
        .file
        .join
        .iter()
        .map(|spec| read_table(spec, &base.join(&spec.file), csv, entity, period))
        .collect()
}

fn read_table(
    spec: &JoinSpec,
    path: &Path,
    csv: &CsvOptions,
    entity: &str,
    period: &str,
) -> Result<Table> {
    let keep_first = spec.duplicates == RepeatedKeys::KeepFirst;
    let drop_unmatched = spec.unmatched == Unmatched::Drop;
    if spec.on.is_empty() {
        return Err(setting(format!(
            "`{}`: `on` names no column to match",
            spec.file
        )));
    }
    if let Some((_, c)) = spec
        .on
        .iter()
        .enumerate()
        .find(|(i, c)| spec.on[..*i].contains(c))
    {
        return Err(setting(format!("`{}`: `on` names `{c}` twice", spec.file)));
    }
    let format = crate::config::format_from_extension(path)?;
    let bytes = std::fs::read(path).map_err(Error::io(path))?;
    let sha256 = crate::load::sha256_hex(&bytes);
    drop(bytes);
    // The entity as text from the start, as in the main file (`00123` is not `123`).
    let entity_raw = spec
        .rename
        .iter()
        .find(|(_, to)| *to == entity)
        .map_or(entity, |(from, _)| from.as_str());
    let text: Vec<&str> = spec
        .on
        .iter()
        .any(|o| o == entity)
        .then_some(entity_raw)
        .into_iter()
        .collect();
    let (raw, read_notes) = crate::load::read_raw(path, format, csv, spec.sheet.as_deref(), &text)?;
    // Numbers with `NA`, `.` or `#N/A` for missing ones, as in the main file; the columns
    // matched on stay as read.
    // A cell a spreadsheet wrote as `="007"` holds `007`, as in the main file (the columns
    // matched on too, so that such keys meet the panel's).
    let (raw, formulas) = if format == crate::config::InputFormat::Csv {
        crate::load::formula_text(raw, None)?
    } else {
        (raw, Vec::new())
    };
    let (raw, notes) = if format == crate::config::InputFormat::Csv {
        let on: Vec<String> = raw
            .get_column_names()
            .into_iter()
            .map(|c| c.to_string())
            .filter(|c| spec.on.contains(spec.rename.get(c).unwrap_or(c)))
            .collect();
        let on: Vec<&str> = on.iter().map(String::as_str).collect();
        crate::load::numbers_with_markers(raw, &on, csv.decimal_comma)?
    } else {
        (raw, Vec::new())
    };
    let (raw, decimals) = crate::load::decimals_as_floats(raw, &[])?;
    let (raw, non_finite) = crate::load::non_finite_as_missing(raw, &[])?;
    let notes: Vec<String> = read_notes
        .into_iter()
        .chain(formulas)
        .chain(notes)
        .chain(decimals)
        .chain(non_finite)
        .collect();
    let missing = |column: &str, context: &str| Error::MissingColumn {
        file: path.to_path_buf(),
        column: column.to_string(),
        context: context.to_string(),
    };
    // A name the file has only with other spaces or letter case is pointed to.
    let near = |column: &str, context: &str, among: &[String]| {
        let context = match crate::error::near_name(column, among.iter().map(String::as_str)) {
            Some(hint) => format!("{context}; {hint}"),
            None => context.to_string(),
        };
        missing(column, &context)
    };
    let names: Vec<String> = raw
        .get_column_names()
        .iter()
        .map(|c| c.to_string())
        .collect();
    if let Some(c) = names.iter().find(|c| c.starts_with("__")) {
        return Err(missing(
            c,
            "names starting with `__` are reserved for panelready; rename the column",
        ));
    }
    for from in spec.rename.keys() {
        if !names.contains(from) {
            return Err(near(from, "named in `rename` of its [[join]]", &names));
        }
    }
    // Every column under its panel name.
    let renamed: Vec<String> = names
        .iter()
        .map(|c| spec.rename.get(c).cloned().unwrap_or_else(|| c.clone()))
        .collect();
    for (i, a) in renamed.iter().enumerate() {
        if renamed[..i].contains(a) {
            return Err(missing(a, "two columns of the file would take this name"));
        }
    }
    for o in &spec.on {
        if !renamed.contains(o) {
            return Err(near(
                o,
                "named in `on` of its [[join]] (after `rename`)",
                &renamed,
            ));
        }
    }
    let brought: Vec<String> = match &spec.columns {
        Some(list) => {
            for c in list {
                if !renamed.contains(c) {
                    return Err(near(c, "named in `columns` of its [[join]]", &renamed));
                }
                if spec.on.contains(c) {
                    return Err(setting(format!(
                        "`{}`: `{c}` is in both `on` and `columns`",
                        spec.file
                    )));
                }
            }
            list.clone()
        }
        None => renamed
            .iter()
            .filter(|c| !spec.on.contains(c))
            .cloned()
            .collect(),
    };
    if brought.is_empty() {
        return Err(setting(format!(
            "`{}`: no column to bring in besides `on`",
            spec.file
        )));
    }
    let rows = raw.height() as u64;
    let mut select: Vec<Expr> = vec![col(ROW)];
    for (raw_name, name) in names.iter().zip(&renamed) {
        if spec.on.contains(name) || brought.contains(name) {
            select.push(col(raw_name.as_str()).alias(name.as_str()));
        }
    }
    let df = raw
        .lazy()
        .with_row_index(ROW, Some(1))
        .select(select)
        .collect()?;
    // The entity as text, the period as a whole number, as the main file's keys are typed.
    let mut df = df;
    for o in &spec.on {
        if o == entity {
            df = cast_key(df, o, &DataType::String, path)?;
        } else if o == period {
            df = cast_key(df, o, &DataType::Int64, path)?;
        }
    }
    let on: Vec<Expr> = spec.on.iter().map(|c| col(c.as_str())).collect();
    let all: Vec<Expr> = spec
        .on
        .iter()
        .chain(&brought)
        .map(|c| col(c.as_str()))
        .collect();
    let key_missing = spec
        .on
        .iter()
        .map(|c| col(c.as_str()).is_null())
        .reduce(|a, b| a.or(b))
        .expect("`on` is not empty");
    let mut marked = df
        .lazy()
        .with_columns([
            key_missing.alias("__missing"),
            col(ROW).min().over(on.clone())?.alias("__first"),
            len().over(on.clone())?.alias("__n"),
        ])
        .collect()?;
    // An exact copy repeats its row's key, so only rows whose key repeats (usually none) are
    // compared on every column; every other row is its own first copy. At 9 million rows the
    // window over every column took about a second.
    let repeating = marked
        .clone()
        .lazy()
        .filter(col("__n").gt(lit(1)))
        .select([
            col(ROW),
            col(ROW).min().over(all.clone())?.alias("__copy_of"),
        ])
        .collect()?;
    let copy_of: PlHashMap<IdxSize, IdxSize> = repeating
        .column(ROW)?
        .idx()?
        .into_no_null_iter()
        .zip(repeating.column("__copy_of")?.idx()?.into_no_null_iter())
        .collect();
    let copies: IdxCa = marked
        .column(ROW)?
        .idx()?
        .apply_values(|r| copy_of.get(&r).copied().unwrap_or(r));
    marked.with_column(copies.into_column().with_name("__copy_of".into()))?;
    let tag = |filter: Expr, step: &str, reason: &str, related: Expr| -> Result<DataFrame> {
        let mut select = vec![col(ROW)];
        select.extend(on.iter().cloned());
        select.extend([
            lit(step.to_string()).alias(STEP),
            lit(reason.to_string()).alias(REASON),
            related.cast(IDX_DTYPE).alias(RELATED),
        ]);
        Ok(marked
            .clone()
            .lazy()
            .filter(filter)
            .select(select)
            .collect()?)
    };
    let present = col("__missing").not();
    let missing_rows = tag(
        col("__missing"),
        "join: missing key",
        "a column of `on` is empty",
        lit(NULL),
    )?;
    let copies = tag(
        present.clone().and(col("__copy_of").neq(col(ROW))),
        "join: exact copies",
        "an exact copy of an earlier row",
        col("__copy_of"),
    )?;
    let distinct = present.and(col("__copy_of").eq(col(ROW)));
    let repeats = tag(
        distinct.clone().and(col("__first").neq(col(ROW))),
        "join: repeated key",
        "its key repeats an earlier row with other values (keep-first)",
        col("__first"),
    )?;
    if repeats.height() > 0 && !keep_first {
        let first = repeats.column(RELATED)?.cast(&DataType::Int64)?;
        return Err(Error::Unreadable {
            file: path.to_path_buf(),
            at: crate::load::first_row(&repeats)?,
            message: format!(
                "{} rows repeat the key ({}) of an earlier row with other values (the first: \
                 row {}); a joined table needs one row per key, or `duplicates = \"keep-first\"` \
                 in its [[join]]",
                repeats.height(),
                spec.on.join(", "),
                first.i64()?.get(0).unwrap_or(0)
            ),
        });
    }
    let kept = marked
        .lazy()
        .filter(distinct.and(col("__first").eq(col(ROW))))
        .drop(cols(["__missing", "__copy_of", "__first", "__n"]))
        .collect()?;
    let (missing_keys, exact_copies, repeated_keys) = (
        missing_rows.height() as u64,
        copies.height() as u64,
        repeats.height() as u64,
    );
    let mut set_aside = missing_rows;
    set_aside.vstack_mut(&copies)?;
    set_aside.vstack_mut(&repeats)?;
    Ok(Table {
        path: path.to_path_buf(),
        sha256,
        on: spec.on.clone(),
        brought,
        rows,
        df: kept,
        set_aside,
        missing_keys,
        exact_copies,
        repeated_keys,
        drop_unmatched,
        format,
        notes,
    })
}

/// Cast a key column to `dtype`; a value that does not convert is an error naming its row.
fn cast_key(df: DataFrame, column: &str, dtype: &DataType, path: &Path) -> Result<DataFrame> {
    if df.column(column)?.dtype() == dtype {
        return Ok(df);
    }
    let source = df.column(column)?.dtype().clone();
    // Text is trimmed first; a whole number written as a decimal (2015.0) is accepted.
    let text_first = matches!(source, DataType::String) && dtype.is_integer();
    let converted = if text_first {
        col(column)
            .str()
            .strip_chars(lit(NULL))
            .cast(DataType::Float64)
    } else {
        col(column)
    };
    let converted = if dtype.is_integer() && (text_first || source.is_float()) {
        let f = converted.cast(DataType::Float64);
        when(f.clone().eq(f.clone().floor()))
            .then(f.cast(dtype.clone()))
            .otherwise(lit(NULL).cast(dtype.clone()))
    } else {
        converted.cast(dtype.clone())
    };
    let marked = df.lazy().with_column(converted.alias("__cast")).collect()?;
    let bad = marked
        .clone()
        .lazy()
        .filter(col(column).is_not_null().and(col("__cast").is_null()))
        .select([col(ROW), col(column).cast(DataType::String)])
        .limit(1)
        .collect()?;
    if bad.height() > 0 {
        return Err(Error::Unreadable {
            file: path.to_path_buf(),
            at: crate::load::first_row(&bad)?,
            message: format!(
                "`{column}` holds `{}`, which does not match the panel's `{column}` ({})",
                bad.column(column)?.str()?.get(0).unwrap_or(""),
                if dtype.is_integer() {
                    "whole numbers"
                } else {
                    "its type"
                }
            ),
        });
    }
    Ok(marked
        .lazy()
        .drop(cols([column]))
        .rename(["__cast"], [column], true)
        .collect()?)
}
