//! Stage 7, cleaning, in a fixed order: outlier treatment (winsorize, then trim), balancing,
//! singletons. Each removed row goes to the ledger under its step.

use super::*;

/// What cleaning reports.
pub(super) struct CleanLines {
    /// One line per treated variable.
    pub treatment: Vec<crate::report::TreatLine>,
    /// The balancing line.
    pub balance: Option<crate::report::BalanceLine>,
    /// The variables whose values treatment may have changed.
    pub treated: Vec<String>,
    /// A corrections-ledger part per variable winsorizing changed (with `record`).
    pub changed: Vec<repair::LedgerPart>,
}

/// Clean the sample's panel. `before` codes the panel as the checks saw it; `record` asks for
/// the corrections-ledger lines of the values changed.
pub(super) fn clean(
    sample: &mut Sample,
    treatments: Vec<Treatment>,
    balance: Balance,
    singletons: SingletonPolicy,
    keys: &Keys,
    before: &audit::KeyFrames,
    record: bool,
) -> Result<CleanLines> {
    let mut lines = Vec::new();
    let mut treated: Vec<String> = Vec::new();
    let mut changed = Vec::new();
    for t in treatments {
        treated.extend(t.variables.iter().cloned());
        // Per-period cutoffs on the panel core's codes while the rows are those it codes.
        let core = (sample.panel.height() == before.rows).then(|| before.core());
        let done = t.apply(std::mem::take(&mut sample.panel), keys, core, record)?;
        sample.panel = done.panel;
        lines.extend(done.lines);
        changed.extend(done.changed);
        if let Some(removed) = done.removed {
            sample.removed("trim", removed)?;
        }
    }
    let (rest, removed, balance_line) =
        balance::apply(std::mem::take(&mut sample.panel), balance, keys)?;
    sample.panel = rest;
    if let Some(removed) = removed {
        sample.removed("balance", removed)?;
    }
    sample.filter("singletons", |panel| {
        clean::drop_singletons(panel, singletons, keys)
    })?;
    Ok(CleanLines {
        treatment: lines,
        balance: balance_line,
        treated,
        changed,
    })
}
