//! The verdict: `pass`, `warn` or `fail` for each check family with a one-line reason, and
//! overall the worst of them. Computed from the finished report; documented in the README.

use crate::report::Report;
pub use crate::report::{CheckVerdict, Status, Verdict};

/// The level each finding raises the verdict to, from `[verdict]`.
#[derive(Debug, Clone)]
pub struct Levels {
    /// Unresolved conflicting keys.
    pub conflicting_keys: Status,
    /// Missing keys, copies, resolved conflicts.
    pub key_repairs: Status,
    /// Gaps.
    pub gaps: Status,
    /// Singletons.
    pub singletons: Status,
    /// Leavers differ at entry.
    pub attrition: Status,
    /// Absorbed or unidentified model regressor.
    pub absorbed_regressor: Status,
    /// Nearly absorbed variables.
    pub nearly_absorbed: Status,
    /// Coverage breaks.
    pub missing_breaks: Status,
    /// Unit slips.
    pub unit_slips: Status,
    /// Rule violations.
    pub rule_violations: Status,
    /// Model rules of thumb.
    pub model_warnings: Status,
    /// p-value for the attrition finding.
    pub attrition_p: f64,
}

impl Default for Levels {
    fn default() -> Levels {
        use Status::*;
        Levels {
            conflicting_keys: Fail,
            key_repairs: Warn,
            gaps: Warn,
            singletons: Warn,
            attrition: Warn,
            absorbed_regressor: Fail,
            nearly_absorbed: Warn,
            missing_breaks: Warn,
            unit_slips: Warn,
            rule_violations: Warn,
            model_warnings: Warn,
            attrition_p: 0.05,
        }
    }
}

impl Levels {
    /// Read `[verdict]` and `[thresholds] attrition_p`.
    pub fn from_rules(rules: &crate::rules::RulesFile) -> crate::Result<Levels> {
        let mut l = Levels::default();
        let v = &rules.verdict;
        for (value, slot, name) in [
            (
                &v.conflicting_keys,
                &mut l.conflicting_keys,
                "[verdict] conflicting_keys",
            ),
            (&v.key_repairs, &mut l.key_repairs, "[verdict] key_repairs"),
            (&v.gaps, &mut l.gaps, "[verdict] gaps"),
            (&v.singletons, &mut l.singletons, "[verdict] singletons"),
            (&v.attrition, &mut l.attrition, "[verdict] attrition"),
            (
                &v.absorbed_regressor,
                &mut l.absorbed_regressor,
                "[verdict] absorbed_regressor",
            ),
            (
                &v.nearly_absorbed,
                &mut l.nearly_absorbed,
                "[verdict] nearly_absorbed",
            ),
            (
                &v.missing_breaks,
                &mut l.missing_breaks,
                "[verdict] missing_breaks",
            ),
            (&v.unit_slips, &mut l.unit_slips, "[verdict] unit_slips"),
            (
                &v.rule_violations,
                &mut l.rule_violations,
                "[verdict] rule_violations",
            ),
            (
                &v.model_warnings,
                &mut l.model_warnings,
                "[verdict] model_warnings",
            ),
        ] {
            if let Some(text) = value {
                *slot = match text.as_str() {
                    "pass" => Status::Pass,
                    "warn" => Status::Warn,
                    "fail" => Status::Fail,
                    other => {
                        return Err(crate::Error::Setting {
                            setting: name,
                            message: format!("\"{other}\" is not \"pass\", \"warn\" or \"fail\""),
                        })
                    }
                };
            }
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
    checks.extend(super::registry().iter().filter_map(|c| c.verdict(r, lv)));
    checks.extend(super::accounting::verdict(r, lv));
    checks.extend(super::model::verdict(r, lv));
    let overall = checks
        .iter()
        .map(|c| c.status)
        .max()
        .unwrap_or(Status::Pass)
        .max(Status::Pass);
    Verdict { overall, checks }
}

/// The key steps' verdict line: unresolved conflicting keys, or the repairs made.
pub(super) fn keys(r: &Report, lv: &Levels) -> Option<CheckVerdict> {
    use Status::*;
    let k = &r.keys;
    let unresolved = k.policy == "report only" && k.conflicting_keys > 0;
    Some(if unresolved {
        line(
            "Keys",
            lv.conflicting_keys,
            format!(
                "{} entity-period keys appear on rows with different values",
                k.conflicting_keys
            ),
        )
    } else if k.missing_key_rows + k.exact_duplicate_rows + k.conflicting_rows > 0 {
        line(
            "Keys",
            lv.key_repairs,
            format!(
                "{} rows missing a key, {} exact copies, {} conflicting keys resolved by {}",
                k.missing_key_rows, k.exact_duplicate_rows, k.conflicting_keys, k.policy
            ),
        )
    } else {
        line(
            "Keys",
            Pass,
            "every entity-period key is present and unique".into(),
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
