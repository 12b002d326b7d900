//! One module per subcommand, each with `run(config) -> Result<i32>` returning the exit
//! code. Errors are printed once, by [`crate::run`]; commands print only their results.

pub mod audit;
pub mod build;
pub mod compare;
pub mod demo;
pub mod draft;
pub mod ratios;
pub mod verify;

use std::io::Write;

use crate::config::ReportFormat;
use crate::{Error, Result};

/// Write `bytes` to stdout and flush.
fn stdout_write(bytes: &[u8]) -> Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(bytes)
        .and_then(|()| out.flush())
        .map_err(Error::io("<stdout>"))
}

/// Colour only for a person: terminal output to a terminal, and never with NO_COLOR set.
fn colour(format: ReportFormat, report: Option<&std::path::Path>) -> bool {
    use std::io::IsTerminal;
    format == ReportFormat::Terminal
        && report.is_none()
        && std::io::stdout().is_terminal()
        && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty())
}
