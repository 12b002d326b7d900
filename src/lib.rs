//! panelready: read raw firm accounts, derive the standard ratios from a rules file, audit
//! the panel for what silently wrecks panel estimates, and write a cleaned panel with a
//! rejects ledger and a manifest that lets a colleague rebuild it bit for bit.
//!
//! Data flows one way: `cli` -> `config` -> `load` -> `clean` (keys) -> `derive` -> `audit`
//! -> `bundle` / `report`. The binary is a thin wrapper around [`run`].

pub mod assemble;
pub mod audit;
pub mod bundle;
pub mod clean;
mod cli;
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
pub mod sheet;

use std::ffi::OsString;
use std::io::Write;

use clap::Parser;

pub use error::{Error, Result};

use config::{AuditConfig, BuildConfig, Command, DemoConfig};

/// Run panelready with command-line arguments; returns the process exit code.
/// Errors are printed once, here, as `panelready: error: ...`.
pub fn run<I: IntoIterator<Item = OsString>>(args: I) -> i32 {
    let args: Vec<OsString> = args.into_iter().collect();
    let cli = match cli::Cli::try_parse_from(&args) {
        Ok(cli) => cli,
        Err(e) => {
            let _ = e.print();
            return if e.use_stderr() { 2 } else { 0 };
        }
    };
    let command_line = args
        .iter()
        .map(|a| a.to_string_lossy().to_string())
        .collect::<Vec<_>>()
        .join(" ");
    let result = Command::from_cli(cli.command, command_line).and_then(|cmd| match cmd {
        Command::Audit(cfg) => audit_cmd(&cfg),
        Command::Build(cfg) => build_cmd(&cfg),
        Command::Demo(cfg) => demo_cmd(&cfg),
        Command::Ratios => ratios_cmd(),
        Command::Compare(cfg) => compare_cmd(&cfg),
        Command::Draft(cfg) => draft_cmd(&cfg),
        Command::Verify(dir, moved) => verify_cmd(&dir, &moved),
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

fn stdout_write(bytes: &[u8]) -> Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(bytes)
        .and_then(|()| out.flush())
        .map_err(Error::io("<stdout>"))
}

fn audit_cmd(cfg: &AuditConfig) -> Result<i32> {
    let progress = progress::Progress::new(cfg.input.quiet, cfg.input.timings);
    let prepared = pipeline::prepare(&cfg.input, pipeline::Mode::Audit, &progress)?;
    progress.stage("rendering the report");
    let mut buf = Vec::new();
    // Colour only for a person: terminal output to a terminal, and never with NO_COLOR set.
    use std::io::IsTerminal;
    let colour = cfg.format == config::ReportFormat::Terminal
        && cfg.report.is_none()
        && std::io::stdout().is_terminal()
        && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
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
        .unwrap_or(audit::verdict::Status::Pass);
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

fn build_cmd(cfg: &BuildConfig) -> Result<i32> {
    let manifest = build(cfg)?;
    stdout_write(
        format!(
            "wrote {}: {} rows read, {} kept in panel.csv / panel.parquet, {} in rejected.csv{}\n",
            cfg.out.display(),
            manifest.rows.input,
            manifest.rows.kept,
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
    // The input's hash for the manifest, read beside the pipeline (both only read the file).
    let path = cfg.input.path.clone();
    let hashing = std::thread::spawn(move || bundle::sha256_file(&path));
    let mut prepared = pipeline::prepare(&cfg.input, pipeline::Mode::Build, &progress)?;
    progress.stage("writing the bundle");
    let input_sha256 = hashing
        .join()
        .unwrap_or_else(|panic| std::panic::resume_unwind(panic))?;
    bundle::write(cfg, &mut prepared, &input_sha256, &progress)
}

fn demo_cmd(cfg: &DemoConfig) -> Result<i32> {
    let data_dir = cfg.out.join("data");
    let planted = demo::write_data(&data_dir, cfg.firms, cfg.periods, cfg.seed)?;
    let data = data_dir.join(demo::DATA_FILE);
    let mut msg = format!(
        "generated {} rows for {} invented firms in {}\n",
        planted.rows,
        planted.firms,
        data.display()
    );
    if !cfg.data_only {
        let rules = rules::Rules::from_path(&data_dir.join("rules.toml"))?;
        let out = cfg.out.join("bundle");
        let build_cfg = BuildConfig {
            input: config::InputConfig::new(data, rules)?,
            out: out.clone(),
            panel_csv: true,
            fail_on: None,
            command_line: format!(
                "panelready build {} --rules {} --out {}",
                data_dir.join(demo::DATA_FILE).display(),
                data_dir.join("rules.toml").display(),
                out.display()
            ),
        };
        let manifest = build(&build_cfg)?;
        msg.push_str(&format!(
            "built the hand-off bundle in {}: {} rows kept, {} rejected (see report.md)\n",
            out.display(),
            manifest.rows.kept,
            manifest.rows.rejected
        ));
    }
    stdout_write(msg.as_bytes())?;
    Ok(0)
}

fn verify_cmd(dir: &std::path::Path, moved: &bundle::Relocated) -> Result<i32> {
    let v = bundle::verify(dir, moved)?;
    let mut msg = String::new();
    if let Some(version) = &v.other_version {
        msg.push_str(&format!(
            "note: the bundle was made by panelready {version}, this is {}\n",
            env!("CARGO_PKG_VERSION")
        ));
    }
    for f in &v.changed {
        msg.push_str(&format!("changed since it was written: {f}\n"));
    }
    for f in &v.not_reproduced {
        msg.push_str(&format!("not reproduced by a fresh build: {f}\n"));
    }
    let ok = v.changed.is_empty() && v.not_reproduced.is_empty();
    if ok {
        msg.push_str(&format!(
            "{}: every output matches its manifest hash and was rebuilt bit for bit\n",
            dir.display()
        ));
    }
    stdout_write(msg.as_bytes())?;
    Ok(if ok { 0 } else { 1 })
}

fn compare_cmd(cfg: &compare::CompareConfig) -> Result<i32> {
    use polars::prelude::{CsvWriter, SerWriter};
    let (comparison, mut ledger) = compare::compare(&cfg.old, &cfg.new, &cfg.tolerance)?;
    if let Some(path) = &cfg.changes {
        let mut guarded = bundle::guard_text(&ledger)?;
        let mut bytes = Vec::new();
        CsvWriter::new(&mut bytes)
            .include_header(true)
            .finish(&mut guarded)?;
        bundle::write_atomic(path, &bytes)?;
        ledger = guarded;
    }
    use std::io::IsTerminal;
    let colour = cfg.format == config::ReportFormat::Terminal
        && cfg.report.is_none()
        && std::io::stdout().is_terminal()
        && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
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

fn draft_cmd(cfg: &config::DraftConfig) -> Result<i32> {
    let df = load::read_raw(&cfg.data, cfg.format, &cfg.csv, cfg.sheet.as_deref())?;
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

fn ratios_cmd() -> Result<i32> {
    let lib = rules::library("standard")?;
    let mut table = comfy_table::Table::new();
    table
        .load_preset(comfy_table::presets::UTF8_HORIZONTAL_ONLY)
        .set_content_arrangement(comfy_table::ContentArrangement::Dynamic)
        .set_width(100)
        .set_header(["ratio", "formula", "null when", "source"]);
    for (name, rule) in &lib.derive {
        let nulls: Vec<String> = rule
            .null_when
            .iter()
            .map(|n| format!("{} ({})", n.when, n.reason))
            .collect();
        let nulls = if nulls.is_empty() {
            "an input is missing".to_string()
        } else {
            nulls.join("; ") + "; or an input is missing"
        };
        table.add_row([
            name.clone(),
            rule.expr.clone(),
            nulls,
            rule.source.clone().unwrap_or_default(),
        ]);
    }
    let text = format!(
        "{table}\n\nCanonical columns (map yours in [columns]): {}\n\
         Panel functions: lag(x, k), lead(x, k), diff(x, k), growth(x, k) = x / lag(x, k) - 1 \
         (null when lag(x, k) <= 0); each uses period t - k of the same entity and is null when \
         that period is absent.\n",
        rules::CANONICAL_COLUMNS.join(", ")
    );
    stdout_write(text.as_bytes())?;
    Ok(0)
}
