//! The one error type of panelready: each variant names the file, row, column or rule at fault.

use std::path::PathBuf;

/// Everything that can stop a run. Messages are lowercase, one line, with names in backticks.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Reading or writing a file failed.
    #[error("`{path}`: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    /// The rules file is not valid TOML or has fields we do not know.
    #[error("rules file `{path}`: {message}")]
    RulesFile { path: PathBuf, message: String },
    /// `include` names a library that does not exist.
    #[error("rules file: unknown library `{name}` in `include` (known: standard)")]
    UnknownLibrary { name: String },
    /// Neither the rules file nor the command line names a panel key.
    #[error("no `{key}` column: set `[panel] {key}` in the rules file or pass `--{key}`")]
    MissingKey { key: &'static str },
    /// A column named by the rules or the command line is not in the data.
    #[error("`{file}`: no column `{column}` ({context})")]
    MissingColumn {
        file: PathBuf,
        column: String,
        context: String,
    },
    /// A column of the input holds values a panel's columns cannot (lists, records, bytes).
    #[error(
        "`{file}`: column `{column}` holds {kind}; a panel's columns hold numbers, text, true / \
         false or dates: convert or drop it first"
    )]
    ColumnKind {
        file: PathBuf,
        column: String,
        kind: &'static str,
    },
    /// The period column holds something that is not a whole number.
    #[error(
        "`{file}`: period column `{column}` must hold integers; row {row} has `{value}`{hint}"
    )]
    NonIntegerPeriod {
        file: PathBuf,
        column: String,
        row: u64,
        value: String,
        /// What to do instead, for a date ("" when there is nothing to say).
        hint: String,
    },
    /// The period column's window holds more periods than a panel may
    /// (`rules::MAX_WINDOW_PERIODS`).
    #[error(
        "`{file}`: period column `{column}` runs from {first} (row {first_row}) to {last} (row \
         {last_row}), a window of {periods} periods; periods are consecutive whole numbers such \
         as fiscal years, at most {most} of them: turn a date or a code (YYYYMMDD, a timestamp) \
         into a period first"
    )]
    PeriodWindow {
        file: PathBuf,
        column: String,
        first: i64,
        first_row: u64,
        last: i64,
        last_row: u64,
        periods: i128,
        most: i64,
    },
    /// The input's extension does not say whether it is CSV or Parquet.
    #[error(
        "`{file}`: cannot tell the format from the extension; pass `--input-format csv|parquet`"
    )]
    UnknownFormat { file: PathBuf },
    /// An expression does not parse. `rule` names what holds it: "derived variable `x`" or
    /// "accounting rule `r`".
    #[error("{rule}: syntax error in `{expr}`: {message}")]
    RuleSyntax {
        rule: String,
        expr: String,
        message: String,
    },
    /// A derived variable refers to a column that neither the data nor the rules define.
    #[error("{rule}: unknown column `{column}`{hint}")]
    UnknownColumn {
        rule: String,
        column: String,
        /// ` (the file has …)` when a column is the name but for spaces or case, or empty.
        hint: String,
    },
    /// A derived variable calls a function we do not offer.
    #[error("{rule}: unknown function `{function}`")]
    UnknownFunction { rule: String, function: String },
    /// A panel function was called the wrong way.
    #[error("{rule}: `{call}`: {message}")]
    PanelFunction {
        rule: String,
        call: String,
        message: String,
    },
    /// A derived variable's name is unusable.
    #[error("{rule}: {message}")]
    RuleName { rule: String, message: String },
    /// Derived variables that depend on each other in a circle.
    #[error("derived variables `{}` depend on each other in a cycle", .rules.join("` -> `"))]
    Cycle { rules: Vec<String> },
    /// The expression parsed, but polars could not translate it.
    #[error("{rule}: {message}")]
    RuleExpr { rule: String, message: String },
    /// An environment variable the run reads holds a value it cannot use.
    #[error("the environment variable {variable} is {value:?}, {message}")]
    Environment {
        variable: &'static str,
        value: std::ffi::OsString,
        message: &'static str,
    },
    /// A setting in the rules file is out of range.
    #[error("rules file: `{setting}` {message}")]
    Setting {
        setting: &'static str,
        message: String,
    },
    /// The data has conflicting duplicate keys and the policy says to stop.
    #[error("`{file}`: {} on rows with different values (first: entity `{entity}`, period {period}); choose a policy in `[clean] duplicates`", keys_appear(*.keys))]
    ConflictingKeys {
        file: PathBuf,
        keys: u64,
        entity: String,
        period: i64,
    },
    /// `build --out` points at the input or a folder holding it.
    #[error("`--out {out}` would overwrite the input `{input}`")]
    OutOverlapsInput { out: PathBuf, input: PathBuf },
    /// `build --out` points at a folder that is not a bundle and is not empty.
    #[error(
        "`--out {out}` exists, is not empty and holds no `manifest.json`; refusing to replace it"
    )]
    OutNotBundle { out: PathBuf },
    /// A command-line value is out of range.
    #[error("`--{option}`: {message}")]
    BadOption {
        option: &'static str,
        message: String,
    },
    /// An output whose folder is not there.
    #[error("`{path}`: cannot be written: its folder `{folder}` does not exist")]
    NoFolder { path: PathBuf, folder: PathBuf },
    /// A bundle's manifest cannot be read.
    #[error("`{path}`: not a panelready manifest: {message}")]
    Manifest { path: PathBuf, message: String },
    /// `verify` cannot re-run: the recorded input or rules moved or changed.
    #[error("`{path}`: {message}")]
    VerifyInput { path: PathBuf, message: String },
    /// `compare` needs one row per key on each side.
    #[error("`{file}`: key {entity} in {period} is on rows {first} and {second} with different values; `compare` needs one row per key (build both files and compare the bundles)")]
    CompareKey {
        file: PathBuf,
        entity: String,
        period: i64,
        /// The first two data rows carrying the key with different values.
        first: u64,
        second: u64,
    },
    /// The input file does not exist (or is a folder without Parquet files).
    #[error("`{file}`: no such file")]
    NoInput { file: PathBuf },
    /// The run would need more memory than `--memory-budget` allows.
    #[error("`{file}`: holding its {rows} rows × {columns} columns (with the derived variables) needs about {needed} at the peak, more than the memory budget of {budget} (`--memory-budget`); the whole panel is held in memory: raise the budget, or split the panel, by period range or by entities")]
    MemoryBudget {
        file: PathBuf,
        rows: u64,
        columns: usize,
        needed: String,
        budget: String,
    },
    /// The input holds a header but no data rows.
    #[error("`{file}`: no data rows (only a header)")]
    NoRows { file: PathBuf },
    /// The spreadsheet's sheet holds no cell at all.
    #[error("`{file}`: sheet `{sheet}` is empty (no header, no data rows)")]
    EmptySheet { file: PathBuf, sheet: String },
    /// Two columns of the input share a name.
    #[error("`{file}`: the column name `{column}` appears more than once: rename all but one")]
    DuplicateColumn { file: PathBuf, column: String },
    /// The input cannot be parsed; `at` names the row (and column) where known.
    #[error("`{file}`{at}: {message}")]
    Unreadable {
        file: PathBuf,
        at: String,
        message: String,
    },
    /// polars reported an error while computing.
    #[error("data engine: {}", one_line(&.0.to_string()))]
    Polars(#[from] polars::prelude::PolarsError),
    /// Writing JSON failed.
    #[error("json: {0}")]
    Json(#[from] serde_json::Error),
}

impl Error {
    /// The expression `expr` of `rule` ("derived variable `x`", "accounting rule `r`"), which
    /// the engine could not evaluate on the panel's columns: named, with the engine's reason.
    pub(crate) fn evaluation(rule: String, expr: &str, e: &polars::prelude::PolarsError) -> Error {
        // The engine's message may already name the rule (a check of ours run in its plan).
        let said = one_line(&e.to_string());
        let said = said
            .strip_prefix(&format!("{rule}: "))
            .unwrap_or(&said)
            .to_string();
        Error::RuleExpr {
            rule,
            message: format!("`{expr}`: {said}"),
        }
    }

    /// The exit code this error maps to: usage, input and rules errors are all 2.
    pub fn code(&self) -> i32 {
        2
    }

    /// Wrap an I/O error with the path it concerns.
    pub(crate) fn io(path: impl Into<PathBuf>) -> impl FnOnce(std::io::Error) -> Error {
        let path = path.into();
        move |source| Error::Io { path, source }
    }
}

/// The first line of an engine message, without the hints the engine appends.
/// A column among `names` that is `wanted` but for surrounding spaces or letter case, said for
/// a message: "the file has ` firm`, with spaces around it".
pub(crate) fn near_name<'a>(
    wanted: &str,
    names: impl IntoIterator<Item = &'a str>,
) -> Option<String> {
    let fold = |name: &str| name.trim().to_lowercase();
    let target = fold(wanted);
    let near = names
        .into_iter()
        .find(|name| *name != wanted && fold(name) == target)?;
    Some(if near.trim() == wanted.trim() {
        format!("the file has `{near}`, with spaces around it")
    } else {
        format!("the file has `{near}`: names match exactly, letter case included")
    })
}

/// A hint for a CSV file whose header reads as one column holding `wanted` between other
/// separators (`firm;year;x` read with commas): the separator it seems to use.
pub(crate) fn other_delimiter<'a>(
    wanted: &str,
    names: impl IntoIterator<Item = &'a str>,
) -> Option<String> {
    let mut names = names.into_iter();
    let (only, None) = (names.next()?, names.next()) else {
        return None;
    };
    one_column(only, |part| part.trim() == wanted)
}

/// The same hint for a header that reads as one column, `only`, holding one of the other
/// separators: a first line such as `firm;year;x` in a file read with commas.
pub(crate) fn one_column_header(only: &str) -> Option<String> {
    one_column(only, |part| !part.trim().is_empty())
}

/// The hint for a header read as one column, `only`, that splits on `;`, a tab or `|` into
/// parts of which one is `wanted`.
fn one_column(only: &str, wanted: impl Fn(&str) -> bool) -> Option<String> {
    let (_, written) = [(';', ";"), ('\t', "\\t"), ('|', "|")]
        .into_iter()
        .find(|(c, _)| only.contains(*c) && only.split(*c).any(&wanted))?;
    Some(format!(
        "the header reads as one column, `{}`: its fields seem separated by `{written}` (give \
         `--delimiter '{written}'`)",
        only.escape_debug()
    ))
}

pub(crate) fn one_line(message: &str) -> String {
    message
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty())
        .unwrap_or("unknown error")
        .to_string()
}

/// The result type used throughout panelready.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// "1 entity-period key appears", "2 entity-period keys appear" (the report's `counted` is
/// above this module, which the report itself uses).
fn keys_appear(keys: u64) -> String {
    match keys {
        1 => "1 entity-period key appears".to_string(),
        n => format!("{n} entity-period keys appear"),
    }
}
