//! Stage 2, the key steps: rows without a key, exact copies and conflicting keys resolved by
//! the duplicate policy; then the joined tables matched onto the panel, each with its report.

use super::*;

/// What the key steps and the joins report beyond the sample.
pub(super) struct KeyFindings {
    /// Counts of the key steps.
    pub keys: crate::report::KeysSummary,
    /// One match report per joined table.
    pub joins: Vec<crate::report::JoinLine>,
    /// Each joined table's rows for the ledger.
    pub join_ledgers: Vec<DataFrame>,
}

/// Resolve the keys of `df` and join the tables.
pub(super) fn key_steps<'a>(
    df: DataFrame,
    keys: &Keys<'a>,
    policy: &DuplicatePolicy,
    tables: &[assemble::Table],
    progress: &Progress,
) -> Result<(Sample<'a>, KeyFindings)> {
    let resolved = clean::resolve_keys(df, keys, policy)?;
    let mut sample = Sample {
        panel: resolved.kept,
        pending: resolved.pending,
        steps: resolved.steps,
        ledger: resolved.rejected,
        entity: keys.entity,
    };
    let mut joins = Vec::new();
    let mut join_ledgers = Vec::new();
    // A join matches the panel as it stands.
    if !tables.is_empty() {
        sample.settle()?;
    }
    for t in tables {
        progress.stage(&format!("joining {}", t.name()));
        let joined = assemble::join(std::mem::take(&mut sample.panel), t, keys)?;
        sample.panel = joined.panel;
        if let Some(removed) = joined.dropped {
            sample.removed(&format!("join {}: rows without a match", t.name()), removed)?;
        }
        join_ledgers.push(joined.ledger);
        joins.push(joined.line);
    }
    Ok((
        sample,
        KeyFindings {
            keys: resolved.keys,
            joins,
            join_ledgers,
        },
    ))
}
