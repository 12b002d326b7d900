//! A CSV file as written, before the engine reads it: its encoding (a Windows-1252 file read
//! through a UTF-8 copy, a UTF-16 file refused), its header (a repeated name, a quoted name
//! with a doubled quote), and the data row and field at a byte offset, for messages.

use std::path::Path;

use polars::prelude::*;

use crate::config::InputFormat;
use crate::{Error, Result};

/// A UTF-8 copy of a Windows-1252 file, removed when dropped.
pub(super) struct Transcoded {
    pub(super) path: std::path::PathBuf,
}

impl Transcoded {
    pub(super) fn new(input: &Path) -> Result<Transcoded> {
        let bytes = std::fs::read(input).map_err(Error::io(input))?;
        if bytes.starts_with(&[0x1f, 0x8b]) || bytes.starts_with(&[0x28, 0xb5, 0x2f, 0xfd]) {
            return Err(Error::Unreadable {
                file: input.to_path_buf(),
                at: String::new(),
                message: "a compressed file in another encoding than UTF-8: decompress it first"
                    .into(),
            });
        }
        let (text, _, _) = encoding_rs::WINDOWS_1252.decode(&bytes);
        static COUNTER: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
        let n = COUNTER.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        let path =
            std::env::temp_dir().join(format!("panelready-{}-{n}-utf8.csv", std::process::id()));
        std::fs::write(&path, text.as_bytes()).map_err(Error::io(&path))?;
        Ok(Transcoded { path })
    }
}

impl Drop for Transcoded {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

/// The text of the CSV file at `path`, decompressed on the way when it is gzip or zstd
/// compressed (as the engine reads such a file).
pub(super) fn open_text(path: &Path) -> std::io::Result<Box<dyn std::io::Read>> {
    use std::io::{Read, Seek};
    let mut file = std::fs::File::open(path)?;
    let mut magic = [0u8; 4];
    let n = file.read(&mut magic)?;
    file.rewind()?;
    Ok(match &magic[..n] {
        [0x1f, 0x8b, ..] => Box::new(flate2::read::MultiGzDecoder::new(file)),
        [0x28, 0xb5, 0x2f, 0xfd] => Box::new(zstd::stream::read::Decoder::new(file)?),
        _ => Box::new(file),
    })
}

/// The names of a CSV header as written (RFC 4180: a doubled quote inside quotes is one
/// quote), of a compressed file too.
fn header_names(path: &Path, delimiter: char) -> Result<Option<Vec<String>>> {
    use std::io::BufRead;
    let text = open_text(path).map_err(Error::io(path))?;
    let mut line = Vec::new();
    std::io::BufReader::new(text)
        .read_until(b'\n', &mut line)
        .map_err(Error::io(path))?;
    let text = String::from_utf8_lossy(&line);
    let mut names = Vec::new();
    let (mut field, mut quoted) = (String::new(), false);
    let sep = delimiter;
    let mut chars = text
        .trim_start_matches('\u{feff}')
        .trim_end_matches(['\r', '\n'])
        .chars()
        .peekable();
    while let Some(ch) = chars.next() {
        match ch {
            // A doubled quote inside quotes is one quote of the name (RFC 4180).
            '"' if quoted && chars.peek() == Some(&'"') => {
                chars.next();
                field.push('"');
            }
            '"' => quoted = !quoted,
            c if c == sep && !quoted => names.push(std::mem::take(&mut field)),
            c => field.push(c),
        }
    }
    names.push(field);
    Ok(Some(names))
}

/// The first name that appears twice in a CSV header (the engine would rename the copy);
/// names left empty are columns without a name ([`unnamed_columns`]), not repeats.
pub(super) fn repeated_header_name(path: &Path, delimiter: char) -> Result<Option<String>> {
    let Some(names) = header_names(path, delimiter)? else {
        return Ok(None);
    };
    let mut seen = std::collections::HashSet::new();
    Ok(names
        .into_iter()
        .filter(|n| !n.trim().is_empty())
        .find(|n| !seen.insert(n.clone())))
}

/// `df` (a CSV file's columns in the order of its header `names`, after the row number when
/// it has one) without the columns the header leaves unnamed, and a note for each: such a
/// column with no value at all — what a delimiter at the end of every line makes — is left
/// out; one holding a value stops the run, naming its place in the header and its first value
/// (no rule could name it, and the reports would show it without a name).
fn unnamed_columns(
    df: DataFrame,
    names: &[String],
    file: &Path,
) -> Result<(DataFrame, Vec<String>)> {
    let columns: Vec<PlSmallStr> = df
        .get_column_names()
        .into_iter()
        .filter(|c| c.as_str() != super::ROW)
        .cloned()
        .collect();
    if columns.len() != names.len() || names.iter().all(|n| !n.trim().is_empty()) {
        return Ok((df, Vec::new()));
    }
    let mut unnamed = Vec::new();
    let mut notes = Vec::new();
    for (place, (name, column)) in names.iter().zip(&columns).enumerate() {
        if !name.trim().is_empty() {
            continue;
        }
        let c = df.column(column)?;
        if c.null_count() < c.len() {
            let first = c.as_materialized_series().drop_nulls();
            let row = c
                .is_not_null()
                .iter()
                .position(|v| v == Some(true))
                .unwrap_or(0)
                + 1;
            let value = first.get(0).map(|v| v.to_string()).unwrap_or_default();
            return Err(Error::Unreadable {
                file: file.to_path_buf(),
                at: format!(", column {}", place + 1),
                message: format!(
                    "the header leaves this column without a name, but it holds values (data \
                     row {row} holds `{}`): give it a name",
                    value.trim_matches('"')
                ),
            });
        }
        unnamed.push(column.clone());
        notes.push(format!(
            "column {} of the header has no name and no value in any row (a delimiter at the \
             end of each line): left out",
            place + 1
        ));
    }
    Ok((df.drop_many(unnamed), notes))
}

/// A CSV file read (from `source`, the input or its UTF-8 copy; errors name `input`) checked
/// against its header: `df` without the columns the header leaves unnamed
/// ([`unnamed_columns`]), with their notes, and no row short of fields
/// ([`super::fields::no_short_rows`]). Other formats as they are.
pub(super) fn csv_shape(
    df: DataFrame,
    format: InputFormat,
    source: &Path,
    input: &Path,
    delimiter: char,
) -> Result<(DataFrame, Vec<String>)> {
    if format != InputFormat::Csv {
        return Ok((df, Vec::new()));
    }
    let Some(names) = header_names(source, delimiter)? else {
        return Ok((df, Vec::new()));
    };
    let (df, notes) = unnamed_columns(df, &names, input)?;
    // Unnamed columns closing the header are empty in every row (else an error above): a row
    // may lack them.
    let may_lack = names
        .iter()
        .rev()
        .take_while(|n| n.trim().is_empty())
        .count();
    super::fields::no_short_rows(&df, source, input, delimiter, may_lack)?;
    Ok((df, notes))
}

/// The data row (1 = first row after the header) and the 1-based field at the end of
/// `before`, counting quoted line breaks and commas as part of their field.
pub(super) fn csv_position(before: &[u8], delimiter: u8) -> (u64, u64) {
    let (mut line, mut field, mut quoted) = (0u64, 1u64, false);
    for b in before {
        match b {
            b'"' => quoted = !quoted,
            b'\n' if !quoted => {
                line += 1;
                field = 1;
            }
            b if *b == delimiter && !quoted => field += 1,
            _ => {}
        }
    }
    (line, field)
}

/// The data row where a quote opens and is never closed, if any.
pub(super) fn unclosed_quote(bytes: &[u8]) -> Option<u64> {
    let (mut line, mut quoted, mut opened) = (0u64, false, 0u64);
    for b in bytes {
        match b {
            b'"' => {
                quoted = !quoted;
                if quoted {
                    opened = line;
                }
            }
            b'\n' => line += 1,
            _ => {}
        }
    }
    quoted.then_some(opened)
}

/// A CSV file (at `source`, named `input`) in UTF-16, as spreadsheets save "Unicode text",
/// is refused by its byte-order mark: read as UTF-8 its header matched no column name.
pub(super) fn not_utf16(source: &Path, input: &Path) -> Result<()> {
    use std::io::Read;
    let mut start = [0u8; 2];
    let mut file = std::fs::File::open(source).map_err(Error::io(input))?;
    let read = file.read(&mut start).map_err(Error::io(input))?;
    if read == 2 && matches!(start, [0xff, 0xfe] | [0xfe, 0xff]) {
        return Err(Error::Unreadable {
            file: input.to_path_buf(),
            at: String::new(),
            message: "the file is UTF-16 text (what spreadsheets save as \"Unicode text\"): \
                      save it as CSV in UTF-8"
                .into(),
        });
    }
    Ok(())
}

/// `lf` (a CSV scan whose columns `schema` names) with each column named as its header
/// writes it. The engine keeps a
/// doubled quote of a quoted header name (`"net ""adj"" income"` came out as
/// `net ""adj"" income`), where RFC 4180 makes it one quote (`net "adj" income`): such a name
/// could be matched by no rule, and the outputs carried it doubled.
pub(super) fn names_as_written(lf: LazyFrame, schema: &Schema) -> LazyFrame {
    let (doubled, single): (Vec<String>, Vec<String>) = schema
        .iter_names()
        .filter(|name| name.contains("\"\""))
        .map(|name| (name.to_string(), name.replace("\"\"", "\"")))
        .unzip();
    if doubled.is_empty() {
        return lf;
    }
    lf.rename(doubled, single, true)
}
