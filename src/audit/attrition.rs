//! Attrition: do entities that leave before the window ends differ from those that stay, at
//! their first observed period? Welch's t-test per variable. A warning signal only: it is not
//! a test of selection bias.

use polars::prelude::*;
use statrs::distribution::{ContinuousCDF, StudentsT};

use super::names::*;
use super::verdict::{level_key, line, CheckVerdict, LevelKey, Levels, Status};
use super::Context;
use crate::report::{AttritionGroups, AttritionTest, EntryExitFigures};
use crate::Result;

/// Leavers differing from stayers at entry.
pub const ATTRITION: LevelKey = level_key!("attrition", Warn);

/// Leavers against stayers: how many of each, and per variable compared their means at
/// their first observed period with Welch's t-test (part of the entry-and-exit check).
pub(super) fn compare(ctx: &Context) -> Result<(AttritionGroups, Vec<AttritionTest>)> {
    let mut groups = AttritionGroups::default();
    let mut tests = Vec::new();
    let Some((_, last)) = ctx.window()? else {
        return Ok((groups, tests));
    };
    let leaver = col(LAST).lt(lit(last));
    let counts = ctx
        .entities
        .clone()
        .lazy()
        .select([
            leaver.clone().sum().cast(DataType::UInt64).alias("leavers"),
            leaver
                .clone()
                .not()
                .sum()
                .cast(DataType::UInt64)
                .alias("stayers"),
        ])
        .collect()?;
    groups.leavers = super::scalar_u64(&counts, "leavers")?;
    groups.stayers = super::scalar_u64(&counts, "stayers")?;
    let schema = ctx.df.schema();
    let vars: Vec<&String> = ctx
        .compare
        .iter()
        .filter(|v| {
            schema
                .get(v.as_str())
                .is_some_and(|d| d.is_primitive_numeric() || d.is_bool())
        })
        .collect();
    if vars.is_empty() {
        return Ok((groups, tests));
    }
    // The first row of each entity at its first period (the first of any duplicates): in
    // the sorted panel, the entity's first row; it left early if its last period is
    // before the window's last.
    let core = &ctx.core;
    let firsts: Vec<IdxSize> = (0..core.entities())
        .map(|i| core.starts[i] as IdxSize)
        .collect();
    let left: Vec<bool> = (0..core.entities())
        .map(|i| core.period_of(core.starts[i + 1] - 1) < last)
        .collect();
    let mut first_rows = ctx
        .df
        .select(vars.iter().map(|v| v.as_str()))?
        .take(&IdxCa::from_vec("first".into(), firsts))?;
    first_rows.with_column(Column::new("__leaver".into(), left))?;
    let at_first = first_rows.lazy();
    let mut aggs = Vec::new();
    for (i, v) in vars.iter().enumerate() {
        let x = col(v.as_str()).cast(DataType::Float64);
        let x = x.clone().filter(x.clone().is_finite());
        aggs.push(
            x.clone()
                .count()
                .cast(DataType::Float64)
                .alias(format!("n{i}")),
        );
        aggs.push(x.clone().mean().alias(format!("m{i}")));
        aggs.push(x.var(1).alias(format!("v{i}")));
    }
    let g = at_first
        .group_by([col("__leaver")])
        .agg(aggs)
        .sort(["__leaver"], Default::default())
        .collect()?;
    let leavers_row = g
        .column("__leaver")?
        .bool()?
        .iter()
        .position(|b| b == Some(true));
    let stayers_row = g
        .column("__leaver")?
        .bool()?
        .iter()
        .position(|b| b == Some(false));
    let get = |row: Option<usize>, name: String| -> Result<Option<f64>> {
        Ok(match row {
            Some(r) => g.column(&name)?.cast(&DataType::Float64)?.f64()?.get(r),
            None => None,
        })
    };
    for (i, v) in vars.iter().enumerate() {
        let a = (
            get(leavers_row, format!("n{i}"))?,
            get(leavers_row, format!("m{i}"))?,
            get(leavers_row, format!("v{i}"))?,
        );
        let b = (
            get(stayers_row, format!("n{i}"))?,
            get(stayers_row, format!("m{i}"))?,
            get(stayers_row, format!("v{i}"))?,
        );
        let n1 = a.0.unwrap_or(0.0);
        let n2 = b.0.unwrap_or(0.0);
        let test = match (a.1, a.2, b.1, b.2) {
            (Some(m1), Some(v1), Some(m2), Some(v2)) => welch(m1, v1, n1, m2, v2, n2),
            _ => None,
        };
        tests.push(AttritionTest {
            variable: v.to_string(),
            n_leavers: n1 as u64,
            n_stayers: n2 as u64,
            mean_leavers: a.1.filter(|_| n1 > 0.0),
            mean_stayers: b.1.filter(|_| n2 > 0.0),
            t: test.map(|t| t.0),
            df: test.map(|t| t.1),
            p: test.map(|t| t.2),
        });
    }
    Ok((groups, tests))
}

/// The entry-and-exit verdict line: whether leavers differed from stayers at entry.
pub(super) fn verdict(r: &EntryExitFigures, lv: &Levels) -> Option<CheckVerdict> {
    use Status::*;
    let compared: Vec<&str> = r
        .attrition
        .iter()
        .filter(|a| a.p.is_some())
        .map(|a| a.variable.as_str())
        .collect();
    let differ: Vec<&str> = r
        .attrition
        .iter()
        .filter(|a| a.p.is_some_and(|p| p < lv.attrition_p))
        .map(|a| a.variable.as_str())
        .collect();
    Some(if compared.is_empty() {
        line(
            "Entry and exit",
            NotChecked,
            "no variable could be compared between leavers and stayers".into(),
        )
    } else if differ.is_empty() {
        line(
            "Entry and exit",
            Pass,
            format!(
                "leavers and stayers do not differ at entry (p >= {}) in {} variables compared",
                lv.attrition_p,
                compared.len()
            ),
        )
    } else {
        line(
            "Entry and exit",
            lv.of(&ATTRITION),
            format!(
                "leavers differ from stayers at entry in {}",
                differ.join(", ")
            ),
        )
    })
}

/// Welch's unequal-variance t-test from group means, sample variances (ddof 1) and sizes:
/// (t, Welch–Satterthwaite df, two-sided p). `None` when a group has fewer than two values
/// or both variances are zero.
pub fn welch(m1: f64, v1: f64, n1: f64, m2: f64, v2: f64, n2: f64) -> Option<(f64, f64, f64)> {
    if n1 < 2.0 || n2 < 2.0 {
        return None;
    }
    let (a, b) = (v1 / n1, v2 / n2);
    let se2 = a + b;
    if se2.is_nan() || se2 <= 0.0 {
        return None;
    }
    let t = (m1 - m2) / se2.sqrt();
    let df = se2 * se2 / (a * a / (n1 - 1.0) + b * b / (n2 - 1.0));
    if !(t.is_finite() && df.is_finite() && df > 0.0) {
        return None;
    }
    let dist = StudentsT::new(0.0, 1.0, df).ok()?;
    let p = (2.0 * dist.sf(t.abs())).min(1.0);
    Some((t, df, p))
}
