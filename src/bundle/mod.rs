//! The hand-off bundle: cleaned panel, rejects ledger, reports and manifest, written into a
//! staging folder beside `--out` and moved into place only when every file is complete.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::config::{BuildConfig, ReportFormat};
pub use crate::load::sha256_hex;
use crate::pipeline::Prepared;
use crate::progress::Progress;
use crate::report::renderer;
use crate::{Error, Result};

mod dictionary;
mod guard;
mod hashing;
mod manifest;
mod parquet;

pub use crate::config::Relocated;
use dictionary::{dictionary_md, parquet_labels, DictionaryFile};
pub use guard::{dates_as_text, guard_text};
use hashing::HashingFile;
pub use manifest::{
    CorrectionsRecord, InputRecord, JoinedRecord, Manifest, OutputRecord, RowCounts, RulesRecord,
};

/// Write the bundle for a prepared run; returns the manifest.
pub fn write(
    cfg: &BuildConfig,
    prepared: &mut Prepared,
    input_sha256: &str,
    progress: &Progress,
) -> Result<Manifest> {
    let out = &cfg.out;
    let parent = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    fs::create_dir_all(&parent).map_err(Error::io(&parent))?;
    if out.exists() && !is_replaceable(out)? {
        return Err(Error::OutNotBundle { out: out.clone() });
    }
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "bundle".into());
    let staging = parent.join(format!(".{name}.partial-{}", std::process::id()));
    if staging.exists() {
        fs::remove_dir_all(&staging).map_err(Error::io(&staging))?;
    }
    // An error names the folder asked for, not the staging folder beside it.
    fs::create_dir(&staging).map_err(Error::io(out))?;
    let result = write_files(cfg, prepared, input_sha256, &staging, progress);
    let manifest = match result {
        Ok(m) => m,
        Err(e) => {
            let _ = fs::remove_dir_all(&staging);
            return Err(e);
        }
    };
    swap_into_place(&staging, out)?;
    Ok(manifest)
}

fn write_files(
    cfg: &BuildConfig,
    p: &mut Prepared,
    input_sha256: &str,
    dir: &Path,
    progress: &Progress,
) -> Result<Manifest> {
    let mut outputs = Vec::new();
    let mut write = |file: &str, content: &mut dyn FnMut(&mut HashingFile) -> Result<()>| {
        let mut f = HashingFile::create(dir, file)?;
        content(&mut f)?;
        outputs.push(f.finish(file)?);
        Ok::<(), Error>(())
    };

    progress.stage("writing panel.parquet");
    write("panel.parquet", &mut |f| {
        // Snappy, as most Parquet writers default to: several times faster to write than
        // zstd, at a somewhat larger file.
        let labels = parquet_labels(&p.panel, &p.dictionary);
        parquet::write_parquet(f, &mut p.panel, labels, progress)?;
        Ok(())
    })?;
    progress.stage("writing panel.csv and rejected.csv");
    if cfg.panel_csv {
        let panel = Rows::of(&p.panel);
        write("panel.csv", &mut |f| write_csv(f, panel, Some(progress)))?;
    }
    let rejected = Rows {
        df: &p.rejected,
        order: p.rejected_order.as_ref(),
    };
    write("rejected.csv", &mut |f| write_csv(f, rejected, None))?;
    write("corrections.csv", &mut |f| write_ledger(f, &p.corrections))?;

    progress.stage("writing the reports and the dictionary");
    for (file, format) in [
        ("report.md", ReportFormat::Markdown),
        ("report.json", ReportFormat::Json),
        ("report.html", ReportFormat::Html),
    ] {
        let path = dir.join(file);
        write(file, &mut |f| {
            renderer(format)
                .render(&p.report, f)
                .map_err(Error::io(&path))
        })?;
    }
    write("dictionary.json", &mut |f| {
        serde_json::to_writer_pretty(&mut *f, &DictionaryFile::new(&p.dictionary))
            .map_err(|e| Error::io(dir.join("dictionary.json"))(e.into()))?;
        f.write_all(b"\n")
            .map_err(Error::io(dir.join("dictionary.json")))
    })?;
    write("dictionary.md", &mut |f| {
        f.write_all(dictionary_md(&p.dictionary).as_bytes())
            .map_err(Error::io(dir.join("dictionary.md")))
    })?;

    progress.stage("writing the manifest");
    let manifest = manifest::manifest(cfg, p, input_sha256, outputs)?;
    let path = dir.join("manifest.json");
    let mut f = fs::File::create(&path).map_err(Error::io(&path))?;
    serde_json::to_writer_pretty(&mut f, &manifest)?;
    writeln!(f).map_err(Error::io(&path))?;
    Ok(manifest)
}

/// Rows of a CSV written at a time, so that a bar can show the rows written.
const CSV_SLICE: usize = 1 << 20;

/// The rows a CSV file is written from: a frame's, in the order of the row numbers given
/// (None: as they stand).
#[derive(Clone, Copy)]
struct Rows<'a> {
    df: &'a DataFrame,
    order: Option<&'a IdxCa>,
}

impl<'a> Rows<'a> {
    fn of(df: &'a DataFrame) -> Rows<'a> {
        Rows { df, order: None }
    }

    /// The rows `offset..offset + len` in their order, copied only when an order is given.
    fn slice(self, offset: usize, len: usize) -> Result<DataFrame> {
        Ok(match self.order {
            Some(order) => self.df.take(&order.slice(offset as i64, len))?,
            None => self.df.slice(offset as i64, len),
        })
    }
}

/// Write a CSV with text cells guarded against spreadsheet formula injection, a slice of rows
/// at a time (the same bytes as in one go), showing the rows written on `progress`.
fn write_csv<W: Write>(f: W, rows: Rows, progress: Option<&Progress>) -> Result<()> {
    write_csv_sliced(f, rows, progress, CSV_SLICE)
}

/// The corrections ledger as one CSV: its parts in order, each a slice of rows at a time in
/// the ledger's shape (`LedgerPart::slice`), guarded as [`write_csv`] guards.
fn write_ledger<W: Write>(f: W, parts: &[crate::clean::repair::LedgerPart]) -> Result<()> {
    let ready = |part: DataFrame| dates_as_text(guard_text(&crate::core::spelled_out(&part)?)?);
    let first = parts.first().expect("the ledger has a part for its header");
    let mut writer = CsvWriter::new(f)
        .include_header(true)
        .batched(ready(first.slice(0, 0)?)?.schema())?;
    for part in parts {
        for offset in (0..part.rows.height()).step_by(CSV_SLICE) {
            writer.write_batch(&ready(part.slice(offset, CSV_SLICE)?)?)?;
        }
    }
    writer.finish()?;
    Ok(())
}

/// [`write_csv`], `slice` rows at a time.
fn write_csv_sliced<W: Write>(
    f: W,
    rows: Rows,
    progress: Option<&Progress>,
    slice: usize,
) -> Result<()> {
    let df = rows.df;
    // Each slice of rows with its text held as codes spelled out, guarded and its dates as
    // text: the bytes of the whole frame done at once, without a second copy of its columns.
    let spelling = crate::core::Spelling::of(df)?;
    let ready = |part: DataFrame| dates_as_text(guard_text(&spelling.spell(&part)?)?);
    let mut writer = CsvWriter::new(f)
        .include_header(true)
        .batched(ready(df.clear())?.schema())?;
    if let Some(progress) = progress {
        progress.items_of(df.height(), "rows");
    }
    for offset in (0..df.height()).step_by(slice) {
        let part = ready(rows.slice(offset, slice)?)?;
        writer.write_batch(&part)?;
        if let Some(progress) = progress {
            progress.done(part.height());
        }
    }
    writer.finish()?;
    Ok(())
}

/// SHA-256 of a file, read in blocks.
pub fn sha256_file(path: &Path) -> Result<String> {
    if path.is_dir() {
        return sha256_dataset(path);
    }
    let mut file = fs::File::open(path).map_err(Error::io(path))?;
    let mut hash = Sha256::new();
    std::io::copy(&mut file, &mut hash).map_err(Error::io(path))?;
    Ok(format!("{:x}", hash.finalize()))
}

/// The SHA-256 of a folder of Parquet files: of one line per file, sorted by path,
/// `relative/path<TAB>sha256<LF>` (its path inside the folder, with `/`, and the hash of its
/// bytes), so that a moved, renamed or re-partitioned dataset is told apart.
fn sha256_dataset(dir: &Path) -> Result<String> {
    let mut listing = String::new();
    for file in crate::config::parquet_files(dir)? {
        let relative = file.strip_prefix(dir).unwrap_or(&file);
        let name: Vec<String> = relative
            .components()
            .map(|c| c.as_os_str().to_string_lossy().to_string())
            .collect();
        listing.push_str(&format!("{}\t{}\n", name.join("/"), sha256_file(&file)?));
    }
    Ok(sha256_hex(listing.as_bytes()))
}

/// An existing `--out` may be replaced only if it is empty or an earlier bundle.
fn is_replaceable(out: &Path) -> Result<bool> {
    if !out.is_dir() {
        return Ok(false);
    }
    let empty = fs::read_dir(out).map_err(Error::io(out))?.next().is_none();
    Ok(empty || out.join("manifest.json").is_file())
}

fn swap_into_place(staging: &Path, out: &Path) -> Result<()> {
    if out.exists() {
        let old = staging.with_extension("old");
        fs::rename(out, &old).map_err(Error::io(out))?;
        fs::rename(staging, out).map_err(Error::io(out))?;
        fs::remove_dir_all(&old).map_err(Error::io(&old))?;
    } else {
        fs::rename(staging, out).map_err(Error::io(out))?;
    }
    Ok(())
}

pub(crate) fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default()
}

/// Write a file through a temporary file beside it and a rename.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "report".into());
    let tmp = path.with_file_name(format!(".{name}.partial-{}", std::process::id()));
    // An error names the file asked for, not the temporary one beside it.
    if let Some(folder) = path
        .parent()
        .filter(|f| !f.as_os_str().is_empty() && !f.is_dir())
    {
        return Err(Error::NoFolder {
            path: path.to_path_buf(),
            folder: folder.to_path_buf(),
        });
    }
    fs::write(&tmp, bytes).map_err(Error::io(path))?;
    fs::rename(&tmp, path).map_err(Error::io(path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_like_text_is_guarded_and_numbers_are_not() {
        // The guard list is common practice for CSV files opened in spreadsheets.
        let df = df!(
            "name" => [Some("=SUM(A1)"), Some("+1x"), Some("-x"), Some("@a"), Some("\tb"), Some("ok"), None, Some("-5"), Some("-1.5e3"), Some("+2"), Some("-2+3")],
            "value" => [-1.5, 2.0, -3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, 11.0],
        )
        .unwrap();
        let g = guard_text(&df).unwrap();
        let names: Vec<Option<&str>> = g.column("name").unwrap().str().unwrap().iter().collect();
        assert_eq!(
            names,
            [
                Some("'=SUM(A1)"),
                Some("'+1x"),
                Some("'-x"),
                Some("'@a"),
                Some("'\tb"),
                Some("ok"),
                None,
                // A cell that is a number is read as that number, and runs nothing.
                Some("-5"),
                Some("-1.5e3"),
                Some("+2"),
                Some("'-2+3"),
            ]
        );
        assert!(g
            .column("value")
            .unwrap()
            .equals(df.column("value").unwrap()));
    }

    /// A CSV written a slice of rows at a time is the engine writer's file in one go, byte for
    /// byte: slices that do and do not divide the rows, text needing quotes and the guard,
    /// missing values, and a frame without rows (the header alone); so is one written from the
    /// rows in another order, gathered back into theirs slice by slice.
    #[test]
    fn csv_in_slices_is_the_same_file() {
        let n = 10;
        let df = df!(
            "firm" => (0..n).map(|i| format!("F,{i}")).collect::<Vec<_>>(),
            "note" => (0..n).map(|i| (i % 3 != 0).then(|| if i == 4 { "=bad".to_string() } else { format!("n\"{i}") })).collect::<Vec<_>>(),
            "x" => (0..n).map(|i| (i % 4 != 0).then_some(i as f64 / 7.0)).collect::<Vec<_>>(),
            "k" => (0..n as i64).collect::<Vec<_>>(),
        )
        .unwrap();
        for frame in [df.clone(), df.clear()] {
            let mut whole = Vec::new();
            CsvWriter::new(&mut whole)
                .include_header(true)
                .finish(&mut guard_text(&frame).unwrap())
                .unwrap();
            // The frame's rows in reverse, written in the order that restores them.
            let n = frame.height() as IdxSize;
            let reversed = frame.reverse();
            let order = IdxCa::from_vec("order".into(), (0..n).rev().collect());
            for slice in [1, 3, 10, 64] {
                for rows in [
                    Rows::of(&frame),
                    Rows {
                        df: &reversed,
                        order: Some(&order),
                    },
                ] {
                    let mut sliced = Vec::new();
                    write_csv_sliced(&mut sliced, rows, None, slice).unwrap();
                    assert_eq!(
                        String::from_utf8(sliced).unwrap(),
                        String::from_utf8(whole.clone()).unwrap(),
                        "slices of {slice}, {} rows, order {}",
                        frame.height(),
                        rows.order.is_some()
                    );
                }
            }
        }
    }

    /// A text column without a risky cell comes back as it was, its buffer shared, not
    /// copied; a column with one is guarded beside it.
    #[test]
    fn text_without_a_risky_cell_is_not_copied() {
        let df = df!(
            "firm" => ["Alder", "Birch", "Cedar"],
            "note" => ["fine", "=1+1", "ok"],
        )
        .unwrap();
        let g = guard_text(&df).unwrap();
        let views = |d: &DataFrame, c: &str| {
            d.column(c)
                .unwrap()
                .str()
                .unwrap()
                .downcast_iter()
                .next()
                .unwrap()
                .views()
                .as_ptr()
        };
        assert_eq!(views(&g, "firm"), views(&df, "firm"));
        let notes: Vec<Option<&str>> = g.column("note").unwrap().str().unwrap().iter().collect();
        assert_eq!(notes, [Some("fine"), Some("'=1+1"), Some("ok")]);
    }
}
