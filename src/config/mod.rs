//! `Config::from_cli`: command-line arguments become a validated configuration — rules parsed,
//! keys resolved, paths checked — before any data is loaded.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::cli::{CliCommand, FailOnArg, InputArgs, InputFormatArg, ReportFormatArg, RulesCommand};
pub use crate::report::{InputFormat, ReportFormat};
use crate::rules::Rules;
use crate::{Error, Result};

mod input;

pub(crate) use input::{format_from_extension, parse_size};
pub use input::{holds_parquet, parquet_files};

/// The most firm-years the demo makes (firms × periods, before attrition): a typo of a few
/// zeros in `--firms` would otherwise run until memory ran out.
const DEMO_FIRM_YEARS: u64 = 100_000_000;

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
    Verify(PathBuf, Relocated),
    /// `compare OLD NEW`.
    Compare(Box<CompareConfig>),
    /// `rules draft DATA`.
    Draft(DraftConfig),
}

/// One side of a comparison.
#[derive(Debug, Clone)]
pub enum Side {
    /// A raw file, read as `audit` reads it.
    Raw(Box<InputConfig>),
    /// A bundle folder written by `build`: its cleaned panel and dictionary.
    Bundle(PathBuf),
}

/// When a numeric cell counts as changed: |new − old| > absolute + relative · |old|.
#[derive(Debug, Clone, Serialize)]
pub struct Tolerance {
    /// Absolute part, for every column without its own.
    pub absolute: f64,
    /// Relative part, for every column without its own.
    pub relative: f64,
    /// Per-column (absolute, relative) overrides.
    pub by_column: BTreeMap<String, (f64, f64)>,
}

impl Default for Tolerance {
    fn default() -> Self {
        Tolerance {
            absolute: 0.0,
            relative: 1e-9,
            by_column: BTreeMap::new(),
        }
    }
}

impl Tolerance {
    pub(crate) fn of(&self, column: &str) -> (f64, f64) {
        self.by_column
            .get(column)
            .copied()
            .unwrap_or((self.absolute, self.relative))
    }
}

/// `compare` settings.
#[derive(Debug, Clone)]
pub struct CompareConfig {
    /// The earlier vintage.
    pub old: Side,
    /// The later vintage.
    pub new: Side,
    /// When a number counts as changed.
    pub tolerance: Tolerance,
    /// How to print the summary.
    pub format: ReportFormat,
    /// Write the summary here instead of stdout.
    pub report: Option<PathBuf>,
    /// Write the change ledger (CSV) here.
    pub changes: Option<PathBuf>,
}

/// Where `verify` finds the files a bundle was built from, when they are not where the
/// manifest says they were (another machine, another folder).
#[derive(Debug, Clone, Default)]
pub struct Relocated {
    /// The raw input.
    pub input: Option<PathBuf>,
    /// The rules file.
    pub rules: Option<PathBuf>,
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
    /// Print the table of stages (wall, processor and kernel time, memory peak) on stderr at the end.
    pub timings: bool,
    /// How to read a CSV input.
    pub csv: CsvOptions,
    /// The sheet of a spreadsheet input (default: the first).
    pub sheet: Option<String>,
    /// Stop before reading when the run's estimated peak memory exceeds this many bytes.
    pub memory_budget: Option<u64>,
}

/// How a CSV input is read: from `[input]` in the rules file, overridden on the command line.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct CsvOptions {
    /// The field separator (one ASCII character).
    pub delimiter: char,
    /// Numbers with a decimal comma.
    pub decimal_comma: bool,
    /// The text encoding.
    pub encoding: Encoding,
}

impl Default for CsvOptions {
    fn default() -> CsvOptions {
        CsvOptions {
            delimiter: ',',
            decimal_comma: false,
            encoding: Encoding::Utf8,
        }
    }
}

/// Text encodings of CSV inputs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Encoding {
    /// UTF-8 (the default; a byte-order mark is skipped).
    Utf8,
    /// Windows-1252, the superset of Latin-1 (ISO-8859-1) that such files really use.
    Windows1252,
}

impl Encoding {
    /// Parse a name: `utf-8`, `windows-1252`, `cp1252`, `latin-1`, `iso-8859-1`.
    pub fn parse(name: &str, setting: &'static str) -> Result<Encoding> {
        match name.to_ascii_lowercase().replace('_', "-").as_str() {
            "utf-8" | "utf8" => Ok(Encoding::Utf8),
            "windows-1252" | "cp1252" | "latin-1" | "latin1" | "iso-8859-1" => {
                Ok(Encoding::Windows1252)
            }
            other => Err(Error::Setting {
                setting,
                message: format!(
                    "\"{other}\" is not an encoding we read (utf-8, windows-1252, latin-1)"
                ),
            }),
        }
    }
}

impl CsvOptions {
    /// `[input]` of the rules file, then the command line on top.
    fn resolve(
        rules: &Rules,
        delimiter: Option<&str>,
        decimal_comma: bool,
        encoding: Option<&str>,
    ) -> Result<CsvOptions> {
        let section = &rules.file.input;
        let mut o = CsvOptions::default();
        let one_byte = |text: &str, setting: &'static str| -> Result<char> {
            let text = if text == "\\t" { "\t" } else { text };
            match text.as_bytes() {
                [b] if b.is_ascii() && *b != b'"' && *b != b'\n' && *b != b'\r' => Ok(*b as char),
                _ => Err(Error::Setting {
                    setting,
                    message: format!("`{text}` is not one ASCII character (e.g. \";\" or \"\\t\")"),
                }),
            }
        };
        if let Some(d) = &section.delimiter {
            o.delimiter = one_byte(d, "[input] delimiter")?;
        }
        if let Some(d) = delimiter {
            o.delimiter = one_byte(d, "--delimiter")?;
        }
        o.decimal_comma = decimal_comma || section.decimal_comma.unwrap_or(false);
        if o.decimal_comma && o.delimiter == ',' {
            return Err(Error::Setting {
                setting: "[input] decimal_comma",
                message: "needs a delimiter other than `,` (usually `;`)".into(),
            });
        }
        if let Some(e) = &section.encoding {
            o.encoding = Encoding::parse(e, "[input] encoding")?;
        }
        if let Some(e) = encoding {
            o.encoding = Encoding::parse(e, "--encoding")?;
        }
        Ok(o)
    }
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
    pub fail_on: Option<crate::report::Status>,
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
    /// Write `panel.csv` beside `panel.parquet`.
    pub panel_csv: bool,
    /// Exit 1 (after writing the bundle) at or above this verdict.
    pub fail_on: Option<crate::report::Status>,
}

/// `rules draft` settings.
#[derive(Debug, Clone)]
pub struct DraftConfig {
    /// The raw file.
    pub data: PathBuf,
    /// How to read it.
    pub format: InputFormat,
    /// CSV reading.
    pub csv: CsvOptions,
    /// The sheet of a spreadsheet.
    pub sheet: Option<String>,
    /// Where to write the draft (stdout if none).
    pub out: Option<PathBuf>,
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

/// The report format: from the extension of `--report`, else `--format`.
fn report_format(report: Option<&Path>, format: ReportFormatArg) -> Result<ReportFormat> {
    Ok(match report {
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
        None => match format {
            ReportFormatArg::Terminal => ReportFormat::Terminal,
            ReportFormatArg::Md => ReportFormat::Markdown,
            ReportFormatArg::Json => ReportFormat::Json,
            ReportFormatArg::Html => ReportFormat::Html,
        },
    })
}

/// `--absolute` / `--relative` values: bare numbers set the default, `COLUMN=X` a column's.
fn tolerances(
    values: &[String],
    option: &'static str,
    default: &mut f64,
    by_column: &mut std::collections::BTreeMap<String, (Option<f64>, Option<f64>)>,
    absolute: bool,
) -> Result<()> {
    for v in values {
        let (column, number) = match v.split_once('=') {
            Some((c, x)) => (Some(c.trim().to_string()), x.trim()),
            None => (None, v.trim()),
        };
        let x: f64 = number
            .parse()
            .ok()
            .filter(|x: &f64| x.is_finite() && *x >= 0.0)
            .ok_or_else(|| Error::BadOption {
                option,
                message: format!("`{v}`: give a number >= 0, or COLUMN=NUMBER"),
            })?;
        match column {
            None => *default = x,
            Some(c) => {
                let slot = by_column.entry(c).or_default();
                if absolute {
                    slot.0 = Some(x);
                } else {
                    slot.1 = Some(x);
                }
            }
        }
    }
    Ok(())
}

impl Command {
    /// Validate what the user typed.
    pub(crate) fn from_cli(cli: CliCommand, command_line: String) -> Result<Command> {
        Ok(match cli {
            CliCommand::Audit(a) => {
                let format = report_format(a.report.as_deref(), a.format)?;
                Command::Audit(AuditConfig {
                    input: InputConfig::from_args(a.input)?,
                    format,
                    report: a.report,
                    fail_on: a.fail_on.map(FailOnArg::status),
                })
            }
            CliCommand::Build(b) => {
                let input = InputConfig::from_args(b.input)?;
                check_out(&b.out, &input.path)?;
                Command::Build(BuildConfig {
                    input,
                    out: b.out,
                    command_line,
                    panel_csv: !b.no_panel_csv,
                    fail_on: b.fail_on.map(FailOnArg::status),
                })
            }
            CliCommand::Demo(d) => {
                if d.firms == 0 {
                    return Err(Error::BadOption {
                        option: "firms",
                        message: "must be at least 1".into(),
                    });
                }
                if u64::from(d.firms) * u64::from(d.periods) > DEMO_FIRM_YEARS {
                    return Err(Error::BadOption {
                        option: "firms",
                        message: format!(
                            "{} firms × {} periods is more than {DEMO_FIRM_YEARS} firm-years",
                            d.firms, d.periods
                        ),
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
            CliCommand::Rules(RulesCommand::Draft(d)) => {
                let format = match d.read.input_format {
                    Some(InputFormatArg::Csv) => InputFormat::Csv,
                    Some(InputFormatArg::Parquet) => InputFormat::Parquet,
                    Some(InputFormatArg::Spreadsheet) => InputFormat::Spreadsheet,
                    None => format_from_extension(&d.data)?,
                };
                if let Some(out) = &d.out {
                    if out.exists() {
                        return Err(Error::BadOption {
                            option: "out",
                            message: format!(
                                "`{}` exists; name a new file (a draft never replaces a rules file)",
                                out.display()
                            ),
                        });
                    }
                }
                let csv = CsvOptions::resolve(
                    &Rules::empty(),
                    d.read.delimiter.as_deref(),
                    d.read.decimal_comma,
                    d.read.encoding.as_deref(),
                )?;
                Command::Draft(DraftConfig {
                    data: d.data,
                    format,
                    csv,
                    sheet: d.read.sheet,
                    out: d.out,
                })
            }
            CliCommand::Compare(c) => {
                let format = report_format(c.report.as_deref(), c.format)?;
                let side = |path: &Path| -> Result<Side> {
                    // A folder is a bundle, unless it is a Parquet dataset without a manifest.
                    let dataset = !path.join("manifest.json").is_file() && holds_parquet(path);
                    if path.is_dir() && !dataset {
                        return Ok(Side::Bundle(path.to_path_buf()));
                    }
                    let args = InputArgs {
                        data: path.to_path_buf(),
                        keys: c.keys.clone(),
                        read: c.read.clone(),
                        quiet: true,
                        timings: false,
                        memory_budget: None,
                    };
                    Ok(Side::Raw(Box::new(InputConfig::from_args(args)?)))
                };
                let mut tolerance = Tolerance::default();
                let mut by_column = std::collections::BTreeMap::new();
                tolerances(
                    &c.absolute,
                    "absolute",
                    &mut tolerance.absolute,
                    &mut by_column,
                    true,
                )?;
                tolerances(
                    &c.relative,
                    "relative",
                    &mut tolerance.relative,
                    &mut by_column,
                    false,
                )?;
                tolerance.by_column = by_column
                    .into_iter()
                    .map(|(k, (a, r))| {
                        (
                            k,
                            (
                                a.unwrap_or(tolerance.absolute),
                                r.unwrap_or(tolerance.relative),
                            ),
                        )
                    })
                    .collect();
                Command::Compare(Box::new(CompareConfig {
                    old: side(&c.old)?,
                    new: side(&c.new)?,
                    tolerance,
                    format,
                    report: c.report,
                    changes: c.changes,
                }))
            }
            CliCommand::Verify(v) => Command::Verify(
                v.dir,
                Relocated {
                    input: v.input,
                    rules: v.rules,
                },
            ),
        })
    }
}

impl InputConfig {
    fn from_args(a: InputArgs) -> Result<InputConfig> {
        let rules = match &a.keys.rules {
            Some(path) => Rules::from_path(path)?,
            None => Rules::empty(),
        };
        let format = match a.read.input_format {
            Some(InputFormatArg::Csv) => InputFormat::Csv,
            Some(InputFormatArg::Parquet) => InputFormat::Parquet,
            Some(InputFormatArg::Spreadsheet) => InputFormat::Spreadsheet,
            None => format_from_extension(&a.data)?,
        };
        let entity = a
            .keys
            .entity
            .or_else(|| rules.file.panel.entity.clone())
            .ok_or(Error::MissingKey { key: "entity" })?;
        let period = a
            .keys
            .period
            .or_else(|| rules.file.panel.period.clone())
            .ok_or(Error::MissingKey { key: "period" })?;
        if entity == period {
            return Err(Error::BadOption {
                option: "period",
                message: format!(
                    "`{period}` is the entity column too: the period is a column of its own"
                ),
            });
        }
        let csv = CsvOptions::resolve(
            &rules,
            a.read.delimiter.as_deref(),
            a.read.decimal_comma,
            a.read.encoding.as_deref(),
        )?;
        let sheet = a.read.sheet.or_else(|| rules.file.input.sheet.clone());
        Ok(InputConfig {
            path: a.data,
            format,
            rules,
            entity,
            period,
            quiet: a.quiet,
            timings: a.timings,
            csv,
            sheet,
            memory_budget: a.memory_budget.as_deref().map(parse_size).transpose()?,
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
        let csv = CsvOptions::resolve(&rules, None, false, None)?;
        let sheet = rules.file.input.sheet.clone();
        Ok(InputConfig {
            path,
            format,
            rules,
            entity,
            period,
            quiet: false,
            timings: false,
            sheet,
            csv,
            memory_budget: None,
        })
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
