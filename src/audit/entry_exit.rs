//! Entry and exit: per period, the entities present, entering, leaving and returning after a
//! gap; and survival by entry cohort.

use std::collections::HashMap;

use super::{Check, Context};
use crate::core::PanelCore;
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
        // One pass over the panel core's distinct keys, entity by entity.
        let (counts, seen) = counts(&ctx.core);
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

/// Per period value: entities present, entering (their first period), leaving (their last)
/// and returning after a gap; per (entry cohort, periods since entry): entities present.
type Counts = (HashMap<i64, [u64; 4]>, HashMap<(i64, i64), u64>);

fn counts(core: &PanelCore) -> Counts {
    let mut by_period: HashMap<i64, [u64; 4]> = HashMap::new();
    let mut cohorts: HashMap<(i64, i64), u64> = HashMap::new();
    let mut periods: Vec<i64> = Vec::new();
    for i in 0..core.entities() {
        // The entity's distinct periods, ascending (copies of a key sit together).
        periods.clear();
        for r in core.starts[i]..core.starts[i + 1] {
            let t = core.periods[core.period[r] as usize];
            if periods.last() != Some(&t) {
                periods.push(t);
            }
        }
        let (Some(&first), Some(&last)) = (periods.first(), periods.last()) else {
            continue;
        };
        let mut previous = None;
        for &t in &periods {
            let c = by_period.entry(t).or_default();
            c[0] += 1;
            c[1] += u64::from(t == first);
            c[2] += u64::from(t == last);
            c[3] += u64::from(previous.is_some_and(|p| t - p > 1));
            previous = Some(t);
            *cohorts.entry((first, t - first)).or_default() += 1;
        }
    }
    (by_period, cohorts)
}
