//! Stage 4, accounting rules: counted on the repaired panel, then their `null` and `drop`
//! actions applied — before derivation, so that no derived ratio uses a value they reject.

use super::*;

/// Count each rule's violations and apply the actions; returns the rules' report lines and a
/// corrections-ledger line for every value a `null` rule blanked. Rules that read only their
/// own row work on the panel with the rows the key steps removed still in it, so that one
/// copy of the panel drops both steps' rows.
pub(super) fn accounting_rules(
    sample: &mut Sample,
    compiled: &[accounting::CompiledRule],
    keys: &Keys,
    tables: &[crate::assemble::Table],
    input: &InputConfig,
) -> Result<(Vec<crate::report::RuleLine>, DataFrame)> {
    // Rules that read other periods need the panel as it stands.
    if compiled.iter().any(|r| !r.shifts.is_empty()) {
        sample.settle()?;
    }
    let within = sample.pending.take();
    // Rules with panel functions read other periods through hidden columns, added first.
    let (with_shifts, hidden) = accounting::with_shifts(
        std::mem::take(&mut sample.panel),
        compiled,
        keys.entity,
        keys.period,
    )?;
    let compiled = &accounting::checked(compiled, with_shifts.schema());
    let lines = accounting::count(&with_shifts, compiled, within.as_ref()).map_err(|e| {
        let sources = super::sources(input, &with_shifts, keys.columns, tables);
        accounting::located(e, compiled, &sources)
    })?;
    // Every rule reads the values before any rule acts: the rows a `drop` rule breaks are
    // found before a `null` rule blanks a value, and leave for the ledger as they were.
    match (
        accounting::drop_mask(compiled),
        accounting::drop_reason(compiled),
    ) {
        (Some(mask), Some(reason)) => {
            // Which rows break a rule, as flags; the reason's text only for those rows.
            let hit = with_shifts
                .clone()
                .lazy()
                .select([mask.alias("__rule_drop")])
                .collect()?;
            let hit = hit.column("__rule_drop")?.bool()?.clone();
            // The hidden columns stay if a `null` rule is still to read them.
            let nulls = compiled
                .iter()
                .any(|r| r.action == accounting::Action::Null);
            let helpers: Vec<&str> = match nulls {
                true => Vec::new(),
                false => hidden.iter().map(String::as_str).collect(),
            };
            sample.panel = with_shifts;
            sample.filter("accounting rules", |panel| {
                let (rest, removed) = clean::drop_marked(
                    panel,
                    &hit,
                    reason,
                    &helpers,
                    "accounting rules",
                    keys,
                    within.as_ref(),
                )?;
                Ok((rest, Some(removed)))
            })?;
        }
        _ => {
            sample.panel = with_shifts;
            sample.pending = within;
        }
    }
    let (panel, blanked) = accounting::apply_nulls(
        std::mem::take(&mut sample.panel),
        compiled,
        keys.entity,
        keys.period,
        sample.pending.as_ref(),
    )?;
    let left: Vec<&String> = hidden
        .iter()
        .filter(|h| panel.schema().contains(h))
        .collect();
    sample.panel = if left.is_empty() {
        panel
    } else {
        panel.lazy().drop(cols(left)).collect()?
    };
    // Derivation reads the panel as it stands, each column in one chunk.
    sample.settle()?;
    Ok((lines, blanked))
}
