//! What a file that will not read as its declared format seems to be, from its first bytes:
//! a Parquet file named `.csv`, a CSV file saved as `.xlsx`, a workbook in the old binary
//! format. The engine's own words ("The file must end with PAR1", "byte 0xd1 is not UTF-8",
//! "invalid Zip archive") do not say that the file is of another kind.

use std::io::Read;
use std::path::Path;

use crate::config::InputFormat;

/// What the file at `path` seems to be, when that is not `declared`: the words for a message,
/// with the way to read it. None when its first bytes say nothing clear.
pub(crate) fn other_kind(path: &Path, declared: InputFormat) -> Option<String> {
    let mut start = Vec::with_capacity(4096);
    std::fs::File::open(path)
        .ok()?
        .take(4096)
        .read_to_end(&mut start)
        .ok()?;
    let (what, format) = kind(&start)?;
    if format == Some(declared) {
        return None;
    }
    let how = match format {
        Some(InputFormat::Csv) => "give `--input-format csv`, or name it `.csv`",
        Some(InputFormat::Parquet) => "give `--input-format parquet`, or name it `.parquet`",
        Some(InputFormat::Spreadsheet) => {
            "give `--input-format spreadsheet`, or name it `.xlsx` or `.ods` as it is"
        }
        None => "save it as .xlsx (or as CSV) first",
    };
    Some(format!("the file looks like {what}: {how}"))
}

/// Whether the file at `path` begins as a Parquet file but does not end as one: cut short
/// in a copy or a download (the format puts its footer, and `PAR1` again, at the end).
pub(crate) fn cut_short_parquet(path: &Path) -> bool {
    use std::io::{Seek, SeekFrom};
    let ends = |file: &mut std::fs::File| -> std::io::Result<bool> {
        let mut start = [0u8; 4];
        file.read_exact(&mut start)?;
        if &start != b"PAR1" {
            return Ok(false);
        }
        file.seek(SeekFrom::End(-4))?;
        let mut end = [0u8; 4];
        file.read_exact(&mut end)?;
        Ok(&end != b"PAR1")
    };
    std::fs::File::open(path)
        .and_then(|mut f| ends(&mut f))
        .unwrap_or(false)
}

/// The kind of file `start` (its first bytes) begins, and the format that reads it.
fn kind(start: &[u8]) -> Option<(&'static str, Option<InputFormat>)> {
    if start.starts_with(b"PAR1") {
        return Some(("a Parquet file", Some(InputFormat::Parquet)));
    }
    if start.starts_with(b"PK\x03\x04") {
        return Some((
            "a workbook (a zip archive, as .xlsx and .ods files are)",
            Some(InputFormat::Spreadsheet),
        ));
    }
    if start.starts_with(&[0xd0, 0xcf, 0x11, 0xe0]) {
        return Some((
            "a workbook in the old binary format (.xls), which is not read",
            None,
        ));
    }
    // Text: no NUL byte, and UTF-8 but perhaps for a character cut at the end.
    let text = !start.is_empty()
        && !start.contains(&0)
        && std::str::from_utf8(start).map_or_else(|e| e.error_len().is_none(), |_| true);
    text.then_some(("text (a CSV file?)", Some(InputFormat::Csv)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The first bytes of each kind, from the formats' specifications: Parquet files begin
    /// with `PAR1` (Apache Parquet format), zip archives with `PK\3\4` (PKWARE APPNOTE, the
    /// local file header), OLE2 compound files with `D0 CF 11 E0` (MS-CFB); text is neither.
    #[test]
    fn a_parquet_file_cut_short() {
        let dir = std::env::temp_dir().join(format!("panelready-sniff-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let file = dir.join("p.parquet");
        std::fs::write(&file, b"PAR1 columns... PAR1").unwrap();
        assert!(!cut_short_parquet(&file));
        std::fs::write(&file, b"PAR1 columns...").unwrap();
        assert!(cut_short_parquet(&file));
        std::fs::write(&file, b"PAR").unwrap();
        assert!(!cut_short_parquet(&file), "too short to say");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn kinds_by_their_first_bytes() {
        let of = |b: &[u8]| kind(b).map(|(_, f)| f);
        assert_eq!(of(b"PAR1\x15\x04"), Some(Some(InputFormat::Parquet)));
        assert_eq!(
            of(b"PK\x03\x04\x14\x00"),
            Some(Some(InputFormat::Spreadsheet))
        );
        assert_eq!(of(&[0xd0, 0xcf, 0x11, 0xe0, 0xa1]), Some(None));
        assert_eq!(of(b"firm,year\nA,2001\n"), Some(Some(InputFormat::Csv)));
        // A character cut by the 4096-byte window is still text; a byte that is never
        // UTF-8, or a NUL, is not.
        assert_eq!(
            of("firm,é".as_bytes().split_last().unwrap().1),
            Some(Some(InputFormat::Csv))
        );
        assert_eq!(of(b"firm,\xff\n"), None);
        assert_eq!(of(b"a\x00b"), None);
        assert_eq!(of(b""), None);
    }
}
