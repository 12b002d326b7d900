//! The checks: one file per check family, each behind the small `Check` trait, run in the
//! order of `registry()`. Each returns its finding (its figures, laid out by themselves) and
//! writes its verdict line; none prints or writes into another's figures. The panel summary
//! (`glance`) and model readiness (`model`) are computed beside the checks, not among them.

pub mod accounting;
mod attrition;
mod coverage;
mod entry_exit;
mod glance;
mod missing;
pub mod model;
mod outliers;
mod robust_z;
mod spread;
mod unit_slips;
mod variation;
pub mod verdict;

use polars::prelude::*;

use crate::core::{GroupCodes, PanelCore};
use crate::report::{Finding, Findings, Report};
use crate::Result;
use verdict::CheckVerdict;

pub use attrition::welch;
pub use coverage::Coverage;
pub use entry_exit::EntryExit;
pub use glance::{alike_entities, panel_summary};
pub use missing::Missing;
pub use outliers::{CutoffGroups, Outliers, MAD_SCALE};
pub use variation::{Variation, ABSORBED_SHARE};

/// Thresholds and settings of the checks, from `[thresholds]` and `[audit]`.
#[derive(Debug, Clone)]
pub struct Settings {
    /// Within share under which a variable is nearly absorbed by entity effects.
    pub nearly_absorbed: f64,
    /// Change in a missing share between consecutive periods that flags a break.
    pub missing_jump: f64,
    /// Robust z beyond which a value is counted.
    pub robust_z: f64,
    /// Absolute change in a log level beyond which a jump is counted.
    pub log_jump: f64,
    /// Lower percentile of the outlier cutoffs, as a fraction.
    pub lower: f64,
    /// Upper percentile of the outlier cutoffs, as a fraction.
    pub upper: f64,
    /// Cutoffs pooled, per period or per group of `group_columns`.
    pub by: CutoffGroups,
    /// The grouping columns of the outlier cutoffs (with `CutoffGroups::Groups`).
    pub group_columns: Vec<String>,
}

impl Default for Settings {
    fn default() -> Settings {
        Settings {
            nearly_absorbed: 0.05,
            missing_jump: 0.25,
            robust_z: 5.0,
            log_jump: std::f64::consts::LN_10,
            lower: 0.01,
            upper: 0.99,
            by: CutoffGroups::Pooled,
            group_columns: Vec::new(),
        }
    }
}

/// What the checks look at beyond the panel itself.
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Variables compared between leavers and stayers.
    pub compare: Vec<String>,
    /// Level variables searched for unit slips and log jumps.
    pub levels: Vec<String>,
    /// Columns that are not variables (the row number).
    pub exclude: Vec<String>,
    /// Columns declared categorical: treated as text, never as numbers.
    pub categorical: Vec<String>,
    /// Thresholds.
    pub settings: Settings,
    /// The declared model, if any.
    pub model: Option<model::ModelSpec>,
    /// Periods back and ahead each derived variable reads (lags, leads, growth rates).
    pub reach: std::collections::BTreeMap<String, (i64, i64)>,
}

/// Column names in `Context::keys` and `Context::entities`.
pub mod names {
    /// Observations of the entity.
    pub const N: &str = "__n";
    /// The entity's first period.
    pub const FIRST: &str = "__first";
    /// The entity's last period.
    pub const LAST: &str = "__last";
    /// Periods missing inside the entity's span.
    pub const GAPS: &str = "__gaps";
    /// The entity's spells.
    pub const SPELLS: &str = "__spells";
    /// The entity's longest gap.
    pub const LONGEST: &str = "__longest";
}

/// What every check sees: the panel and two frames computed once from it.
pub struct Context<'a> {
    /// The panel (after the key steps and any cleaning), with derived variables, sorted by
    /// entity and period.
    pub df: &'a DataFrame,
    /// The entity column.
    pub entity: &'a str,
    /// The period column.
    pub period: &'a str,
    /// Variables to compare between leavers and stayers.
    pub compare: Vec<String>,
    /// Level variables for the unit-slip check.
    pub levels: Vec<String>,
    /// Every column but the keys and the row number.
    pub variables: Vec<String>,
    /// The numeric ones among them.
    pub numeric: Vec<String>,
    /// Thresholds.
    pub settings: Settings,
    /// The declared model, if any.
    pub model: Option<model::ModelSpec>,
    /// Periods back and ahead each derived variable reads.
    pub reach: std::collections::BTreeMap<String, (i64, i64)>,
    /// Distinct (entity, period) keys sorted by entity and period.
    pub keys: DataFrame,
    /// One row per entity: `__n`, `__first`, `__last`, `__gaps`, `__spells`, `__longest`.
    pub entities: DataFrame,
    /// Entity and period codes of the panel's rows.
    pub core: PanelCore,
    /// With outlier cutoffs by groups: the groups and each row's (the loose group where a
    /// grouping value is missing).
    pub outlier_groups: Option<GroupCodes>,
    /// Where a check that goes through the variables a few at a time reports how far it is.
    progress: Option<&'a crate::progress::Progress>,
    /// Each variable's pooled quantiles, once computed ([`Context::pooled`]).
    pooled: std::sync::Mutex<std::collections::HashMap<String, Pooled>>,
}

/// A variable's pooled quantiles over the panel's rows with a value: at the outlier cutoffs'
/// percentiles and the quartiles (type 7), and its extremes.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Pooled {
    pub(crate) min: Option<f64>,
    pub(crate) max: Option<f64>,
    pub(crate) lower: Option<f64>,
    pub(crate) upper: Option<f64>,
    pub(crate) p25: Option<f64>,
    pub(crate) median: Option<f64>,
    pub(crate) p75: Option<f64>,
}

impl Pooled {
    /// The pooled quantiles of the values of `x`, from one bracketing pass
    /// (core::quantiles_visiting), the extremes taken on the way: a comparison that keeps
    /// the lower (higher) value, which costs the pass little, where a pass of their own
    /// would read the column from memory again.
    pub(crate) fn of(x: &crate::core::View, s: &Settings) -> Pooled {
        let ps = [s.lower, s.upper, 0.25, 0.5, 0.75];
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        let (q, _) = crate::core::quantiles_visiting(
            x,
            x.count(),
            |v| v,
            &ps,
            |_| {
                |v: f64, _| {
                    lo = if v < lo { v } else { lo };
                    hi = if v > hi { v } else { hi };
                }
            },
        );
        let seen = lo <= hi;
        Pooled {
            min: seen.then_some(lo),
            max: seen.then_some(hi),
            lower: q[0],
            upper: q[1],
            p25: q[2],
            median: q[3],
            p75: q[4],
        }
    }
}

/// A context's key frames and codes, kept when its panel is let go.
pub struct KeyFrames {
    /// Rows of the panel they describe.
    pub rows: usize,
    keys: DataFrame,
    entities: DataFrame,
    core: PanelCore,
}

impl KeyFrames {
    /// The entity and period codes.
    pub fn core(&self) -> &PanelCore {
        &self.core
    }

    /// A context over `df`, which has the same rows in the same order as the panel these
    /// describe, with other options. Nothing about the keys is computed again.
    pub fn context<'b>(
        &self,
        df: &'b DataFrame,
        entity: &'b str,
        period: &'b str,
        options: Options,
    ) -> Result<Context<'b>> {
        debug_assert_eq!(df.height(), self.rows);
        Context::from_parts(
            df,
            entity,
            period,
            options,
            self.keys.clone(),
            self.entities.clone(),
            self.core.clone(),
        )
    }
}

/// Every column but the keys and the excluded ones, and the numeric ones among them.
fn variable_lists(
    df: &DataFrame,
    entity: &str,
    period: &str,
    options: &Options,
) -> (Vec<String>, Vec<String>) {
    let schema = df.schema();
    let variables: Vec<String> = schema
        .iter_names()
        .map(|n| n.to_string())
        .filter(|n| n != entity && n != period && !options.exclude.contains(n))
        .collect();
    let numeric = variables
        .iter()
        .filter(|v| {
            !options.categorical.contains(v)
                && schema
                    .get(v.as_str())
                    .is_some_and(|d| d.is_primitive_numeric() || d.is_bool())
        })
        .cloned()
        .collect();
    (variables, numeric)
}

/// The distinct (entity, period) keys, and one row per entity with `__n`,
/// `__first`, `__last`, `__spells`, `__longest` and `__gaps` (see [`names`]), from the panel
/// core of `df`, which is sorted by entity and period: copies of a key sit together.
fn key_frames(
    df: &DataFrame,
    entity: &str,
    period: &str,
    core: &PanelCore,
) -> Result<(DataFrame, DataFrame)> {
    use names::*;
    let ne = core.entities();
    // The first row of each key, listed only once a key repeats (until then, every row).
    let mut first_rows: Option<Vec<IdxSize>> = None;
    let (mut n, mut first, mut last) = (vec![0i64; ne], vec![0i64; ne], vec![0i64; ne]);
    let (mut spells, mut longest) = (vec![1i64; ne], vec![0i64; ne]);
    for (i, rows) in core.starts.windows(2).enumerate() {
        // The entity's figures in locals, each written once: the first row starts them, every
        // later one is a step from the one before (none for a repeated key).
        let r0 = rows[0];
        let t0 = core.period_of(r0);
        if let Some(first_rows) = &mut first_rows {
            first_rows.push(r0 as IdxSize);
        }
        let (mut count, mut runs, mut widest) = (1i64, 1i64, 0i64);
        let mut previous = t0;
        for r in r0 + 1..rows[1] {
            let t = core.period_of(r);
            if t == previous {
                first_rows.get_or_insert_with(|| (0..r as IdxSize).collect());
                continue;
            }
            if let Some(first_rows) = &mut first_rows {
                first_rows.push(r as IdxSize);
            }
            let g = t - previous;
            runs += i64::from(g > 1);
            widest = widest.max(g - 1);
            count += 1;
            previous = t;
        }
        (n[i], first[i], last[i]) = (count, t0, previous);
        (spells[i], longest[i]) = (runs, widest);
    }
    let key_columns = df.select([entity, period])?;
    let keys = match first_rows {
        None => key_columns,
        Some(first_rows) => key_columns.take(&IdxCa::from_vec("rows".into(), first_rows))?,
    };
    let starts: Vec<IdxSize> = core.starts[..ne].iter().map(|r| *r as IdxSize).collect();
    let ids = df
        .select([entity])?
        .take(&IdxCa::from_vec("starts".into(), starts))?;
    let gaps: Vec<i64> = (0..ne).map(|i| last[i] - first[i] + 1 - n[i]).collect();
    let mut entities = ids;
    for (name, values) in [
        (N, n),
        (FIRST, first),
        (LAST, last),
        (SPELLS, spells),
        (LONGEST, longest),
        (GAPS, gaps),
    ] {
        entities.with_column(Column::new(name.into(), values))?;
    }
    Ok((keys, entities))
}

impl<'a> Context<'a> {
    /// Compute the shared frames.
    pub fn new(
        df: &'a DataFrame,
        entity: &'a str,
        period: &'a str,
        options: Options,
    ) -> Result<Context<'a>> {
        // The panel arrives sorted by entity and period: its core's codes give the distinct
        // keys and each entity's span in one typed pass, with no group-by or sort.
        let core = PanelCore::new(df, entity, period)?;
        let (keys, entities) = key_frames(df, entity, period, &core)?;
        Context::from_parts(df, entity, period, options, keys, entities, core)
    }

    /// A context over `df` with the key frames and codes given.
    fn from_parts(
        df: &'a DataFrame,
        entity: &'a str,
        period: &'a str,
        options: Options,
        keys: DataFrame,
        entities: DataFrame,
        core: PanelCore,
    ) -> Result<Context<'a>> {
        let (variables, numeric) = variable_lists(df, entity, period, &options);
        let outlier_groups = match options.settings.by {
            CutoffGroups::Groups => Some(GroupCodes::of(df, &options.settings.group_columns)?),
            _ => None,
        };
        Ok(Context {
            df,
            entity,
            period,
            compare: options.compare,
            levels: options.levels,
            variables,
            numeric,
            settings: options.settings,
            model: options.model,
            reach: options.reach,
            keys,
            entities,
            core,
            outlier_groups,
            progress: None,
            pooled: Default::default(),
        })
    }

    /// The pooled quantiles of variable `v`, whose values are `x`: from one pass over the
    /// column the first time a check asks (the variation's quartiles), then shared (the
    /// outliers' cutoffs and median), so that the column is read once for both.
    pub(crate) fn pooled(&self, v: &str, x: &crate::core::View) -> Pooled {
        let cached = self.pooled.lock().map(|m| m.get(v).copied());
        if let Ok(Some(q)) = cached {
            return q;
        }
        let pooled = Pooled::of(x, &self.settings);
        if let Ok(mut m) = self.pooled.lock() {
            m.insert(v.to_string(), pooled);
        }
        pooled
    }

    /// The same context, reporting the checks' progress through the variables to `progress`.
    pub fn with_progress(mut self, progress: &'a crate::progress::Progress) -> Context<'a> {
        self.progress = Some(progress);
        self
    }

    /// The running check will go through `total` variables.
    pub fn items(&self, total: usize) {
        if let Some(p) = self.progress {
            p.items(total);
        }
    }

    /// `n` more variables of the running check are done.
    pub fn done(&self, n: usize) {
        if let Some(p) = self.progress {
            p.done(n);
        }
    }

    /// The keys, codes and shared frames, without the panel: for a panel with the same rows
    /// in the same order (values may differ: after winsorizing).
    pub fn into_keys(self) -> KeyFrames {
        KeyFrames {
            rows: self.df.height(),
            keys: self.keys,
            entities: self.entities,
            core: self.core,
        }
    }

    /// `lf` with each row's entity's first and last period (`__first`, `__last`) joined on.
    pub fn with_span(&self, lf: LazyFrame) -> LazyFrame {
        use names::{FIRST, LAST};
        lf.join(
            self.entities
                .clone()
                .lazy()
                .select([col(self.entity), col(FIRST), col(LAST)]),
            [col(self.entity)],
            [col(self.entity)],
            JoinArgs::new(JoinType::Inner),
        )
    }

    /// The window's first and last period, if the panel has rows.
    pub fn window(&self) -> Result<Option<(i64, i64)>> {
        let s = self
            .keys
            .clone()
            .lazy()
            .select([
                col(self.period).min().alias("a"),
                col(self.period).max().alias("b"),
            ])
            .collect()?;
        Ok(s.column("a")?
            .i64()?
            .get(0)
            .zip(s.column("b")?.i64()?.get(0)))
    }
}

/// One family of checks: it computes its finding (its own figures, which lay themselves out
/// in the reports), and judges it.
pub trait Check {
    /// A short name for progress and errors.
    fn name(&self) -> &'static str;
    /// Compute the check's finding on the panel of `ctx`.
    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>>;
    /// Whether `build` reports the check's figures for the cleaned panel too (in
    /// `report.cleaned`, beside the panel as read).
    fn on_cleaned(&self) -> bool {
        false
    }
    /// The finding for the cleaned panel when cleaning kept every row in the same order and
    /// changed only the values of the variables `treated` (winsorizing), from `read`, this
    /// check's finding for the panel as read. By default computed again.
    fn after_treatment(
        &self,
        ctx: &Context,
        _read: &dyn Finding,
        _treated: &[String],
    ) -> Result<Box<dyn Finding>> {
        self.run(ctx)
    }
    /// The findings whose level `[verdict]` may set, which `verdict` reads (none for a check
    /// that only describes or judges at fixed levels).
    fn levels(&self) -> Vec<verdict::LevelKey> {
        Vec::new()
    }
    /// The check's line of the verdict, from the finished report at the configured levels;
    /// none for a check that only describes.
    fn verdict(&self, _report: &Report, _levels: &verdict::Levels) -> Option<CheckVerdict> {
        None
    }
}

/// `finding` as the check's own figures `T`, if it is.
pub(crate) fn own<T: Finding>(finding: &dyn Finding) -> Option<&T> {
    (finding as &dyn std::any::Any).downcast_ref::<T>()
}

/// `Check::after_treatment` of a check whose figures treatment cannot change: the figures as
/// read, `read` (computed again should it not be the check's own).
pub(crate) fn unchanged<T: Finding + Clone>(
    check: &dyn Check,
    ctx: &Context,
    read: &dyn Finding,
) -> Result<Box<dyn Finding>> {
    match own::<T>(read) {
        Some(figures) => Ok(Box::new(figures.clone())),
        None => check.run(ctx),
    }
}

/// Every check, in report order: their findings, sections and verdict lines follow it.
pub fn registry() -> Vec<Box<dyn Check>> {
    vec![
        Box::new(Coverage),
        Box::new(EntryExit),
        Box::new(Variation),
        Box::new(Missing),
        Box::new(Outliers),
    ]
}

/// Run every check on the panel of `ctx`, in registry order.
pub fn run_all(ctx: &Context) -> Result<Findings> {
    let mut findings = Findings::default();
    for check in registry() {
        findings.push(check.run(ctx)?);
    }
    Ok(findings)
}

/// Read one value of a one-row frame as f64.
pub(crate) fn scalar_f64(df: &DataFrame, column: &str) -> Result<Option<f64>> {
    Ok(df.column(column)?.cast(&DataType::Float64)?.f64()?.get(0))
}

/// Read one value of a one-row frame as u64.
pub(crate) fn scalar_u64(df: &DataFrame, column: &str) -> Result<u64> {
    Ok(df
        .column(column)?
        .cast(&DataType::UInt64)?
        .u64()?
        .get(0)
        .unwrap_or(0))
}

#[cfg(test)]
mod tests;
