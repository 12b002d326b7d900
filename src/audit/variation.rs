//! Variation and absorption: for every numeric variable, total, between and within standard
//! deviations, the within share of the sum of squares, entities without within variation, and
//! whether entity effects, period effects or both would absorb it (alternating demeaning for
//! the two-way case, which also handles unbalanced panels).

use polars::prelude::*;

use super::{Check, Context};
use crate::report::{Absorbed, Report, VariationLine};
use crate::Result;

/// A share of the sum of squares below this counts as no variation at all.
pub const ABSORBED_SHARE: f64 = 1e-10;
/// Most alternating-demeaning rounds before giving up on convergence.
const MAX_ROUNDS: usize = 1000;

/// Variation and absorption.
pub struct Variation;

impl Check for Variation {
    fn name(&self) -> &'static str {
        "variation"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let vars = &ctx.numeric;
        if vars.is_empty() {
            return Ok(());
        }
        let (e, p) = (ctx.entity, ctx.period);
        let x = |v: &str| col(v).cast(DataType::Float64);
        // One pass: entity and period deviations for every variable (nulls stay null).
        let mut dev = vec![col(e), col(p)];
        for (i, v) in vars.iter().enumerate() {
            dev.push(x(v).alias(format!("x{i}")));
            dev.push((x(v) - x(v).mean().over([col(e)])?).alias(format!("w{i}")));
            dev.push((x(v) - x(v).mean().over([col(p)])?).alias(format!("q{i}")));
            dev.push((x(v) - x(v).mean()).alias(format!("t{i}")));
        }
        let frame = ctx.df.clone().lazy().select(dev).collect()?;
        let sq = |c: String| col(c.as_str()).pow(2).sum();
        let mut aggs = Vec::new();
        for i in 0..vars.len() {
            aggs.push(
                col(format!("x{i}").as_str())
                    .count()
                    .cast(DataType::Float64)
                    .alias(format!("n{i}")),
            );
            aggs.push(col(format!("x{i}").as_str()).mean().alias(format!("m{i}")));
            aggs.push(sq(format!("t{i}")).alias(format!("tss{i}")));
            aggs.push(sq(format!("w{i}")).alias(format!("wss{i}")));
            aggs.push(sq(format!("q{i}")).alias(format!("pss{i}")));
        }
        let totals = frame.clone().lazy().select(aggs).collect()?;
        // Per entity: mean (for the between SD) and whether the values never change. Window
        // expressions on the sorted panel, then one row per entity, so that the sums run in
        // the same order on every run (a byte-identical report).
        let mut per_entity = vec![col(e)];
        for i in 0..vars.len() {
            let c = col(format!("x{i}").as_str());
            per_entity.push(c.clone().mean().over([col(e)])?.alias(format!("em{i}")));
            per_entity.push(
                c.clone()
                    .count()
                    .over([col(e)])?
                    .gt(lit(1))
                    .and(c.clone().max().over([col(e)])?.eq(c.min().over([col(e)])?))
                    .alias(format!("flat{i}")),
            );
        }
        let mut between = Vec::new();
        for i in 0..vars.len() {
            between.push(
                col(format!("em{i}").as_str())
                    .std(1)
                    .alias(format!("bsd{i}")),
            );
            between.push(
                col(format!("flat{i}").as_str())
                    .sum()
                    .cast(DataType::UInt64)
                    .alias(format!("flat{i}")),
            );
        }
        let entity_stats = frame
            .clone()
            .lazy()
            .select(per_entity)
            .unique_stable_generic(Some(vec![col(e)]), UniqueKeepStrategy::First)
            .select(between)
            .collect()?;
        let get = |df: &DataFrame, c: String| -> Result<f64> {
            Ok(df
                .column(&c)?
                .cast(&DataType::Float64)?
                .f64()?
                .get(0)
                .unwrap_or(f64::NAN))
        };
        let mut lines = Vec::new();
        let mut two_way_candidates = Vec::new();
        for (i, v) in vars.iter().enumerate() {
            let n = get(&totals, format!("n{i}"))?;
            let tss = get(&totals, format!("tss{i}"))?;
            let wss = get(&totals, format!("wss{i}"))?;
            let pss = get(&totals, format!("pss{i}"))?;
            let sd = |ss: f64| {
                if n > 1.0 {
                    (ss / (n - 1.0)).sqrt()
                } else {
                    f64::NAN
                }
            };
            let within_share = if tss > 0.0 { wss / tss } else { 0.0 };
            let period_share = if tss > 0.0 { pss / tss } else { 0.0 };
            let absorbed_by = if n < 2.0 {
                None
            } else if within_share < ABSORBED_SHARE {
                Some(Absorbed::Entity)
            } else if period_share < ABSORBED_SHARE {
                Some(Absorbed::Period)
            } else {
                two_way_candidates.push(i);
                None
            };
            lines.push(VariationLine {
                variable: v.clone(),
                n: n as u64,
                mean: finite(get(&totals, format!("m{i}"))?),
                sd_total: finite(sd(tss)),
                sd_between: finite(get(&entity_stats, format!("bsd{i}"))?),
                sd_within: finite(sd(wss)),
                within_share: finite(if n > 0.0 { within_share } else { f64::NAN }),
                two_way_share: None,
                zero_within_entities: get(&entity_stats, format!("flat{i}"))? as u64,
                absorbed_by,
                nearly_absorbed: n >= 2.0
                    && absorbed_by.is_none()
                    && within_share < ctx.settings.nearly_absorbed,
            });
        }
        let tss: Vec<f64> = two_way_candidates
            .iter()
            .map(|i| get(&totals, format!("tss{i}")))
            .collect::<Result<_>>()?;
        let shares = two_way_shares(&frame, e, p, &two_way_candidates, &tss)?;
        for (i, share) in two_way_candidates.iter().zip(shares) {
            lines[*i].two_way_share = finite(share);
            if share < ABSORBED_SHARE {
                lines[*i].absorbed_by = Some(Absorbed::EntityPeriod);
                lines[*i].nearly_absorbed = false;
            }
        }
        lines.extend(categorical(ctx)?);
        report.variation = lines;
        Ok(())
    }
}

/// Text and other non-numeric variables: only whether each entity (or each period) holds
/// a single value, which makes the variable's dummies absorbed by those effects.
fn categorical(ctx: &Context) -> Result<Vec<VariationLine>> {
    let others: Vec<&String> = ctx
        .variables
        .iter()
        .filter(|v| !ctx.numeric.contains(v))
        .collect();
    let mut lines = Vec::new();
    for v in others {
        let one_value = |by: &str| -> Result<bool> {
            let df = ctx
                .df
                .clone()
                .lazy()
                .group_by([col(by)])
                .agg([col(v.as_str()).drop_nulls().n_unique().alias("k")])
                .select([col("k").max().alias("k")])
                .collect()?;
            Ok(df
                .column("k")?
                .cast(&DataType::UInt64)?
                .u64()?
                .get(0)
                .unwrap_or(0)
                <= 1)
        };
        let n = ctx.df.column(v)?.len() - ctx.df.column(v)?.null_count();
        let absorbed_by = if n < 2 {
            None
        } else if one_value(ctx.entity)? {
            Some(Absorbed::Entity)
        } else if one_value(ctx.period)? {
            Some(Absorbed::Period)
        } else {
            None
        };
        lines.push(VariationLine {
            variable: v.clone(),
            n: n as u64,
            mean: None,
            sd_total: None,
            sd_between: None,
            sd_within: None,
            within_share: None,
            two_way_share: None,
            zero_within_entities: 0,
            absorbed_by,
            nearly_absorbed: false,
        });
    }
    Ok(lines)
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// Share of the total sum of squares left after removing entity and period effects, by
/// alternating demeaning (entity, then period) until the residual stops changing.
fn two_way_shares(
    frame: &DataFrame,
    e: &str,
    p: &str,
    vars: &[usize],
    tss: &[f64],
) -> Result<Vec<f64>> {
    let mut shares = vec![f64::NAN; vars.len()];
    if vars.is_empty() {
        return Ok(shares);
    }
    let r = |i: usize| format!("r{i}");
    // Residuals start as deviations from the grand mean; a variable's sample is its non-null rows.
    let mut cols = vec![col(e), col(p)];
    cols.extend(
        vars.iter()
            .map(|i| col(format!("t{i}").as_str()).alias(r(*i))),
    );
    let mut res = frame.clone().lazy().select(cols).collect()?;
    let mut active: Vec<usize> = (0..vars.len()).collect();
    let mut last = vec![f64::INFINITY; vars.len()];
    for _ in 0..MAX_ROUNDS {
        let mut step = Vec::new();
        for k in &active {
            let c = col(r(vars[*k]).as_str());
            step.push((c.clone() - c.mean().over([col(e)])?).alias(r(vars[*k])));
        }
        res = res.lazy().with_columns(step).collect()?;
        let mut step = Vec::new();
        let mut ss = Vec::new();
        for k in &active {
            let c = col(r(vars[*k]).as_str());
            let demeaned = c.clone() - c.mean().over([col(p)])?;
            step.push(demeaned.alias(r(vars[*k])));
        }
        res = res.lazy().with_columns(step).collect()?;
        for k in &active {
            ss.push(col(r(vars[*k]).as_str()).pow(2).sum().alias(r(vars[*k])));
        }
        let sums = res.clone().lazy().select(ss).collect()?;
        let mut still = Vec::new();
        for k in active {
            let rss = sums.column(&r(vars[k]))?.f64()?.get(0).unwrap_or(0.0);
            let share = if tss[k] > 0.0 { rss / tss[k] } else { 0.0 };
            shares[k] = share;
            // Converged: the share no longer moves, or it is already far below the threshold.
            let moved = (last[k] - share).abs();
            if share < ABSORBED_SHARE * 1e-3 || moved <= 1e-6 * share {
                continue;
            }
            last[k] = share;
            still.push(k);
        }
        active = still;
        if active.is_empty() {
            break;
        }
    }
    Ok(shares)
}
