//! Unit slips in level variables: a period-to-period ratio near 1000 or 1,000,000 (or their
//! inverses) within an entity, typically reversed the next period; and the count of large
//! within-entity jumps in log levels.

use polars::prelude::*;
use rayon::prelude::*;

use super::{Check, Context};
use crate::clean::repair::{log_ratios, magnitude};
use crate::core::Values;
use crate::report::{Report, UnitSlip};
use crate::Result;

/// One level variable's slips (row, magnitude, jumps back the next period) and its count of
/// large jumps in the log level.
type Found = (Vec<(usize, i32, bool)>, u64);

/// The longest slip list kept in the report (the count covers all).
const LISTED: usize = 10_000;

/// Unit slips and jumps.
pub struct UnitSlips;

impl Check for UnitSlips {
    fn name(&self) -> &'static str {
        "unit slips"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let levels = &ctx.levels;
        if levels.is_empty() {
            return Ok(());
        }
        // The panel is sorted by entity and period: whether the row before is the previous
        // period of the same entity comes from the panel core's codes, once; then one typed
        // pass per level variable (in parallel) with the detector the repair uses.
        let back = ctx.core.previous_period();
        let log_jump = ctx.settings.log_jump;
        let one = |v: &String| -> Result<Found> {
            let x = Values::of(ctx.df, v)?;
            let r = log_ratios(&back, &x);
            let mag: Vec<Option<i32>> = r.iter().map(|r| r.and_then(magnitude)).collect();
            let jumps = r
                .iter()
                .flatten()
                .filter(|r| (*r * std::f64::consts::LN_10).abs() > log_jump)
                .count() as u64;
            // A slip is listed once: the jump back of a listed slip is not another slip.
            let slips = (0..mag.len())
                .filter_map(|i| {
                    let m = mag[i]?;
                    let listed = i == 0 || mag[i - 1] != Some(-m);
                    let reverses = mag.get(i + 1).copied().flatten() == Some(-m);
                    listed.then_some((i, m, reverses))
                })
                .collect();
            Ok((slips, jumps))
        };
        // A few variables at a time, in parallel, so that memory holds a few columns.
        let mut found: Vec<Found> = Vec::with_capacity(levels.len());
        for batch in levels.chunks(crate::core::BATCH) {
            let part: Vec<Found> = batch.par_iter().map(one).collect::<Result<_>>()?;
            found.extend(part);
        }
        let entity = ctx.df.column(ctx.entity)?.cast(&DataType::String)?;
        let entity = entity.str()?;
        let period = ctx.df.column(ctx.period)?.cast(&DataType::Int64)?;
        let period = period.i64()?;
        let mut slips = Vec::new();
        for (v, (rows, jumps)) in levels.iter().zip(found) {
            for (r, m, reverses) in rows {
                slips.push(UnitSlip {
                    entity: entity.get(r).unwrap_or_default().to_string(),
                    period: period.get(r).unwrap_or_default(),
                    variable: v.clone(),
                    factor: 10f64.powi(m),
                    reverses,
                });
            }
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
