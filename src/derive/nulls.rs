//! The derived variables' figures: each one's values and its nulls by reason.

use std::sync::atomic::Ordering;

use polars::prelude::*;

use super::{NotFinite, Plan, INPUT_MISSING, NOT_FINITE, NO_VALUE};
use crate::report::{DerivedSummary, NullCount};
use crate::Result;

impl Plan {
    /// Per variable: non-null values and nulls by reason (first matching condition wins), from
    /// `df` as [`Plan::apply`] made it and the counts of values not finite it gave beside.
    pub fn null_counts(
        &self,
        df: &DataFrame,
        not_finite: &NotFinite,
    ) -> Result<Vec<DerivedSummary>> {
        let mut aggs = Vec::new();
        let mut unexplained_by_var = Vec::new();
        for (i, var) in self.vars.iter().enumerate() {
            let name = var.name.as_str();
            aggs.push(col(name).is_not_null().sum().alias(format!("{i}_ok")));
            let mut earlier = lit(false);
            for (j, (_, cond)) in var.conditions.iter().enumerate() {
                let c = cond.expr.clone().fill_null(lit(false));
                aggs.push(
                    c.clone()
                        .and(earlier.clone().not())
                        .sum()
                        .alias(format!("{i}_{j}")),
                );
                earlier = earlier.or(c);
            }
            let unexplained = col(name).is_null().and(earlier.not());
            aggs.push(unexplained.clone().sum().alias(format!("{i}_input")));
            unexplained_by_var.push(unexplained);
        }
        let counts = df.clone().lazy().select(aggs).collect()?;
        let get = |name: String| -> Result<u64> {
            let v = counts.column(&name)?.cast(&DataType::UInt64)?;
            Ok(v.u64()?.get(0).unwrap_or(0))
        };
        let finite = |var: &super::Planned| {
            not_finite
                .get(&var.name)
                .map_or(0, |count| count.load(Ordering::Relaxed))
        };
        // Of the nulls no condition explains, beyond those not finite, the rows where every
        // column the value reads has one (the hidden columns of its lags and leads included):
        // counted in a second pass, for the variables that have such nulls only.
        let mut present_aggs = Vec::new();
        for (i, (var, unexplained)) in self.vars.iter().zip(unexplained_by_var).enumerate() {
            if get(format!("{i}_input"))? <= finite(var) {
                continue;
            }
            let v = &var.value;
            let present = v
                .raw_columns
                .iter()
                .chain(&v.derived_deps)
                .cloned()
                .chain(v.shifts.iter().map(|s| s.hidden_name()))
                .map(|c| col(c.as_str()).is_not_null())
                .fold(lit(true), |all, c| all.and(c));
            present_aggs.push(unexplained.and(present).sum().alias(format!("{i}")));
        }
        let present_counts = match present_aggs.is_empty() {
            true => DataFrame::empty(),
            false => df.clone().lazy().select(present_aggs).collect()?,
        };
        let present = |i: usize| -> Result<u64> {
            match present_counts.column(&i.to_string()) {
                Ok(v) => Ok(v.cast(&DataType::UInt64)?.u64()?.get(0).unwrap_or(0)),
                Err(_) => Ok(0),
            }
        };
        let mut out = Vec::new();
        for (i, var) in self.vars.iter().enumerate() {
            let mut nulls = Vec::new();
            for (j, (reason, _)) in var.conditions.iter().enumerate() {
                nulls.push(NullCount {
                    reason: reason.clone(),
                    rows: get(format!("{i}_{j}"))?,
                });
            }
            // The rows made missing for not being finite, counted as the values were made; the
            // nulls no condition explains hold them too (they had a value, so the two are
            // apart).
            let finite = finite(var);
            // Rows not finite had every input too (a missing input gives a missing value).
            let no_value = present(i)?.saturating_sub(finite);
            let input = get(format!("{i}_input"))?
                .saturating_sub(finite)
                .saturating_sub(no_value);
            // Listed only when it happened, so that a report without such values reads as
            // before.
            if finite > 0 {
                nulls.push(NullCount {
                    reason: NOT_FINITE.to_string(),
                    rows: finite,
                });
            }
            if no_value > 0 {
                nulls.push(NullCount {
                    reason: NO_VALUE.to_string(),
                    rows: no_value,
                });
            }
            nulls.push(NullCount {
                reason: INPUT_MISSING.to_string(),
                rows: input,
            });
            out.push(DerivedSummary {
                name: var.name.clone(),
                label: var.rule.label.clone().unwrap_or_default(),
                expr: var.rule.expr.clone(),
                unit: var.rule.unit.clone().unwrap_or_default(),
                source: var.rule.source.clone().unwrap_or_default(),
                origin: var.origin,
                non_null: get(format!("{i}_ok"))?,
                nulls: nulls.iter().map(|n| n.rows).sum(),
                null_reasons: nulls,
            });
        }
        Ok(out)
    }
}
