//! The readiness report: one typed `Report` filled by the pipeline and the checks, and one
//! renderer per output format behind the `Render` trait. Renderers never compute.

mod finding;
mod html;
mod json;
pub(crate) mod layout;
mod markdown;
mod model;
mod terminal;

pub use erased::Json as ToJson;
pub(crate) use layout::{level, strings};
pub use layout::{Block, Section};

use std::io::Write;

use crate::Result;
use polars::prelude::*;

pub use finding::{Finding, Findings};
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

/// A report other than the readiness report (the summary of `compare`), laid out as titled
/// sections of blocks and rendered like it in the terminal, Markdown and HTML.
pub(crate) struct Page {
    /// The page title.
    pub(crate) title: String,
    /// One line under the title.
    pub(crate) subtitle: String,
    /// The sections in order.
    pub(crate) sections: Vec<Section>,
}

/// Render a page; `json` is what the JSON format writes.
pub(crate) fn render_page(
    page: &Page,
    format: ReportFormat,
    colour: bool,
    json: &dyn erased::Json,
    wtr: &mut dyn Write,
) -> std::io::Result<()> {
    match format {
        ReportFormat::Terminal => terminal::page(page, colour, wtr),
        ReportFormat::Markdown => markdown::page(page, wtr),
        ReportFormat::Html => html::page(page, wtr),
        ReportFormat::Json => {
            wtr.write_all(json.to_json().as_bytes())?;
            writeln!(wtr)
        }
    }
}

/// Object-safe JSON, for `render_page` and the findings' entries.
pub mod erased {
    /// Anything serialisable, as pretty JSON.
    pub trait Json {
        /// The value as pretty-printed JSON.
        fn to_json(&self) -> String;
    }
    impl<T: serde::Serialize> Json for T {
        fn to_json(&self) -> String {
            serde_json::to_string_pretty(self).unwrap_or_default()
        }
    }
}

#[cfg(test)]
mod tests;
