//! `Config::from_cli`: command-line arguments become a validated configuration — rules parsed,
//! keys resolved, paths checked — before any data is loaded.

use std::path::{Path, PathBuf};

use crate::cli::{CliCommand, FailOnArg, InputArgs, InputFormatArg, ReportFormatArg};
use crate::rules::Rules;
use crate::{Error, Result};

/// What to run, fully resolved.
#[derive(Debug)]
pub enum Command {
    /// `panelready audit`.
    Audit(AuditConfig),
    /// `panelready build`.
    Build(BuildConfig),
    /// `panelready demo`.
    Demo(DemoConfig),
    /// `panelready ratios`.
    Ratios,
    /// `panelready verify DIR`.
    Verify(PathBuf),
}

/// How to read the raw panel.
#[derive(Debug, Clone)]
pub struct InputConfig {
    /// The raw panel file.
    pub path: PathBuf,
    /// CSV or Parquet.
    pub format: InputFormat,
    /// The rules (possibly empty).
    pub rules: Rules,
    /// The entity column.
    pub entity: String,
    /// The period column.
    pub period: String,
    /// Hide progress.
    pub quiet: bool,
}

/// Input file formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum InputFormat {
    /// Comma-separated values with a header row.
    Csv,
    /// Apache Parquet.
    Parquet,
}

/// Report output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReportFormat {
    /// Tables for a terminal.
    Terminal,
    /// Markdown.
    Markdown,
    /// JSON.
    Json,
    /// A self-contained HTML page with charts.
    Html,
}

/// `audit` settings.
#[derive(Debug, Clone)]
pub struct AuditConfig {
    /// The input.
    pub input: InputConfig,
    /// How to print the report.
    pub format: ReportFormat,
    /// Write the report here instead of stdout.
    pub report: Option<PathBuf>,
    /// Exit 1 at or above this verdict.
    pub fail_on: Option<crate::audit::verdict::Status>,
}

/// `build` settings.
#[derive(Debug, Clone)]
pub struct BuildConfig {
    /// The input.
    pub input: InputConfig,
    /// The bundle folder.
    pub out: PathBuf,
    /// The command line, recorded in the manifest.
    pub command_line: String,
}

/// `demo` settings.
#[derive(Debug, Clone)]
pub struct DemoConfig {
    /// Where data and bundle go.
    pub out: PathBuf,
    /// Number of firms.
    pub firms: u32,
    /// Number of fiscal years.
    pub periods: u32,
    /// Random seed.
    pub seed: u64,
    /// Skip the build.
    pub data_only: bool,
}

impl Command {
    /// Validate what the user typed.
    pub(crate) fn from_cli(cli: CliCommand, command_line: String) -> Result<Command> {
        Ok(match cli {
            CliCommand::Audit(a) => {
                let format = match &a.report {
                    Some(path) => match path.extension().and_then(|e| e.to_str()) {
                        Some("md") => ReportFormat::Markdown,
                        Some("json") => ReportFormat::Json,
                        Some("txt") => ReportFormat::Terminal,
                        Some("html") => ReportFormat::Html,
                        _ => {
                            return Err(Error::BadOption {
                                option: "report",
                                message: format!(
                                    "`{}`: name a .md, .json, .html or .txt file",
                                    path.display()
                                ),
                            })
                        }
                    },
                    None => match a.format {
                        ReportFormatArg::Terminal => ReportFormat::Terminal,
                        ReportFormatArg::Md => ReportFormat::Markdown,
                        ReportFormatArg::Json => ReportFormat::Json,
                        ReportFormatArg::Html => ReportFormat::Html,
                    },
                };
                Command::Audit(AuditConfig {
                    input: InputConfig::from_args(a.input)?,
                    format,
                    report: a.report,
                    fail_on: a.fail_on.map(|f| match f {
                        FailOnArg::Warn => crate::audit::verdict::Status::Warn,
                        FailOnArg::Fail => crate::audit::verdict::Status::Fail,
                    }),
                })
            }
            CliCommand::Build(b) => {
                let input = InputConfig::from_args(b.input)?;
                check_out(&b.out, &input.path)?;
                Command::Build(BuildConfig {
                    input,
                    out: b.out,
                    command_line,
                })
            }
            CliCommand::Demo(d) => {
                if d.firms == 0 {
                    return Err(Error::BadOption {
                        option: "firms",
                        message: "must be at least 1".into(),
                    });
                }
                if !(2..=200).contains(&d.periods) {
                    return Err(Error::BadOption {
                        option: "periods",
                        message: "must be between 2 and 200".into(),
                    });
                }
                Command::Demo(DemoConfig {
                    out: d.out,
                    firms: d.firms,
                    periods: d.periods,
                    seed: d.seed,
                    data_only: d.data_only,
                })
            }
            CliCommand::Ratios => Command::Ratios,
            CliCommand::Verify(v) => Command::Verify(v.dir),
        })
    }
}

impl InputConfig {
    fn from_args(a: InputArgs) -> Result<InputConfig> {
        let rules = match &a.rules {
            Some(path) => Rules::from_path(path)?,
            None => Rules::empty(),
        };
        let format = match a.input_format {
            Some(InputFormatArg::Csv) => InputFormat::Csv,
            Some(InputFormatArg::Parquet) => InputFormat::Parquet,
            None => format_from_extension(&a.data)?,
        };
        let entity = a
            .entity
            .or_else(|| rules.file.panel.entity.clone())
            .ok_or(Error::MissingKey { key: "entity" })?;
        let period = a
            .period
            .or_else(|| rules.file.panel.period.clone())
            .ok_or(Error::MissingKey { key: "period" })?;
        Ok(InputConfig {
            path: a.data,
            format,
            rules,
            entity,
            period,
            quiet: a.quiet,
        })
    }

    /// A configuration for library callers and tests.
    pub fn new(path: PathBuf, rules: Rules) -> Result<InputConfig> {
        let format = format_from_extension(&path)?;
        let entity = rules
            .file
            .panel
            .entity
            .clone()
            .ok_or(Error::MissingKey { key: "entity" })?;
        let period = rules
            .file
            .panel
            .period
            .clone()
            .ok_or(Error::MissingKey { key: "period" })?;
        Ok(InputConfig {
            path,
            format,
            rules,
            entity,
            period,
            quiet: false,
        })
    }
}

fn format_from_extension(path: &Path) -> Result<InputFormat> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    match ext.as_deref() {
        Some("csv") => Ok(InputFormat::Csv),
        Some("parquet" | "pq") => Ok(InputFormat::Parquet),
        _ => Err(Error::UnknownFormat {
            file: path.to_path_buf(),
        }),
    }
}

/// Refuse an `--out` that is, or contains, the input file.
fn check_out(out: &Path, input: &Path) -> Result<()> {
    let input_abs = std::path::absolute(input).map_err(Error::io(input))?;
    let out_abs = std::path::absolute(out).map_err(Error::io(out))?;
    let input_real = input_abs.canonicalize().unwrap_or(input_abs.clone());
    let out_real = out_abs.canonicalize().unwrap_or(out_abs.clone());
    if input_real.starts_with(&out_real) || input_abs.starts_with(&out_abs) {
        return Err(Error::OutOverlapsInput {
            out: out.to_path_buf(),
            input: input.to_path_buf(),
        });
    }
    Ok(())
}
