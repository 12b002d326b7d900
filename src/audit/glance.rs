//! Panel at a glance: rows, entities, periods, window and whether the panel is balanced.

use polars::prelude::*;

use super::names::N;
use super::{scalar_f64, Context};
use crate::report::PanelSummary;
use crate::Result;

/// The panel of `ctx` at a glance: rows, entities, periods, window, balance and evenness.
pub fn panel_summary(ctx: &Context) -> Result<PanelSummary> {
    let mut panel = summarize(ctx.df, ctx.entity, ctx.period, ctx.keys.height() as u64)?;
    (panel.evenness_harmonic, panel.evenness_squares) = evenness(&ctx.entities)?;
    Ok(panel)
}

/// How evenly the observations spread over the entities, from their counts `__n`; Ahrens &
/// Pincus (1981): gamma = N / (T-bar · Σ 1/T_i), nu = n² / (N · Σ T_i²). None without entities.
fn evenness(entities: &DataFrame) -> Result<(Option<f64>, Option<f64>)> {
    let n = col(N).cast(DataType::Float64);
    let s = entities
        .clone()
        .lazy()
        .select([
            len().cast(DataType::Float64).alias("entities"),
            n.clone().sum().alias("rows"),
            (lit(1.0) / n.clone()).sum().alias("inv_sum"),
            (n.clone() * n).sum().alias("sq_sum"),
        ])
        .collect()?;
    let f = |c: &str| -> Result<f64> { Ok(scalar_f64(&s, c)?.unwrap_or(0.0)) };
    let (count, rows) = (f("entities")?, f("rows")?);
    if count == 0.0 {
        return Ok((None, None));
    }
    Ok((
        Some(count * count / (rows * f("inv_sum")?)),
        Some(rows * rows / (count * f("sq_sum")?)),
    ))
}

/// The glance figures of one frame with `keys` distinct (entity, period) pairs.
pub fn summarize(df: &DataFrame, entity: &str, period: &str, keys: u64) -> Result<PanelSummary> {
    let s = df
        .clone()
        .lazy()
        .select([
            len().cast(DataType::UInt64).alias("rows"),
            col(entity)
                .n_unique()
                .cast(DataType::UInt64)
                .alias("entities"),
            col(period)
                .n_unique()
                .cast(DataType::UInt64)
                .alias("periods"),
            col(period).min().alias("first"),
            col(period).max().alias("last"),
        ])
        .collect()?;
    let u = |c: &str| -> Result<u64> { Ok(s.column(c)?.u64()?.get(0).unwrap_or(0)) };
    let first = s.column("first")?.i64()?.get(0);
    let last = s.column("last")?.i64()?.get(0);
    let (rows, entities) = (u("rows")?, u("entities")?);
    let window = match (first, last) {
        (Some(a), Some(b)) => (b - a + 1) as u64,
        _ => 0,
    };
    Ok(PanelSummary {
        rows,
        entities,
        periods: u("periods")?,
        first_period: first,
        last_period: last,
        balanced: rows > 0 && rows == keys && rows == entities * window,
        evenness_harmonic: None,
        evenness_squares: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn balance_needs_every_entity_in_every_period_once() {
        // Hand-worked: two firms over 2001..2002 is balanced; dropping one row is not.
        let df = df!("f" => ["a", "a", "b", "b"], "y" => [2001i64, 2002, 2001, 2002]).unwrap();
        let s = summarize(&df, "f", "y", 4).unwrap();
        assert!(s.balanced);
        assert_eq!((s.rows, s.entities, s.periods), (4, 2, 2));
        let s = summarize(&df.slice(0, 3), "f", "y", 3).unwrap();
        assert!(!s.balanced);
        // A duplicated key makes the count match but is not balanced.
        let df = df!("f" => ["a", "a", "b", "c"], "y" => [2001i64, 2001, 2001, 2001]).unwrap();
        assert!(!summarize(&df, "f", "y", 3).unwrap().balanced);
    }
}
