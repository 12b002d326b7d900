//! Stage 1, reading: the corrections file and the joined tables first (they are small and
//! checked whole), then the main file; the duplicate policy's column checked against its
//! header.

use super::*;

/// What reading produced.
pub(super) struct Read {
    /// The main file.
    pub loaded: load::Loaded,
    /// The joined tables, in the order of the rules file.
    pub tables: Vec<assemble::Table>,
    /// The corrections file, if the rules name one.
    pub corrections: Option<repair::Corrections>,
    /// The panel's columns: the main file's, then each joined table's.
    pub columns: Vec<String>,
}

/// Read every file the run needs, showing the main file's rows read (Parquet) on `progress`.
pub(super) fn read(input: &InputConfig, typed: &Typed, progress: &Progress) -> Result<Read> {
    let rules = &input.rules;
    let corrections = match &rules.file.repair.corrections {
        Some(name) => {
            let base = assemble::rules_dir(rules);
            Some(repair::read_corrections(&base.join(name), &input.csv)?)
        }
        None => None,
    };
    // Joined tables are read and checked before the main file.
    let tables = assemble::read_tables(rules, &input.csv, &input.entity, &input.period)?;
    let joined_columns: Vec<String> = tables.iter().flat_map(|t| t.brought.clone()).collect();
    let loaded = load::load(input, &joined_columns, Some(progress))?;
    let columns: Vec<String> = loaded
        .columns
        .iter()
        .chain(&joined_columns)
        .cloned()
        .collect();
    if let DuplicatePolicy::PreferMax(c) | DuplicatePolicy::PreferMin(c) = &typed.policy {
        if !loaded.columns.contains(c) {
            return Err(Error::MissingColumn {
                file: input.path.clone(),
                column: c.clone(),
                context: "named in `[clean] duplicates`".into(),
            });
        }
    }
    Ok(Read {
        loaded,
        tables,
        corrections,
        columns,
    })
}
