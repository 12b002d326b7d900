//! The Markdown renderer: the report as headed sections with pipe tables.

use std::io::Write;

use super::layout::{figure_column, headline, pair_rows, sections, Block, Section};
use super::Page;
use super::{Render, Report};

/// Renders the report as Markdown.
pub struct Markdown;

fn cell(s: &str) -> String {
    s.replace('|', "\\|")
}

fn table(wtr: &mut dyn Write, header: &[String], rows: &[Vec<String>]) -> std::io::Result<()> {
    writeln!(
        wtr,
        "| {} |",
        header
            .iter()
            .map(|h| cell(h))
            .collect::<Vec<_>>()
            .join(" | ")
    )?;
    let align: Vec<&str> = (0..header.len())
        .map(|i| {
            if figure_column(rows, i) {
                "---:"
            } else {
                "---"
            }
        })
        .collect();
    writeln!(wtr, "|{}|", align.join("|"))?;
    for row in rows {
        writeln!(
            wtr,
            "| {} |",
            row.iter().map(|c| cell(c)).collect::<Vec<_>>().join(" | ")
        )?;
    }
    writeln!(wtr)
}

impl Render for Markdown {
    fn render(&self, r: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        writeln!(wtr, "# Readiness report: `{}`\n", r.input.path)?;
        writeln!(
            wtr,
            "panelready {} · {} rows read · entity `{}` · period `{}`\n",
            r.tool_version, r.input.rows, r.input.entity, r.input.period
        )?;
        if let Some(h) = headline(r) {
            // Markdown has no colour of its own: a coloured mark before each status word.
            let mark = |s: &str| match s {
                "fail" => "🔴",
                "warn" => "🟡",
                "pass" => "🟢",
                _ => "⚪",
            };
            writeln!(
                wtr,
                "**{} Overall verdict: {}** ({}; [the table](#verdict))\n",
                mark(h.overall),
                h.overall,
                h.tally
            )?;
            for (status, check, anchor, reason) in &h.lines {
                writeln!(
                    wtr,
                    "- {} {status} · [{check}](#{anchor}): {reason}",
                    mark(status)
                )?;
            }
            if !h.lines.is_empty() {
                writeln!(wtr)?;
            }
        }
        write_sections(&sections(r), wtr)?;
        writeln!(
            wtr,
            "_These figures inform a judgement about the data; they do not show that a model is right._"
        )
    }
}

fn write_sections(sections: &[Section], wtr: &mut dyn Write) -> std::io::Result<()> {
    for section in sections {
        writeln!(wtr, "## {}\n", section.title)?;
        for block in &section.blocks {
            match block {
                Block::Pairs(rows) => {
                    let rows = pair_rows(rows);
                    table(wtr, &["figure".into(), "value".into()], &rows)?;
                }
                Block::Table(header, rows) => table(wtr, header, rows)?,
                Block::Note(text) => writeln!(wtr, "{text}\n")?,
                Block::Heading(text) => writeln!(wtr, "### {text}\n")?,
            }
        }
    }
    Ok(())
}

/// A page other than the readiness report, as Markdown.
pub(crate) fn page(page: &Page, wtr: &mut dyn Write) -> std::io::Result<()> {
    writeln!(wtr, "# {}\n\n{}\n", page.title, page.subtitle)?;
    write_sections(&page.sections, wtr)
}
