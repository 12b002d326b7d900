//! The terminal renderer: comfy-table tables that read well at 100 columns.

use std::io::Write;

use comfy_table::presets::UTF8_HORIZONTAL_ONLY;
use comfy_table::{Cell, CellAlignment, Color, ContentArrangement, Table, TableComponent};

use super::layout::{figure_column, pair_rows, sections, Block, Section};
use super::Page;
use super::{Render, Report};

/// Renders the report as tables for a person at a terminal.
pub struct Terminal {
    /// Colour the verdict words (only when printing to a terminal without `NO_COLOR`).
    pub color: bool,
}

fn table(header: Vec<String>, rows: &[Vec<String>], show_header: bool, color: bool) -> Table {
    let mut t = Table::new();
    if color {
        t.enforce_styling();
    } else {
        t.force_no_tty();
    }
    t.load_preset(UTF8_HORIZONTAL_ONLY)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(100)
        .remove_style(TableComponent::HorizontalLines)
        .remove_style(TableComponent::MiddleIntersections)
        .remove_style(TableComponent::LeftBorderIntersections)
        .remove_style(TableComponent::RightBorderIntersections);
    let width = header.len();
    if show_header {
        t.set_header(header);
    }
    for row in rows {
        t.add_row(row.iter().map(|c| {
            let cell = Cell::new(c);
            match (color, c.as_str()) {
                (true, "pass") => cell.fg(Color::Green),
                (true, "warn") => cell.fg(Color::Yellow),
                (true, "fail") => cell.fg(Color::Red),
                _ => cell,
            }
        }));
    }
    for i in 1..width {
        if let Some(c) = t.column_mut(i).filter(|_| figure_column(rows, i)) {
            c.set_cell_alignment(CellAlignment::Right);
        }
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
        write_sections(&sections(r), self.color, wtr)?;
        writeln!(
            wtr,
            "These figures inform a judgement about the data; they do not show that a model is right."
        )
    }
}

/// Wrap text at `width` columns with an indent.
fn wrap(text: &str, width: usize, indent: &str) -> String {
    let mut out = String::new();
    let mut line = String::from(indent);
    for word in text.split_whitespace() {
        if line.len() > indent.len() && line.len() + 1 + word.len() > width {
            out.push_str(line.trim_end());
            out.push('\n');
            line = String::from(indent);
        }
        if line.len() > indent.len() {
            line.push(' ');
        }
        line.push_str(word);
    }
    out.push_str(line.trim_end());
    out
}

fn write_sections(sections: &[Section], color: bool, wtr: &mut dyn Write) -> std::io::Result<()> {
    for section in sections {
        writeln!(wtr, "{}", section.title.to_uppercase())?;
        for block in &section.blocks {
            match block {
                Block::Pairs(rows) => {
                    let rows = pair_rows(rows);
                    writeln!(
                        wtr,
                        "{}",
                        table(vec![String::new(), String::new()], &rows, false, color)
                    )?;
                }
                Block::Table(header, rows) => {
                    writeln!(wtr, "{}", table(header.clone(), rows, true, color))?
                }
                Block::Note(text) => writeln!(wtr, "{}", wrap(text, 98, "  "))?,
                Block::Heading(text) => writeln!(wtr, "{}", wrap(&format!("» {text}"), 98, ""))?,
            }
        }
        writeln!(wtr)?;
    }
    Ok(())
}

/// A page other than the readiness report, as terminal tables.
pub(crate) fn page(page: &Page, color: bool, wtr: &mut dyn Write) -> std::io::Result<()> {
    writeln!(wtr, "{}\n{}\n", page.title, wrap(&page.subtitle, 98, ""))?;
    write_sections(&page.sections, color, wtr)
}
