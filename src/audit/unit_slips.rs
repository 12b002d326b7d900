//! Unit slips in level variables: a period-to-period ratio near 1000 or 1,000,000 (or their
//! inverses) within an entity, typically reversed the next period; and the count of large
//! within-entity jumps in log levels.

use polars::prelude::*;

use super::Context;
use crate::core::slips;
use crate::core::{in_batches, Values};
use crate::report::UnitSlip;
use crate::Result;

/// One level variable's slips (row, magnitude, jumps back the next period) and its count of
/// large jumps in the log level.
type Found = (Vec<(usize, i32, bool)>, u64);

/// The longest slip list kept in the report (the count covers all).
const LISTED: usize = 10_000;

/// What the unit-slip search found: the slips (the first `LISTED`), their total, the level
/// variables searched, the rows whose entity has the period before (each a change searched),
/// and each variable's count of large jumps in the log level.
pub(super) struct Search {
    pub slips: Vec<UnitSlip>,
    pub total: u64,
    pub searched: u64,
    pub pairs: u64,
    pub jumps: Vec<(String, u64)>,
}

/// Search the level variables for unit slips and count their large log jumps.
pub(super) fn search(ctx: &Context) -> Result<Search> {
    let levels = &ctx.levels;
    if levels.is_empty() {
        return Ok(Search {
            slips: Vec::new(),
            total: 0,
            searched: 0,
            pairs: 0,
            jumps: Vec::new(),
        });
    }
    // The panel is sorted by entity and period: whether the row before is the previous
    // period of the same entity comes from the panel core's codes, once; then one typed
    // pass per level variable (in parallel) with the detector the repair uses.
    let back = ctx.core.previous_period();
    let pairs = back.iter().filter(|b| **b).count() as u64;
    let log_jump = ctx.settings.log_jump;
    let one = |v: &String| -> Result<Found> {
        let values = Values::of(ctx.df, v)?;
        // The rows with a slip and its magnitude, in row order (few), with no column-sized
        // buffer.
        let (hits, jumps) = slips(&back, &values.view(), Some(log_jump));
        // A slip is listed once: the jump back of a listed slip is not another slip.
        let at = |i: usize, r: usize| match hits.get(i) {
            Some(&(row, m)) if row == r => m,
            _ => 0,
        };
        let slips = hits
            .iter()
            .enumerate()
            .filter_map(|(i, &(r, m))| {
                let before = if i > 0 && r > 0 { at(i - 1, r - 1) } else { 0 };
                let listed = r == 0 || before != -m;
                let reverses = at(i + 1, r + 1) == -m;
                listed.then_some((r, i32::from(m), reverses))
            })
            .collect();
        Ok((slips, jumps))
    };
    // A few variables at a time, in parallel, so that memory holds a few columns.
    let mut found: Vec<Found> = Vec::with_capacity(levels.len());
    in_batches(levels, one, |batch, part| {
        found.extend(part);
        ctx.done(batch.len());
        Ok(())
    })?;
    let entity = ctx.df.column(ctx.entity)?.cast(&DataType::String)?;
    let entity = entity.str()?;
    let period = ctx.df.column(ctx.period)?.cast(&DataType::Int64)?;
    let period = period.i64()?;
    let mut slips = Vec::new();
    let mut jump_counts = Vec::new();
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
        jump_counts.push((v.clone(), jumps));
    }
    let total = slips.len() as u64;
    slips.truncate(LISTED);
    Ok(Search {
        slips,
        total,
        searched: levels.len() as u64,
        pairs,
        jumps: jump_counts,
    })
}
