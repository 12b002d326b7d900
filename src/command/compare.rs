//! `panelready compare`: two vintages side by side, the summary and the change ledger.

use crate::config::CompareConfig;
use crate::{bundle, compare, report, Error, Result};

use super::{colour, stdout_write};

/// Run `compare`; exit 1 when something changed beyond the tolerance.
pub fn run(cfg: &CompareConfig) -> Result<i32> {
    use polars::prelude::{CsvWriter, SerWriter};
    let (comparison, mut ledger) = compare::compare(&cfg.old, &cfg.new, &cfg.tolerance)?;
    if let Some(path) = &cfg.changes {
        let mut guarded = bundle::dates_as_text(bundle::guard_text(&ledger)?)?;
        let mut bytes = Vec::new();
        CsvWriter::new(&mut bytes)
            .include_header(true)
            .finish(&mut guarded)?;
        bundle::write_atomic(path, &bytes)?;
        ledger = guarded;
    }
    let colour = colour(cfg.format, cfg.report.as_deref());
    let mut buf = Vec::new();
    report::render_page(
        &compare::page(&comparison),
        cfg.format,
        colour,
        &comparison,
        &mut buf,
    )
    .map_err(Error::io("<report>"))?;
    match &cfg.report {
        Some(path) => {
            bundle::write_atomic(path, &buf)?;
            stdout_write(
                format!(
                    "wrote {} ({} ledger lines; {})\n",
                    path.display(),
                    ledger.height(),
                    if comparison.changed {
                        "changed beyond the tolerance"
                    } else {
                        "no change beyond the tolerance"
                    }
                )
                .as_bytes(),
            )?;
        }
        None => stdout_write(&buf)?,
    }
    Ok(if comparison.changed { 1 } else { 0 })
}
