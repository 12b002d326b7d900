//! Balancing in `build`: keep the panel unbalanced, cut it to a given window keeping only the
//! entities observed in every period of it, or find the window that keeps the most
//! entity-periods and do the same.

use polars::prelude::*;

use super::{drop_marked, Keys};
use crate::core::PanelCore;
use crate::report::{BalanceLine, WindowScore};
use crate::Result;

/// The helper column holding why each row is balanced away.
const WHY: &str = "__balance_why";

pub use crate::rules::Balance;

/// How many runner-up windows the report lists.
const RUNNERS_UP: usize = 5;

/// Every window's score from the panel core of a panel sorted by entity and period: for each
/// (first, last), the entities observed in every period of it. Sorted best first: windows of
/// two periods or more keeping an entity before single periods, then entities × periods, then
/// longer, then earlier.
pub fn window_scores(core: &PanelCore) -> Vec<WindowScore> {
    let (Some(&lo), Some(&hi)) = (core.periods.first(), core.periods.last()) else {
        return Vec::new();
    };
    let t = (hi - lo + 1) as usize;
    // m[a][b]: spells (maximal runs of consecutive periods of an entity; a key's copies stay in
    // its run) starting at a and ending at b, read off the sorted rows in one pass.
    let mut m = vec![vec![0u64; t]; t];
    for rows in core.starts.windows(2) {
        let mut start = core.period_of(rows[0]);
        for r in rows[0] + 1..rows[1] {
            let (before, now) = (core.period_of(r - 1), core.period_of(r));
            if now - before > 1 {
                m[(start - lo) as usize][(before - lo) as usize] += 1;
                start = now;
            }
        }
        if rows[1] > rows[0] {
            let end = core.period_of(rows[1] - 1);
            m[(start - lo) as usize][(end - lo) as usize] += 1;
        }
    }
    let mut c = vec![vec![0u64; t]; t];
    for a in 0..t {
        let mut suffix = 0;
        for b in (0..t).rev() {
            suffix += m[a][b];
            c[a][b] = suffix + if a > 0 { c[a - 1][b] } else { 0 };
        }
    }
    let mut scores = Vec::new();
    for (a, row) in c.iter().enumerate() {
        for (b, &entities) in row.iter().enumerate().skip(a) {
            scores.push(WindowScore {
                first: lo + a as i64,
                last: lo + b as i64,
                entities,
                rows: entities * (b - a + 1) as u64,
            });
        }
    }
    // A window of one period is a cross-section, with no change within an entity left to
    // estimate from: any window of two periods or more that keeps an entity comes first.
    let panel = |w: &WindowScore| w.last > w.first && w.entities > 0;
    scores.sort_by(|x, y| {
        panel(y)
            .cmp(&panel(x))
            .then(y.rows.cmp(&x.rows))
            .then((y.last - y.first).cmp(&(x.last - x.first)))
            .then(x.first.cmp(&y.first))
    });
    scores
}

/// Apply the balancing choice; returns the kept rows, the ledger part and the report line.
pub fn apply(
    df: DataFrame,
    balance: Balance,
    k: &Keys,
) -> Result<(DataFrame, Option<DataFrame>, Option<BalanceLine>)> {
    // The panel arrives sorted by entity and period: its core's codes give each entity's
    // periods in one typed pass, with no group-by over the entity names.
    let core = PanelCore::new(&df, k.entity, k.period)?;
    let (first, last, runner_up, mode) = match balance {
        Balance::Keep => return Ok((df, None, None)),
        Balance::Window(a, b) => (a, b, Vec::new(), "window"),
        Balance::Largest => {
            let scores = window_scores(&core);
            let Some(best) = scores.first() else {
                return Ok((df, None, None));
            };
            let runner_up = scores.iter().skip(1).take(RUNNERS_UP).cloned().collect();
            (best.first, best.last, runner_up, "largest")
        }
    };
    let e = k.entity;
    let span = last - first + 1;
    let inside = |r: usize| (first..=last).contains(&core.period_of(r));
    // Each entity's distinct periods inside the window (a key's copies counted once).
    let complete: Vec<bool> = core
        .starts
        .windows(2)
        .map(|rows| {
            let distinct = (rows[0]..rows[1])
                .filter(|r| inside(*r) && (*r == rows[0] || core.period[*r] != core.period[r - 1]))
                .count();
            distinct as i64 == span
        })
        .collect();
    // Why each row goes: 1, its entity is not observed in every period of the window; 2, its
    // period is outside it; 0, it stays.
    let why: Vec<u8> = (0..core.rows())
        .map(|r| match (complete[core.entity[r] as usize], inside(r)) {
            (false, _) => 1,
            (true, false) => 2,
            (true, true) => 0,
        })
        .collect();
    let hit: BooleanChunked = why.iter().map(|w| *w > 0).collect();
    let mut df = df;
    df.with_column(Column::new(WHY.into(), why))?;
    let reason = when(col(WHY).eq(lit(1u8)))
        .then(lit(format!(
            "entity not observed in every period of {first}..{last}"
        )))
        .otherwise(lit(format!(
            "period outside the balancing window {first}..{last}"
        )));
    let (kept, removed) = drop_marked(df, &hit, reason, &[WHY], "balance", k, None)?;
    let entities = crate::report::distinct(&kept, e)?;
    let line = BalanceLine {
        mode: mode.to_string(),
        first,
        last,
        entities,
        rows: kept.height() as u64,
        runner_up,
    };
    Ok((kept, Some(removed), Some(line)))
}
