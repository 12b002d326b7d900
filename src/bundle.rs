//! The hand-off bundle: cleaned panel, rejects ledger, reports and manifest, written into a
//! staging folder beside `--out` and moved into place only when every file is complete.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use polars::prelude::*;
use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::config::{BuildConfig, ReportFormat};
use crate::pipeline::Prepared;
use crate::report::renderer;
use crate::{Error, Result};

/// `manifest.json`: what made the bundle and the hash of every file in it.
#[derive(Debug, Clone, Serialize)]
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
    /// Every other file in the bundle.
    pub outputs: Vec<OutputRecord>,
}

/// The input file in the manifest.
#[derive(Debug, Clone, Serialize)]
pub struct InputRecord {
    /// Absolute path.
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Rows read.
    pub rows: u64,
}

/// The rules file in the manifest.
#[derive(Debug, Clone, Serialize)]
pub struct RulesRecord {
    /// Absolute path, if a file was used.
    pub path: Option<String>,
    /// SHA-256 of its text.
    pub sha256: String,
}

/// Row accounting.
#[derive(Debug, Clone, Serialize)]
pub struct RowCounts {
    /// Rows read.
    pub input: u64,
    /// Rows in the cleaned panel.
    pub kept: u64,
    /// Rows in the rejects ledger.
    pub rejected: u64,
}

/// One output file.
#[derive(Debug, Clone, Serialize)]
pub struct OutputRecord {
    /// Path inside the bundle.
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// Write the bundle for a prepared run; returns the manifest.
pub fn write(cfg: &BuildConfig, prepared: &mut Prepared) -> Result<Manifest> {
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
    let result = write_files(cfg, prepared, &staging);
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

fn write_files(cfg: &BuildConfig, p: &mut Prepared, dir: &Path) -> Result<Manifest> {
    let mut outputs = Vec::new();
    let mut record = |file: &str| -> Result<()> {
        let path = dir.join(file);
        let bytes = fs::read(&path).map_err(Error::io(&path))?;
        outputs.push(OutputRecord {
            path: file.to_string(),
            sha256: sha256_hex(&bytes),
            bytes: bytes.len() as u64,
        });
        Ok(())
    };

    let path = dir.join("panel.parquet");
    let mut f = fs::File::create(&path).map_err(Error::io(&path))?;
    ParquetWriter::new(&mut f).finish(&mut p.panel)?;
    record("panel.parquet")?;

    write_csv(&dir.join("panel.csv"), &mut p.panel)?;
    record("panel.csv")?;
    write_csv(&dir.join("rejected.csv"), &mut p.rejected)?;
    record("rejected.csv")?;

    for (file, format) in [
        ("report.md", ReportFormat::Markdown),
        ("report.json", ReportFormat::Json),
    ] {
        let path = dir.join(file);
        let mut buf = Vec::new();
        renderer(format)
            .render(&p.report, &mut buf)
            .map_err(Error::io(&path))?;
        fs::write(&path, &buf).map_err(Error::io(&path))?;
        record(file)?;
    }

    let input_bytes = fs::read(&cfg.input.path).map_err(Error::io(&cfg.input.path))?;
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
            path: input_abs.display().to_string(),
            sha256: sha256_hex(&input_bytes),
            rows: p.report.input.rows,
        },
        rules: RulesRecord {
            path: rules_path,
            sha256: sha256_hex(cfg.input.rules.text.as_bytes()),
        },
        rows: RowCounts {
            input: p.report.input.rows,
            kept: p.panel.height() as u64,
            rejected: p.rejected.height() as u64,
        },
        outputs,
    };
    let path = dir.join("manifest.json");
    let mut f = fs::File::create(&path).map_err(Error::io(&path))?;
    serde_json::to_writer_pretty(&mut f, &manifest)?;
    writeln!(f).map_err(Error::io(&path))?;
    Ok(manifest)
}

fn write_csv(path: &Path, df: &mut DataFrame) -> Result<()> {
    let mut f = fs::File::create(path).map_err(Error::io(path))?;
    CsvWriter::new(&mut f).include_header(true).finish(df)?;
    Ok(())
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
