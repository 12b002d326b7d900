//! Reading the raw panel: CSV or Parquet into a `LazyFrame` with typed keys and the original
//! row number, after checking that the key columns exist and the period holds integers.

use std::path::Path;
use std::sync::Arc;

use polars::prelude::*;

use crate::config::{holds_parquet, CsvOptions, Encoding, InputConfig, InputFormat};
use crate::{Error, Result};

mod budget;
mod contiguous;
mod csv_file;
mod digest;
mod fields;
mod finite;
mod footer;
mod formula;
mod markers;
mod not_numbers;
mod period;
mod sheet;
mod sniff;
mod whole;

use budget::check_budget;
use csv_file::{
    csv_position, csv_shape, names_as_written, not_utf16, repeated_header_name, unclosed_quote,
    Transcoded,
};
pub use digest::sha256_hex;
pub(crate) use finite::non_finite_as_missing;
pub(crate) use formula::formula_text;
pub(crate) use markers::numbers_with_markers;
pub(crate) use not_numbers::{text_among_numbers, Source};
pub(crate) use period::IsoDate;
use period::{check_period, check_window, fiscal_year, period_as_int};

/// A column read as text for its codes written with leading zeros: its name, and the data row
/// and value of its first such code.
pub(super) type CodeColumn = (String, usize, String);

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
    /// The sheet read, for a spreadsheet.
    pub sheet: Option<String>,
    /// What reading had to decide (spreadsheet conversions), one sentence each.
    pub notes: Vec<String>,
    /// With `[panel] year_end`: entities whose year-end month changed.
    pub year_end_changes: Option<crate::report::YearEndChanges>,
}

/// Read a raw file whole, without checking keys (for a joined table, and for `rules draft`,
/// which guesses them); the CSV columns named in `text` are read as text, and so are a CSV
/// file's codes written with leading zeros. Returns what reading had to decide, one sentence
/// each.
pub fn read_raw(
    path: &Path,
    format: InputFormat,
    csv: &CsvOptions,
    sheet: Option<&str>,
    text: &[&str],
) -> Result<(DataFrame, Vec<String>)> {
    if format == InputFormat::Spreadsheet {
        let sheet = sheet::read(path, sheet, text)?;
        return Ok((sheet.df, sheet.notes));
    }
    let utf8 = match (format, csv.encoding) {
        (InputFormat::Csv, Encoding::Windows1252) => Some(Transcoded::new(path)?),
        _ => None,
    };
    let source = utf8.as_ref().map_or(path, |t| t.path.as_path());
    let coded = match format {
        InputFormat::Csv => leading_zero_columns(source, path, csv, text)?,
        _ => Vec::new(),
    };
    let text: Vec<&str> = text
        .iter()
        .copied()
        .chain(coded.iter().map(|(name, _, _)| name.as_str()))
        .collect();
    // Whole numbers read as text and made numbers after, and a column of decimals with a cell
    // the reader cannot parse read again as text, as `load` reads them.
    let read = |infer| -> Result<PolarsResult<_>> {
        let lf = scan(source, path, format, infer, csv, &text)?;
        if format != InputFormat::Csv {
            return Ok(lf.collect().map(|df| (df, Vec::new())));
        }
        let schema = lf
            .clone()
            .collect_schema()
            .map_err(|e| unreadable(path, format, csv.delimiter, e))?;
        let (_, guessed) = whole::as_text_first(&schema, &[]);
        let as_text: Vec<&str> = text
            .iter()
            .copied()
            .chain(guessed.iter().map(|(name, _)| name.as_str()))
            .collect();
        let mut failed = None;
        let read = whole::with_decimals_as_text(&schema, |decimals| {
            let mut as_text = as_text.clone();
            as_text.extend(
                decimals
                    .iter()
                    .filter_map(|i| schema.get_at_index(*i).map(|(name, _)| name.as_str())),
            );
            match scan(source, path, format, infer, csv, &as_text) {
                Ok(lf) => lf.collect(),
                Err(e) => {
                    failed = Some(e);
                    // Not the reader's words, so no retry: the scan's own error is returned below.
                    Err(PolarsError::NoData("not scanned".into()))
                }
            }
        });
        if let Some(e) = failed {
            return Err(e);
        }
        Ok(read.and_then(|df| whole::whole_numbers(df, &guessed)))
    };
    let (df, coded_further) = match read(Some(INFER_ROWS))? {
        Ok(read) => read,
        Err(_) if format == InputFormat::Csv => {
            read(None)?.map_err(|e| unreadable(path, format, csv.delimiter, e))?
        }
        Err(e) => return Err(unreadable(path, format, csv.delimiter, e)),
    };
    if df.height() == 0 {
        return Err(Error::NoRows {
            file: path.to_path_buf(),
        });
    }
    let (df, mut notes) = csv_shape(df, format, source, path, csv.delimiter)?;
    notes.extend(coded_notes(&coded));
    notes.extend(coded_notes(&coded_further));
    Ok((df, notes))
}

/// The columns of a CSV file (at `source`, named `input`) but those in `keep` that hold codes
/// written with leading zeros among their first rows (judged as the column types are), each
/// with the data row and value of the first such code.
fn leading_zero_columns(
    source: &Path,
    input: &Path,
    csv: &CsvOptions,
    keep: &[&str],
) -> Result<Vec<CodeColumn>> {
    let format = InputFormat::Csv;
    let sample = scan(source, input, format, Some(0), csv, &[])?
        .slice(0, INFER_ROWS as IdxSize)
        .collect()
        .map_err(|e| unreadable(input, format, csv.delimiter, e))?;
    markers::leading_zero_codes(&sample, keep)
}

/// The input notes of the columns [`leading_zero_columns`] found.
fn coded_notes(coded: &[CodeColumn]) -> Vec<String> {
    coded
        .iter()
        .map(|(name, row, value)| {
            format!(
                "column `{name}` read as text: its values are codes written with leading zeros \
                 (data row {row} holds `{value}`)"
            )
        })
        .collect()
}

/// Read the input named in `cfg` and check its keys. `joined` names the columns that joined
/// tables will bring (a `[columns]` mapping may point to them). A Parquet input's rows read so
/// far show on `progress`, when given.
pub fn load(
    cfg: &InputConfig,
    joined: &[String],
    progress: Option<&crate::progress::Progress>,
) -> Result<Loaded> {
    // A Windows-1252 (Latin-1) file is read through a UTF-8 copy in the temporary folder.
    let utf8 = match (cfg.format, cfg.csv.encoding) {
        (InputFormat::Csv, Encoding::Windows1252) => Some(Transcoded::new(&cfg.path)?),
        _ => None,
    };
    let source = utf8
        .as_ref()
        .map_or(cfg.path.as_path(), |t| t.path.as_path());
    let entity = [cfg.entity.as_str()];
    // Codes written with leading zeros (an industry code `0100`, a postal code) are text, as
    // the entity is; judged on the first rows, as the column types are.
    let coded = match cfg.format {
        InputFormat::Csv => {
            let mut keys = vec![cfg.entity.as_str(), cfg.period.as_str()];
            keys.extend(cfg.rules.file.panel.year_end.as_deref());
            leading_zero_columns(source, &cfg.path, &cfg.csv, &keys)?
        }
        _ => Vec::new(),
    };
    let text: Vec<&str> = entity
        .into_iter()
        .chain(coded.iter().map(|(name, _, _)| name.as_str()))
        .collect();
    let scan = |infer| scan(source, &cfg.path, cfg.format, infer, &cfg.csv, &text);
    let sheet = match cfg.format {
        InputFormat::Spreadsheet => Some(sheet::read(&cfg.path, cfg.sheet.as_deref(), &entity)?),
        _ => None,
    };
    let mut lf = match &sheet {
        Some(s) => s.df.clone().lazy(),
        None => scan(Some(INFER_ROWS))?,
    };
    let schema = lf
        .collect_schema()
        .map_err(|e| unreadable(&cfg.path, cfg.format, cfg.csv.delimiter, e))?;
    let columns: Vec<String> = schema.iter_names().map(|n| n.to_string()).collect();
    if cfg.format == InputFormat::Csv {
        if let Some(column) = repeated_header_name(source, cfg.csv.delimiter)? {
            return Err(Error::DuplicateColumn {
                file: cfg.path.clone(),
                column,
            });
        }
    }
    if let Some(c) = columns.iter().find(|c| c.starts_with("__")) {
        return Err(Error::MissingColumn {
            file: cfg.path.clone(),
            column: c.clone(),
            context: "names starting with `__` are reserved for panelready; rename the column"
                .into(),
        });
    }
    if let Some((name, kind)) = schema.iter().find_map(|(name, dtype)| {
        let kind = match dtype {
            DataType::List(_) | DataType::Array(..) => "lists",
            DataType::Struct(_) => "records of several fields",
            DataType::Duration(_) => "durations",
            DataType::Binary | DataType::BinaryOffset => "raw bytes",
            _ => return None,
        };
        Some((name, kind))
    }) {
        return Err(Error::ColumnKind {
            file: cfg.path.clone(),
            column: name.to_string(),
            kind,
        });
    }
    let missing = |column: &str, context: String| Error::MissingColumn {
        file: cfg.path.clone(),
        column: column.to_string(),
        context: match crate::error::near_name(column, schema.iter_names().map(|n| n.as_str()))
            .or_else(|| {
                crate::error::other_delimiter(column, schema.iter_names().map(|n| n.as_str()))
            }) {
            Some(near) => format!("{context}; {near}"),
            None => context,
        },
    };
    if !schema.contains(&cfg.entity) {
        return Err(missing(&cfg.entity, "the entity column".into()));
    }
    match &cfg.rules.file.panel.year_end {
        None if !schema.contains(&cfg.period) => {
            return Err(missing(&cfg.period, "the period column".into()));
        }
        Some(date) if !schema.contains(date) => {
            return Err(missing(date, "named in `[panel] year_end`".into()));
        }
        Some(_) if schema.contains(&cfg.period) => {
            return Err(Error::Setting {
                setting: "[panel] year_end",
                message: format!(
                    "the period is derived from the year-end date, but the data already has a \
                     column `{}`: name the derived period something else in `[panel] period`",
                    cfg.period
                ),
            });
        }
        _ => {}
    }
    for (canonical, raw) in &cfg.rules.file.columns {
        if !schema.contains(raw) && !joined.contains(raw) {
            return Err(missing(
                raw,
                format!("mapped from `{canonical}` in [columns]"),
            ));
        }
    }
    if let Some(budget) = cfg.memory_budget {
        check_budget(cfg, &lf, &schema, budget)?;
    }
    // Read once. Column types are guessed from the first rows; the columns guessed to be
    // whole numbers are read as text and made numbers after, unless a code written with
    // leading zeros turns up further down (`whole`). A column of decimals with a cell the
    // reader cannot parse further down (`NA`) is read again as text, for the marker pass; if
    // a later row does not fit otherwise, read again guessing the types from every row.
    let mut keys = vec![cfg.entity.as_str(), cfg.period.as_str()];
    keys.extend(cfg.rules.file.panel.year_end.as_deref());
    let read_csv = |schema: &Schema| {
        whole::with_decimals_as_text(schema, |decimals| {
            let mut schema = schema.clone();
            for i in decimals {
                schema.set_dtype_at_index(*i, DataType::String);
            }
            let (as_read, guessed) = whole::as_text_first(&schema, &keys);
            let mut coded = Vec::new();
            contiguous::read_csv(source, &as_read, &cfg.csv, ROW, |c| {
                whole::settle(c, &guessed, &mut coded)
            })
            .map(|df| (df, coded))
        })
    };
    let read = match cfg.format {
        InputFormat::Parquet => contiguous::collect(lf, ROW, progress).map(|df| (df, Vec::new())),
        InputFormat::Csv => read_csv(&schema),
        InputFormat::Spreadsheet => lf
            .with_row_index(ROW, Some(1))
            .collect()
            .map(|df| (df, Vec::new())),
    };
    let (df, coded_further) = match read {
        Ok(read) => read,
        // And if that fails too, every column as text: the marker pass below reads the
        // numbers back and names what was unusual.
        Err(_) if cfg.format == InputFormat::Csv => scan(None)?
            .collect_schema()
            .and_then(|every_row| read_csv(&every_row))
            .or_else(|e| {
                scan(Some(0))
                    .map_err(|_| e)?
                    .collect_schema()
                    .and_then(|text| read_csv(&text))
            })
            .map_err(|e| unreadable(&cfg.path, cfg.format, cfg.csv.delimiter, e))?,
        Err(e) => return Err(unreadable(&cfg.path, cfg.format, cfg.csv.delimiter, e)),
    };
    if df.height() == 0 {
        return Err(Error::NoRows {
            file: cfg.path.clone(),
        });
    }
    let (df, unnamed) = csv_shape(df, cfg.format, source, &cfg.path, cfg.csv.delimiter)?;
    let columns: Vec<String> = columns
        .into_iter()
        .filter(|c| df.schema().contains(c))
        .collect();
    // A CSV cell a spreadsheet wrote as `="007"`: the text it holds, noted. Then a CSV column
    // of numbers with `NA`, `.` or `#N/A` for missing ones: numbers, noted.
    let (df, formulas, marked) = if cfg.format == InputFormat::Csv {
        let (df, formulas) = formula::formula_text(df, Some(ROW))?;
        // The period too (whole numbers only: a marker there is a missing period).
        let text = [
            cfg.entity.as_str(),
            cfg.rules.file.panel.year_end.as_deref().unwrap_or(""),
        ];
        let (period, comma) = (Some(cfg.period.as_str()), cfg.csv.decimal_comma);
        let (df, marked) = markers::numbers_with_markers_and(df, &text, period, comma)?;
        (df, formulas, marked)
    } else {
        (df, Vec::new(), Vec::new())
    };
    let (df, columns, year_end_changes) = match &cfg.rules.file.panel.year_end {
        Some(date) => {
            let cutoff = cfg.rules.file.panel.year_end_cutoff.unwrap_or(5);
            fiscal_year(df, columns, cfg, date, cutoff)?
        }
        None => (df, columns, None),
    };
    let period_dtype = df
        .schema()
        .get(&cfg.period)
        .cloned()
        .unwrap_or(DataType::Null);
    check_period(&df, cfg, &period_dtype)?;
    // A column with no value at all carries no type; the engine guesses text (CSV) or null.
    // Read it as numbers, so that arithmetic on it gives missing values, not a type error.
    let mut casts = vec![
        col(cfg.entity.as_str()).cast(DataType::String),
        period_as_int(&cfg.period, &period_dtype),
    ];
    for c in df.columns() {
        let name = c.name().as_str();
        let untyped = matches!(c.dtype(), DataType::String | DataType::Null);
        if untyped && name != cfg.entity && name != cfg.period && c.null_count() == c.len() {
            casts.push(col(name).cast(DataType::Float64));
        }
    }
    let df = df.lazy().with_columns(casts).collect()?;
    let (df, decimals) = decimals_as_floats(df, &[&cfg.entity, &cfg.period])?;
    let (df, non_finite) = non_finite_as_missing(df, &[&cfg.entity, &cfg.period])?;
    let (sheet, mut notes) = sheet.map_or((None, Vec::new()), |s| (Some(s.name), s.notes));
    notes.extend(check_window(&df, cfg)?);
    notes.extend(unnamed);
    notes.extend(coded_notes(&coded));
    notes.extend(coded_notes(&coded_further));
    notes.extend(formulas);
    notes.extend(marked);
    notes.extend(markers::entity_markers(&df, &cfg.entity)?);
    notes.extend(decimals);
    notes.extend(non_finite);
    Ok(Loaded {
        rows: df.height() as u64,
        df,
        columns,
        sheet,
        notes,
        year_end_changes,
    })
}

/// `df` with each decimal column not in `keep` (a Parquet file written from a database or a
/// money type) as floating-point numbers, and a note for each. The engine's decimals are
/// neither floats nor integers, so every check passed such a column by as if it were text.
pub(crate) fn decimals_as_floats(df: DataFrame, keep: &[&str]) -> Result<(DataFrame, Vec<String>)> {
    let mut casts = Vec::new();
    let mut notes = Vec::new();
    for (name, dtype) in df.schema().iter() {
        if let DataType::Decimal(precision, scale) = dtype {
            if !keep.contains(&name.as_str()) {
                casts.push(col(name.clone()).cast(DataType::Float64));
                notes.push(format!(
                    "column `{name}`: decimal numbers (precision {precision}, scale {scale}) read \
                     as floating-point numbers, exact to about 15 significant digits"
                ));
            }
        }
    }
    if casts.is_empty() {
        return Ok((df, notes));
    }
    Ok((df.lazy().with_columns(casts).collect()?, notes))
}

/// ", row N" for the first row of `bad` (a frame with the row-number column), for messages.
pub(crate) fn first_row(bad: &DataFrame) -> Result<String> {
    let row = bad.column(ROW)?.cast(&DataType::Int64)?;
    Ok(format!(", row {}", row.i64()?.get(0).unwrap_or(0)))
}

/// A read error as one line naming the file and, for CSV, the row where it can be found: the
/// first byte that is not UTF-8, or a quote that is never closed.
fn unreadable(path: &Path, format: InputFormat, delimiter: char, e: PolarsError) -> Error {
    let message = crate::error::one_line(&e.to_string());
    // A file of another kind than its name says: that is what to say, not the engine's words.
    if let Some(kind) = sniff::other_kind(path, format) {
        return Error::Unreadable {
            file: path.to_path_buf(),
            at: String::new(),
            message: kind,
        };
    }
    if format != InputFormat::Csv {
        let message = match format == InputFormat::Parquet && sniff::cut_short_parquet(path) {
            true => "the file is cut short: it begins as a Parquet file but lacks the end \
                     every Parquet file has (copy or download it again)"
                .to_string(),
            false => message,
        };
        return Error::Unreadable {
            file: path.to_path_buf(),
            at: String::new(),
            message,
        };
    }
    // The file's text, a compressed one decompressed as the engine read it (its compressed
    // bytes were taken for text that is not UTF-8).
    let text = csv_file::open_text(path).and_then(|mut t| {
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut t, &mut bytes).map(|_| bytes)
    });
    let Ok(bytes) = text else {
        return Error::Unreadable {
            file: path.to_path_buf(),
            at: String::new(),
            message,
        };
    };
    if let Err(bad) = std::str::from_utf8(&bytes) {
        let at = bad.valid_up_to();
        let (row, column) = csv_position(&bytes[..at], delimiter as u8);
        return Error::Unreadable {
            file: path.to_path_buf(),
            at: format!(", row {row}, column {column}"),
            message: format!(
                "byte 0x{:02x} is not UTF-8 text (save the file as UTF-8)",
                bytes[at]
            ),
        };
    }
    if let Some(row) = unclosed_quote(&bytes) {
        return Error::Unreadable {
            file: path.to_path_buf(),
            at: format!(", row {row}"),
            message: "a quoted field is never closed (a missing `\"`)".into(),
        };
    }
    if message.contains("more fields") {
        if let Some(ragged) = fields::ragged_row(&bytes, delimiter as u8, None) {
            // A header of one column: most likely another delimiter than the one read with.
            let header = bytes.split(|&b| b == b'\n').next().unwrap_or_default();
            let header = String::from_utf8_lossy(header);
            let other = (ragged.header == 1)
                .then(|| {
                    let line = header.trim_start_matches('\u{feff}');
                    crate::error::one_column_header(line.trim_end_matches('\r'))
                })
                .flatten();
            return Error::Unreadable {
                file: path.to_path_buf(),
                at: format!(", row {}", ragged.row),
                message: match other {
                    Some(hint) => format!("{}; {hint}", ragged.message()),
                    None => ragged.message(),
                },
            };
        }
    }
    Error::Unreadable {
        file: path.to_path_buf(),
        at: String::new(),
        message,
    }
}

/// Rows used to guess CSV column types before falling back to the whole file.
const INFER_ROWS: usize = 10_000;

/// A lazy scan of `source` (the input, or its UTF-8 copy); errors name `input`. The CSV
/// columns named in `text` (those the file has) are read as text, whatever their values look
/// like: a firm id `00123` guessed a number became 123, the same firm as `123`.
fn scan(
    source: &Path,
    input: &Path,
    format: InputFormat,
    infer: Option<usize>,
    csv: &CsvOptions,
    text: &[&str],
) -> Result<LazyFrame> {
    let dataset = format == InputFormat::Parquet && holds_parquet(input);
    if input.is_dir() && !dataset {
        return Err(Error::Unreadable {
            file: input.to_path_buf(),
            at: String::new(),
            message: "a folder with no Parquet file (`.parquet`, `.pq`) in it: give a file, or \
                      a folder of Parquet files"
                .into(),
        });
    }
    if !input.is_file() && !dataset {
        return Err(Error::NoInput {
            file: input.to_path_buf(),
        });
    }
    match format {
        InputFormat::Parquet => footer::check(input)?,
        InputFormat::Csv => not_utf16(source, input)?,
        InputFormat::Spreadsheet => {}
    }
    let pl_path = PlRefPath::try_from_path(source)?;
    let lf = match format {
        InputFormat::Csv => {
            let reader = |overwrite: Option<SchemaRef>| {
                LazyCsvReader::new(pl_path.clone())
                    .with_has_header(true)
                    .with_separator(csv.delimiter as u8)
                    .with_decimal_comma(csv.decimal_comma)
                    .with_infer_schema_length(infer)
                    .with_dtype_overwrite(overwrite)
                    .finish()
                    .map_err(|e| unreadable(input, format, csv.delimiter, e))
            };
            let mut lf = reader(None)?;
            let guessed = lf
                .collect_schema()
                .map_err(|e| unreadable(input, format, csv.delimiter, e))?;
            let as_text: Schema = text
                .iter()
                .filter(|c| guessed.get(c).is_some_and(|d| d != &DataType::String))
                .map(|c| Field::new((*c).into(), DataType::String))
                .collect();
            if !as_text.is_empty() {
                lf = reader(Some(Arc::new(as_text)))?;
            }
            // The override changes types only: the guessed schema's names are the file's.
            names_as_written(lf, &guessed)
        }
        InputFormat::Parquet => LazyFrame::scan_parquet(pl_path, ScanArgsParquet::default())?,
        // load() reads spreadsheets itself, with the chosen sheet; the first sheet here.
        InputFormat::Spreadsheet => sheet::read(input, None, text)?.df.lazy(),
    };
    Ok(lf)
}
