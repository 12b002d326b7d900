//! Layout of the variable sections: variation, absorption, missing values, outliers and
//! unit slips, accounting rules, derived variables.

use super::*;

pub(super) fn accounting(r: &Report) -> Section {
    let blocks = if r.rules.is_empty() {
        vec![Block::Note("No accounting rules.".into())]
    } else {
        let rows = r
            .rules
            .iter()
            .map(|l| {
                vec![
                    l.name.clone(),
                    l.expr.clone(),
                    l.action.clone(),
                    l.violations.to_string(),
                    l.unknown.to_string(),
                ]
            })
            .collect();
        vec![
            Block::Table(
                strings(&["rule", "must hold", "action", "broken", "not checkable"]),
                rows,
            ),
            Block::Note(
                "Broken: rows where the condition is false. Not checkable: an input is missing. \
                 `build` sets a `null` rule's columns to null and moves a `drop` rule's rows to \
                 the rejects ledger; `audit` only counts."
                    .into(),
            ),
        ]
    };
    Section {
        title: "Accounting rules",
        blocks,
    }
}

/// How a derived variable's nulls break down, in words.
pub(crate) fn null_breakdown(d: &DerivedSummary) -> String {
    let parts: Vec<String> = d
        .null_reasons
        .iter()
        .filter(|n| n.rows > 0)
        .map(|n| format!("{}: {}", n.reason, n.rows))
        .collect();
    if parts.is_empty() {
        "none".into()
    } else {
        parts.join("; ")
    }
}

pub(super) fn derived(r: &Report) -> Section {
    let rows = r
        .derived
        .iter()
        .map(|d| {
            vec![
                d.name.clone(),
                if d.label.is_empty() {
                    "–".into()
                } else {
                    d.label.clone()
                },
                d.non_null.to_string(),
                d.nulls.to_string(),
                null_breakdown(d),
            ]
        })
        .collect();
    let mut blocks = vec![Block::Table(
        strings(&[
            "derived variable",
            "label (from the rules)",
            "with a value",
            "null",
            "why null",
        ]),
        rows,
    )];
    for s in &r.skipped {
        let near = s
            .near
            .as_ref()
            .map_or(String::new(), |near| format!(" ({near})"));
        blocks.push(Block::Note(format!(
            "Library ratio {} left out: no column `{}`{near}.",
            s.name, s.missing
        )));
    }
    Section {
        title: "Derived variables",
        blocks,
    }
}
