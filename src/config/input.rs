//! The input as the command line names it: what kind of input a path is (a CSV, Parquet or
//! spreadsheet file by its name, or a folder of Parquet files, partitioned into `key=value`
//! folders or not), and the size `--memory-budget` gives.

use std::path::Path;

use super::InputFormat;
use crate::{Error, Result};

/// Whether `path` is a folder with a Parquet file somewhere below it (a dataset, partitioned
/// into `key=value` folders or not).
pub fn holds_parquet(path: &Path) -> bool {
    parquet_files(path).is_ok_and(|files| !files.is_empty())
}

/// The Parquet files below the folder `dir`, sorted by path (hidden files and those starting
/// with `_`, which writers use for metadata, left out).
pub fn parquet_files(dir: &Path) -> Result<Vec<std::path::PathBuf>> {
    let mut files = Vec::new();
    let mut folders = vec![dir.to_path_buf()];
    while let Some(folder) = folders.pop() {
        for entry in std::fs::read_dir(&folder).map_err(Error::io(&folder))? {
            let path = entry.map_err(Error::io(&folder))?.path();
            let name = path.file_name().map(|n| n.to_string_lossy().to_string());
            if name
                .as_deref()
                .is_some_and(|n| n.starts_with('.') || n.starts_with('_'))
            {
                continue;
            }
            if path.is_dir() {
                folders.push(path);
            } else if name.is_some_and(|n| n.ends_with(".parquet") || n.ends_with(".pq")) {
                files.push(path);
            }
        }
    }
    files.sort();
    Ok(files)
}

/// The format of the input at `path`: a folder is Parquet; a file by its extension (a
/// compressed CSV by the name under `.gz` or `.zst`).
pub(crate) fn format_from_extension(path: &Path) -> Result<InputFormat> {
    // A folder is a Parquet dataset: its Parquet files, partitioned or not.
    if path.is_dir() {
        return Ok(InputFormat::Parquet);
    }
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    // Compressed CSV is read as CSV; the engine recognises gzip and zstd by their first bytes.
    let name = name
        .strip_suffix(".gz")
        .or_else(|| name.strip_suffix(".zst"))
        .or_else(|| name.strip_suffix(".zstd"))
        .unwrap_or(&name);
    let ext = Path::new(name)
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_string);
    match ext.as_deref() {
        Some("csv") => Ok(InputFormat::Csv),
        Some("parquet" | "pq") => Ok(InputFormat::Parquet),
        Some("xlsx" | "xlsm" | "ods") => Ok(InputFormat::Spreadsheet),
        _ => Err(Error::UnknownFormat {
            file: path.to_path_buf(),
        }),
    }
}

/// A size such as `8GiB`, `8 GB`, `500MiB`, `2g` or a number of bytes. Binary and decimal
/// units are both taken at their word (GiB = 2^30, GB = 10^9).
pub(crate) fn parse_size(text: &str) -> Result<u64> {
    let bad = || Error::BadOption {
        option: "memory-budget",
        message: format!("\"{text}\" is not a size such as 8GiB, 500MB or 2000000000"),
    };
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (number, unit) = t.split_at(split);
    let number: f64 = number.parse().map_err(|_| bad())?;
    let factor: f64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "k" | "kb" => 1e3,
        "m" | "mb" => 1e6,
        "g" | "gb" => 1e9,
        "t" | "tb" => 1e12,
        "kib" => 1024.0,
        "mib" => 1024f64.powi(2),
        "gib" => 1024f64.powi(3),
        "tib" => 1024f64.powi(4),
        _ => return Err(bad()),
    };
    let bytes = number * factor;
    if !(bytes >= 1.0 && bytes.is_finite()) {
        return Err(bad());
    }
    Ok(bytes as u64)
}
