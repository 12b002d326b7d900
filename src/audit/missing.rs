//! Missing values: per variable, and per variable and period with a flag where a variable's
//! coverage changes sharply from one period to the next (a source or definition break).

use polars::prelude::*;

use super::verdict::{counted, level_key, line, worst, CheckVerdict, LevelKey, Levels, Status};
use super::{unchanged, Check, Context};
use crate::report::layout::{num, strings, Block, Section};
use crate::report::{
    Finding, MissingBreak, MissingByPeriod, MissingFigures as Figures, MissingLine, Report, ToJson,
};
use crate::Result;

/// Sharp changes in a variable's missing share between periods.
pub const MISSING_BREAKS: LevelKey = level_key!("missing_breaks", Warn);
/// A variable with no value in any row (often a column mapped by mistake, or not delivered).
pub const EMPTY_VARIABLES: LevelKey = level_key!("empty_variables", Warn);

/// Missing values.
pub struct Missing;

impl Check for Missing {
    fn name(&self) -> &'static str {
        "missing values"
    }

    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>> {
        let mut f = Figures::default();
        let vars = &ctx.variables;
        if vars.is_empty() || ctx.df.height() == 0 {
            return Ok(Box::new(f));
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
            f.lines.push(MissingLine {
                variable: v.clone(),
                missing,
                share: missing as f64 / rows,
            });
        }
        if gappy.is_empty() {
            return Ok(Box::new(f));
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
                    f.breaks.push(MissingBreak {
                        variable: v.clone(),
                        period: p1,
                        share_before: a,
                        share_after: b,
                    });
                }
            }
            for i in 0..by_period.height() {
                if let (Some(period), Some(share)) = (periods.get(i), shares.get(i)) {
                    f.by_period.push(MissingByPeriod {
                        variable: v.clone(),
                        period,
                        share,
                    });
                }
            }
        }
        Ok(Box::new(f))
    }

    fn on_cleaned(&self) -> bool {
        true
    }

    fn levels(&self) -> Vec<LevelKey> {
        vec![EMPTY_VARIABLES, MISSING_BREAKS]
    }

    /// Treatment changes values, never whether one is missing: the figures as read stand.
    fn after_treatment(
        &self,
        ctx: &Context,
        read: &dyn Finding,
        _treated: &[String],
    ) -> Result<Box<dyn Finding>> {
        unchanged::<Figures>(self, ctx, read)
    }

    fn verdict(&self, r: &Report, lv: &Levels) -> Option<CheckVerdict> {
        use Status::*;
        let f = r.findings.get::<Figures>()?;
        let empty: Vec<&str> = f
            .lines
            .iter()
            .filter(|m| m.missing > 0 && m.share >= 1.0)
            .map(|m| m.variable.as_str())
            .collect();
        let mut found = Vec::new();
        if !empty.is_empty() {
            found.push((
                lv.of(&EMPTY_VARIABLES),
                format!("no value in any row: {}", empty.join(", ")),
            ));
        }
        if !f.breaks.is_empty() {
            found.push((
                lv.of(&MISSING_BREAKS),
                counted(
                    f.breaks.len() as u64,
                    "coverage break between periods",
                    "coverage breaks between periods",
                ),
            ));
        }
        Some(if f.lines.is_empty() {
            line(
                "Missing values",
                NotChecked,
                "no variable besides the keys".into(),
            )
        } else if found.is_empty() && r.panel.periods < 2 {
            // Only the variables with no value at all were looked for.
            line(
                "Missing values",
                Pass,
                "every variable has a value; a single period, so no change in coverage \
                 between periods to look for"
                    .into(),
            )
        } else if found.is_empty() {
            line(
                "Missing values",
                Pass,
                "no sharp change in coverage between periods".into(),
            )
        } else {
            worst("Missing values", found)
        })
    }
}

impl Finding for Figures {
    fn entries(&self) -> Vec<(&'static str, &dyn ToJson)> {
        vec![
            ("missing", &self.lines),
            ("missing_by_period", &self.by_period),
            ("missing_breaks", &self.breaks),
        ]
    }

    fn cleaned_entries(&self) -> Vec<(&'static str, &dyn ToJson)> {
        vec![("missing", &self.lines)]
    }

    fn sections(&self, _report: &Report) -> Vec<Section> {
        vec![section(self)]
    }
}

fn section(r: &Figures) -> Section {
    let rows: Vec<Vec<String>> = r
        .lines
        .iter()
        .filter(|m| m.missing > 0)
        .map(|m| vec![m.variable.clone(), m.missing.to_string(), num(m.share, 3)])
        .collect();
    let mut blocks = if rows.is_empty() {
        vec![Block::Note("No missing values.".into())]
    } else {
        vec![Block::Table(
            strings(&["variable", "missing", "share"]),
            rows,
        )]
    };
    if !r.breaks.is_empty() {
        let rows = r
            .breaks
            .iter()
            .map(|b| {
                vec![
                    b.variable.clone(),
                    b.period.to_string(),
                    num(b.share_before, 3),
                    num(b.share_after, 3),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&["coverage break", "period", "missing before", "missing from"]),
            rows,
        ));
        blocks.push(Block::Note(
            "A sharp change in the missing share between consecutive periods often marks a change \
             of source or definition (or, for lags and growth rates, the window's first period)."
                .into(),
        ));
    }
    Section {
        title: "Missing values",
        blocks,
    }
}
