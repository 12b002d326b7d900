//! The figures `build` reports for the cleaned panel, from the keys and codes of the panel as
//! read when cleaning kept every row.

use super::*;

/// Glance, coverage, variation and missing values of the cleaned panel. When cleaning kept
/// every row (winsorizing only), the keys, codes, glance, coverage and missing values are
/// those of the panel as read, and only the treated variables' variation is computed again.
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
    let mut r = Report::new(InputSummary {
        path: String::new(),
        format: input.format,
        rows: 0,
        columns: 0,
        entity: input.entity.clone(),
        period: input.period.clone(),
        sheet: None,
        notes: Vec::new(),
    });
    let ctx = if same_rows {
        before.context(panel, &input.entity, &input.period, options.clone())?
    } else {
        Context::new(panel, &input.entity, &input.period, options.clone())?
    };
    if same_rows {
        r.panel = read.panel.clone();
        r.coverage = read.coverage.clone();
        r.missing = read.missing.clone();
        let mut only = options;
        only.exclude.extend(
            ctx.variables
                .iter()
                .filter(|v| !treated.contains(v))
                .cloned(),
        );
        audit::Variation.run(
            &before.context(panel, &input.entity, &input.period, only)?,
            &mut r,
        )?;
        let fresh = std::mem::take(&mut r.variation);
        r.variation = read
            .variation
            .iter()
            .map(|l| {
                fresh
                    .iter()
                    .find(|f| f.variable == l.variable)
                    .unwrap_or(l)
                    .clone()
            })
            .collect();
    } else {
        for check in [
            Box::new(audit::Glance) as Box<dyn audit::Check>,
            Box::new(audit::Coverage),
            Box::new(audit::Variation),
            Box::new(audit::Missing),
        ] {
            check.run(&ctx, &mut r)?;
        }
    }
    // Model readiness on the panel that will be estimated; its warnings about absorbed
    // regressors read the variation of that same panel, just computed.
    r.model = audit::model::readiness(&ctx, &r.variation)?;
    Ok((
        Cleaned {
            panel: r.panel,
            coverage: r.coverage,
            variation: r.variation,
            missing: r.missing,
        },
        r.model,
    ))
}
