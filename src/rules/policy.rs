//! The typed values of the rules file: each policy, choice and pair of cutoffs deserialises
//! straight into its type, so that a bad value stops the parse of the rules file with its line,
//! its column and a message naming the setting and the values it takes — before any data
//! file is opened, identically for every command. The code that acts on them (`clean`,
//! `audit`, `assemble`) re-exports them.

use serde::{de, Deserialize, Deserializer};

use super::{BalanceSpec, SingletonDrop, TreatBy};
pub use crate::report::CutoffGroups;
use crate::report::Status;
use std::collections::BTreeMap;

/// Deserialise `R` and turn it into `T`, the error becoming the parse error's message.
fn typed<'de, D, R, T>(d: D, make: impl FnOnce(R) -> Result<T, String>) -> Result<T, D::Error>
where
    D: Deserializer<'de>,
    R: Deserialize<'de>,
{
    make(R::deserialize(d)?).map_err(de::Error::custom)
}

/// What to do with entity-period keys that appear on rows with different values
/// (`[clean] duplicates`).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub enum DuplicatePolicy {
    /// Stop with an error (the default for `build`).
    #[default]
    Fail,
    /// Keep the row that comes first in the file.
    KeepFirst,
    /// Keep the row that comes last in the file.
    KeepLast,
    /// Drop every row of a conflicting key.
    DropAll,
    /// Keep the row with the largest value of the column (ties: the first such row).
    PreferMax(String),
    /// Keep the row with the smallest value of the column (ties: the first such row).
    PreferMin(String),
    /// Keep every row and only report (what `audit` does; not a value of the rules file).
    Report,
}

impl DuplicatePolicy {
    /// Parse a value of `[clean] duplicates`.
    pub fn parse(value: &str) -> Result<DuplicatePolicy, String> {
        Ok(match value {
            "fail" => DuplicatePolicy::Fail,
            "keep-first" => DuplicatePolicy::KeepFirst,
            "keep-last" => DuplicatePolicy::KeepLast,
            "drop-all" => DuplicatePolicy::DropAll,
            v => match v.split_once(':') {
                Some(("prefer-max", c)) if !c.is_empty() => DuplicatePolicy::PreferMax(c.into()),
                Some(("prefer-min", c)) if !c.is_empty() => DuplicatePolicy::PreferMin(c.into()),
                _ => {
                    return Err(format!(
                        "`[clean] duplicates = \"{value}\"` is not a policy (fail, keep-first, \
                         keep-last, drop-all, prefer-max:COL, prefer-min:COL)"
                    ))
                }
            },
        })
    }

    /// The name written into the ledger and the report.
    pub fn label(&self) -> String {
        match self {
            DuplicatePolicy::Fail => "fail".into(),
            DuplicatePolicy::KeepFirst => "keep-first".into(),
            DuplicatePolicy::KeepLast => "keep-last".into(),
            DuplicatePolicy::DropAll => "drop-all".into(),
            DuplicatePolicy::PreferMax(c) => format!("prefer-max:{c}"),
            DuplicatePolicy::PreferMin(c) => format!("prefer-min:{c}"),
            DuplicatePolicy::Report => "report only".into(),
        }
    }
}

impl<'de> Deserialize<'de> for DuplicatePolicy {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        typed(d, |s: String| DuplicatePolicy::parse(&s))
    }
}

/// Which singletons `build` drops (`[clean] drop_singletons`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum SingletonPolicy {
    /// Keep them (the default).
    #[default]
    Keep,
    /// Drop entities observed in one period only.
    Entity,
    /// Drop rows whose entity or period has one row, again and again until none is left.
    EntityPeriod,
}

impl<'de> Deserialize<'de> for SingletonPolicy {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        typed(d, |v: SingletonDrop| match v {
            SingletonDrop::Flag(false) => Ok(SingletonPolicy::Keep),
            SingletonDrop::Flag(true) => Ok(SingletonPolicy::Entity),
            SingletonDrop::Mode(m) if m == "entity" => Ok(SingletonPolicy::Entity),
            SingletonDrop::Mode(m) if m == "entity+period" => Ok(SingletonPolicy::EntityPeriod),
            SingletonDrop::Mode(m) => Err(format!(
                "`[clean] drop_singletons = \"{m}\"` is not a choice (true, false, \"entity\", \
                 \"entity+period\")"
            )),
        })
    }
}

/// How `build` balances the panel (`[clean] balance`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Balance {
    /// Leave it unbalanced (the default).
    #[default]
    Keep,
    /// Keep entities observed in every period of first..last, cut to it.
    Window(i64, i64),
    /// The window with the most entities × periods.
    Largest,
}

impl<'de> Deserialize<'de> for Balance {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        typed(d, |spec: BalanceSpec| {
            match spec {
            BalanceSpec::Mode(m) if m == "keep" => Ok(Balance::Keep),
            BalanceSpec::Mode(m) if m == "largest" => Ok(Balance::Largest),
            BalanceSpec::Mode(m) => Err(format!(
                "`[clean] balance` \"{m}\" is not \"keep\", \"largest\" or {{ window = [FIRST, LAST] }}"
            )),
            BalanceSpec::Window { window: [a, b] }
                if a <= b && i128::from(b) - i128::from(a) >= i128::from(super::MAX_WINDOW_PERIODS) =>
            {
                Err(format!(
                    "`[clean] balance` window [{a}, {b}] holds more than {} periods, the most a \
                     panel's window may",
                    super::MAX_WINDOW_PERIODS
                ))
            }
            BalanceSpec::Window { window: [a, b] } if a <= b => Ok(Balance::Window(a, b)),
            BalanceSpec::Window { .. } => {
                Err("`[clean] balance` window must be [FIRST, LAST] with FIRST <= LAST".into())
            }
        }
        })
    }
}

/// What to do with a detected unit slip (`[repair] unit_slips`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum SlipPolicy {
    /// List it in the report only (the default).
    #[default]
    Report,
    /// Divide the slipped cell by the detected power of 1000.
    Rescale,
    /// Set the slipped cell to null.
    Null,
}

impl<'de> Deserialize<'de> for SlipPolicy {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        typed(d, |s: String| match s.as_str() {
            "report" => Ok(SlipPolicy::Report),
            "rescale" => Ok(SlipPolicy::Rescale),
            "null" => Ok(SlipPolicy::Null),
            other => Err(format!(
                "`[repair] unit_slips` \"{other}\" is not a policy (report, rescale, null)"
            )),
        })
    }
}

/// What `build` does where an accounting rule does not hold (`[[rule]] action`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Action {
    /// Report only (the default).
    #[default]
    Flag,
    /// Set the rule's columns to null.
    Null,
    /// Move the row to the rejects ledger.
    Drop,
}

impl Action {
    /// Parse an action of the rule `rule`.
    pub fn parse(rule: &str, value: &str) -> Result<Action, String> {
        match value {
            "flag" => Ok(Action::Flag),
            "null" => Ok(Action::Null),
            "drop" => Ok(Action::Drop),
            other => Err(format!(
                "accounting rule `{rule}`: action `{other}` is not flag, null or drop"
            )),
        }
    }

    /// The name used in rules files and reports.
    pub fn label(self) -> &'static str {
        match self {
            Action::Flag => "flag",
            Action::Null => "null",
            Action::Drop => "drop",
        }
    }
}

/// A joined file's keys that repeat with other values (`[[join]] duplicates`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum RepeatedKeys {
    /// Stop with an error (the default).
    #[default]
    Fail,
    /// Keep the first row of each key; the others go to the ledger.
    KeepFirst,
}

/// Panel rows without a match in a joined file (`[[join]] unmatched`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Unmatched {
    /// Keep them, the joined columns empty (a left join; the default).
    #[default]
    Keep,
    /// Move them to the ledger.
    Drop,
}

/// Whether the cutoffs may sit at the ends (0 and 1: no cut on that side).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Ends {
    /// `0 < lower < upper < 1` (the outlier counts).
    Inside,
    /// `0 <= lower < upper <= 1` (winsorizing and trimming).
    Included,
}

/// The fields of a pair of percentile cutoffs as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct CutoffFields {
    #[serde(default)]
    variables: Option<Vec<String>>,
    #[serde(default)]
    lower: Option<f64>,
    #[serde(default)]
    upper: Option<f64>,
    #[serde(default)]
    by: Option<TreatBy>,
}

/// Percentile cutoffs (fractions), pooled, per period or per group of columns: one type for
/// `[audit] outliers`, `[clean] winsorize` and `[clean] trim`.
#[derive(Debug, Clone, PartialEq)]
pub struct Cutoffs {
    /// Lower percentile, as a fraction (default 0.01).
    pub lower: f64,
    /// Upper percentile, as a fraction (default 0.99).
    pub upper: f64,
    /// Pooled, per period, or per group of `groups`.
    pub by: CutoffGroups,
    /// The grouping columns (as written) when `by` is `Groups`.
    pub groups: Vec<String>,
}

impl Default for Cutoffs {
    fn default() -> Cutoffs {
        Cutoffs {
            lower: 0.01,
            upper: 0.99,
            by: CutoffGroups::Pooled,
            groups: Vec::new(),
        }
    }
}

impl Cutoffs {
    /// Check the fields of the setting `setting`.
    fn new(setting: &str, f: &CutoffFields, ends: Ends) -> Result<Cutoffs, String> {
        let bad = |message: &str| format!("`{setting}` {message}");
        let d = Cutoffs::default();
        let (lower, upper) = (f.lower.unwrap_or(d.lower), f.upper.unwrap_or(d.upper));
        let ok = match ends {
            Ends::Inside => 0.0 < lower && lower < upper && upper < 1.0,
            Ends::Included => 0.0 <= lower && lower < upper && upper <= 1.0,
        };
        if !ok {
            return Err(bad(match ends {
                Ends::Inside => "needs 0 < lower < upper < 1 (fractions, e.g. 0.01 and 0.99)",
                Ends::Included => "needs 0 <= lower < upper <= 1 (fractions, e.g. 0.01 and 0.99)",
            }));
        }
        let (by, groups) = match &f.by {
            None => (CutoffGroups::Pooled, Vec::new()),
            Some(TreatBy::Word(w)) if w == "pooled" => (CutoffGroups::Pooled, Vec::new()),
            Some(TreatBy::Word(w)) if w == "period" => (CutoffGroups::Period, Vec::new()),
            Some(TreatBy::Word(_)) => {
                return Err(bad(
                    "`by` must be \"pooled\", \"period\" or grouping columns such as \
                     [\"sector\", \"fiscal_year\"]",
                ))
            }
            Some(TreatBy::Columns(list)) if list.is_empty() => {
                return Err(bad("`by` lists no grouping column"))
            }
            Some(TreatBy::Columns(list)) => (CutoffGroups::Groups, list.clone()),
        };
        Ok(Cutoffs {
            lower,
            upper,
            by,
            groups,
        })
    }
}

/// `[audit] outliers`: the outlier check's cutoffs.
pub(super) fn outliers<'de, D: Deserializer<'de>>(d: D) -> Result<Option<Cutoffs>, D::Error> {
    typed(d, |f: Option<CutoffFields>| {
        f.map(|f| {
            if f.variables.is_some() {
                return Err(
                    "`[audit] outliers` takes no `variables`: every numeric variable \
                            is counted"
                        .into(),
                );
            }
            Cutoffs::new("[audit] outliers", &f, Ends::Inside)
        })
        .transpose()
    })
}

/// `[clean] winsorize` or `trim`: the variables treated and their cutoffs.
#[derive(Debug, Clone, PartialEq)]
pub struct TreatSpec {
    /// Variables treated (raw, canonical or derived names, resolved once the data is read).
    pub variables: Vec<String>,
    /// The cutoffs.
    pub cutoffs: Cutoffs,
}

fn treat_spec(setting: &str, f: Option<CutoffFields>) -> Result<Option<TreatSpec>, String> {
    let Some(f) = f else { return Ok(None) };
    let Some(variables) = f.variables.clone() else {
        return Err(format!("`{setting}` needs `variables`"));
    };
    Ok(Some(TreatSpec {
        variables,
        cutoffs: Cutoffs::new(setting, &f, Ends::Included)?,
    }))
}

/// `[clean] winsorize`.
pub(super) fn winsorize<'de, D: Deserializer<'de>>(d: D) -> Result<Option<TreatSpec>, D::Error> {
    typed(d, |f| treat_spec("[clean] winsorize", f))
}

/// `[clean] trim`.
pub(super) fn trim<'de, D: Deserializer<'de>>(d: D) -> Result<Option<TreatSpec>, D::Error> {
    typed(d, |f| treat_spec("[clean] trim", f))
}

/// `[verdict]`: each finding's level, `"pass"`, `"warn"` or `"fail"`, by its key (the keys
/// are declared by the checks and checked against them by `audit::verdict::Levels`).
pub(super) fn verdict<'de, D: Deserializer<'de>>(
    d: D,
) -> Result<BTreeMap<String, Status>, D::Error> {
    typed(d, |m: BTreeMap<String, String>| {
        m.into_iter()
            .map(|(key, level)| {
                let status = match level.as_str() {
                    "pass" => Status::Pass,
                    "warn" => Status::Warn,
                    "fail" => Status::Fail,
                    other => {
                        return Err(format!(
                            "`[verdict] {key}` \"{other}\" is not \"pass\", \"warn\" or \"fail\""
                        ))
                    }
                };
                Ok((key, status))
            })
            .collect()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn duplicate_policies_parse() {
        assert_eq!(DuplicatePolicy::default(), DuplicatePolicy::Fail);
        assert_eq!(
            DuplicatePolicy::parse("prefer-min:assets").unwrap(),
            DuplicatePolicy::PreferMin("assets".into())
        );
        assert!(DuplicatePolicy::parse("newest").is_err());
        assert!(DuplicatePolicy::parse("prefer-max:").is_err());
    }

    #[test]
    fn cutoffs_check_their_ends() {
        let f = |lower, upper| CutoffFields {
            variables: None,
            lower: Some(lower),
            upper: Some(upper),
            by: None,
        };
        assert!(Cutoffs::new("x", &f(0.0, 1.0), Ends::Included).is_ok());
        assert!(Cutoffs::new("x", &f(0.0, 1.0), Ends::Inside).is_err());
        let err = Cutoffs::new("[clean] trim", &f(0.9, 0.1), Ends::Included).unwrap_err();
        assert!(err.starts_with("`[clean] trim` needs"), "{err}");
    }
}
