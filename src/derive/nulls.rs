//! The derived variables' figures: each one's values and its nulls by reason.

use std::sync::atomic::Ordering;

use polars::prelude::*;

use super::{NotFinite, Plan, INPUT_MISSING, NOT_FINITE};
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
            aggs.push(
                col(name)
                    .is_null()
                    .and(earlier.not())
                    .sum()
                    .alias(format!("{i}_input")),
            );
        }
        let counts = df.clone().lazy().select(aggs).collect()?;
        let get = |name: String| -> Result<u64> {
            let v = counts.column(&name)?.cast(&DataType::UInt64)?;
            Ok(v.u64()?.get(0).unwrap_or(0))
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
            let finite = not_finite
                .get(&var.name)
                .map_or(0, |count| count.load(Ordering::Relaxed));
            let input = get(format!("{i}_input"))?.saturating_sub(finite);
            // Listed only when it happened, so that a report without such values reads as
            // before.
            if finite > 0 {
                nulls.push(NullCount {
                    reason: NOT_FINITE.to_string(),
                    rows: finite,
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
