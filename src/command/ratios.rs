//! `panelready ratios`: the built-in ratio library as a table.

use crate::{rules, Result};

use super::stdout_write;

/// Run `ratios`.
pub fn run() -> Result<i32> {
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
