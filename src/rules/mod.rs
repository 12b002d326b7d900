//! The rules file: its serde model (every value that needs no data typed as it is read,
//! `policy`), the built-in libraries it can include, and the translation of derived-variable
//! expressions into polars plans (`expr`).

pub(crate) mod checked;
pub(crate) mod expr;
mod policy;

pub use policy::{
    Action, Balance, CutoffGroups, Cutoffs, DuplicatePolicy, RepeatedKeys, SingletonPolicy,
    SlipPolicy, TreatSpec, Unmatched,
};

use std::collections::BTreeMap;

use indexmap::IndexMap;
use std::path::{Path, PathBuf};

use serde::Deserialize;

pub use crate::report::Origin;
use crate::{Error, Result};

/// The built-in ratio library, a readable file in `rules/` embedded in the binary.
pub const STANDARD_LIBRARY: &str = include_str!("../../rules/standard.toml");

/// The most periods a panel's window (its first to its last period) may hold. Periods are
/// consecutive whole numbers — fiscal years, or quarters or months numbered one after another —
/// and a window of more than a thousand of them is a date or a code read as a period (dates
/// as YYYYMMDD span ten thousand a year): every count of gaps, every coverage chart and every
/// lag would be wrong, and the chart as large as the window. Also the longest lag or lead.
pub const MAX_WINDOW_PERIODS: i64 = 1_000;

/// A column name as names are compared when one is guessed from it: lower case, letters and
/// digits only (`Total Assets` and `total_assets` are `totalassets`).
pub(crate) fn plain_name(name: &str) -> String {
    name.chars()
        .filter(|c| c.is_ascii_alphanumeric())
        .flat_map(|c| c.to_lowercase())
        .collect()
}

/// Whether column `name`, as [`plain_name`] writes it, holds one of `hints` (`fiscal_year`
/// holds `year`).
pub(crate) fn name_suggests(name: &str, hints: &[&str]) -> bool {
    let n = plain_name(name);
    hints.iter().any(|h| n.contains(h))
}

/// Canonical columns that hold levels (amounts), searched for unit slips by default.
pub const LEVEL_COLUMNS: [&str; 8] = [
    "total_assets",
    "sales",
    "current_assets",
    "current_liabilities",
    "short_term_debt",
    "long_term_debt",
    "interest_expense",
    "rd_expense",
];

/// Canonical column names the built-in ratios use; map each to a raw column in `[columns]`.
pub const CANONICAL_COLUMNS: [&str; 10] = [
    "total_assets",
    "net_income",
    "ebit",
    "interest_expense",
    "rd_expense",
    "current_assets",
    "current_liabilities",
    "short_term_debt",
    "long_term_debt",
    "sales",
];

/// A rules file as written by the user (or a built-in library).
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RulesFile {
    /// Built-in libraries to pull in: `standard` is the ratio library.
    #[serde(default)]
    pub include: Vec<String>,
    /// How to read a CSV input.
    #[serde(default)]
    pub input: InputSection,
    /// Panel keys.
    #[serde(default)]
    pub panel: PanelSection,
    /// Canonical name -> raw column name.
    #[serde(default)]
    pub columns: BTreeMap<String, String>,
    /// Derived variables by name, in the order of the file.
    #[serde(default)]
    pub derive: IndexMap<String, DeriveRule>,
    /// Cleaning policy.
    #[serde(default)]
    pub clean: CleanSection,
    /// Repairs that change cells (recorded in the corrections ledger).
    #[serde(default)]
    pub repair: RepairSection,
    /// What the audit compares.
    #[serde(default)]
    pub audit: AuditSection,
    /// Thresholds of the checks.
    #[serde(default)]
    pub thresholds: ThresholdSection,
    /// Accounting rules (`[[rule]]`).
    #[serde(default)]
    pub rule: Vec<AccountingRule>,
    /// The panel model the user plans to estimate.
    #[serde(default)]
    pub model: Option<ModelSection>,
    /// `[verdict]`: the level (`"pass"`, `"warn"` or `"fail"`) of each finding, by its key.
    /// The keys are declared by the code that judges them (`audit::verdict::level_keys`) and
    /// checked against them before any file is read.
    #[serde(default, deserialize_with = "policy::verdict")]
    pub verdict: BTreeMap<String, crate::report::Status>,
    /// Further raw files joined onto the main one (`[[join]]`), in order.
    #[serde(default)]
    pub join: Vec<JoinSpec>,
}

/// `[[join]]`: a further raw file (firm-year, firm, year or group-year table) joined onto the
/// panel after the key steps.
#[derive(Debug, Clone, Deserialize)]
#[serde(try_from = "JoinFields")]
pub struct JoinSpec {
    /// The file, relative to the rules file (CSV, Parquet or spreadsheet; CSV read with the
    /// main file's `[input]` settings).
    pub file: String,
    /// The columns matched, as named in the panel: the entity and period columns, or a group
    /// column of the panel.
    pub on: Vec<String>,
    /// The columns brought in, as named in the panel (default: every other column).
    pub columns: Option<Vec<String>>,
    /// Column names of the joined file -> names in the panel.
    pub rename: BTreeMap<String, String>,
    /// `"fail"` (default) or `"keep-first"` when a key repeats with other values.
    pub duplicates: RepeatedKeys,
    /// `"keep"` (default: left join) or `"drop"` (panel rows without a match go to the
    /// ledger).
    pub unmatched: Unmatched,
    /// The sheet of a spreadsheet file (default: the first).
    pub sheet: Option<String>,
}

/// `[[join]]` as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct JoinFields {
    file: String,
    on: Vec<String>,
    #[serde(default)]
    columns: Option<Vec<String>>,
    #[serde(default)]
    rename: BTreeMap<String, String>,
    #[serde(default)]
    duplicates: Option<String>,
    #[serde(default)]
    unmatched: Option<String>,
    #[serde(default)]
    sheet: Option<String>,
}

impl TryFrom<JoinFields> for JoinSpec {
    type Error = String;
    fn try_from(f: JoinFields) -> std::result::Result<JoinSpec, String> {
        let duplicates = match f.duplicates.as_deref() {
            None | Some("fail") => RepeatedKeys::Fail,
            Some("keep-first") => RepeatedKeys::KeepFirst,
            Some(other) => {
                return Err(format!(
                    "`[[join]]` `{}`: duplicates = \"{other}\": use \"fail\" or \"keep-first\"",
                    f.file
                ))
            }
        };
        let unmatched = match f.unmatched.as_deref() {
            None | Some("keep") => Unmatched::Keep,
            Some("drop") => Unmatched::Drop,
            Some(other) => {
                return Err(format!(
                    "`[[join]]` `{}`: unmatched = \"{other}\": use \"keep\" or \"drop\"",
                    f.file
                ))
            }
        };
        Ok(JoinSpec {
            file: f.file,
            on: f.on,
            columns: f.columns,
            rename: f.rename,
            duplicates,
            unmatched,
            sheet: f.sheet,
        })
    }
}

/// `[model]`: the regression the diagnostics are about.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelSection {
    /// The outcome (dependent variable).
    pub outcome: String,
    /// The regressors.
    pub regressors: Vec<String>,
    /// Add the outcome's gap-aware one-period lag as a regressor.
    #[serde(default)]
    pub lagged_outcome: bool,
    /// The fixed effects, by the key columns they follow: `["firm_id"]` or
    /// `["firm_id", "fiscal_year"]` (period dummies added). The older spelling `"entity"` /
    /// `"entity+period"` is still read.
    #[serde(default)]
    pub effects: Option<EffectsSpec>,
}

/// How `[model] effects` is written.
#[derive(Debug, Clone, Deserialize)]
#[serde(
    untagged,
    expecting = "`[model] effects` is a list of the key columns, such as [\"firm_id\"] or [\"firm_id\", \"fiscal_year\"]"
)]
pub enum EffectsSpec {
    /// The key columns, e.g. `["firm_id", "fiscal_year"]`.
    Keys(Vec<String>),
    /// The older words `"entity"` or `"entity+period"`.
    Word(String),
}

/// `[[rule]]`: an accounting identity or bound that should hold on every row.
#[derive(Debug, Clone, Deserialize)]
#[serde(try_from = "RuleFields")]
pub struct AccountingRule {
    /// The rule's name, as reported.
    pub name: String,
    /// An SQL boolean expression that must hold.
    pub expr: String,
    /// `flag` (default), `null` or `drop`.
    pub action: Action,
    /// With `null`: the columns to set to null (default: every column the rule names).
    pub columns: Option<Vec<String>>,
}

/// `[[rule]]` as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct RuleFields {
    name: String,
    expr: String,
    #[serde(default)]
    action: Option<String>,
    #[serde(default)]
    columns: Option<Vec<String>>,
}

impl TryFrom<RuleFields> for AccountingRule {
    type Error = String;
    fn try_from(f: RuleFields) -> std::result::Result<AccountingRule, String> {
        let action = match &f.action {
            Some(a) => Action::parse(&f.name, a)?,
            None => Action::default(),
        };
        Ok(AccountingRule {
            name: f.name,
            expr: f.expr,
            action,
            columns: f.columns,
        })
    }
}

/// `[audit]`: settings of the checks.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AuditSection {
    /// Variables compared between leavers and stayers; default: every derived variable.
    #[serde(default)]
    pub compare: Option<Vec<String>>,
    /// Level variables searched for unit slips; default: the mapped canonical levels.
    #[serde(default)]
    pub levels: Option<Vec<String>>,
    /// Outlier cutoffs.
    #[serde(default, deserialize_with = "policy::outliers")]
    pub outliers: Option<Cutoffs>,
}

/// `[thresholds]`: the numbers behind warnings.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ThresholdSection {
    /// Within share under which a variable is nearly absorbed (default 0.05).
    #[serde(default)]
    pub nearly_absorbed: Option<f64>,
    /// Change in missing share between periods that flags a break (default 0.25).
    #[serde(default)]
    pub missing_jump: Option<f64>,
    /// Robust z beyond which a value is counted (default 5).
    #[serde(default)]
    pub robust_z: Option<f64>,
    /// Absolute change in log level counted as a jump (default ln 10).
    #[serde(default)]
    pub log_jump: Option<f64>,
    /// p-value under which leavers are said to differ from stayers (default 0.05).
    #[serde(default)]
    pub attrition_p: Option<f64>,
}

/// `[input]`: how to read a CSV file that is not comma-separated UTF-8 with decimal points.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputSection {
    /// The field separator, one character (default `,`).
    pub delimiter: Option<String>,
    /// Numbers use a decimal comma (`1,5`), as files from many European providers do.
    pub decimal_comma: Option<bool>,
    /// The text encoding: `utf-8` (default), `windows-1252` or `latin-1`.
    pub encoding: Option<String>,
    /// The sheet of a spreadsheet input (default: the first).
    pub sheet: Option<String>,
}

/// `[repair]`: cell repairs, each recorded in `corrections.csv`.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RepairSection {
    /// Detected unit slips: `report` (default), `rescale` or `null`.
    #[serde(default)]
    pub unit_slips: SlipPolicy,
    /// A CSV of firm-year overrides (`entity,period,column,value,reason`), relative to the
    /// rules file.
    pub corrections: Option<String>,
}

/// `[panel]`: which columns identify the entity and the period.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PanelSection {
    /// The entity (firm) column.
    pub entity: Option<String>,
    /// The period (fiscal year) column, integers.
    pub period: Option<String>,
    /// A fiscal-year-end date column (text `YYYY-MM-DD`) from which the period column is
    /// derived instead of read.
    pub year_end: Option<String>,
    /// With `year_end`: a year end in this month or earlier belongs to the previous fiscal
    /// year (default 5: a year ending January–May is the previous year's; 0: never).
    pub year_end_cutoff: Option<u32>,
    /// Columns of codes (industry, country) that hold numbers but are categories: never
    /// averaged, given percentiles or winsorized.
    pub categorical: Option<Vec<String>>,
}

/// `[derive.NAME]`: one derived variable.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DeriveRule {
    /// An SQL expression over raw, canonical and other derived columns, with panel functions.
    pub expr: String,
    /// A human label for reports and the data dictionary.
    #[serde(default)]
    pub label: Option<String>,
    /// The unit of the result.
    #[serde(default)]
    pub unit: Option<String>,
    /// Where the definition comes from (a paper, a standard, "common practice").
    #[serde(default)]
    pub source: Option<String>,
    /// Conditions under which the value is set to null, each with the reason reported.
    #[serde(default)]
    pub null_when: Vec<NullWhen>,
}

/// One null condition of a derived variable.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NullWhen {
    /// An SQL boolean expression; where true, the derived value is null.
    pub when: String,
    /// The reason, as counted in the report.
    pub reason: String,
}

/// `[clean]`: how `build` resolves problems it finds.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CleanSection {
    /// Policy for conflicting duplicate keys (default `fail`).
    #[serde(default)]
    pub duplicates: DuplicatePolicy,
    /// Drop singletons: `false` (default), `true` or `"entity"` for entities with one row,
    /// `"entity+period"` for the iterated two-way rule.
    #[serde(default)]
    pub drop_singletons: SingletonPolicy,
    /// Replace values beyond percentile cutoffs by the cutoffs.
    #[serde(default, deserialize_with = "policy::winsorize")]
    pub winsorize: Option<TreatSpec>,
    /// Drop rows with values beyond percentile cutoffs.
    #[serde(default, deserialize_with = "policy::trim")]
    pub trim: Option<TreatSpec>,
    /// `"keep"` (default), `"largest"` or `{ window = [FIRST, LAST] }`.
    #[serde(default)]
    pub balance: Balance,
}

/// `by` of a treatment: a word (`"pooled"`, `"period"`) or grouping columns.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(
    untagged,
    expecting = "`by` of a treatment is \"pooled\", \"period\" or a list of columns, such as [\"sector\", \"fiscal_year\"]"
)]
pub enum TreatBy {
    /// `"pooled"` or `"period"`.
    Word(String),
    /// Cutoffs per group of these columns, e.g. `["sector", "fiscal_year"]`.
    Columns(Vec<String>),
}

/// `[clean] balance`.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(
    untagged,
    expecting = "`[clean] balance` is \"keep\", \"largest\" or { window = [FIRST, LAST] }, FIRST and LAST whole numbers"
)]
pub enum BalanceSpec {
    /// `"keep"` or `"largest"`.
    Mode(String),
    /// `{ window = [FIRST, LAST] }`.
    Window {
        /// First and last period of the window.
        window: [i64; 2],
    },
}

/// `[clean] drop_singletons`.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(
    untagged,
    expecting = "`[clean] drop_singletons` is true, false, \"entity\" or \"entity+period\""
)]
pub enum SingletonDrop {
    /// `true` drops entities with one row; `false` keeps everything.
    Flag(bool),
    /// `"entity"` or `"entity+period"`.
    Mode(String),
}

/// A rules file with its libraries merged in, ready for `Config`.
#[derive(Debug, Clone)]
pub struct Rules {
    /// The file it was read from, if any.
    pub path: Option<PathBuf>,
    /// The file's text, hashed into the manifest.
    pub text: String,
    /// The parsed file (user part).
    pub file: RulesFile,
    /// Every derived variable in declaration order (the included libraries' first, then the
    /// file's), user rules overriding library rules of the same name in place.
    pub derive: IndexMap<String, (DeriveRule, Origin)>,
    /// Every accounting rule in order, library first, user rules replacing same-named ones.
    pub accounting: Vec<(AccountingRule, Origin)>,
}

impl Rules {
    /// The raw column a name stands for: its `[columns]` mapping if it is a canonical name
    /// the file maps, else the name itself.
    pub fn resolve(&self, name: &str) -> String {
        self.file
            .columns
            .get(name)
            .cloned()
            .unwrap_or_else(|| name.to_string())
    }

    /// Read and parse a rules file, then merge in its included libraries.
    pub fn from_path(path: &Path) -> Result<Rules> {
        let text = std::fs::read_to_string(path).map_err(Error::io(path))?;
        Rules::from_text(Some(path.to_path_buf()), text)
    }

    /// Parse rules from text; `path` is only used in messages and the manifest.
    pub fn from_text(path: Option<PathBuf>, text: String) -> Result<Rules> {
        let shown = path.clone().unwrap_or_else(|| PathBuf::from("<rules>"));
        let file: RulesFile = toml::from_str(&text).map_err(|e| Error::RulesFile {
            path: shown,
            message: one_line(&e.to_string()),
        })?;
        let mut derive = IndexMap::new();
        let mut accounting: Vec<(AccountingRule, Origin)> = Vec::new();
        for name in &file.include {
            let lib = library(name)?;
            for (rule_name, rule) in lib.derive {
                derive.insert(rule_name, (rule, Origin::Standard));
            }
            accounting.extend(lib.rule.into_iter().map(|r| (r, Origin::Standard)));
        }
        for rule in &file.rule {
            accounting.retain(|(r, _)| r.name != rule.name);
            accounting.push((rule.clone(), Origin::User));
        }
        for (name, rule) in &file.derive {
            derive.insert(name.clone(), (rule.clone(), Origin::User));
        }
        Ok(Rules {
            path,
            text,
            file,
            derive,
            accounting,
        })
    }

    /// Rules with nothing in them: keys must then come from the command line.
    pub fn empty() -> Rules {
        Rules {
            path: None,
            text: String::new(),
            file: RulesFile::default(),
            derive: IndexMap::new(),
            accounting: Vec::new(),
        }
    }
}

/// A built-in library by name.
pub fn library(name: &str) -> Result<RulesFile> {
    match name {
        "standard" => Ok(toml::from_str(STANDARD_LIBRARY).expect("the embedded library parses")),
        _ => Err(Error::UnknownLibrary {
            name: name.to_string(),
        }),
    }
}

/// toml's messages span several lines with a source excerpt; keep the first useful line.
fn one_line(message: &str) -> String {
    let lines: Vec<&str> = message.lines().map(str::trim).collect();
    let head = lines.first().copied().unwrap_or_default();
    let detail = lines.last().copied().unwrap_or_default();
    if detail.is_empty() || detail == head {
        head.to_string()
    } else {
        format!("{head}: {detail}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn standard_library_parses_and_names_a_source_for_every_ratio() {
        let lib = library("standard").unwrap();
        assert!(lib.derive.len() >= 6);
        for (name, rule) in &lib.derive {
            assert!(rule.source.is_some(), "`{name}` has no source");
        }
    }

    #[test]
    fn user_rules_override_library_rules() {
        let text = r#"
            include = ["standard"]
            [derive.size]
            expr = "ln(total_assets + 1)"
        "#;
        let rules = Rules::from_text(None, text.to_string()).unwrap();
        let (rule, origin) = &rules.derive["size"];
        assert_eq!(rule.expr, "ln(total_assets + 1)");
        assert_eq!(*origin, Origin::User);
        assert_eq!(rules.derive["leverage"].1, Origin::Standard);
    }

    #[test]
    fn unknown_fields_and_libraries_are_errors() {
        let err = Rules::from_text(None, "[panel]\nfirm = \"x\"\n".into()).unwrap_err();
        assert!(err.to_string().contains("unknown field"), "{err}");
        let err = Rules::from_text(None, "include = [\"nope\"]\n".into()).unwrap_err();
        assert!(err.to_string().contains("`nope`"), "{err}");
    }
}
