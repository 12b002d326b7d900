//! Entry and exit: per period, the entities present, entering, leaving and returning after a
//! gap; and survival by entry cohort.

use std::collections::HashMap;

use polars::prelude::*;

use super::names::*;
use super::{Check, Context};
use crate::report::{EntryExit as Line, Report, Survival};
use crate::Result;

/// Entry, exit and survival.
pub struct EntryExit;

impl Check for EntryExit {
    fn name(&self) -> &'static str {
        "entry and exit"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let Some((first, last)) = ctx.window()? else {
            return Ok(());
        };
        let joined = ctx.with_span(ctx.keys.clone().lazy());
        let per_period = joined
            .clone()
            .group_by([col(ctx.period)])
            .agg([
                len().cast(DataType::UInt64).alias("present"),
                col(ctx.period)
                    .eq(col(FIRST))
                    .sum()
                    .cast(DataType::UInt64)
                    .alias("entrants"),
                col(ctx.period)
                    .eq(col(LAST))
                    .sum()
                    .cast(DataType::UInt64)
                    .alias("leavers"),
                col(STEP)
                    .gt(lit(1))
                    .sum()
                    .cast(DataType::UInt64)
                    .alias("reentrants"),
            ])
            .collect()?;
        let counts = by_period(&per_period, ctx.period)?;
        report.entry_exit = (first..=last)
            .map(|p| {
                let [present, entrants, leavers, reentrants] =
                    counts.get(&p).copied().unwrap_or_default();
                Line {
                    period: p,
                    present,
                    entrants: (p > first).then_some(entrants),
                    leavers: (p < last).then_some(leavers),
                    reentrants,
                }
            })
            .collect();

        let cohorts = joined
            .with_column((col(ctx.period) - col(FIRST)).alias("k"))
            .group_by([col(FIRST), col("k")])
            .agg([len().cast(DataType::UInt64).alias("n")])
            .collect()?;
        let (c, k, n) = (
            cohorts.column(FIRST)?.i64()?,
            cohorts.column("k")?.i64()?,
            cohorts.column("n")?.u64()?,
        );
        let mut seen: HashMap<(i64, i64), u64> = HashMap::new();
        for i in 0..cohorts.height() {
            if let (Some(c), Some(k), Some(n)) = (c.get(i), k.get(i), n.get(i)) {
                seen.insert((c, k), n);
            }
        }
        report.survival = (first..=last)
            .filter_map(|cohort| {
                let size = *seen.get(&(cohort, 0))?;
                let shares = (0..=last - cohort)
                    .map(|k| seen.get(&(cohort, k)).copied().unwrap_or(0) as f64 / size as f64)
                    .collect();
                Some(Survival {
                    cohort,
                    entities: size,
                    shares,
                })
            })
            .collect();
        Ok(())
    }
}

fn by_period(df: &DataFrame, period: &str) -> Result<HashMap<i64, [u64; 4]>> {
    let p = df.column(period)?.i64()?;
    let cols = ["present", "entrants", "leavers", "reentrants"]
        .map(|c| df.column(c).and_then(|s| s.u64().cloned()));
    let [a, b, c, d] = cols;
    let (a, b, c, d) = (a?, b?, c?, d?);
    let mut out = HashMap::new();
    for i in 0..df.height() {
        if let Some(period) = p.get(i) {
            let v = |x: &UInt64Chunked| x.get(i).unwrap_or(0);
            out.insert(period, [v(&a), v(&b), v(&c), v(&d)]);
        }
    }
    Ok(out)
}
