//! `panelready rules draft`: a starter rules file guessed from a raw file.

use crate::config::{DraftConfig, InputFormat};
use crate::{bundle, draft, load, Result};

use super::stdout_write;

/// Run `rules draft`.
pub fn run(cfg: &DraftConfig) -> Result<i32> {
    let (df, _) = load::read_raw(&cfg.data, cfg.format, &cfg.csv, cfg.sheet.as_deref(), &[])?;
    // A CSV cell a spreadsheet wrote as `="007"` holds `007`, and a column of numbers with
    // `NA` or `.` for missing ones is numbers, as `build` reads them (a year column with a
    // missing year included).
    let df = match cfg.format {
        InputFormat::Csv => {
            let (df, _) = load::formula_text(df, None)?;
            load::numbers_with_markers(df, &[], cfg.csv.decimal_comma)?.0
        }
        _ => df,
    };
    let name = cfg
        .data
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let text = draft::draft(&df, &name)?;
    match &cfg.out {
        Some(path) => {
            bundle::write_atomic(path, text.as_bytes())?;
            stdout_write(
                format!(
                    "wrote {}: check every guess before building\n",
                    path.display()
                )
                .as_bytes(),
            )?;
        }
        None => stdout_write(text.as_bytes())?,
    }
    Ok(0)
}
