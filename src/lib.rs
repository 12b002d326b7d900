//! panelready: read raw firm accounts, derive the standard ratios from a rules file, audit
//! the panel for what silently wrecks panel estimates, and write a cleaned panel with a
//! rejects ledger and a manifest that lets a colleague rebuild it bit for bit.
//!
//! Imports flow one way: `command` (one module per subcommand) -> `pipeline` (the stages
//! shared by `audit` and `build`) and `bundle` (the outputs) -> the stages (`load`,
//! `assemble`, `clean`, `derive`, `audit`) -> `core`, `rules`, `config` -> `report` (the
//! report model and its renderers) and `error`. `tests/architecture.rs` fails on a cycle.
//! The binary is a thin wrapper around [`run`].

pub mod assemble;
pub mod audit;
pub mod bundle;
pub mod clean;
mod cli;
pub mod command;
pub mod compare;
pub mod config;
pub mod core;
pub mod demo;
pub mod derive;
pub mod draft;
mod error;
pub mod load;
pub mod pipeline;
pub mod progress;
pub mod report;
pub mod rules;

use std::ffi::OsString;

use clap::Parser;

pub use error::{Error, Result};

pub use command::build::build;
use config::Command;

/// A usage error as one line, as every other error is: the parser's message, its tip and the
/// usage it shows, without its layout (`error: ...`, indented values, blank lines, the
/// pointer to `--help`, which the line ends with instead).
fn usage_line(rendered: &str) -> String {
    let mut parts: Vec<String> = Vec::new();
    for line in rendered.lines().map(str::trim) {
        if line.is_empty() || line.starts_with("For more information") {
            continue;
        }
        let line = line.strip_prefix("error: ").unwrap_or(line);
        if let Some(usage) = line.strip_prefix("Usage: ") {
            parts.push(format!("(usage: {usage})"));
        } else if line.starts_with("tip: ") {
            parts.push(format!("({line})"));
        } else {
            parts.push(line.to_string());
        }
    }
    format!("{}; see --help", parts.join(" "))
}

/// Run panelready with command-line arguments; returns the process exit code.
/// Errors are printed once, here, as `panelready: error: ...`.
pub fn run<I: IntoIterator<Item = OsString>>(args: I) -> i32 {
    let args: Vec<OsString> = args.into_iter().collect();
    let cli = match cli::Cli::try_parse_from(&args) {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            let help = matches!(
                e.kind(),
                ErrorKind::DisplayHelp
                    | ErrorKind::DisplayVersion
                    | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
            );
            if help {
                let _ = e.print();
            } else {
                eprintln!("panelready: error: {}", usage_line(&e.render().to_string()));
            }
            return if e.use_stderr() { 2 } else { 0 };
        }
    };
    let command_line = args
        .iter()
        .map(|a| a.to_string_lossy().to_string())
        .collect::<Vec<_>>()
        .join(" ");
    let result = Command::from_cli(cli.command, command_line).and_then(|cmd| match cmd {
        Command::Audit(cfg) => command::audit::run(&cfg),
        Command::Build(cfg) => command::build::run(&cfg),
        Command::Demo(cfg) => command::demo::run(&cfg),
        Command::Ratios => command::ratios::run(),
        Command::Compare(cfg) => command::compare::run(&cfg),
        Command::Draft(cfg) => command::draft::run(&cfg),
        Command::Verify(dir, moved) => command::verify::run(&dir, &moved),
    });
    match result {
        Ok(code) => code,
        Err(Error::Io { source, .. }) if source.kind() == std::io::ErrorKind::BrokenPipe => 0,
        Err(err) => {
            eprintln!("panelready: error: {err}");
            err.code()
        }
    }
}
