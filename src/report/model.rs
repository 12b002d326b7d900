//! The report's data: every figure the readiness report shows, as typed, documented structs.
//! Field names are the JSON contract of `report.json`.

use polars::prelude::*;
use serde::Serialize;

use super::distinct;
use crate::config::InputFormat;
use crate::rules::Origin;
use crate::Result;

/// Every figure the readiness report shows. Field names are the JSON contract.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// The panelready version that made the report.
    pub tool_version: String,
    /// What was read.
    pub input: InputSummary,
    /// The panel the checks ran on (after the key steps).
    pub panel: PanelSummary,
    /// Missing and duplicate keys in the input.
    pub keys: KeysSummary,
    /// Gaps, spells, singletons and the shape of each entity's coverage.
    pub coverage: Coverage,
    /// Entities present, entering, leaving and returning, per period.
    pub entry_exit: Vec<EntryExit>,
    /// Share of each entry cohort still observed k periods after entry.
    pub survival: Vec<Survival>,
    /// How many entities left before the window's end and how many stayed.
    pub attrition_groups: AttritionGroups,
    /// Leavers against stayers at their first observed period, one line per variable.
    pub attrition: Vec<AttritionTest>,
    /// How the variation figures are computed.
    pub variation_convention: String,
    /// Per numeric variable: variation and absorption by fixed effects.
    pub variation: Vec<VariationLine>,
    /// Per variable: missing values.
    pub missing: Vec<MissingLine>,
    /// Per variable with missing values and period: the share missing.
    pub missing_by_period: Vec<MissingByPeriod>,
    /// Sharp changes in a variable's missing share from one period to the next.
    pub missing_breaks: Vec<MissingBreak>,
    /// Per numeric variable: values beyond the cutoffs and robust z-scores.
    pub outliers: Vec<OutlierLine>,
    /// Suspected unit slips in level variables (at most 10,000 listed).
    pub unit_slips: Vec<UnitSlip>,
    /// How many unit slips were found in all.
    pub unit_slips_total: u64,
    /// Accounting rules and their violations.
    pub rules: Vec<RuleLine>,
    /// Each derived variable with its null counts by reason.
    pub derived: Vec<DerivedSummary>,
    /// Library ratios left out because the data lacks an input.
    pub skipped: Vec<SkippedRule>,
    /// From raw rows to final rows, one line per step.
    pub sample_construction: Vec<SampleStep>,
    /// Outlier treatment applied by `build`, one line per variable.
    pub treatment: Vec<TreatLine>,
    /// The balancing window chosen by `build`, if any.
    pub balance: Option<BalanceLine>,
    /// The cleaned panel written by `build` (absent for `audit`).
    pub cleaned: Option<Cleaned>,
    /// Diagnostics for the model declared in `[model]` (on the cleaned panel for `build`).
    pub model: Option<ModelReport>,
    /// Pass, warn or fail per check family, and overall.
    pub verdict: Option<crate::audit::verdict::Verdict>,
}

/// Model readiness: which panel estimator the data support.
#[derive(Debug, Clone, Serialize)]
pub struct ModelReport {
    /// The outcome.
    pub outcome: String,
    /// The regressors (with the lagged outcome, if declared).
    pub regressors: Vec<String>,
    /// `entity` or `entity+period`.
    pub effects: String,
    /// Rows left after dropping rows missing any model variable.
    pub sample_rows: u64,
    /// Entities in that sample.
    pub sample_entities: u64,
    /// Rows missing each model variable (one row may miss several).
    pub cost: Vec<VariableCost>,
    /// Entities with a single row in the sample.
    pub sample_singletons: u64,
    /// The tests.
    pub tests: Vec<ModelTest>,
    /// SD of the entity effects (Swamy–Arora).
    pub entity_sd: Option<f64>,
    /// SD of the idiosyncratic error (within residuals).
    pub idiosyncratic_sd: Option<f64>,
    /// Entity-effect share of the error variance.
    pub entity_share: Option<f64>,
    /// How the variance components and the Hausman covariance are computed.
    pub variance_convention: String,
    /// Slopes by estimator.
    pub slopes: Vec<Slope>,
    /// Rules of thumb that apply, each with its source.
    pub warnings: Vec<String>,
}

/// Rows missing one model variable.
#[derive(Debug, Clone, Serialize)]
pub struct VariableCost {
    /// The variable.
    pub variable: String,
    /// Rows where it is missing.
    pub rows: u64,
}

/// One diagnostic test.
#[derive(Debug, Clone, Serialize)]
pub struct ModelTest {
    /// The test.
    pub name: String,
    /// Its statistic.
    pub statistic: f64,
    /// Degrees of freedom (none for normal statistics, two for F).
    pub df: Vec<f64>,
    /// p-value.
    pub p: Option<f64>,
    /// What it suggests, in one line.
    pub reading: String,
}

/// One regressor's slope under each estimator.
#[derive(Debug, Clone, Serialize)]
pub struct Slope {
    /// The regressor.
    pub variable: String,
    /// Pooled OLS.
    pub pooled: f64,
    /// Within (fixed effects).
    pub within: f64,
    /// Random effects (Swamy–Arora).
    pub random: Option<f64>,
    /// (within - pooled) / |pooled|, in percent.
    pub change_within_vs_pooled: Option<f64>,
    /// The sign differs or the size moves by more than half.
    pub material: bool,
}

/// Figures of the cleaned panel.
#[derive(Debug, Clone, Serialize)]
pub struct Cleaned {
    /// Panel at a glance.
    pub panel: PanelSummary,
    /// Coverage.
    pub coverage: Coverage,
    /// Variation.
    pub variation: Vec<VariationLine>,
    /// Missing values.
    pub missing: Vec<MissingLine>,
}

/// Outlier treatment of one variable.
#[derive(Debug, Clone, Serialize)]
pub struct TreatLine {
    /// The variable.
    pub variable: String,
    /// `winsorize` or `trim`.
    pub method: String,
    /// Pooled or per period.
    pub by: crate::audit::CutoffGroups,
    /// Lower percentile (0-100).
    pub lower_percentile: f64,
    /// Upper percentile (0-100).
    pub upper_percentile: f64,
    /// The cutoffs used (one, or one per period).
    pub cutoffs: Vec<Cutoff>,
    /// Values below the lower cutoff (replaced or dropped).
    pub below: u64,
    /// Values above the upper cutoff (replaced or dropped).
    pub above: u64,
    /// Distribution of the values before treatment (between the 0.5th and 99.5th
    /// percentiles; the rest counted at the ends).
    pub histogram: Histogram,
}

/// Equal-width bins.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Histogram {
    /// Left edge of the first bin.
    pub start: f64,
    /// Bin width.
    pub width: f64,
    /// Values per bin.
    pub counts: Vec<u64>,
}

/// A pair of cutoffs.
#[derive(Debug, Clone, Serialize)]
pub struct Cutoff {
    /// The period, or null when pooled.
    pub period: Option<i64>,
    /// Lower cutoff.
    pub lower: Option<f64>,
    /// Upper cutoff.
    pub upper: Option<f64>,
}

/// The balancing window.
#[derive(Debug, Clone, Serialize)]
pub struct BalanceLine {
    /// `window` (given) or `largest` (chosen).
    pub mode: String,
    /// First period of the window.
    pub first: i64,
    /// Last period.
    pub last: i64,
    /// Entities kept.
    pub entities: u64,
    /// Rows kept.
    pub rows: u64,
    /// The next-best windows (for `largest`).
    pub runner_up: Vec<WindowScore>,
}

/// A candidate balancing window.
#[derive(Debug, Clone, Serialize)]
pub struct WindowScore {
    /// First period.
    pub first: i64,
    /// Last period.
    pub last: i64,
    /// Entities observed in every period of it.
    pub entities: u64,
    /// Entities × periods.
    pub rows: u64,
}

/// The degrees-of-freedom convention of the variation figures.
pub const VARIATION_CONVENTION: &str = "over each variable's non-missing rows: sd_total = \
sqrt(TSS / (N - 1)); sd_within = sqrt(WSS / (N - 1)) with WSS the squared deviations from entity \
means (descriptive, N - 1, not N - n); sd_between = SD of the entity means, each entity once, \
n - 1; within_share = WSS / TSS";

impl Report {
    /// A report with no figures yet, for the pipeline and the checks to fill.
    pub fn new(input: InputSummary) -> Report {
        Report {
            tool_version: env!("CARGO_PKG_VERSION").to_string(),
            input,
            panel: PanelSummary::default(),
            keys: KeysSummary::default(),
            coverage: Coverage::default(),
            entry_exit: Vec::new(),
            survival: Vec::new(),
            attrition_groups: AttritionGroups::default(),
            attrition: Vec::new(),
            variation_convention: VARIATION_CONVENTION.to_string(),
            variation: Vec::new(),
            missing: Vec::new(),
            missing_by_period: Vec::new(),
            missing_breaks: Vec::new(),
            outliers: Vec::new(),
            unit_slips: Vec::new(),
            unit_slips_total: 0,
            rules: Vec::new(),
            derived: Vec::new(),
            skipped: Vec::new(),
            sample_construction: Vec::new(),
            treatment: Vec::new(),
            balance: None,
            cleaned: None,
            model: None,
            verdict: None,
        }
    }
}

/// The input file.
#[derive(Debug, Clone, Serialize)]
pub struct InputSummary {
    /// The file name (the manifest has the full path).
    pub path: String,
    /// CSV or Parquet.
    pub format: InputFormat,
    /// Rows read.
    pub rows: u64,
    /// Columns read.
    pub columns: u64,
    /// The entity column.
    pub entity: String,
    /// The period column.
    pub period: String,
}

/// Panel at a glance.
#[derive(Debug, Clone, Default, Serialize)]
pub struct PanelSummary {
    /// Rows (entity-period observations).
    pub rows: u64,
    /// Distinct entities.
    pub entities: u64,
    /// Distinct periods observed.
    pub periods: u64,
    /// First period observed.
    pub first_period: Option<i64>,
    /// Last period observed.
    pub last_period: Option<i64>,
    /// Every entity observed in every period of first..last, once.
    pub balanced: bool,
    /// Ahrens–Pincus unbalancedness: harmonic over arithmetic mean of observations per
    /// entity; 1 when balanced.
    pub gamma: Option<f64>,
    /// Ahrens–Pincus unbalancedness: N² / (n Σ T_i²); 1 when balanced.
    pub nu: Option<f64>,
}

/// Missing and duplicate keys.
#[derive(Debug, Clone, Default, Serialize)]
pub struct KeysSummary {
    /// Rows whose entity or period is missing.
    pub missing_key_rows: u64,
    /// Rows identical in every column to an earlier row (removed; the first is kept).
    pub exact_duplicate_rows: u64,
    /// Keys that had such copies.
    pub exact_duplicate_keys: u64,
    /// Keys that appear on rows with different values.
    pub conflicting_keys: u64,
    /// Rows carrying those keys.
    pub conflicting_rows: u64,
    /// The policy applied to conflicting keys.
    pub policy: String,
    /// The first few conflicting keys.
    pub examples: Vec<KeyExample>,
}

/// One conflicting key.
#[derive(Debug, Clone, Serialize)]
pub struct KeyExample {
    /// The entity.
    pub entity: String,
    /// The period.
    pub period: i64,
    /// How many rows carry it.
    pub rows: u64,
}

/// One derived variable.
#[derive(Debug, Clone, Serialize)]
pub struct DerivedSummary {
    /// Output column name.
    pub name: String,
    /// Human label.
    pub label: String,
    /// The expression as written.
    pub expr: String,
    /// Unit.
    pub unit: String,
    /// Source of the definition.
    pub source: String,
    /// User rules file or the built-in library.
    pub origin: Origin,
    /// Rows with a value.
    pub non_null: u64,
    /// Rows without one.
    pub nulls: u64,
    /// Nulls by reason; the reasons add up to `nulls`.
    pub null_reasons: Vec<NullCount>,
}

/// Nulls of one reason.
#[derive(Debug, Clone, Serialize)]
pub struct NullCount {
    /// The reason, as declared in the rule.
    pub reason: String,
    /// Rows.
    pub rows: u64,
}

/// A library ratio left out.
#[derive(Debug, Clone, Serialize)]
pub struct SkippedRule {
    /// The ratio.
    pub name: String,
    /// The input it lacks.
    pub missing: String,
}

/// One line of the sample-construction table.
#[derive(Debug, Clone, Serialize)]
pub struct SampleStep {
    /// The step.
    pub step: String,
    /// Rows before it.
    pub rows_before: u64,
    /// Rows it removed.
    pub removed: u64,
    /// Rows after it.
    pub rows_after: u64,
    /// Distinct entities after it.
    pub entities_after: u64,
}

impl SampleStep {
    /// The first line: rows as read.
    pub fn start(df: &DataFrame, entity: &str) -> Result<SampleStep> {
        let rows = df.height() as u64;
        Ok(SampleStep {
            step: "rows read".into(),
            rows_before: rows,
            removed: 0,
            rows_after: rows,
            entities_after: distinct(df, entity)?,
        })
    }

    /// The line for a step that left `df`.
    pub fn after(
        steps: &[SampleStep],
        step: &str,
        df: &DataFrame,
        entity: &str,
    ) -> Result<SampleStep> {
        let before = steps.last().map_or(0, |s| s.rows_after);
        let after = df.height() as u64;
        Ok(SampleStep {
            step: step.into(),
            rows_before: before,
            removed: before - after,
            rows_after: after,
            entities_after: distinct(df, entity)?,
        })
    }
}

/// Coverage: how each entity's observations fill its span. Counted on distinct keys.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Coverage {
    /// Entities with at least one gap inside their span.
    pub entities_with_gaps: u64,
    /// Periods missing inside entities' spans, summed over entities.
    pub gap_periods: u64,
    /// The longest run of missing periods inside any entity's span.
    pub longest_gap: u64,
    /// Entities observed in one period only.
    pub singletons: u64,
    /// Rows removed when singletons are dropped again and again under entity and period
    /// effects (an entity or a period with one row), until none is left.
    pub singletons_two_way: u64,
    /// Maximal runs of consecutive periods, summed over entities.
    pub spells: u64,
    /// Observations per entity.
    pub per_entity: Distribution,
    /// The most common coverage shapes (first period, last period, gaps), most common first.
    pub shapes: Vec<Shape>,
    /// How many distinct shapes there are.
    pub distinct_shapes: u64,
    /// A sample of entities with the periods they are observed in, for the coverage chart.
    pub grid: CoverageGrid,
}

/// Presence of a sample of entities over the window.
#[derive(Debug, Clone, Default, Serialize)]
pub struct CoverageGrid {
    /// The window's periods.
    pub periods: Vec<i64>,
    /// Sampled entities (evenly spaced in entity order), each with presence per period.
    pub rows: Vec<GridRow>,
    /// Entities sampled from.
    pub of_entities: u64,
}

/// One entity's presence per period.
#[derive(Debug, Clone, Serialize)]
pub struct GridRow {
    /// The entity.
    pub entity: String,
    /// Observed in each period of the window.
    pub present: Vec<bool>,
}

/// A distribution's summary; quartiles by linear interpolation (Hyndman–Fan type 7).
#[derive(Debug, Clone, Default, Serialize)]
pub struct Distribution {
    /// Smallest value.
    pub min: f64,
    /// First quartile.
    pub q1: f64,
    /// Median.
    pub median: f64,
    /// Third quartile.
    pub q3: f64,
    /// Largest value.
    pub max: f64,
    /// Mean.
    pub mean: f64,
}

/// Entities sharing a coverage shape.
#[derive(Debug, Clone, Serialize)]
pub struct Shape {
    /// First period observed.
    pub first: i64,
    /// Last period observed.
    pub last: i64,
    /// Periods missing in between.
    pub gap_periods: u64,
    /// Entities with this shape.
    pub entities: u64,
}

/// One period's entry and exit. Entrants are not counted in the window's first period and
/// leavers not in its last (`null`): whether an entity entered or left there is not
/// observable.
#[derive(Debug, Clone, Serialize)]
pub struct EntryExit {
    /// The period.
    pub period: i64,
    /// Entities observed in it.
    pub present: u64,
    /// Entities whose first period it is.
    pub entrants: Option<u64>,
    /// Entities whose last period it is.
    pub leavers: Option<u64>,
    /// Entities observed in it, absent in the period before, and seen earlier (back after a gap).
    pub reentrants: u64,
}

/// One entry cohort's survival.
#[derive(Debug, Clone, Serialize)]
pub struct Survival {
    /// The cohort's first period (the window's first period holds everyone present then).
    pub cohort: i64,
    /// Entities in the cohort.
    pub entities: u64,
    /// `shares[k]`: share of the cohort observed in period cohort + k.
    pub shares: Vec<f64>,
}

/// The two groups of the attrition comparison.
#[derive(Debug, Clone, Default, Serialize)]
pub struct AttritionGroups {
    /// Entities last seen before the window's last period.
    pub leavers: u64,
    /// Entities observed in the window's last period.
    pub stayers: u64,
}

/// Welch's t-test of one variable, leavers against stayers.
#[derive(Debug, Clone, Serialize)]
pub struct AttritionTest {
    /// The variable.
    pub variable: String,
    /// Leavers with a value at their first period.
    pub n_leavers: u64,
    /// Stayers with a value at their first period.
    pub n_stayers: u64,
    /// Mean among leavers.
    pub mean_leavers: Option<f64>,
    /// Mean among stayers.
    pub mean_stayers: Option<f64>,
    /// Welch's t statistic (leavers minus stayers).
    pub t: Option<f64>,
    /// Welch–Satterthwaite degrees of freedom.
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: Option<f64>,
}

/// Which fixed effects absorb a variable completely.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Absorbed {
    /// Constant within every entity (time-invariant).
    #[serde(rename = "entity")]
    Entity,
    /// Constant within every period (a macro series).
    #[serde(rename = "period")]
    Period,
    /// A sum of an entity part and a period part (firm age = year - founding year).
    #[serde(rename = "entity+period")]
    EntityPeriod,
}

/// Variation of one numeric variable.
#[derive(Debug, Clone, Serialize)]
pub struct VariationLine {
    /// The variable.
    pub variable: String,
    /// Rows with a value.
    pub n: u64,
    /// Mean.
    pub mean: Option<f64>,
    /// Total SD.
    pub sd_total: Option<f64>,
    /// SD of entity means.
    pub sd_between: Option<f64>,
    /// SD of deviations from entity means.
    pub sd_within: Option<f64>,
    /// Within sum of squares over total sum of squares.
    pub within_share: Option<f64>,
    /// Share of the total sum of squares left after removing entity and period effects
    /// (computed when neither alone absorbs the variable).
    pub two_way_share: Option<f64>,
    /// Entities with two or more values, all equal.
    pub zero_within_entities: u64,
    /// The effects that absorb the variable, if any.
    pub absorbed_by: Option<Absorbed>,
    /// Within share below the `nearly_absorbed` threshold: fixed-effects estimates will be
    /// imprecise.
    pub nearly_absorbed: bool,
}

/// Missing values of one variable.
#[derive(Debug, Clone, Serialize)]
pub struct MissingLine {
    /// The variable.
    pub variable: String,
    /// Rows missing it.
    pub missing: u64,
    /// Share of rows missing it.
    pub share: f64,
}

/// Missing share of one variable in one period.
#[derive(Debug, Clone, Serialize)]
pub struct MissingByPeriod {
    /// The variable.
    pub variable: String,
    /// The period.
    pub period: i64,
    /// Share of that period's rows missing it.
    pub share: f64,
}

/// A sharp change in a variable's missing share between consecutive periods.
#[derive(Debug, Clone, Serialize)]
pub struct MissingBreak {
    /// The variable.
    pub variable: String,
    /// The later of the two periods.
    pub period: i64,
    /// Missing share in the period before.
    pub share_before: f64,
    /// Missing share in this period.
    pub share_after: f64,
}

/// Outlier figures of one numeric variable.
#[derive(Debug, Clone, Serialize)]
pub struct OutlierLine {
    /// The variable.
    pub variable: String,
    /// Cutoffs pooled over all rows or per period.
    pub by: crate::audit::CutoffGroups,
    /// Lower cutoff (pooled only; per-period cutoffs vary).
    pub lower: Option<f64>,
    /// Upper cutoff (pooled only).
    pub upper: Option<f64>,
    /// Values below the lower cutoff.
    pub below: u64,
    /// Values above the upper cutoff.
    pub above: u64,
    /// Median absolute deviation times 1.4826.
    pub mad: Option<f64>,
    /// Values whose robust z (from the median and scaled MAD) is beyond the threshold.
    pub robust_z_beyond: u64,
    /// Within-entity jumps in the log level beyond the threshold (level variables only).
    pub log_jumps: Option<u64>,
    /// Some period has fewer values than 1 / p: its cutoffs are unreliable.
    pub small_groups: bool,
}

/// A suspected unit slip.
#[derive(Debug, Clone, Serialize)]
pub struct UnitSlip {
    /// The entity.
    pub entity: String,
    /// The period whose value jumped.
    pub period: i64,
    /// The variable.
    pub variable: String,
    /// The ratio to the previous period, rounded to 1000, 1/1000, 10^6 or 10^-6.
    pub factor: f64,
    /// The next period jumps back by the inverse factor.
    pub reverses: bool,
}

/// One accounting rule.
#[derive(Debug, Clone, Serialize)]
pub struct RuleLine {
    /// The rule's name.
    pub name: String,
    /// The SQL condition that must hold.
    pub expr: String,
    /// `flag`, `null` or `drop`.
    pub action: String,
    /// Rows where it does not hold.
    pub violations: u64,
    /// Rows where it cannot be checked (an input is missing).
    pub unknown: u64,
    /// With `null`: the columns set to null where it does not hold.
    pub nulls: Vec<String>,
}
