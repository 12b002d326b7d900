//! The hand-off bundle: cleaned panel, rejects ledger, reports and manifest, written into a
//! staging folder beside `--out` and moved into place only when every file is complete.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::config::{BuildConfig, InputConfig, InputFormat, ReportFormat};
use crate::pipeline::Prepared;
use crate::report::renderer;
use crate::rules::Rules;
use crate::{Error, Result};

mod dictionary;
mod verify;

use dictionary::{dictionary_md, parquet_labels, DictionaryFile};
pub use verify::{verify, Relocated, Verification};

/// `manifest.json`: what made the bundle and the hash of every file in it.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Manifest {
    /// panelready's version.
    pub tool_version: String,
    /// The command line that made the bundle.
    pub created_by_command: String,
    /// Seconds since 1970 when the bundle was made (`SOURCE_DATE_EPOCH` if set).
    pub created_unix_seconds: u64,
    /// The raw input.
    pub input: InputRecord,
    /// The rules file.
    pub rules: RulesRecord,
    /// Row accounting: `input == kept + rejected`.
    pub rows: RowCounts,
    /// The corrections file applied, if any (`[repair] corrections`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub corrections: Option<CorrectionsRecord>,
    /// Further raw files joined onto the input (`[[join]]`), in order.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub joins: Vec<JoinedRecord>,
    /// The overall verdict of the readiness report (null in bundles made before it was
    /// recorded, or when nothing was judged).
    #[serde(default)]
    pub verdict: Option<crate::audit::verdict::Status>,
    /// Every other file in the bundle.
    pub outputs: Vec<OutputRecord>,
}

/// The input file in the manifest.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InputRecord {
    /// The file's name: what `verify` looks for, with its hash, wherever the file now is.
    #[serde(default)]
    pub name: String,
    /// Absolute path where the bundle was built: a hint for `verify`, not a requirement.
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Rows read.
    pub rows: u64,
    /// How it was read.
    pub format: InputFormat,
    /// The entity column used.
    pub entity: String,
    /// The period column used.
    pub period: String,
    /// How a CSV input was read (delimiter, decimal comma, encoding).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub csv: Option<crate::config::CsvOptions>,
    /// The sheet a spreadsheet input was read from.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
}

/// The corrections file in the manifest.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CorrectionsRecord {
    /// The file's name.
    pub name: String,
    /// Absolute path where the bundle was built (a hint).
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Cells it changed.
    pub cells: u64,
}

/// A joined file in the manifest.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct JoinedRecord {
    /// The file's name as the rules file gives it (relative to the rules file).
    pub name: String,
    /// Absolute path where the bundle was built (a hint).
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Rows read.
    pub rows: u64,
    /// Its rows in the rejects ledger: `rows` = rows that matched the panel + these.
    pub rejected: u64,
}

/// The rules file in the manifest.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RulesRecord {
    /// The file's name, if a file was used.
    #[serde(default)]
    pub name: Option<String>,
    /// Absolute path where the bundle was built, if a file was used: a hint for `verify`.
    pub path: Option<String>,
    /// SHA-256 of its text.
    pub sha256: String,
}

/// Row accounting.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RowCounts {
    /// Rows read.
    pub input: u64,
    /// Rows in the cleaned panel.
    pub kept: u64,
    /// Rows of the input in the rejects ledger (rows of joined files there are counted in
    /// `joins`).
    pub rejected: u64,
}

/// One output file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct OutputRecord {
    /// Path inside the bundle.
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// Write the bundle for a prepared run; returns the manifest.
pub fn write(
    cfg: &BuildConfig,
    prepared: &mut Prepared,
    input_sha256: &str,
    progress: &crate::progress::Progress,
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
    fs::create_dir(&staging).map_err(Error::io(&staging))?;
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

/// A file being written, hashed and counted on the way (no second read).
struct HashingFile {
    path: PathBuf,
    file: std::io::BufWriter<fs::File>,
    hash: Sha256,
    bytes: u64,
}

impl HashingFile {
    fn create(dir: &Path, name: &str) -> Result<HashingFile> {
        let path = dir.join(name);
        let file = fs::File::create(&path).map_err(Error::io(&path))?;
        Ok(HashingFile {
            path,
            file: std::io::BufWriter::with_capacity(1 << 20, file),
            hash: Sha256::new(),
            bytes: 0,
        })
    }

    /// Flush and return the file's record.
    fn finish(mut self, name: &str) -> Result<OutputRecord> {
        self.file.flush().map_err(Error::io(&self.path))?;
        Ok(OutputRecord {
            path: name.to_string(),
            sha256: format!("{:x}", self.hash.finalize()),
            bytes: self.bytes,
        })
    }
}

impl Write for HashingFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.file.write(buf)?;
        self.hash.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.file.flush()
    }
}

fn write_files(
    cfg: &BuildConfig,
    p: &mut Prepared,
    input_sha256: &str,
    dir: &Path,
    progress: &crate::progress::Progress,
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
        ParquetWriter::new(f)
            .with_compression(ParquetCompression::Snappy)
            .with_key_value_metadata(Some(parquet_labels(&p.panel, &p.dictionary)))
            .finish(&mut p.panel)?;
        Ok(())
    })?;
    progress.stage("writing panel.csv and rejected.csv");
    if cfg.panel_csv {
        write("panel.csv", &mut |f| write_csv(f, &p.panel))?;
    }
    write("rejected.csv", &mut |f| write_csv(f, &p.rejected))?;
    write("corrections.csv", &mut |f| write_csv(f, &p.corrections))?;

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
    let input_abs = std::path::absolute(&cfg.input.path).map_err(Error::io(&cfg.input.path))?;
    let rules_path = match &cfg.input.rules.path {
        Some(r) => Some(
            std::path::absolute(r)
                .map_err(Error::io(r))?
                .display()
                .to_string(),
        ),
        None => None,
    };
    let manifest = Manifest {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        created_by_command: cfg.command_line.clone(),
        created_unix_seconds: created_seconds(),
        input: InputRecord {
            name: file_name(&input_abs),
            path: input_abs.display().to_string(),
            sha256: input_sha256.to_string(),
            rows: p.report.input.rows,
            format: cfg.input.format,
            entity: cfg.input.entity.clone(),
            period: cfg.input.period.clone(),
            csv: (cfg.input.format == InputFormat::Csv).then(|| cfg.input.csv.clone()),
            sheet: p.report.input.sheet.clone(),
        },
        rules: RulesRecord {
            name: cfg.input.rules.path.as_deref().map(file_name),
            path: rules_path,
            sha256: sha256_hex(cfg.input.rules.text.as_bytes()),
        },
        verdict: p.report.verdict.as_ref().map(|v| v.overall),
        corrections: p
            .corrections_file
            .as_ref()
            .map(|(path, sha256)| CorrectionsRecord {
                name: file_name(path),
                path: std::path::absolute(path)
                    .unwrap_or_else(|_| path.clone())
                    .display()
                    .to_string(),
                sha256: sha256.clone(),
                cells: p.report.repairs.as_ref().map_or(0, |r| r.corrected_cells),
            }),
        joins: cfg
            .input
            .rules
            .file
            .join
            .iter()
            .zip(&p.joined_files)
            .map(|(spec, j)| JoinedRecord {
                name: spec.file.clone(),
                path: std::path::absolute(&j.path)
                    .unwrap_or_else(|_| j.path.clone())
                    .display()
                    .to_string(),
                sha256: j.sha256.clone(),
                rows: j.rows,
                rejected: j.ledger_rows,
            })
            .collect(),
        rows: RowCounts {
            input: p.report.input.rows,
            kept: p.panel.height() as u64,
            rejected: p.rejected_main,
        },
        outputs,
    };
    let path = dir.join("manifest.json");
    let mut f = fs::File::create(&path).map_err(Error::io(&path))?;
    serde_json::to_writer_pretty(&mut f, &manifest)?;
    writeln!(f).map_err(Error::io(&path))?;
    Ok(manifest)
}

/// Write a CSV with text cells guarded against spreadsheet formula injection.
fn write_csv(f: &mut HashingFile, df: &DataFrame) -> Result<()> {
    let mut guarded = guard_text(df)?;
    CsvWriter::new(f)
        .include_header(true)
        .finish(&mut guarded)?;
    Ok(())
}

/// SHA-256 of a file, read in blocks.
pub fn sha256_file(path: &Path) -> Result<String> {
    let mut file = fs::File::open(path).map_err(Error::io(path))?;
    let mut hash = Sha256::new();
    std::io::copy(&mut file, &mut hash).map_err(Error::io(path))?;
    Ok(format!("{:x}", hash.finalize()))
}

/// Text cells that a spreadsheet would read as a formula (starting with `=`, `+`, `-`, `@`,
/// a tab or a carriage return) get a leading `'`. Numeric columns are untouched.
pub fn guard_text(df: &DataFrame) -> Result<DataFrame> {
    let schema = df.schema();
    let guards: Vec<Expr> = schema
        .iter()
        .filter(|(_, dtype)| **dtype == DataType::String)
        .map(|(name, _)| {
            let c = col(name.clone());
            let risky = ["=", "+", "-", "@", "\t", "\r"]
                .iter()
                .map(|p| c.clone().str().starts_with(lit(*p)))
                .reduce(|a, b| a.or(b))
                .expect("prefixes are listed");
            when(risky.fill_null(lit(false)))
                .then(lit("'") + c.clone())
                .otherwise(c)
                .alias(name.clone())
        })
        .collect();
    if guards.is_empty() {
        return Ok(df.clone());
    }
    Ok(df.clone().lazy().with_columns(guards).collect()?)
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

fn file_name(p: &Path) -> String {
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
    fs::write(&tmp, bytes).map_err(Error::io(&tmp))?;
    fs::rename(&tmp, path).map_err(Error::io(path))
}

/// Lowercase hex SHA-256.
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn created_seconds() -> u64 {
    std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_secs())
                .unwrap_or(0)
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_like_text_is_guarded_and_numbers_are_not() {
        // The guard list is common practice for CSV files opened in spreadsheets.
        let df = df!(
            "name" => [Some("=SUM(A1)"), Some("+1"), Some("-x"), Some("@a"), Some("\tb"), Some("ok"), None],
            "value" => [-1.5, 2.0, -3.0, 4.0, 5.0, 6.0, 7.0],
        )
        .unwrap();
        let g = guard_text(&df).unwrap();
        let names: Vec<Option<&str>> = g.column("name").unwrap().str().unwrap().iter().collect();
        assert_eq!(
            names,
            [
                Some("'=SUM(A1)"),
                Some("'+1"),
                Some("'-x"),
                Some("'@a"),
                Some("'\tb"),
                Some("ok"),
                None
            ]
        );
        assert!(g
            .column("value")
            .unwrap()
            .equals(df.column("value").unwrap()));
    }
}
