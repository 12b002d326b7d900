//! The figures `build` reports for the cleaned panel, from the keys and codes of the panel as
//! read when cleaning kept every row.

use super::*;

/// The glance and the findings of the checks that describe the cleaned panel too
/// (`Check::on_cleaned`). When cleaning kept every row (winsorizing only), the keys, codes and
/// glance are those of the panel as read, and each check derives its figures from those as
/// read (`Check::after_treatment`: only the treated variables' variation is computed again).
pub(super) fn cleaned_figures(
    before: &audit::KeyFrames,
    panel: &DataFrame,
    read: &Report,
    treated: &[String],
    input: &InputConfig,
    options: Options,
    progress: &Progress,
) -> Result<(Cleaned, Option<crate::report::ModelReport>)> {
    progress.stage("checks on the cleaned panel");
    // Rows are only ever removed: the same count is the same rows, in the same order.
    let same_rows = panel.height() == before.rows;
    let ctx = if same_rows {
        before.context(panel, &input.entity, &input.period, options)?
    } else {
        Context::new(panel, &input.entity, &input.period, options)?
    };
    let panel_summary = if same_rows {
        read.panel.clone()
    } else {
        audit::panel_summary(&ctx)?
    };
    let mut findings = Findings::default();
    // The panel as read has one finding per check, in registry order (`prepare` ran them).
    let checks = audit::registry();
    debug_assert_eq!(checks.len(), read.findings.iter().count());
    for (check, as_read) in checks.iter().zip(read.findings.iter()) {
        if !check.on_cleaned() {
            continue;
        }
        findings.push(if same_rows {
            check.after_treatment(&ctx, as_read, treated)?
        } else {
            check.run(&ctx)?
        });
    }
    // Model readiness on the panel that will be estimated; its warnings about absorbed
    // regressors read the variation of that same panel, just computed.
    let variation = findings
        .get::<VariationFigures>()
        .map_or(&[][..], |f| &f.lines);
    let model = audit::model::readiness(&ctx, variation)?;
    Ok((
        Cleaned {
            panel: panel_summary,
            findings,
        },
        model,
    ))
}
