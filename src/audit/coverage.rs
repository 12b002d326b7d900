//! Coverage: gaps, spells, singletons (one-way and iterated under two-way effects), the
//! distribution of observations per entity, Ahrens–Pincus unbalancedness and the most common
//! coverage shapes.

use polars::prelude::*;

use super::names::*;
use super::verdict::{counted, level_key, line, worst, CheckVerdict, LevelKey, Levels, Status};
use super::{scalar_f64, scalar_u64, unchanged, Check, Context};
use crate::report::layout::{num, pairs, strings, Block, Section};
use crate::report::{
    Coverage as Figures, CoverageGrid, Distribution, Finding, GridRow, Report, Shape,
};
use crate::Result;

/// How many coverage shapes the report lists.
const SHAPES: usize = 8;

/// Entities with gaps.
pub const GAPS_LEVEL: LevelKey = level_key!("gaps", Warn);
/// Entities observed in one period only.
pub const SINGLETONS_LEVEL: LevelKey = level_key!("singletons", Warn);

/// Coverage figures.
pub struct Coverage;

impl Check for Coverage {
    fn name(&self) -> &'static str {
        "coverage"
    }

    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>> {
        let n = col(N).cast(DataType::Float64);
        let s = ctx
            .entities
            .clone()
            .lazy()
            .select([
                col(GAPS).gt(lit(0)).sum().alias("with_gaps"),
                col(GAPS).sum().alias("gap_periods"),
                col(LONGEST).max().alias("longest"),
                col(N).eq(lit(1)).sum().alias("singletons"),
                col(SPELLS).sum().alias("spells"),
                n.clone().min().alias("min"),
                n.clone()
                    .quantile(lit(0.25), QuantileMethod::Linear)
                    .alias("q1"),
                n.clone()
                    .quantile(lit(0.5), QuantileMethod::Linear)
                    .alias("median"),
                n.clone()
                    .quantile(lit(0.75), QuantileMethod::Linear)
                    .alias("q3"),
                n.clone().max().alias("max"),
                n.mean().alias("mean"),
            ])
            .collect()?;
        let f = |c: &str| -> Result<f64> { Ok(scalar_f64(&s, c)?.unwrap_or(0.0)) };
        let (shapes, distinct_shapes) = shapes(&ctx.entities)?;
        let c = Figures {
            entities_with_gaps: scalar_u64(&s, "with_gaps")?,
            gap_periods: scalar_u64(&s, "gap_periods")?,
            longest_gap: scalar_u64(&s, "longest")?,
            singletons: scalar_u64(&s, "singletons")?,
            singletons_two_way: ctx.core.two_way_singletons(),
            spells: scalar_u64(&s, "spells")?,
            per_entity: Distribution {
                min: f("min")?,
                q1: f("q1")?,
                median: f("median")?,
                q3: f("q3")?,
                max: f("max")?,
                mean: f("mean")?,
            },
            shapes,
            distinct_shapes,
            grid: grid(ctx)?,
        };
        Ok(Box::new(c))
    }

    fn on_cleaned(&self) -> bool {
        true
    }

    fn levels(&self) -> Vec<LevelKey> {
        vec![GAPS_LEVEL, SINGLETONS_LEVEL]
    }

    /// Coverage counts keys: with the same rows, the cleaned panel's is the one as read.
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
        let c = r.findings.get::<Figures>()?;
        let mut coverage = Vec::new();
        if c.entities_with_gaps > 0 {
            coverage.push((
                lv.of(&GAPS_LEVEL),
                counted(
                    c.entities_with_gaps,
                    "entity with gaps",
                    "entities with gaps",
                ),
            ));
        }
        if c.singletons > 0 {
            coverage.push((
                lv.of(&SINGLETONS_LEVEL),
                counted(c.singletons, "singleton", "singletons"),
            ));
        }
        Some(if coverage.is_empty() {
            line("Coverage", Pass, "no gaps and no singletons".into())
        } else {
            worst("Coverage", coverage)
        })
    }
}

impl Finding for Figures {
    fn entries(&self) -> Vec<(&'static str, &dyn crate::report::ToJson)> {
        vec![("coverage", self)]
    }

    fn cleaned_entries(&self) -> Vec<(&'static str, &dyn crate::report::ToJson)> {
        vec![("coverage", self)]
    }

    fn sections(&self, _report: &Report) -> Vec<Section> {
        vec![section(self)]
    }
}

fn shape_words(s: &Shape) -> String {
    let span = if s.first == s.last {
        format!("only {}", s.first)
    } else {
        format!("{} to {}", s.first, s.last)
    };
    match s.gap_periods {
        0 => format!("{span}, no gaps"),
        1 => format!("{span}, 1 period missing"),
        g => format!("{span}, {g} periods missing"),
    }
}

fn section(c: &Figures) -> Section {
    let d = &c.per_entity;
    let mut blocks = vec![pairs(&[
        (
            "observations per entity: min / q1 / median / q3 / max",
            format!(
                "{} / {} / {} / {} / {}",
                num(d.min, 0),
                num(d.q1, 2),
                num(d.median, 1),
                num(d.q3, 2),
                num(d.max, 0)
            ),
        ),
        ("observations per entity: mean", num(d.mean, 2)),
        ("spells (runs of consecutive periods)", c.spells.to_string()),
        ("entities with gaps", c.entities_with_gaps.to_string()),
        ("periods missing inside spans", c.gap_periods.to_string()),
        ("longest gap (periods)", c.longest_gap.to_string()),
        ("singletons (one period only)", c.singletons.to_string()),
        (
            "rows lost to singletons under entity + period effects",
            c.singletons_two_way.to_string(),
        ),
    ])];
    if !c.shapes.is_empty() {
        let rows = c
            .shapes
            .iter()
            .map(|s| vec![shape_words(s), s.entities.to_string()])
            .collect();
        blocks.push(Block::Table(
            strings(&["most common coverage", "entities"]),
            rows,
        ));
        blocks.push(Block::Note(format!(
            "{} distinct coverage shapes in all.",
            c.distinct_shapes
        )));
    }
    Section {
        title: "Coverage",
        blocks,
    }
}

/// Entities shown in the coverage chart.
const GRID_ROWS: usize = 60;

fn grid(ctx: &Context) -> Result<CoverageGrid> {
    let Some((first, last)) = ctx.window()? else {
        return Ok(CoverageGrid::default());
    };
    let ids = ctx.entities.column(ctx.entity)?.str()?;
    let n = ctx.entities.height();
    let step = (n as f64 / GRID_ROWS as f64).max(1.0);
    let width = (last - first + 1) as usize;
    // Each picked entity's periods from its rows in the panel core (the entity frame lists
    // the entities in the order of their codes), not by a search of every key for its name.
    let core = &ctx.core;
    let rows = (0..n.min(GRID_ROWS))
        .map(|i| (i as f64 * step) as usize)
        .filter_map(|e| {
            let id = ids.get(e)?;
            let mut present = vec![false; width];
            for r in core.starts[e]..core.starts[e + 1] {
                present[(core.period_of(r) - first) as usize] = true;
            }
            Some(GridRow {
                entity: id.to_string(),
                present,
            })
        })
        .collect();
    Ok(CoverageGrid {
        periods: (first..=last).collect(),
        rows,
        of_entities: n as u64,
    })
}

fn shapes(entities: &DataFrame) -> Result<(Vec<Shape>, u64)> {
    let grouped = entities
        .clone()
        .lazy()
        .group_by([col(FIRST), col(LAST), col(GAPS)])
        .agg([len().cast(DataType::UInt64).alias("entities")])
        .sort_by_exprs(
            [col("entities"), col(FIRST), col(LAST), col(GAPS)],
            SortMultipleOptions::default().with_order_descending_multi([true, false, false, false]),
        )
        .collect()?;
    let head = grouped.head(Some(SHAPES));
    let first = head.column(FIRST)?.i64()?;
    let last = head.column(LAST)?.i64()?;
    let gaps = head.column(GAPS)?.i64()?;
    let n = head.column("entities")?.u64()?;
    let shapes = (0..head.height())
        .map(|i| Shape {
            first: first.get(i).unwrap_or_default(),
            last: last.get(i).unwrap_or_default(),
            gap_periods: gaps.get(i).unwrap_or_default() as u64,
            entities: n.get(i).unwrap_or_default(),
        })
        .collect();
    Ok((shapes, grouped.height() as u64))
}
