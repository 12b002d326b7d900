//! The data dictionary's entries: one per column of the cleaned panel.

use super::*;

pub(super) fn dictionary(
    panel: &DataFrame,
    report: &Report,
    input: &InputConfig,
    raw: &[String],
) -> Vec<DictionaryEntry> {
    let canonical: std::collections::BTreeMap<&String, &String> = input
        .rules
        .file
        .columns
        .iter()
        .map(|(c, r)| (r, c))
        .collect();
    let findings = report
        .cleaned
        .as_ref()
        .map_or(&report.findings, |c| &c.findings);
    let lines = findings
        .get::<crate::report::MissingFigures>()
        .map_or(&[][..], |f| &f.lines);
    let missing = |name: &str| lines.iter().find(|m| m.variable == name).map(|m| m.share);
    panel
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .map(|name| {
            let derived = report.derived.iter().find(|d| d.name == name);
            let treatment = report
                .treatment
                .iter()
                .find(|t| t.variable == name)
                .map(|t| {
                    let cuts = if t.cutoffs.len() == 1 {
                        let c = &t.cutoffs[0];
                        format!(
                            "cutoffs {} and {}",
                            c.lower.map_or("–".into(), crate::report::level),
                            c.upper.map_or("–".into(), crate::report::level)
                        )
                    } else if !t.groups.is_empty() {
                        format!(
                            "cutoffs per group of {} in report.json",
                            t.groups.join(" × ")
                        )
                    } else {
                        "cutoffs per period in report.json".to_string()
                    };
                    format!(
                        "{} at percentiles {} / {} ({}); {} below, {} above",
                        t.method, t.lower_percentile, t.upper_percentile, cuts, t.below, t.above
                    )
                })
                .unwrap_or_default();
            let nulled: Vec<String> = report
                .rules
                .iter()
                .filter(|l| l.nulls.contains(&name) && l.violations > 0)
                .map(|l| {
                    format!(
                        "set to null where rule `{}` does not hold ({} rows)",
                        l.name, l.violations
                    )
                })
                .collect();
            let treatment = [treatment]
                .into_iter()
                .chain(nulled)
                .filter(|t| !t.is_empty())
                .collect::<Vec<_>>()
                .join("; ");
            let (definition, unit, source) = match derived {
                Some(d) => (
                    format!("derived: `{}`", d.expr),
                    d.unit.clone(),
                    d.source.clone(),
                ),
                None if raw.contains(&name) => (
                    match canonical.get(&name) {
                        Some(c) => format!("raw column (canonical `{c}`)"),
                        None if name == input.entity => "raw column: the entity key".to_string(),
                        None if name == input.period => "raw column: the period key".to_string(),
                        None => "raw column".to_string(),
                    },
                    String::new(),
                    "input file".to_string(),
                ),
                None => match report.joins.iter().find(|j| j.columns.contains(&name)) {
                    Some(j) => (
                        format!("joined from `{}` on {}", j.file, j.on.join(", ")),
                        String::new(),
                        j.file.clone(),
                    ),
                    None => (
                        "row number in the input file (1 = first data row)".to_string(),
                        String::new(),
                        "panelready".to_string(),
                    ),
                },
            };
            DictionaryEntry {
                missing_share: missing(&name),
                label: derived.map(|d| d.label.clone()).unwrap_or_default(),
                name,
                definition,
                unit,
                source,
                treatment,
            }
        })
        .collect()
}
