//! Unit slips in level variables: a period-to-period ratio near 1000 or 1,000,000 (or their
//! inverses) within an entity, typically reversed the next period; and the count of large
//! within-entity jumps in log levels.

use polars::prelude::*;

use super::{Check, Context};
use crate::clean::repair::slip_magnitude;
use crate::report::{Report, UnitSlip};
use crate::Result;

/// The hidden column saying whether the row before is the previous period of the entity.
const BACK: &str = "__back";

/// The longest slip list kept in the report (the count covers all).
const LISTED: usize = 10_000;

/// Unit slips and jumps.
pub struct UnitSlips;

impl Check for UnitSlips {
    fn name(&self) -> &'static str {
        "unit slips"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let (e, p) = (ctx.entity, ctx.period);
        let levels = &ctx.levels;
        if levels.is_empty() {
            return Ok(());
        }
        // The panel is sorted by entity and period: whether the row before is the previous
        // period of the same entity comes from the panel core's codes, once.
        let mut frame = ctx.df.clone();
        frame.with_column(Column::new(BACK.into(), ctx.core.previous_period()))?;
        let back = col(BACK);
        let mut cols = vec![col(e), col(p)];
        for (i, v) in levels.iter().enumerate() {
            let x = col(v.as_str()).cast(DataType::Float64);
            let prev = x.clone().shift(lit(1));
            let ok = back
                .clone()
                .and(x.clone().gt(lit(0.0)))
                .and(prev.clone().gt(lit(0.0)));
            let r = when(ok)
                .then((x.clone() / prev).log(lit(10.0)))
                .otherwise(lit(NULL));
            // The same detector the repair uses (clean::repair).
            let mag = slip_magnitude(back.clone(), x);
            cols.push(mag.alias(format!("mag{i}")));
            cols.push(
                (r * lit(std::f64::consts::LN_10))
                    .abs()
                    .gt(lit(ctx.settings.log_jump))
                    .alias(format!("jump{i}")),
            );
        }
        let frame = frame.lazy().select(cols).collect()?;
        let mut slips = Vec::new();
        for (i, v) in levels.iter().enumerate() {
            let mag = col(format!("mag{i}").as_str());
            let listed = mag.clone().is_not_null().and(
                mag.clone()
                    .shift(lit(1))
                    .neq(-mag.clone())
                    .fill_null(lit(true)),
            );
            let reverses = mag
                .clone()
                .shift(lit(-1))
                .eq(-mag.clone())
                .fill_null(lit(false));
            let found = frame
                .clone()
                .lazy()
                .with_column(reverses.alias("reverses"))
                .filter(listed)
                .select([col(e), col(p), mag.alias("mag"), col("reverses")])
                .collect()?;
            let (ent, per, m, rev) = (
                found.column(e)?.str()?,
                found.column(p)?.i64()?,
                found.column("mag")?.i32()?,
                found.column("reverses")?.bool()?,
            );
            for j in 0..found.height() {
                slips.push(UnitSlip {
                    entity: ent.get(j).unwrap_or_default().to_string(),
                    period: per.get(j).unwrap_or_default(),
                    variable: v.clone(),
                    factor: 10f64.powi(m.get(j).unwrap_or_default()),
                    reverses: rev.get(j).unwrap_or(false),
                });
            }
            let jumps = frame
                .column(&format!("jump{i}"))?
                .bool()?
                .sum()
                .unwrap_or(0) as u64;
            if let Some(line) = report.outliers.iter_mut().find(|l| &l.variable == v) {
                line.log_jumps = Some(jumps);
            }
        }
        report.unit_slips_total = slips.len() as u64;
        report.unit_slips_searched = levels.len() as u64;
        slips.truncate(LISTED);
        report.unit_slips = slips;
        Ok(())
    }
}
