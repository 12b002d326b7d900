//! The Markdown renderer: the report as headed sections with pipe tables.

use std::io::Write;

use super::{glance_rows, key_rows, null_breakdown, Render, Report};

/// Renders the report as Markdown.
pub struct Markdown;

fn pairs(wtr: &mut dyn Write, rows: &[(&str, String)]) -> std::io::Result<()> {
    writeln!(wtr, "| figure | value |")?;
    writeln!(wtr, "|---|---:|")?;
    for (label, value) in rows {
        writeln!(wtr, "| {label} | {} |", cell(value))?;
    }
    writeln!(wtr)
}

fn cell(s: &str) -> String {
    s.replace('|', "\\|")
}

impl Render for Markdown {
    fn render(&self, r: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        writeln!(wtr, "# Readiness report: `{}`\n", r.input.path)?;
        writeln!(
            wtr,
            "panelready {} · {} rows read · entity `{}` · period `{}`\n",
            r.tool_version, r.input.rows, r.input.entity, r.input.period
        )?;
        writeln!(wtr, "## Panel at a glance\n")?;
        pairs(wtr, &glance_rows(r))?;
        writeln!(wtr, "## Keys\n")?;
        pairs(wtr, &key_rows(r))?;
        if !r.keys.examples.is_empty() {
            writeln!(wtr, "First keys on rows with different values:\n")?;
            for e in &r.keys.examples {
                writeln!(
                    wtr,
                    "- entity `{}`, period {}: {} rows",
                    e.entity, e.period, e.rows
                )?;
            }
            writeln!(wtr)?;
        }
        writeln!(wtr, "## Derived variables\n")?;
        if r.derived.is_empty() {
            writeln!(wtr, "No derived variables.\n")?;
        } else {
            writeln!(
                wtr,
                "| variable | with a value | null | why null | definition |"
            )?;
            writeln!(wtr, "|---|---:|---:|---|---|")?;
            for d in &r.derived {
                writeln!(
                    wtr,
                    "| `{}` | {} | {} | {} | `{}` |",
                    d.name,
                    d.non_null,
                    d.nulls,
                    cell(&null_breakdown(d)),
                    cell(&d.expr)
                )?;
            }
            writeln!(wtr)?;
        }
        for s in &r.skipped {
            writeln!(
                wtr,
                "- library ratio `{}` left out: no column `{}`",
                s.name, s.missing
            )?;
        }
        if !r.skipped.is_empty() {
            writeln!(wtr)?;
        }
        writeln!(wtr, "## Sample construction\n")?;
        writeln!(
            wtr,
            "| step | rows before | removed | rows after | entities after |"
        )?;
        writeln!(wtr, "|---|---:|---:|---:|---:|")?;
        for s in &r.sample_construction {
            writeln!(
                wtr,
                "| {} | {} | {} | {} | {} |",
                s.step, s.rows_before, s.removed, s.rows_after, s.entities_after
            )?;
        }
        writeln!(wtr)?;
        writeln!(
            wtr,
            "_These figures inform a judgement about the data; they do not show that a model is right._"
        )
    }
}
