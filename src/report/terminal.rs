//! The terminal renderer: comfy-table tables that read well at 100 columns.

use std::io::Write;

use comfy_table::presets::UTF8_HORIZONTAL_ONLY;
use comfy_table::{CellAlignment, ContentArrangement, Table};

use super::{glance_rows, key_rows, null_breakdown, Render, Report};

/// Renders the report as tables for a person at a terminal.
pub struct Terminal;

fn table(header: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_preset(UTF8_HORIZONTAL_ONLY)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(100)
        .set_header(header.to_vec());
    t
}

fn pairs(rows: &[(&str, String)]) -> Table {
    let mut t = table(&["", ""]);
    for (label, value) in rows {
        t.add_row(vec![label.to_string(), value.clone()]);
    }
    if let Some(c) = t.column_mut(1) {
        c.set_cell_alignment(CellAlignment::Right);
    }
    t
}

impl Render for Terminal {
    fn render(&self, r: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        writeln!(
            wtr,
            "{}: {} rows read (entity `{}`, period `{}`)\n",
            r.input.path, r.input.rows, r.input.entity, r.input.period
        )?;
        writeln!(wtr, "PANEL AT A GLANCE\n{}\n", pairs(&glance_rows(r)))?;
        writeln!(wtr, "KEYS\n{}", pairs(&key_rows(r)))?;
        for e in &r.keys.examples {
            writeln!(
                wtr,
                "  e.g. entity {} in {}: {} rows",
                e.entity, e.period, e.rows
            )?;
        }
        writeln!(wtr)?;
        let mut t = table(&["derived variable", "with a value", "null", "why null"]);
        for d in &r.derived {
            t.add_row(vec![
                d.name.clone(),
                d.non_null.to_string(),
                d.nulls.to_string(),
                null_breakdown(d),
            ]);
        }
        for i in [1, 2] {
            if let Some(c) = t.column_mut(i) {
                c.set_cell_alignment(CellAlignment::Right);
            }
        }
        writeln!(wtr, "DERIVED VARIABLES\n{t}")?;
        for s in &r.skipped {
            writeln!(
                wtr,
                "  library ratio {} left out: no column `{}`",
                s.name, s.missing
            )?;
        }
        writeln!(wtr)?;
        let mut t = table(&[
            "step",
            "rows before",
            "removed",
            "rows after",
            "entities after",
        ]);
        for s in &r.sample_construction {
            t.add_row(vec![
                s.step.clone(),
                s.rows_before.to_string(),
                s.removed.to_string(),
                s.rows_after.to_string(),
                s.entities_after.to_string(),
            ]);
        }
        for i in 1..5 {
            if let Some(c) = t.column_mut(i) {
                c.set_cell_alignment(CellAlignment::Right);
            }
        }
        writeln!(wtr, "SAMPLE CONSTRUCTION\n{t}\n")?;
        writeln!(
            wtr,
            "These figures inform a judgement about the data; they do not show that a model is right."
        )
    }
}
