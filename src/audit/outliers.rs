//! Outliers: percentile cutoffs (Hyndman–Fan type 7, pooled or by period) with the counts
//! beyond them, robust z-scores from the median and the MAD, and within-entity jumps in log
//! levels. Missing values never enter a cutoff.

use polars::prelude::*;

use super::{Check, Context};
use crate::report::{OutlierLine, Report};
use crate::Result;

/// The MAD's scale for a normal distribution, 1 / Φ⁻¹(3/4).
pub const MAD_SCALE: f64 = 1.482_602_218_505_602;

/// How cutoffs are computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CutoffGroups {
    /// One pair of cutoffs over all rows.
    Pooled,
    /// A pair of cutoffs per period.
    Period,
}

/// Outliers.
pub struct Outliers;

impl Check for Outliers {
    fn name(&self) -> &'static str {
        "outliers"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let s = &ctx.settings;
        let (lo, hi) = (s.lower, s.upper);
        let vars = &ctx.numeric;
        if vars.is_empty() {
            return Ok(());
        }
        let x = |v: &str| col(v).cast(DataType::Float64);
        let q = |v: &str, p: f64| x(v).quantile(lit(p), QuantileMethod::Linear);
        let groups: Vec<Expr> = match s.by {
            CutoffGroups::Pooled => vec![],
            CutoffGroups::Period => vec![col(ctx.period)],
        };
        let over = |e: Expr| -> Result<Expr> {
            Ok(if groups.is_empty() {
                e
            } else {
                e.over(groups.clone())?
            })
        };
        // One select of aggregates: nothing of the panel's length is materialised.
        let mut aggs = Vec::new();
        for (i, v) in vars.iter().enumerate() {
            let lower = over(q(v, lo))?;
            let upper = over(q(v, hi))?;
            let median = x(v).median();
            let mad = (x(v) - x(v).median()).abs().median() * lit(MAD_SCALE);
            let count = |e: Expr| e.sum().cast(DataType::UInt64);
            aggs.push(count(x(v).lt(lower.clone())).alias(format!("below{i}")));
            aggs.push(count(x(v).gt(upper.clone())).alias(format!("above{i}")));
            aggs.push(lower.first().alias(format!("lo{i}")));
            aggs.push(upper.first().alias(format!("hi{i}")));
            // With a MAD of zero the robust z is undefined: nothing is counted.
            let z = ((x(v) - median) / mad.clone()).abs().gt(lit(s.robust_z));
            aggs.push(count(z.and(mad.clone().gt(lit(0.0)))).alias(format!("z{i}")));
            aggs.push(mad.alias(format!("mad{i}")));
            let group_n = if groups.is_empty() {
                x(v).count()
            } else {
                x(v).count().over(groups.clone())?.min()
            };
            aggs.push(group_n.cast(DataType::UInt64).alias(format!("gn{i}")));
        }
        let t = ctx.df.clone().lazy().select(aggs).collect()?;
        let u = |c: String| -> Result<u64> { Ok(t.column(&c)?.u64()?.get(0).unwrap_or(0)) };
        let f = |c: String| -> Result<Option<f64>> { Ok(t.column(&c)?.f64()?.get(0)) };
        let smallest = (1.0 / lo.min(1.0 - hi)).ceil() as u64;
        for (i, v) in vars.iter().enumerate() {
            let min_group = u(format!("gn{i}"))?;
            report.outliers.push(OutlierLine {
                variable: v.clone(),
                by: s.by,
                lower: if s.by == CutoffGroups::Pooled {
                    f(format!("lo{i}"))?
                } else {
                    None
                },
                upper: if s.by == CutoffGroups::Pooled {
                    f(format!("hi{i}"))?
                } else {
                    None
                },
                below: u(format!("below{i}"))?,
                above: u(format!("above{i}"))?,
                mad: f(format!("mad{i}"))?,
                robust_z_beyond: u(format!("z{i}"))?,
                log_jumps: None,
                small_groups: s.by == CutoffGroups::Period && min_group < smallest,
            });
        }
        Ok(())
    }
}
