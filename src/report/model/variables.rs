//! Report data of the variable checks: variation, absorption, missing values, outliers,
//! unit slips, accounting rules.

use serde::Serialize;

use super::CutoffGroups;

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

/// The degrees-of-freedom convention of the variation figures.
pub const VARIATION_CONVENTION: &str = "over each variable's non-missing rows: sd_total = \
sqrt(TSS / (N - 1)); sd_within = sqrt(WSS / (N - 1)) with WSS the squared deviations from entity \
means (descriptive, N - 1, not N - n); sd_between = SD of the entity means, each entity once, \
n - 1; within_share = WSS / TSS";

/// The variation check's figures: one line per variable.
#[derive(Debug, Clone, Default)]
pub struct VariationFigures {
    /// Per variable (numeric, then categorical): variation and absorption by fixed effects.
    pub lines: Vec<VariationLine>,
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
    /// The smallest value, the quartiles (type-7 percentiles 25, 50 and 75) and the largest
    /// value; absent for text variables and a variable without values.
    #[serde(skip_serializing_if = "Option::is_none", flatten)]
    pub spread: Option<Spread>,
    /// A text variable held as codes, or number codes declared categorical: how many distinct
    /// values and the most common one;
    /// absent for numbers and for text whose values nearly all differ (not held as codes).
    #[serde(skip_serializing_if = "Option::is_none", flatten)]
    pub text_values: Option<TextValues>,
    /// The effects that absorb the variable, if any.
    pub absorbed_by: Option<Absorbed>,
    /// Within share below the `nearly_absorbed` threshold: fixed-effects estimates will be
    /// imprecise.
    pub nearly_absorbed: bool,
    /// Why a numeric variable's SDs and shares are missing (too few values, sums too large
    /// for floating-point numbers); absent from the JSON when they are computed, and for
    /// text variables.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub not_computable: Option<String>,
}

/// Where a numeric variable's values lie: the extremes and the quartiles.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// The smallest value.
    pub min: f64,
    /// The 25th percentile.
    pub p25: f64,
    /// The median.
    pub median: f64,
    /// The 75th percentile.
    pub p75: f64,
    /// The largest value.
    pub max: f64,
}

/// How a text variable's values are spread over its rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TextValues {
    /// Distinct values (missing not counted).
    pub distinct: u64,
    /// The value in the most rows (of those tied, the one met first in the panel's order).
    pub most_common: String,
    /// Rows holding it.
    pub most_common_rows: u64,
    /// Entities holding two or more different values over their periods (missing ones
    /// aside).
    pub entities_changing: u64,
}

/// The missing-values check's figures.
#[derive(Debug, Clone, Default)]
pub struct MissingFigures {
    /// Per variable: missing values.
    pub lines: Vec<MissingLine>,
    /// Per variable with missing values and period: the share missing.
    pub by_period: Vec<MissingByPeriod>,
    /// Sharp changes in a variable's missing share from one period to the next.
    pub breaks: Vec<MissingBreak>,
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
    pub by: CutoffGroups,
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
    /// Values whose robust z (from the median and scaled MAD) is beyond the threshold; None
    /// when the MAD is zero (half the values or more equal the median) or there is no value:
    /// the robust z is then not defined.
    pub robust_z_beyond: Option<u64>,
    /// Within-entity jumps in the log level beyond the threshold (level variables only).
    pub log_jumps: Option<u64>,
    /// Some period has fewer values than 1 / p: its cutoffs are unreliable (by groups: some
    /// group took the pooled cutoffs).
    pub small_groups: bool,
    /// The grouping columns, with cutoffs by groups.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub groups: Vec<String>,
    /// With cutoffs by groups: groups with fewer than 1 / (the smaller tail) values, which
    /// took the pooled cutoffs.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pooled_fallback_groups: Option<u64>,
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
