//! The report laid out as sections of blocks (pairs, tables, notes), shared by the terminal
//! and Markdown renderers so that both show the same figures in the same order. Formatting of
//! numbers happens here; nothing is computed.

mod outcome;
mod structure;
mod variables;

pub(crate) use super::model::*;
use outcome::*;
use structure::*;
use variables::*;

/// One titled section.
pub(crate) struct Section {
    /// The label, from the project vocabulary.
    pub(crate) title: &'static str,
    /// Its content in order.
    pub(crate) blocks: Vec<Block>,
}

/// A piece of a section.
pub(crate) enum Block {
    /// Label and value rows.
    Pairs(Vec<(String, String)>),
    /// A table: header, rows; columns after the first are right-aligned.
    Table(Vec<String>, Vec<Vec<String>>),
    /// A sentence.
    Note(String),
}

/// A number with up to `digits` decimals, trailing zeros kept for alignment.
pub(crate) fn num(x: f64, digits: usize) -> String {
    if x.is_finite() {
        format!("{x:.digits$}")
    } else {
        "–".into()
    }
}

pub(crate) fn opt(x: Option<f64>, digits: usize) -> String {
    x.map_or("–".into(), |x| num(x, digits))
}

/// A p-value: four decimals, or "< 0.0001".
pub(crate) fn pval(p: Option<f64>) -> String {
    match p {
        Some(p) if p < 0.0001 => "< 0.0001".into(),
        Some(p) => num(p, 4),
        None => "–".into(),
    }
}

pub(crate) fn pairs(rows: &[(&str, String)]) -> Block {
    Block::Pairs(
        rows.iter()
            .map(|(a, b)| (a.to_string(), b.clone()))
            .collect(),
    )
}

pub(crate) fn strings(xs: &[&str]) -> Vec<String> {
    xs.iter().map(|s| s.to_string()).collect()
}

/// The whole report as sections.
pub(crate) fn sections(r: &Report) -> Vec<Section> {
    vec![
        glance(r),
        keys(r),
        coverage(r),
        entry_exit(r),
        variation(r),
        absorbed(r),
        missing(r),
        outliers(r),
        accounting(r),
        derived(r),
        model(r),
        sample(r),
        verdict(r),
    ]
}

fn glance(r: &Report) -> Section {
    let p = &r.panel;
    let window = match (p.first_period, p.last_period) {
        (Some(a), Some(b)) => format!("{a}..{b}"),
        _ => "none".into(),
    };
    Section {
        title: "Panel at a glance",
        blocks: vec![pairs(&[
            ("rows", p.rows.to_string()),
            ("entities", p.entities.to_string()),
            ("periods observed", p.periods.to_string()),
            ("window", window),
            ("balanced", if p.balanced { "yes" } else { "no" }.into()),
            ("unbalancedness gamma (1 = balanced)", opt(p.gamma, 4)),
            ("unbalancedness nu (1 = balanced)", opt(p.nu, 4)),
        ])],
    }
}

fn keys(r: &Report) -> Section {
    let k = &r.keys;
    let mut blocks = vec![pairs(&[
        (
            "rows missing entity or period",
            k.missing_key_rows.to_string(),
        ),
        (
            "exact copies of an earlier row",
            k.exact_duplicate_rows.to_string(),
        ),
        ("keys with exact copies", k.exact_duplicate_keys.to_string()),
        (
            "keys on rows with different values",
            k.conflicting_keys.to_string(),
        ),
        ("rows carrying those keys", k.conflicting_rows.to_string()),
        ("policy for those keys", k.policy.clone()),
    ])];
    if !k.examples.is_empty() {
        let list: Vec<String> = k
            .examples
            .iter()
            .map(|e| format!("{} in {} ({} rows)", e.entity, e.period, e.rows))
            .collect();
        blocks.push(Block::Note(format!(
            "First keys on rows with different values: {}.",
            list.join("; ")
        )));
    }
    Section {
        title: "Keys",
        blocks,
    }
}

/// Label-value pairs as two-column table rows.
pub(crate) fn pair_rows(rows: &[(String, String)]) -> Vec<Vec<String>> {
    rows.iter()
        .map(|(a, b)| vec![a.clone(), b.clone()])
        .collect()
}
