//! `panelready audit`: the report on stdout or in a file; nothing else is written.

use crate::config::AuditConfig;
use crate::report::Status;
use crate::{bundle, pipeline, progress, report, Error, Result};

use super::{colour, stdout_write};

/// Run `audit`; exit 1 when the verdict reaches `--fail-on`.
pub fn run(cfg: &AuditConfig) -> Result<i32> {
    let progress = progress::Progress::new(cfg.input.quiet, cfg.input.timings);
    let prepared = pipeline::prepare(&cfg.input, pipeline::Mode::Audit, &progress)?;
    progress.stage("rendering the report");
    let mut buf = Vec::new();
    let colour = colour(cfg.format, cfg.report.as_deref());
    let renderer = if colour {
        report::colour_terminal()
    } else {
        report::renderer(cfg.format)
    };
    renderer
        .render(&prepared.report, &mut buf)
        .map_err(Error::io("<report>"))?;
    let overall = prepared
        .report
        .verdict
        .as_ref()
        .map(|v| v.overall)
        .unwrap_or(Status::Pass);
    match &cfg.report {
        Some(path) => {
            bundle::write_atomic(path, &buf)?;
            let msg = format!(
                "wrote {} (overall verdict: {})\n",
                path.display(),
                overall.label()
            );
            stdout_write(msg.as_bytes())?;
        }
        None => stdout_write(&buf)?,
    }
    Ok(match cfg.fail_on {
        Some(level) if overall >= level => 1,
        _ => 0,
    })
}
