//! Balancing in `build`: keep the panel unbalanced, cut it to a given window keeping only the
//! entities observed in every period of it, or find the window that keeps the most
//! entity-periods and do the same.

use polars::prelude::*;

use super::{drop_where, Keys};
use crate::report::{BalanceLine, WindowScore};
use crate::Result;

pub use crate::rules::Balance;

/// How many runner-up windows the report lists.
const RUNNERS_UP: usize = 5;

/// Every window's score from the distinct keys: for each (first, last), the entities
/// observed in every period of it. Sorted best first: windows of two periods or more keeping
/// an entity before single periods, then entities × periods, then longer, then earlier.
pub fn window_scores(df: &DataFrame, entity: &str, period: &str) -> Result<Vec<WindowScore>> {
    // Spells: maximal runs of consecutive periods per entity, counted by (start, end).
    let spells = df
        .clone()
        .lazy()
        .select([col(entity), col(period)])
        .unique(None, UniqueKeepStrategy::First)
        .sort([entity, period], Default::default())
        .with_column(
            (col(period) - col(period).shift(lit(1)))
                .neq(lit(1))
                .or(col(entity).neq(col(entity).shift(lit(1))))
                .fill_null(lit(true))
                .cast(DataType::UInt32)
                .cum_sum(false)
                .alias("__spell"),
        )
        .group_by([col("__spell")])
        .agg([col(period).min().alias("s"), col(period).max().alias("e")])
        .group_by([col("s"), col("e")])
        .agg([len().cast(DataType::UInt64).alias("n")])
        .collect()?;
    let (s, e, n) = (
        spells.column("s")?.i64()?,
        spells.column("e")?.i64()?,
        spells.column("n")?.u64()?,
    );
    let (Some(lo), Some(hi)) = (s.min(), e.max()) else {
        return Ok(Vec::new());
    };
    let t = (hi - lo + 1) as usize;
    // m[a][b]: spells starting at a and ending at b; c[a][b]: spells with start <= a, end >= b.
    let mut m = vec![vec![0u64; t]; t];
    for i in 0..spells.height() {
        if let (Some(a), Some(b), Some(k)) = (s.get(i), e.get(i), n.get(i)) {
            m[(a - lo) as usize][(b - lo) as usize] += k;
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
    Ok(scores)
}

/// Apply the balancing choice; returns the kept rows, the ledger part and the report line.
pub fn apply(
    df: DataFrame,
    balance: Balance,
    k: &Keys,
) -> Result<(DataFrame, Option<DataFrame>, Option<BalanceLine>)> {
    let (first, last, runner_up, mode) = match balance {
        Balance::Keep => return Ok((df, None, None)),
        Balance::Window(a, b) => (a, b, Vec::new(), "window"),
        Balance::Largest => {
            let scores = window_scores(&df, k.entity, k.period)?;
            let Some(best) = scores.first() else {
                return Ok((df, None, None));
            };
            let runner_up = scores.iter().skip(1).take(RUNNERS_UP).cloned().collect();
            (best.first, best.last, runner_up, "largest")
        }
    };
    let (e, p) = (k.entity, k.period);
    let span = last - first + 1;
    let inside = col(p).gt_eq(lit(first)).and(col(p).lt_eq(lit(last)));
    let complete = col(p)
        .filter(inside.clone())
        .n_unique()
        .over([col(e)])?
        .eq(lit(span as u32).cast(IDX_DTYPE));
    // `complete` is a window over the entity: evaluate it before `drop_where` splits rows.
    let reason = when(complete.not())
        .then(lit(format!(
            "entity not observed in every period of {first}..{last}"
        )))
        .when(inside.not())
        .then(lit(format!(
            "period outside the balancing window {first}..{last}"
        )))
        .otherwise(lit(NULL).cast(DataType::String));
    let (kept, removed) = drop_where(df, reason, "balance", k)?;
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
