//! `panelready build`: the pipeline, then the bundle written atomically.

use crate::config::BuildConfig;
use crate::{bundle, pipeline, progress, Result};

use super::stdout_write;

/// Run `build`; exit 1 when the verdict reaches `--fail-on` (the bundle is still written).
pub fn run(cfg: &BuildConfig) -> Result<i32> {
    let manifest = build(cfg)?;
    stdout_write(
        format!(
            "wrote {}: {} rows read, {} kept in {}, {} in rejected.csv{}\n",
            cfg.out.display(),
            manifest.rows.input,
            manifest.rows.kept,
            if cfg.panel_csv {
                "panel.csv / panel.parquet"
            } else {
                "panel.parquet"
            },
            manifest.rows.rejected,
            match manifest.joins.iter().map(|j| j.rejected).sum::<u64>() {
                0 => String::new(),
                n => format!(" (and {n} rows of joined files)"),
            }
        )
        .as_bytes(),
    )?;
    Ok(match (cfg.fail_on, manifest.verdict) {
        (Some(level), Some(overall)) if overall >= level => {
            eprintln!(
                "overall verdict {} reaches --fail-on {}: exit 1 (the bundle is written)",
                overall.label(),
                level.label()
            );
            1
        }
        _ => 0,
    })
}

/// Run the whole pipeline and write the bundle; the library entry point behind `build`.
pub fn build(cfg: &BuildConfig) -> Result<bundle::Manifest> {
    let progress = progress::Progress::new(cfg.input.quiet, cfg.input.timings);
    // The input's hash for the manifest, read beside the pipeline once the reading is done:
    // the engine decodes the file on every core, and a hash beside it took one of them.
    let path = cfg.input.path.clone();
    let mut hashing = None;
    let mut prepared =
        pipeline::prepare_with(&cfg.input, pipeline::Mode::Build, &progress, || {
            hashing = Some(std::thread::spawn(move || bundle::sha256_file(&path)));
        })?;
    progress.stage("writing the bundle");
    let input_sha256 = match hashing {
        Some(hashing) => hashing
            .join()
            .unwrap_or_else(|panic| std::panic::resume_unwind(panic))?,
        // Not reached: `prepare_with` returns only after the reading.
        None => bundle::sha256_file(&cfg.input.path)?,
    };
    bundle::write(cfg, &mut prepared, &input_sha256, &progress)
}
