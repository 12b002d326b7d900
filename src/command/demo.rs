//! `panelready demo`: the invented panel, its further files and rules, and their bundle.

use crate::config::{self, BuildConfig, DemoConfig};
use crate::{demo, rules, Result};

use super::{build::build, stdout_write};

/// Run `demo`.
pub fn run(cfg: &DemoConfig) -> Result<i32> {
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
