//! The report laid out as sections of blocks (pairs, tables, notes), shared by the terminal
//! and Markdown renderers so that both show the same figures in the same order. Formatting of
//! numbers happens here; nothing is computed.

mod outcome;
mod variables;

pub(crate) use super::model::*;
pub(crate) use outcome::headline;
use outcome::*;
use variables::*;

/// One titled section.
pub struct Section {
    /// The label, from the project vocabulary.
    pub title: &'static str,
    /// Its content in order.
    pub blocks: Vec<Block>,
}

/// A piece of a section.
pub enum Block {
    /// Label and value rows.
    Pairs(Vec<(String, String)>),
    /// A table: header, rows; columns after the first are right-aligned.
    Table(Vec<String>, Vec<Vec<String>>),
    /// A sentence.
    Note(String),
    /// A sub-heading inside a section.
    Heading(String),
}

/// `n` and the noun after it, singular for one: "1 singleton", "3 singletons".
pub(crate) fn counted(n: u64, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// A number with up to `digits` decimals, trailing zeros kept for alignment.
pub(crate) fn num(x: f64, digits: usize) -> String {
    if x.is_finite() {
        format!("{x:.digits$}")
    } else {
        "–".into()
    }
}

/// A level (a mean, an SD, a cutoff, a slope) for reading: four significant digits, no
/// decimals from 1000 on, scientific notation only below 1e-6 or from 1e12.
pub(crate) fn level(x: f64) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    let a = x.abs();
    if a == 0.0 {
        return "0".into();
    }
    if !(1e-6..1e12).contains(&a) {
        return format!("{x:.3e}");
    }
    let decimals = (3 - a.log10().floor() as i64).max(0) as usize;
    format!("{x:.decimals$}")
}

pub(crate) fn opt_level(x: Option<f64>) -> String {
    x.map_or("–".into(), level)
}

/// A test statistic: three decimals, one from 1000 on.
pub(crate) fn stat(x: f64) -> String {
    if x.is_finite() && x.abs() >= 1000.0 {
        num(x, 1)
    } else {
        num(x, 3)
    }
}

/// Whether a table cell holds a figure (right-aligned by every renderer): digits with signs,
/// decimal points, separators and the few marks the layout uses ("< 0.0001", "1 / 7", "x 1000",
/// "–" for none); text that merely starts with a digit is not a figure.
pub(crate) fn is_figure(cell: &str) -> bool {
    let c = cell.trim();
    c == "–"
        || (c.chars().any(|ch| ch.is_ascii_digit())
            && c.chars()
                .all(|ch| ch.is_ascii_digit() || " .,:+-–−<>/×x%e()".contains(ch)))
}

/// Whether every cell of column `i` is a figure (the first column never is).
pub(crate) fn figure_column(rows: &[Vec<String>], i: usize) -> bool {
    i > 0 && rows.iter().all(|r| r.get(i).is_none_or(|c| is_figure(c)))
}

/// The anchor of a section title as Markdown renderers make it ("Entry and exit" ->
/// "entry-and-exit"); the HTML report uses the same ids.
pub(crate) fn slug(title: &str) -> String {
    title
        .to_lowercase()
        .chars()
        .filter_map(|c| match c {
            'a'..='z' | '0'..='9' | '-' | '_' => Some(c),
            ' ' => Some('-'),
            _ => None,
        })
        .collect()
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
    let joins = (!r.joins.is_empty()).then(|| joins(r));
    [glance(r), keys(r)]
        .into_iter()
        .chain(joins)
        .chain(r.findings.iter().flat_map(|f| f.sections(r)))
        .chain([accounting(r), derived(r), model(r), sample(r), verdict(r)])
        .collect()
}

/// How each joined table matched the panel.
fn joins(r: &Report) -> Section {
    let mut blocks = Vec::new();
    for j in &r.joins {
        blocks.push(Block::Heading(format!(
            "{} ({}, on {})",
            j.file,
            j.kind,
            j.on.join(", ")
        )));
        let alike = match j.kind.starts_with("entity") {
            true => "unmatched names alike a panel entity but for spaces, case or zeros".into(),
            false => format!(
                "unmatched `{}` values alike a panel one but for spaces, case or zeros",
                j.alike_column
            ),
        };
        let mut rows = vec![
            ("columns brought in", j.columns.join(", ")),
            ("rows in the file", j.rows.to_string()),
            ("rows that matched the panel", j.rows_used.to_string()),
            (
                "rows that matched no panel row",
                j.rows_unmatched.to_string(),
            ),
        ];
        for (label, n) in [
            ("rows with an empty key", j.missing_keys),
            ("exact copies", j.exact_copies),
            ("repeated keys (first kept)", j.repeated_keys),
        ] {
            if n > 0 {
                rows.push((label, n.to_string()));
            }
        }
        rows.push((
            "panel rows without a match",
            format!("{} of {}", j.panel_rows_unmatched, j.panel_rows),
        ));
        rows.push((
            "panel keys without a match",
            format!("{} of {}", j.panel_keys_unmatched, j.panel_keys),
        ));
        if let [file, panel] = &j.alike_example[..] {
            rows.push((
                alike.as_str(),
                format!(
                    "{} (first: `{file}` in the file, `{panel}` in the panel)",
                    j.alike_unmatched
                ),
            ));
        }
        blocks.push(pairs(&rows));
        let mut note = format!(
            "Every row of `{}` that did not match the panel is in the rejects ledger under its \
             file name.",
            j.file
        );
        if j.panel_rows_unmatched > 0 {
            note.push_str(&format!(
                " Panel rows without a match {} (first keys: {}).",
                if j.unmatched == "drop" {
                    "were dropped into the ledger (`unmatched = \"drop\"`)"
                } else {
                    "are kept with empty joined columns"
                },
                j.examples.join("; ")
            ));
        }
        blocks.push(Block::Note(note));
    }
    Section {
        title: "Joined files",
        blocks,
    }
}

fn glance(r: &Report) -> Section {
    let mut section = glance_figures(r);
    if let Some(sheet) = &r.input.sheet {
        section
            .blocks
            .push(Block::Note(format!("Read from the sheet `{sheet}`.")));
    }
    for note in &r.input.notes {
        section
            .blocks
            .push(Block::Note(format!("Reading the input: {note}.")));
    }
    section
}

fn glance_figures(r: &Report) -> Section {
    let p = &r.panel;
    let window = match (p.first_period, p.last_period) {
        (Some(a), Some(b)) => format!("{a}..{b}"),
        _ => "none".into(),
    };
    Section {
        title: "Panel at a glance",
        blocks: vec![
            pairs(&[
                ("rows", p.rows.to_string()),
                ("entities", p.entities.to_string()),
                ("periods observed", p.periods.to_string()),
                ("window", window),
                ("balanced", if p.balanced { "yes" } else { "no" }.into()),
                (
                    "evenness of periods per entity, harmonic (1 = balanced)",
                    opt(p.evenness_harmonic, 4),
                ),
                (
                    "evenness of periods per entity, squares (1 = balanced)",
                    opt(p.evenness_squares, 4),
                ),
            ]),
            Block::Note(
                "Evenness: how alike the entities are in their number of periods. The harmonic \
                 figure (harmonic over arithmetic mean of periods per entity) falls when some \
                 entities have few periods; the squares figure (squared mean over mean square) \
                 when entity sizes vary widely. They are Ahrens & Pincus's (1981) γ and ν \
                 (Biometrical Journal 23(3))."
                    .into(),
            ),
        ],
    }
}

fn keys(r: &Report) -> Section {
    let k = &r.keys;
    let mut rows = vec![(
        "rows missing entity or period",
        k.missing_key_rows.to_string(),
    )];
    if k.blank_rows > 0 {
        rows.push((
            "blank rows (every cell empty), in the ledger",
            k.blank_rows.to_string(),
        ));
    }
    rows.extend([
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
        (
            "entities alike but for spaces, case or zeros",
            k.alike_entities.to_string(),
        ),
    ]);
    let mut blocks = vec![pairs(&rows)];
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
    if !k.alike_examples.is_empty() {
        let list: Vec<String> = k
            .alike_examples
            .iter()
            .map(|names| {
                let quoted: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
                quoted.join(" and ")
            })
            .collect();
        blocks.push(Block::Note(format!(
            "Entity names that are one name but for surrounding spaces, letter case or leading \
             zeros, most likely one firm keyed two ways and counted as two entities (first: {}). Correct the \
             names in the raw file; panelready keeps them as they are.",
            list.join("; ")
        )));
    }
    if let Some(y) = &k.year_end_changes {
        blocks.push(Block::Note(format!(
            "The period `{}` is derived from the fiscal-year-end date `{}`: its year, less one \
             when it ends in month {} or earlier. {} entities changed their year-end month{}; a \
             change can put two rows of one entity into one fiscal year, which the policy for \
             conflicting keys then handles.",
            r.input.period,
            y.column,
            y.cutoff_month,
            y.entities,
            if y.examples.is_empty() {
                String::new()
            } else {
                format!(" (first: {})", y.examples.join(", "))
            }
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
