//! The JSON renderer: the whole `Report`, pretty-printed, for programs.

use std::io::Write;

use super::{Render, Report};

/// Renders the report as JSON.
pub struct Json;

impl Render for Json {
    fn render(&self, report: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        serde_json::to_writer_pretty(&mut *wtr, report)?;
        writeln!(wtr)
    }
}
