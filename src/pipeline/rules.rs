//! Stage 4, accounting rules: counted on the repaired panel, then their `null` and `drop`
//! actions applied — before derivation, so that no derived ratio uses a value they reject.

use super::*;

/// Count each rule's violations and apply the actions; returns the rules' report lines.
pub(super) fn accounting_rules(
    sample: &mut Sample,
    compiled: &[accounting::CompiledRule],
    keys: &Keys,
) -> Result<Vec<crate::report::RuleLine>> {
    // Rules with panel functions read other periods through hidden columns, added first.
    let (with_shifts, hidden) = accounting::with_shifts(
        std::mem::take(&mut sample.panel),
        compiled,
        keys.entity,
        keys.period,
    )?;
    let lines = accounting::count(&with_shifts, compiled)?;
    let panel = accounting::apply_nulls(with_shifts, compiled)?;
    let drop = accounting::drop_reason(compiled);
    let drops = drop.is_some();
    sample.panel = panel
        .lazy()
        .with_column(
            drop.unwrap_or(lit(NULL).cast(DataType::String))
                .alias("__rule_drop"),
        )
        .drop(cols(hidden))
        .collect()?;
    if drops {
        sample.filter("accounting rules", |panel| {
            let (rest, removed) =
                clean::drop_where(panel, col("__rule_drop"), "accounting rules", keys)?;
            Ok((rest, Some(removed)))
        })?;
    }
    sample.panel = sample.panel.drop("__rule_drop")?;
    Ok(lines)
}
