//! Missing values: per variable, and per variable and period with a flag where a variable's
//! coverage changes sharply from one period to the next (a source or definition break).

use polars::prelude::*;

use super::verdict::{line, CheckVerdict, Levels, Status};
use super::{Check, Context};
use crate::report::{MissingBreak, MissingLine, Report};
use crate::Result;

/// Missing values.
pub struct Missing;

impl Check for Missing {
    fn name(&self) -> &'static str {
        "missing values"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        let vars = &ctx.variables;
        if vars.is_empty() || ctx.df.height() == 0 {
            return Ok(());
        }
        let rows = ctx.df.height() as f64;
        let counts = ctx
            .df
            .clone()
            .lazy()
            .select(
                vars.iter()
                    .map(|v| col(v.as_str()).null_count().cast(DataType::UInt64))
                    .collect::<Vec<_>>(),
            )
            .collect()?;
        let mut gappy = Vec::new();
        for v in vars {
            let missing = counts.column(v)?.u64()?.get(0).unwrap_or(0);
            if missing > 0 {
                gappy.push(v.clone());
            }
            report.missing.push(MissingLine {
                variable: v.clone(),
                missing,
                share: missing as f64 / rows,
            });
        }
        if gappy.is_empty() {
            return Ok(());
        }
        let by_period = ctx
            .df
            .clone()
            .lazy()
            .group_by([col(ctx.period)])
            .agg(
                gappy
                    .iter()
                    .map(|v| col(v.as_str()).is_null().cast(DataType::Float64).mean())
                    .collect::<Vec<_>>(),
            )
            .sort([ctx.period], Default::default())
            .collect()?;
        let periods = by_period.column(ctx.period)?.i64()?;
        let (first, last) = (periods.min().unwrap_or(0), periods.max().unwrap_or(0));
        for v in &gappy {
            // A lag (growth rate, ...) of k periods is null by construction in the window's
            // first k periods, a lead in its last k: no break there.
            let (back, ahead) = ctx.reach.get(v).copied().unwrap_or((0, 0));
            let shares = by_period.column(v)?.f64()?;
            for i in 1..by_period.height() {
                let (Some(a), Some(b), Some(p0), Some(p1)) = (
                    shares.get(i - 1),
                    shares.get(i),
                    periods.get(i - 1),
                    periods.get(i),
                ) else {
                    continue;
                };
                let structural = p0 < first + back || p1 > last - ahead;
                if p1 == p0 + 1 && !structural && (b - a).abs() >= ctx.settings.missing_jump {
                    report.missing_breaks.push(MissingBreak {
                        variable: v.clone(),
                        period: p1,
                        share_before: a,
                        share_after: b,
                    });
                }
            }
            for i in 0..by_period.height() {
                if let (Some(period), Some(share)) = (periods.get(i), shares.get(i)) {
                    report
                        .missing_by_period
                        .push(crate::report::MissingByPeriod {
                            variable: v.clone(),
                            period,
                            share,
                        });
                }
            }
        }
        Ok(())
    }

    fn verdict(&self, r: &Report, lv: &Levels) -> Option<CheckVerdict> {
        use Status::*;
        Some(if r.missing.is_empty() {
            line(
                "Missing values",
                NotChecked,
                "no variable besides the keys".into(),
            )
        } else if r.missing_breaks.is_empty() {
            line(
                "Missing values",
                Pass,
                "no sharp change in coverage between periods".into(),
            )
        } else {
            line(
                "Missing values",
                lv.missing_breaks,
                format!("{} coverage breaks between periods", r.missing_breaks.len()),
            )
        })
    }
}
