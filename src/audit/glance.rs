//! Panel at a glance: rows, entities, periods, window and whether the panel is balanced.

use std::hash::BuildHasher;

use polars::prelude::*;
use rayon::prelude::*;

use super::names::N;
use super::{scalar_f64, Context};
use crate::report::PanelSummary;
use crate::Result;

/// The panel of `ctx` at a glance: rows, entities, periods, window, balance and evenness.
pub fn panel_summary(ctx: &Context) -> Result<PanelSummary> {
    let keys = ctx.keys.height() as u64;
    let (df, core) = (ctx.df, &ctx.core);
    // The panel core codes these rows (sorted, no key missing): its counts are the distinct
    // entities and periods, with no hashing of the entity names.
    let coded = core.rows() == df.height()
        && df.column(ctx.entity)?.null_count() == 0
        && df.column(ctx.period)?.null_count() == 0;
    let mut panel = if coded {
        from_core(core, keys)
    } else {
        summarize(df, ctx.entity, ctx.period, keys)?
    };
    (panel.evenness_harmonic, panel.evenness_squares) = evenness(&ctx.entities)?;
    Ok(panel)
}

/// Groups of entities whose names are one name but for surrounding spaces, letter case or,
/// for ids of digits alone, leading zeros (` K1` and `k1`, `007` and `7`), and the first few
/// groups' names: over the distinct names (one row per entity), not the
/// panel's rows.
pub fn alike_entities(ctx: &Context) -> Result<(u64, Vec<Vec<String>>)> {
    const SHOWN: usize = 3;
    let name = ctx.entity;
    let names = ctx.entities.select([name])?;
    // Mostly there are none: each name, trimmed, lowered and (digits alone) without leading
    // zeros as the engine does below (Rust's `trim`, `to_lowercase`, `without_zeros`), hashed, on both cores; the hashes sorted, and none equal to
    // its neighbour, no two are alike. (A hash set of the names, filled one at a time, took
    // 3.3 s for the 8.85 M names of a 100 M panel: a miss in memory for each.)
    let text = names.column(name)?.cast(&DataType::String)?;
    let state = PlRandomState::default();
    let mut hashes: Vec<u64> = Vec::with_capacity(text.len());
    for chunk in text.str()?.downcast_iter() {
        let hashed: Vec<u64> = (0..chunk.len())
            .into_par_iter()
            .filter_map(|i| chunk.get(i))
            .map_init(String::new, |lowered, id| {
                let id = id.trim();
                let key = if id.is_ascii() && !id.bytes().any(|b| b.is_ascii_uppercase()) {
                    id
                } else {
                    lowered.clear();
                    if id.is_ascii() {
                        lowered.push_str(id);
                        lowered.make_ascii_lowercase();
                    } else {
                        lowered.push_str(&id.to_lowercase());
                    }
                    lowered.as_str()
                };
                state.hash_one(crate::core::without_zeros(key))
            })
            .collect();
        hashes.extend(hashed);
    }
    hashes.par_sort_unstable();
    let met = hashes.windows(2).any(|w| w[0] == w[1]);
    if !met {
        return Ok((0, Vec::new()));
    }
    let alike = names
        .lazy()
        .select([col(name).cast(DataType::String)])
        .with_column({
            let folded = col(name).str().strip_chars(lit(NULL)).str().to_lowercase();
            let digits = folded.clone().str().contains(lit("^[0-9]+$"), true);
            when(digits)
                .then(folded.clone().str().strip_chars_start(lit("0")))
                .otherwise(folded)
                .alias(ALIKE)
        })
        .filter(len().over([col(ALIKE)])?.gt(lit(1)))
        .sort([ALIKE, name], Default::default())
        .collect()?;
    let groups = alike.column(ALIKE)?.n_unique()? as u64;
    let mut examples: Vec<Vec<String>> = Vec::new();
    let (shared, names) = (alike.column(ALIKE)?.str()?, alike.column(name)?.str()?);
    let mut previous = None;
    for (shared, name) in shared.iter().zip(names.iter()) {
        if previous != Some(shared) {
            if examples.len() == SHOWN {
                break;
            }
            examples.push(Vec::new());
            previous = Some(shared);
        }
        if let Some(group) = examples.last_mut() {
            group.push(name.unwrap_or_default().to_string());
        }
    }
    Ok((groups, examples))
}

/// The name two entity names share once trimmed, in lower case and, for ids of digits alone,
/// without leading zeros.
const ALIKE: &str = "__alike";

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
    Ok(summary(
        [u("rows")?, u("entities")?, u("periods")?],
        first.zip(last),
        keys,
    ))
}

/// The summary from the panel core's codes, for rows it codes with no key missing.
fn from_core(core: &crate::core::PanelCore, keys: u64) -> PanelSummary {
    let (first, last) = (core.periods.first().copied(), core.periods.last().copied());
    summary(
        [core.rows(), core.entities(), core.periods.len()].map(|n| n as u64),
        first.zip(last),
        keys,
    )
}

/// The summary from the counts of rows, entities and periods, the first and last period and
/// the distinct keys.
fn summary(
    [rows, entities, periods]: [u64; 3],
    window: Option<(i64, i64)>,
    keys: u64,
) -> PanelSummary {
    let width = window.map_or(0, |(a, b)| (b - a + 1) as u64);
    PanelSummary {
        rows,
        entities,
        periods,
        first_period: window.map(|w| w.0),
        last_period: window.map(|w| w.1),
        balanced: rows > 0 && rows == keys && rows == entities * width,
        evenness_harmonic: None,
        evenness_squares: None,
    }
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

    #[test]
    fn the_panel_core_counts_what_the_engine_counts() {
        // Source: polars' own n_unique, min and max on the same rows (`summarize`), against
        // the entities and periods the panel core counts by its runs and codes.
        let df = df!(
            "f" => ["a", "a", "b", "c", "c", "c"],
            "y" => [2001i64, 2003, 2002, 2001, 2002, 2003]
        )
        .unwrap();
        let core = crate::core::PanelCore::new(&df, "f", "y").unwrap();
        let engine = summarize(&df, "f", "y", 6).unwrap();
        let coded = from_core(&core, 6);
        assert_eq!(format!("{coded:?}"), format!("{engine:?}"));
        assert_eq!((coded.entities, coded.periods), (3, 3));
    }
}
