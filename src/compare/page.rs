//! The comparison laid out as report sections (terminal, Markdown, HTML).

use super::*;

/// The summary as report sections.
pub(crate) fn page(c: &Comparison) -> Page {
    let side_rows = |label: &str, f: &dyn Fn(&VintageSummary) -> String| {
        vec![label.to_string(), f(&c.old), f(&c.new)]
    };
    let vintages = Block::Table(
        strings(&["", "old", "new"]),
        vec![
            side_rows("what", &|v| v.kind.to_string()),
            side_rows("rows read", &|v| v.rows_read.to_string()),
            side_rows("rows without entity or period", &|v| {
                v.rows_without_key.to_string()
            }),
            side_rows("exact copies counted once", &|v| v.exact_copies.to_string()),
            side_rows("firm-years compared", &|v| v.firm_years.to_string()),
            side_rows("entities", &|v| v.entities.to_string()),
        ],
    );
    let list = |xs: &[String]| {
        if xs.is_empty() {
            "none".to_string()
        } else if xs.len() <= 10 {
            xs.join(", ")
        } else {
            format!("{}, … ({} in all)", xs[..10].join(", "), xs.len())
        }
    };
    let rows = Block::Pairs(vec![
        (
            "firm-years in both".into(),
            c.firm_years_in_both.to_string(),
        ),
        ("firm-years added".into(), c.firm_years_added.to_string()),
        (
            "firm-years removed".into(),
            c.firm_years_removed.to_string(),
        ),
        ("entities added".into(), c.entities_added.len().to_string()),
        (
            "entities removed".into(),
            c.entities_removed.len().to_string(),
        ),
    ]);
    let mut firm_years = vec![rows];
    if !c.entities_added.is_empty() {
        firm_years.push(Block::Note(format!(
            "Entities added: {}.",
            list(&c.entities_added)
        )));
    }
    if !c.entities_removed.is_empty() {
        firm_years.push(Block::Note(format!(
            "Entities removed: {}.",
            list(&c.entities_removed)
        )));
    }
    if let Some(r) = &c.ids_rewritten {
        let (old, new) = &r.example;
        firm_years.push(Block::Note(format!(
            "{} of the entities added {} entities removed written without their leading \
             zeros, or with others (`{old}` became `{new}`), as a spreadsheet writes ids it \
             reads as numbers: the ids changed form, perhaps not the firms; write the ids \
             one way in both files to compare the firms.",
            r.entities,
            if r.entities == 1 {
                "is one of the"
            } else {
                "are"
            }
        )));
    }
    let table = Block::Table(
        strings(&[
            "column",
            "kind",
            "compared as",
            "cells changed",
            "became missing",
            "became present",
            "largest change",
        ]),
        c.columns
            .iter()
            .map(|k| {
                vec![
                    k.column.clone(),
                    if k.derived { "derived" } else { "raw" }.into(),
                    k.compared_as.into(),
                    k.cells_changed.to_string(),
                    k.became_missing.to_string(),
                    k.became_present.to_string(),
                    k.largest_change.map_or("–".into(), level),
                ]
            })
            .collect(),
    );
    let mut cells = if c.cells_checked {
        vec![table]
    } else {
        vec![Block::Note(
            "Cells not checked: the two vintages share no column besides the keys, or no \
             firm-year."
                .into(),
        )]
    };
    let mixed: Vec<String> = c
        .columns
        .iter()
        .filter(|k| k.compared_as == "number and text")
        .map(|k| k.column.clone())
        .collect();
    if c.cells_checked && !mixed.is_empty() {
        cells.push(Block::Note(format!(
            "Numbers in one vintage and text in the other: {}. Cells that read as numbers in \
             both are compared as numbers; a cell that does not (text such as `n/a`) is compared \
             as text, so it counts as changed.",
            list(&mixed)
        )));
    }
    if !c.columns_added.is_empty() {
        cells.push(Block::Note(format!(
            "Columns only in the new vintage: {}.",
            list(&c.columns_added)
        )));
    }
    if !c.columns_removed.is_empty() {
        cells.push(Block::Note(format!(
            "Columns only in the old vintage: {}.",
            list(&c.columns_removed)
        )));
    }
    let folded: Vec<String> = c
        .columns
        .iter()
        .filter_map(|k| Some((k, k.case_or_spaces_only.filter(|n| *n > 0)?)))
        .map(|(k, n)| format!("`{}` {n} of {}", k.column, k.cells_changed))
        .collect();
    if c.cells_checked && !folded.is_empty() {
        cells.push(Block::Note(format!(
            "Text changed only in letter case or surrounding spaces (`Mills` and `MILLS `): {}. \
             The same words written another way, perhaps by a new export; they count as changed.",
            folded.join(", ")
        )));
    }
    if !c.same_values.is_empty() {
        let pairs: Vec<String> = c
            .same_values
            .iter()
            .map(|s| format!("`{}` (old) as `{}` (new)", s.old, s.new))
            .collect();
        cells.push(Block::Note(format!(
            "The same values under another name, on every firm-year in both (missing in the \
             same ones, numbers within the tolerance): {}. Perhaps renamed; if so, these \
             cells did not change.",
            pairs.join("; ")
        )));
    }
    let overrides: Vec<String> = c
        .tolerance
        .by_column
        .iter()
        .map(|(k, (a, r))| format!("{k}: {a} + {r} · |old|"))
        .collect();
    cells.push(Block::Note(format!(
        "Over the firm-years in both. A number counts as changed when |new − old| > {} + {} · \
         |old|{}; a value that appears or vanishes always counts; text must match exactly. The \
         change ledger lists every changed cell.",
        c.tolerance.absolute,
        c.tolerance.relative,
        if overrides.is_empty() {
            String::new()
        } else {
            format!(" (by column: {})", overrides.join("; "))
        }
    )));
    Page {
        title: "Comparison of two vintages".into(),
        subtitle: format!(
            "old `{}` · new `{}` · entity `{}` · period `{}` · {}",
            c.old.path,
            c.new.path,
            c.keys.0,
            c.keys.1,
            if c.changed {
                "changed beyond the tolerance"
            } else {
                "no change beyond the tolerance"
            }
        ),
        sections: vec![
            Section {
                title: "Vintages",
                blocks: vec![vintages],
            },
            Section {
                title: "Firm-years and entities",
                blocks: firm_years,
            },
            Section {
                title: "Cells",
                blocks: cells,
            },
        ],
    }
}
