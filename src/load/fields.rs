//! A CSV row with another number of fields than the header. The engine stops at a row with
//! more fields, without saying which, and reads a row with fewer as if the fields it lacks
//! were empty: a row cut short by a line break inside a field that is not quoted, or by a
//! lost delimiter, would come into the panel with its last values missing and nothing said.
//!
//! The file's records are walked by their line breaks and quotes (a quoted field may hold
//! either), so that the n-th record is the n-th row the engine read; only the rows named are
//! split into fields. A record with nothing on it (a blank line, which the engine reads as a
//! row with every value missing) is not counted as short.

use std::io::Read;
use std::path::Path;

use polars::prelude::*;

use crate::{Error, Result};

/// A data row (1 = the first after the header) whose number of fields is not the header's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Ragged {
    pub(super) row: u64,
    pub(super) fields: usize,
    pub(super) header: usize,
}

impl Ragged {
    /// What is wrong, for the one-line message that names the row.
    pub(super) fn message(&self) -> String {
        let (n, m) = (self.fields, self.header);
        let fields = |k: usize| if k == 1 { "field" } else { "fields" };
        if n < m {
            format!(
                "{n} {} where the header has {m}: a delimiter is missing, or a line break inside \
                 a field splits the row (a field holding one must be quoted)",
                fields(n)
            )
        } else {
            format!(
                "{n} {} where the header has {m}: a field holds the delimiter without being \
                 quoted, or a line break is missing",
                fields(n)
            )
        }
    }
}

/// The first of `rows` (ascending data rows; every row when None) of the CSV `bytes` whose
/// number of fields is not the header's, blank records left aside.
pub(super) fn ragged_row(bytes: &[u8], delimiter: u8, rows: Option<&[u64]>) -> Option<Ragged> {
    let mut walk = Walk::new(delimiter, rows, 0);
    walk.feed(bytes).or_else(|| walk.end())
}

/// [`ragged_row`] over the file at `path` (decompressed on the way when it is compressed),
/// read a block at a time (the file is not held whole), a row allowed to lack the header's
/// last `may_lack` fields (columns without a name or a value, which a delimiter at the end of
/// the header's line makes).
pub(super) fn ragged_row_in(
    path: &Path,
    delimiter: u8,
    rows: &[u64],
    may_lack: usize,
) -> std::io::Result<Option<Ragged>> {
    let mut text = super::csv_file::open_text(path)?;
    let mut block = vec![0u8; 8 << 20];
    let mut walk = Walk::new(delimiter, Some(rows), may_lack);
    loop {
        let n = text.read(&mut block)?;
        if n == 0 {
            return Ok(walk.end());
        }
        if let Some(found) = walk.feed(&block[..n]) {
            return Ok(Some(found));
        }
        if walk.done() {
            return Ok(None);
        }
    }
}

/// A CSV read without error (in the file's order) may still have had rows with fewer fields
/// than its header, which the engine fills with missing values: such a row stops the run,
/// named. Only the rows whose last value came out missing can be short, so only those are
/// split into fields, in the file at `source`; a row may lack the header's last `may_lack`
/// fields.
pub(super) fn no_short_rows(
    df: &DataFrame,
    source: &Path,
    input: &Path,
    delimiter: char,
    may_lack: usize,
) -> Result<()> {
    let Some(last) = df.columns().iter().rev().find(|c| c.name() != super::ROW) else {
        return Ok(());
    };
    if last.null_count() == 0 {
        return Ok(());
    }
    // Data rows from 1, as the frame holds them in the file's order.
    let rows = df
        .select([last.name().clone()])?
        .lazy()
        .with_row_index("position", Some(1))
        .filter(col(last.name().clone()).is_null())
        .select([col("position").cast(DataType::UInt64)])
        .collect()?;
    let rows: Vec<u64> = rows
        .column("position")?
        .u64()?
        .into_no_null_iter()
        .collect();
    let found = ragged_row_in(source, delimiter as u8, &rows, may_lack);
    match found.map_err(Error::io(input))? {
        Some(ragged) => Err(Error::Unreadable {
            file: input.to_path_buf(),
            at: format!(", row {}", ragged.row),
            message: ragged.message(),
        }),
        None => Ok(()),
    }
}

/// The walk over the records, carried from one block of bytes to the next.
struct Walk<'a> {
    delimiter: u8,
    /// The rows to split into fields (None: all), and how many of them are behind.
    rows: Option<&'a [u64]>,
    next: usize,
    /// The current record: its row (0 = the header), whether a quote is open, its fields so
    /// far (when it is split), its bytes so far and its first byte.
    row: u64,
    quoted: bool,
    fields: usize,
    len: usize,
    first: u8,
    header: usize,
    /// The header's last fields a row may lack.
    may_lack: usize,
}

impl<'a> Walk<'a> {
    fn new(delimiter: u8, rows: Option<&'a [u64]>, may_lack: usize) -> Walk<'a> {
        Walk {
            delimiter,
            rows,
            next: 0,
            row: 0,
            quoted: false,
            fields: 1,
            len: 0,
            first: 0,
            header: 0,
            may_lack,
        }
    }

    /// Whether the current record is split into fields: the header, and the rows named.
    fn splits(&self) -> bool {
        self.row == 0
            || match self.rows {
                None => true,
                Some(rows) => rows.get(self.next) == Some(&self.row),
            }
    }

    /// Every named row behind.
    fn done(&self) -> bool {
        self.row > 0 && self.rows.is_some_and(|rows| self.next >= rows.len())
    }

    /// Walk `bytes`, the file's next ones; the first ragged record among them, if any. The
    /// walk stops only at quotes and line breaks: the bytes between two stops are all inside
    /// a quoted field or all outside, so the delimiters among them are counted at once (a
    /// count the compiler does several bytes at a time), and only in the records split.
    fn feed(&mut self, bytes: &[u8]) -> Option<Ragged> {
        let mut at = 0;
        loop {
            let rest = &bytes[at..];
            let stop = memchr::memchr2(b'"', b'\n', rest);
            let run = &rest[..stop.unwrap_or(rest.len())];
            if !run.is_empty() {
                self.take(run);
            }
            let i = stop?;
            at += i + 1;
            if rest[i] == b'\n' && !self.quoted {
                if let Some(found) = self.end_record() {
                    return Some(found);
                }
                if self.done() {
                    return None;
                }
                continue;
            }
            // A quote, or a line break inside quotes: part of the record, not a field's end.
            self.take(&rest[i..=i]);
            if rest[i] == b'"' {
                self.quoted = !self.quoted;
            }
        }
    }

    /// More bytes of the current record, all inside quotes or all outside.
    fn take(&mut self, run: &[u8]) {
        if self.len == 0 {
            self.first = run[0];
        }
        self.len += run.len();
        if !self.quoted && self.splits() {
            let d = self.delimiter;
            self.fields += run.iter().filter(|b| **b == d).count();
        }
    }

    /// The end of the file: its last record, when it does not end with a line break.
    fn end(&mut self) -> Option<Ragged> {
        (self.len > 0).then(|| self.end_record()).flatten()
    }

    /// The current record ends: checked if it is split, and the next begins.
    fn end_record(&mut self) -> Option<Ragged> {
        let split = self.splits();
        let blank = self.len == 0 || (self.len == 1 && self.first == b'\r');
        let found = if self.row == 0 {
            self.header = self.fields;
            None
        } else if split {
            self.next += usize::from(self.rows.is_some());
            let short = self.fields + self.may_lack < self.header;
            (!blank && (short || self.fields > self.header)).then_some(Ragged {
                row: self.row,
                fields: self.fields,
                header: self.header,
            })
        } else {
            None
        };
        self.row += 1;
        self.fields = 1;
        self.len = 0;
        found
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ragged(text: &str, rows: Option<&[u64]>) -> Option<(u64, usize, usize)> {
        ragged_row(text.as_bytes(), b',', rows).map(|r| (r.row, r.fields, r.header))
    }

    /// Worked by hand: short and long rows found with their row and field count; quoted
    /// delimiters and line breaks are inside their field; blank lines and a last row without
    /// a line break are rows like any other.
    #[test]
    fn rows_with_another_number_of_fields() {
        assert_eq!(ragged("a,b,c\n1,2,3\n4,5,6\n", None), None);
        assert_eq!(ragged("a,b,c\n1,2,3\n4,5\n", None), Some((2, 2, 3)));
        assert_eq!(ragged("a,b,c\n1,2,3,4\n", None), Some((1, 4, 3)));
        assert_eq!(ragged("a,b,c\n1,2,3\n4,5", None), Some((2, 2, 3)));
        assert_eq!(ragged("a,b,c\r\n1,2,3\r\n4,5\r\n", None), Some((2, 2, 3)));
        // A quoted delimiter and a quoted line break belong to their field.
        assert_eq!(ragged("a,b,c\n1,\"2,x\",3\n\"4\n5\",6,7\n", None), None);
        assert_eq!(ragged("a,\"b,\"\"c\",d\n1,2,3\n", None), None);
        // An unquoted line break splits a row into two short ones: the first is named.
        assert_eq!(ragged("a,b,c\n1,2\nx,3\n", None), Some((1, 2, 3)));
        // Blank lines (also with a carriage return) are not short rows; the row after one is
        // counted past it, as the engine reads a blank line as a row.
        assert_eq!(ragged("a,b,c\n1,2,3\n\n\r\n4,5,6\n\n", None), None);
        assert_eq!(ragged("a,b,c\n\n4,5\n", None), Some((2, 2, 3)));
        // Empty fields are fields.
        assert_eq!(ragged("a,b,c\n,,\n", None), None);
    }

    /// Worked by hand: only the rows named are split, and the walk is the same whatever the
    /// blocks the bytes come in.
    #[test]
    fn only_the_rows_named_and_any_blocks() {
        let text = "a,b,c\n1,2\n\"3\n\",4,5\n6,7\n8,9,10\n";
        assert_eq!(ragged(text, None), Some((1, 2, 3)));
        assert_eq!(ragged(text, Some(&[2, 4])), None);
        assert_eq!(ragged(text, Some(&[2, 3])), Some((3, 2, 3)));
        for size in 1..text.len() {
            let mut walk = Walk::new(b',', Some(&[2, 3]), 0);
            let found = text
                .as_bytes()
                .chunks(size)
                .find_map(|block| walk.feed(block))
                .or_else(|| walk.end());
            assert_eq!(found.map(|r| r.row), Some(3), "blocks of {size}");
        }
    }

    /// A file read a block at a time: a short row far down is found, in a gzip- or
    /// zstd-compressed file too.
    #[test]
    fn a_file_a_block_at_a_time() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.csv");
        let mut text = String::from("firm,year,x\n");
        for i in 0..400_000 {
            text.push_str(&format!("F{i},{},{}\n", 2000 + i % 20, i % 7));
        }
        text.push_str("G,2001\n");
        std::fs::write(&path, &text).unwrap();
        let last = 400_001;
        let found = ragged_row_in(&path, b',', &[5, last], 0).unwrap();
        assert_eq!(
            found,
            Some(Ragged {
                row: last,
                fields: 2,
                header: 3
            })
        );
        assert_eq!(ragged_row_in(&path, b',', &[5], 0).unwrap(), None);
        // The header ends with two fields without a name: a row may lack them, not more.
        std::fs::write(&path, "firm,year,x,,\nA,1,2,,\nA,2,3\nA,3\n").unwrap();
        let found = ragged_row_in(&path, b',', &[1, 2, 3], 2).unwrap();
        assert_eq!(found.map(|r| (r.row, r.fields, r.header)), Some((3, 2, 5)));
        let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        std::io::Write::write_all(&mut gz, text.as_bytes()).unwrap();
        std::fs::write(&path, gz.finish().unwrap()).unwrap();
        let found = ragged_row_in(&path, b',', &[5, last], 0).unwrap();
        assert_eq!(found.map(|r| r.row), Some(last));
        std::fs::write(&path, zstd::encode_all(text.as_bytes(), 1).unwrap()).unwrap();
        let found = ragged_row_in(&path, b',', &[5, last], 0).unwrap();
        assert_eq!(found.map(|r| r.row), Some(last));
    }
}
