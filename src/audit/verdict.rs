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

fn line(check: &str, status: Status, reason: String) -> CheckVerdict {
    CheckVerdict {
        check: check.to_string(),
        status,
        reason,
    }
}

/// Judge a finished report: each finding at the level `[verdict]` gives it.
pub fn judge(r: &Report, lv: &Levels) -> Verdict {
    use Status::*;
    let mut checks = Vec::new();
    let k = &r.keys;
    let unresolved = k.policy == "report only" && k.conflicting_keys > 0;
    checks.push(if unresolved {
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
    });
    let c = &r.coverage;
    let mut coverage = Vec::new();
    if c.entities_with_gaps > 0 {
        coverage.push((
            lv.gaps,
            format!("{} entities with gaps", c.entities_with_gaps),
        ));
    }
    if c.singletons > 0 {
        coverage.push((lv.singletons, format!("{} singletons", c.singletons)));
    }
    checks.push(if coverage.is_empty() {
        line("Coverage", Pass, "no gaps and no singletons".into())
    } else {
        worst("Coverage", coverage)
    });
    let compared: Vec<&str> = r
        .attrition
        .iter()
        .filter(|a| a.p.is_some())
        .map(|a| a.variable.as_str())
        .collect();
    let differ: Vec<&str> = r
        .attrition
        .iter()
        .filter(|a| a.p.is_some_and(|p| p < lv.attrition_p))
        .map(|a| a.variable.as_str())
        .collect();
    checks.push(if compared.is_empty() {
        line(
            "Entry and exit",
            NotChecked,
            "no variable could be compared between leavers and stayers".into(),
        )
    } else if differ.is_empty() {
        line(
            "Entry and exit",
            Pass,
            format!(
                "leavers and stayers do not differ at entry (p >= {}) in {} variables compared",
                lv.attrition_p,
                compared.len()
            ),
        )
    } else {
        line(
            "Entry and exit",
            lv.attrition,
            format!(
                "leavers differ from stayers at entry in {}",
                differ.join(", ")
            ),
        )
    });
    // A model regressor counts as absorbed only under the effects the model declares.
    let absorbed_regressor: Vec<&str> = r
        .model
        .iter()
        .flat_map(|m| m.not_identified_within.iter().chain(&m.not_identified))
        .map(String::as_str)
        .collect();
    let nearly: Vec<&str> = r
        .variation
        .iter()
        .filter(|v| v.nearly_absorbed)
        .map(|v| v.variable.as_str())
        .collect();
    let absorbed = r
        .variation
        .iter()
        .filter(|v| v.absorbed_by.is_some())
        .count();
    let mut absorption = Vec::new();
    if !absorbed_regressor.is_empty() {
        absorption.push((
            lv.absorbed_regressor,
            format!(
                "model regressors absorbed by fixed effects: {}",
                absorbed_regressor.join(", ")
            ),
        ));
    }
    if !nearly.is_empty() {
        absorption.push((
            lv.nearly_absorbed,
            format!("nearly absorbed: {}", nearly.join(", ")),
        ));
    }
    checks.push(if r.variation.is_empty() {
        line(
            "Absorbed by fixed effects",
            NotChecked,
            "no variable besides the keys".into(),
        )
    } else if absorption.is_empty() {
        line(
            "Absorbed by fixed effects",
            Pass,
            format!("{absorbed} variables absorbed (time-invariant traits or macro series), none nearly"),
        )
    } else {
        worst("Absorbed by fixed effects", absorption)
    });
    checks.push(if r.missing.is_empty() {
        line(
            "Missing values",
            NotChecked,
            "no variable besides the keys".into(),
        )
    } else if r.missing_breaks.is_empty() {
        line(
            "Missing values",
            Pass,
            "no sharp change in coverage between periods".into(),
        )
    } else {
        line(
            "Missing values",
            lv.missing_breaks,
            format!("{} coverage breaks between periods", r.missing_breaks.len()),
        )
    });
    let mut outliers = Vec::new();
    if r.unit_slips_total > 0 {
        outliers.push((
            lv.unit_slips,
            format!("{} suspected unit slips", r.unit_slips_total),
        ));
    }
    if r.outliers.iter().any(|o| o.small_groups) {
        outliers.push((Warn, "some periods are too small for their cutoffs".into()));
    }
    checks.push(if !outliers.is_empty() {
        worst("Outliers and unit slips", outliers)
    } else if r.unit_slips_searched == 0 {
        line(
            "Outliers and unit slips",
            NotChecked,
            "no level variable to search for unit slips".into(),
        )
    } else {
        line(
            "Outliers and unit slips",
            Pass,
            format!("no unit slips in {} level variables", r.unit_slips_searched),
        )
    });
    let broken: u64 = r.rules.iter().map(|l| l.violations).sum();
    checks.push(if r.rules.is_empty() {
        line(
            "Accounting rules",
            NotChecked,
            "no accounting rule applies".into(),
        )
    } else if broken > 0 {
        line(
            "Accounting rules",
            lv.rule_violations,
            format!("{broken} rule violations"),
        )
    } else {
        line(
            "Accounting rules",
            Pass,
            format!("{} rules hold on every row", r.rules.len()),
        )
    });
    if let Some(m) = &r.model {
        let not_identified: Vec<&String> = m
            .not_identified
            .iter()
            .chain(&m.not_identified_within)
            .collect();
        let mut findings = Vec::new();
        if !not_identified.is_empty() {
            findings.push((
                lv.absorbed_regressor,
                format!(
                    "not identified by every estimator: {}",
                    not_identified
                        .iter()
                        .map(|s| s.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ));
        }
        let thumbs = m.warnings.len().saturating_sub(not_identified.len());
        if thumbs > 0 {
            findings.push((lv.model_warnings, format!("{thumbs} rules of thumb apply")));
        }
        checks.push(if m.questions.iter().all(|q| q.tests.is_empty()) {
            line(
                "Model readiness",
                Fail,
                "no diagnostic could be computed".into(),
            )
        } else if findings.is_empty() {
            line("Model readiness", Pass, "no rule of thumb applies".into())
        } else {
            worst("Model readiness", findings)
        });
    }
    let overall = checks
        .iter()
        .map(|c| c.status)
        .max()
        .unwrap_or(Pass)
        .max(Pass);
    Verdict { overall, checks }
}

/// One line at the worst level among several findings, their reasons joined.
fn worst(check: &str, findings: Vec<(Status, String)>) -> CheckVerdict {
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
