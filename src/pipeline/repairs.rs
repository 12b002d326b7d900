//! Stage 3, repairs: the corrections file, then the unit slips the detector is sure of, each
//! changed cell into the corrections ledger. Right after the key steps, so that rules and
//! derived variables see the repaired values.

use super::*;

/// What the repairs changed.
pub(super) struct Repaired {
    /// Every changed cell (entity, period, column, old, new, reason).
    pub ledger: DataFrame,
    /// The report's summary, when a repair was asked for.
    pub summary: Option<crate::report::Repairs>,
}

/// Apply the corrections file and the unit-slip policy to the sample's panel.
pub(super) fn repair(
    sample: &mut Sample,
    corrections: Option<&repair::Corrections>,
    slip_policy: repair::SlipPolicy,
    levels: &[String],
    input: &InputConfig,
    progress: &Progress,
) -> Result<Repaired> {
    let (entity, period) = (input.entity.as_str(), input.period.as_str());
    let mut corrected = Vec::new();
    let (mut corrected_cells, mut slips_repaired) = (0u64, 0u64);
    // Repairs find their cells by key in the panel as it stands.
    if corrections.is_some() || slip_policy != repair::SlipPolicy::Report {
        sample.settle()?;
    }
    if let Some(c) = corrections {
        progress.stage("corrections file");
        let (df, lines) =
            repair::apply_corrections(std::mem::take(&mut sample.panel), c, entity, period)?;
        sample.panel = df;
        corrected_cells = lines.height() as u64;
        sample.step(&format!(
            "corrections file: {} cells changed",
            lines.height()
        ))?;
        corrected.push(lines);
    }
    if slip_policy != repair::SlipPolicy::Report {
        progress.stage("unit slips repaired");
        let (df, lines) = repair::repair_slips(
            std::mem::take(&mut sample.panel),
            levels,
            entity,
            period,
            ROW,
            slip_policy,
        )?;
        sample.panel = df;
        slips_repaired = lines.height() as u64;
        sample.step(&format!(
            "unit slips {}: {} cells",
            if slip_policy == repair::SlipPolicy::Rescale {
                "rescaled"
            } else {
                "set to null"
            },
            lines.height()
        ))?;
        corrected.push(lines);
    }
    let ledger = if corrected.is_empty() {
        repair::empty_ledger(entity, period)?
    } else {
        concat(
            corrected.into_iter().map(|d| d.lazy()).collect::<Vec<_>>(),
            UnionArgs::default(),
        )?
        .collect()?
    };
    let summary = (corrections.is_some() || slip_policy != repair::SlipPolicy::Report).then(|| {
        crate::report::Repairs {
            corrections_file: corrections
                .and_then(|c| c.path.file_name().map(|n| n.to_string_lossy().to_string())),
            corrected_cells,
            unit_slips: match slip_policy {
                repair::SlipPolicy::Report => "report",
                repair::SlipPolicy::Rescale => "rescale",
                repair::SlipPolicy::Null => "null",
            }
            .into(),
            unit_slips_repaired: slips_repaired,
        }
    });
    Ok(Repaired { ledger, summary })
}

/// The corrections ledger from its parts (repairs, the cells rules blanked, winsorizing's),
/// in that order: those with lines, or the first (empty) for the header.
pub(super) fn ledger(parts: Vec<repair::LedgerPart>) -> Vec<repair::LedgerPart> {
    let none_has_lines = parts.iter().all(|p| p.rows.height() == 0);
    parts
        .into_iter()
        .enumerate()
        .filter(|(i, p)| p.rows.height() > 0 || (none_has_lines && *i == 0))
        .map(|(_, p)| p)
        .collect()
}
