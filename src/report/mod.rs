//! The readiness report: one typed `Report` filled by the pipeline and the checks, and one
//! renderer per output format behind the `Render` trait. Renderers never compute.

mod html;
mod json;
mod layout;

/// A level formatted for reading (four significant digits), as the reports show it.
pub fn level(x: f64) -> String {
    layout::level(x)
}
mod markdown;
mod model;
mod terminal;

use std::io::Write;

use crate::config::ReportFormat;
use crate::Result;
use polars::prelude::*;

pub use html::Html;
pub use json::Json;
pub use markdown::Markdown;
pub use model::*;
pub use terminal::Terminal;

/// Distinct non-null values of a column.
pub(crate) fn distinct(df: &DataFrame, column: &str) -> Result<u64> {
    let n = df
        .clone()
        .lazy()
        .select([col(column).drop_nulls().n_unique().cast(DataType::UInt64)])
        .collect()?;
    Ok(n.column(column)?.u64()?.get(0).unwrap_or(0))
}

/// A report renderer: formats a `Report`, computes nothing.
pub trait Render {
    /// Write the report.
    fn render(&self, report: &Report, wtr: &mut dyn Write) -> std::io::Result<()>;
}

/// The terminal renderer in colour, for a person at a terminal.
pub fn colour_terminal() -> Box<dyn Render> {
    Box::new(Terminal { color: true })
}

/// The renderer for a format.
pub fn renderer(format: ReportFormat) -> Box<dyn Render> {
    match format {
        ReportFormat::Terminal => Box::new(Terminal { color: false }),
        ReportFormat::Markdown => Box::new(Markdown),
        ReportFormat::Json => Box::new(Json),
        ReportFormat::Html => Box::new(Html),
    }
}

#[cfg(test)]
mod tests;
