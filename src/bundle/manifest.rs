//! `manifest.json`: what made the bundle (tool, command, input, rules, joined and corrections
//! files, each with its hash), the row counts, the verdict and every output's hash.

use serde::{Deserialize, Serialize};

use super::file_name;
use crate::config::{BuildConfig, InputFormat};
use crate::load::sha256_hex;
use crate::pipeline::Prepared;
use crate::{Error, Result};

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
    pub verdict: Option<crate::report::Status>,
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

/// The manifest of a bundle whose files `outputs` were written from `p`.
pub(super) fn manifest(
    cfg: &BuildConfig,
    p: &Prepared,
    input_sha256: &str,
    outputs: Vec<OutputRecord>,
) -> Result<Manifest> {
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
    Ok(manifest)
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
