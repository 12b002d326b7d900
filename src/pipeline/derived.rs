//! Stage 5, derived variables: the rules' expressions in dependency order, lags by a walk
//! over each entity's rows of the sorted panel, each variable's null reasons counted.

use super::*;

/// The panel with its derived columns (row number, raw columns, derived columns, in that
/// order, still sorted by entity, period and row), and the derived variables' report lines.
pub(super) fn derive(
    mut panel: DataFrame,
    plan: &Plan,
    columns: &[String],
    own: &[String],
    tables: &[crate::assemble::Table],
    input: &InputConfig,
) -> Result<(DataFrame, Vec<crate::report::DerivedSummary>)> {
    // Sorted by entity, period and row since the key steps: joins keep the panel's order,
    // repairs and rules only filter or change cells. The lags read the keys and their columns
    // whole (the panel is in one chunk a column afterwards anyway).
    crate::derive::in_one_chunk(
        &mut panel,
        plan.shifted_columns(&input.entity, &input.period),
    )?;
    let (lf, hidden, not_finite) = plan.apply(panel.clone().lazy(), &input.entity, &input.period);
    let with_hidden = match lf.collect() {
        Ok(df) => df,
        Err(e) => {
            let sources = super::sources(input, &panel, own, tables);
            return Err(culprit(&panel, plan, &sources, input).unwrap_or(Error::Polars(e)));
        }
    };
    // Kept only to trace a failure: its columns not held past this point.
    drop(panel);
    let derived = plan.null_counts(&with_hidden, &not_finite)?;
    let mut order = vec![col(ROW)];
    order.extend(columns.iter().map(|c| col(c.as_str())));
    order.extend(plan.vars.iter().map(|v| col(v.name.as_str())));
    let panel = with_hidden.lazy().drop(cols(hidden)).select(order);
    // Each column in one chunk (an expression can come out in several): the checks read a
    // column in place only when it is one chunk, and would each copy it otherwise.
    let mut panel = panel.collect()?;
    panel.rechunk_mut_par();
    Ok((panel, derived))
}

/// The derived variable whose evaluation fails (text divided, a text that will not convert),
/// as the error naming it: the variables one more at a time in dependency order, each set
/// checked by its types, then by its values; the first set that fails ends in the culprit.
/// Where a column of the input or of a joined table (`sources`) it computes with is text, the
/// first cell that is not a number is named instead of the engine's reason.
fn culprit(
    panel: &DataFrame,
    plan: &Plan,
    sources: &[load::Source],
    input: &InputConfig,
) -> Option<Error> {
    let upto = |k: usize| {
        let mut part = plan.clone();
        part.vars.truncate(k + 1);
        part.apply(panel.clone().lazy(), &input.entity, &input.period)
            .0
    };
    let named = |k: usize, e: PolarsError| {
        let var = &plan.vars[k];
        let reads: Vec<&String> = var.compiled().flat_map(|c| c.raw_columns.iter()).collect();
        let what = format!("derived variable `{}` (`{}`)", var.name, var.rule.expr);
        load::text_among_numbers(sources, &reads, &what).unwrap_or_else(|| {
            Error::evaluation(
                format!("derived variable `{}`", var.name),
                &var.rule.expr,
                &e,
            )
        })
    };
    let vars = 0..plan.vars.len();
    vars.clone()
        .find_map(|k| upto(k).collect_schema().err().map(|e| named(k, e)))
        .or_else(|| {
            vars.clone()
                .find_map(|k| upto(k).collect().err().map(|e| named(k, e)))
        })
}
