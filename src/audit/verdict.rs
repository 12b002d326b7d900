//! The verdict: `pass`, `warn` or `fail` for each check family with a one-line reason, and
//! overall the worst of them. Computed from the finished report; documented in the README.

use std::collections::BTreeMap;

pub(crate) use crate::report::layout::counted;
use crate::report::Report;
pub use crate::report::{CheckVerdict, Status, Verdict};

/// A finding whose level `[verdict]` may set: the key under `[verdict]` and the level it
/// raises the verdict to by default. Declared beside the code that judges the finding (a
/// check's through `Check::levels`), so that a new one needs no other file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LevelKey {
    /// The key under `[verdict]`.
    pub name: &'static str,
    /// The level without a setting.
    pub default: Status,
}

/// A `LevelKey` constant: `level_key!("gaps", Warn)`.
#[macro_export]
#[doc(hidden)]
macro_rules! level_key {
    ($name:literal, $default:ident) => {
        $crate::audit::verdict::LevelKey {
            name: $name,
            default: $crate::report::Status::$default,
        }
    };
}
pub use crate::level_key;

/// Keys on rows with different values left unresolved.
pub const CONFLICTING_KEYS: LevelKey = level_key!("conflicting_keys", Fail);
/// Rows missing a key, exact copies, or conflicts resolved by a policy.
pub const KEY_REPAIRS: LevelKey = level_key!("key_repairs", Warn);

/// Entity names alike but for surrounding spaces, letter case or leading zeros.
pub const ALIKE_ENTITIES: LevelKey = level_key!("alike_entities", Warn);

/// Every finding `[verdict]` may set, in the order the reports judge them: the key steps',
/// each check's (registry order), the accounting rules', model readiness's.
pub fn level_keys() -> Vec<LevelKey> {
    let mut keys = vec![CONFLICTING_KEYS, KEY_REPAIRS, ALIKE_ENTITIES];
    for check in super::registry() {
        keys.extend(check.levels());
    }
    keys.push(super::accounting::RULE_VIOLATIONS);
    keys.push(super::model::MODEL_WARNINGS);
    keys
}

/// The level each finding raises the verdict to, from `[verdict]`.
#[derive(Debug, Clone)]
pub struct Levels {
    /// The levels set in `[verdict]`, by key; the others take their default.
    set: BTreeMap<&'static str, Status>,
    /// p-value for the attrition finding.
    pub attrition_p: f64,
}

impl Default for Levels {
    fn default() -> Levels {
        Levels {
            set: BTreeMap::new(),
            attrition_p: 0.05,
        }
    }
}

impl Levels {
    /// The level of `key`'s finding.
    pub fn of(&self, key: &LevelKey) -> Status {
        self.set.get(key.name).copied().unwrap_or(key.default)
    }

    /// Read `[verdict]` and `[thresholds] attrition_p`.
    pub fn from_rules(rules: &crate::rules::RulesFile) -> crate::Result<Levels> {
        let mut l = Levels::default();
        let keys = level_keys();
        for (name, status) in &rules.verdict {
            let Some(key) = keys.iter().find(|k| k.name == name) else {
                let known: Vec<&str> = keys.iter().map(|k| k.name).collect();
                return Err(crate::Error::Setting {
                    setting: "[verdict]",
                    message: format!(
                        "`{name}` is not a finding with a level; the findings are {}",
                        known.join(", ")
                    ),
                });
            };
            l.set.insert(key.name, *status);
        }
        if let Some(p) = rules.thresholds.attrition_p {
            if !(0.0 < p && p < 1.0) {
                return Err(crate::Error::Setting {
                    setting: "[thresholds] attrition_p",
                    message: "must be between 0 and 1".into(),
                });
            }
            l.attrition_p = p;
        }
        Ok(l)
    }
}

pub(crate) fn line(check: &str, status: Status, reason: String) -> CheckVerdict {
    CheckVerdict {
        check: check.to_string(),
        status,
        reason,
    }
}

/// Judge a finished report: each finding at the level `[verdict]` gives it. Each line is
/// written by what found it, in the order the reports list them: the key steps', each
/// check's (`Check::verdict`, registry order), the accounting rules' (which act before
/// derivation), then model readiness; overall is the worst of them.
pub fn judge(r: &Report, lv: &Levels) -> Verdict {
    let mut checks: Vec<CheckVerdict> = Vec::new();
    checks.extend(keys(r, lv));
    for check in super::registry() {
        checks.extend(check.verdict(r, lv).map(|v| match r.panel.rows {
            0 => unexamined(v, r),
            _ => v,
        }));
    }
    checks.extend(super::accounting::verdict(r, lv));
    checks.extend(super::model::verdict(r, lv));
    checks.extend(emptied(r));
    let overall = checks
        .iter()
        .map(|c| c.status)
        .max()
        .unwrap_or(Status::Pass)
        .max(Status::Pass);
    Verdict { overall, checks }
}

/// The key steps' verdict line: unresolved conflicting keys, or the repairs made; and entity
/// names alike but for spaces, case or leading zeros, beside either.
pub(super) fn keys(r: &Report, lv: &Levels) -> Option<CheckVerdict> {
    use Status::*;
    let k = &r.keys;
    let unresolved = k.policy == "report only" && k.conflicting_keys > 0;
    let mut found = Vec::new();
    if unresolved {
        found.push((
            lv.of(&CONFLICTING_KEYS),
            format!(
                "{} on rows with different values",
                counted(
                    k.conflicting_keys,
                    "entity-period key appears",
                    "entity-period keys appear"
                )
            ),
        ));
    } else if k.missing_key_rows + k.exact_duplicate_rows + k.conflicting_rows > 0 {
        found.push((
            lv.of(&KEY_REPAIRS),
            format!(
                "{} missing a key, {}, {} resolved by {}",
                counted(k.missing_key_rows, "row", "rows"),
                counted(k.exact_duplicate_rows, "exact copy", "exact copies"),
                counted(k.conflicting_keys, "conflicting key", "conflicting keys"),
                k.policy
            ),
        ));
    }
    if k.alike_entities > 0 {
        found.push((
            lv.of(&ALIKE_ENTITIES),
            format!(
                "{} of entity names alike but for spaces, letter case or leading zeros",
                counted(k.alike_entities, "group", "groups")
            ),
        ));
    }
    // The joined files' unmatched names alike a panel one: entities, then group values.
    let by_entity = |on_entity: bool| -> u64 {
        r.joins
            .iter()
            .filter(|j| j.kind.starts_with("entity") == on_entity)
            .map(|j| j.alike_unmatched)
            .sum()
    };
    for (n, what) in [
        (
            by_entity(true),
            "entity names of joined files alike a panel entity",
        ),
        (
            by_entity(false),
            "group values of joined files alike a panel value",
        ),
    ] {
        if n > 0 {
            found.push((
                lv.of(&ALIKE_ENTITIES),
                format!("{n} unmatched {what} but for spaces, letter case or leading zeros"),
            ));
        }
    }
    Some(match found.iter().map(|(status, _)| *status).max() {
        // Blank rows are no cause for a finding, but a file of nothing else has no key at all.
        None if r.input.rows > 0 && k.blank_rows >= r.input.rows => line(
            "Keys",
            NotChecked,
            format!(
                "no key to check: the {} rows read were all blank",
                r.input.rows
            ),
        ),
        None => line(
            "Keys",
            Pass,
            "every entity-period key is present and unique".into(),
        ),
        Some(status) => {
            let reasons: Vec<String> = found.into_iter().map(|(_, reason)| reason).collect();
            line("Keys", status, reasons.join("; "))
        }
    })
}

/// A check's line when no row reached the checks (the key steps or the accounting rules
/// removed every row read): whatever its figures, it examined nothing.
fn unexamined(v: CheckVerdict, r: &Report) -> CheckVerdict {
    line(
        &v.check,
        Status::NotChecked,
        format!(
            "no row to check: the {} rows read were all removed before the checks (see the \
             sample construction)",
            r.input.rows
        ),
    )
}

/// A line only when cleaning left no row of a panel that had some (a balancing window outside
/// the data, a rule every row breaks): every other line judges the panel as read, so without
/// it an empty hand-over could pass.
fn emptied(r: &Report) -> Option<CheckVerdict> {
    let cleaned = r.cleaned.as_ref()?;
    (cleaned.panel.rows == 0 && r.input.rows > 0).then(|| {
        line(
            "Cleaned panel",
            Status::Fail,
            format!(
                "no row is left of the {} read: see the sample construction for the step that \
                 removed them",
                r.input.rows
            ),
        )
    })
}

/// One line at the worst level among several findings, their reasons joined.
pub(crate) fn worst(check: &str, findings: Vec<(Status, String)>) -> CheckVerdict {
    let status = findings
        .iter()
        .map(|(s, _)| *s)
        .max()
        .unwrap_or(Status::Pass);
    let reason = findings
        .into_iter()
        .map(|(_, r)| r)
        .collect::<Vec<_>>()
        .join("; ");
    line(check, status, reason)
}
