//! Report data of cleaning and model readiness.

use serde::Serialize;

use super::*;

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
    /// The diagnostics, grouped by the modelling decision each informs.
    pub questions: Vec<Question>,
    /// How the unexplained variation splits into a persistent entity part and a transient
    /// part (Swamy–Arora variance components); null figures when not computable.
    pub error_split: ErrorSplit,
    /// How the variance components and the Hausman covariance are computed.
    pub variance_convention: String,
    /// Slopes by estimator.
    pub slopes: Vec<Slope>,
    /// Declared regressors no estimator identifies (linear combinations of the others).
    pub not_identified: Vec<String>,
    /// Declared regressors the within estimator does not identify under the declared effects
    /// (pooled OLS and random effects keep them).
    pub not_identified_within: Vec<String>,
    /// The regressors the Hausman test compares (those both estimators identify).
    pub hausman_compares: Vec<String>,
    /// How much each regressor the pooled design identifies moves with the others.
    pub collinearity: Vec<Collinearity>,
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

/// A modelling decision and the diagnostics that inform it.
#[derive(Debug, Clone, Serialize)]
pub struct Question {
    /// Stable key: `pool_or_not`, `period_effects`, `fixed_or_random`, `independent_errors`.
    pub key: String,
    /// The question, in words.
    pub question: String,
    /// What the diagnostics beneath suggest, in one line (a reading, not a proof).
    pub answer: String,
    /// The diagnostics, most direct first.
    pub tests: Vec<ModelTest>,
}

/// The unexplained variation split into a persistent entity part and a transient part.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ErrorSplit {
    /// SD of the persistent entity differences (the entity effect, σ_μ).
    pub persistent_sd: Option<f64>,
    /// SD of the transient part, within an entity from period to period (σ_ν).
    pub transient_sd: Option<f64>,
    /// Share of the unexplained variance that is persistent: σ_μ² / (σ_μ² + σ_ν²).
    pub persistent_share: Option<f64>,
}

/// One diagnostic test.
#[derive(Debug, Clone, Serialize)]
pub struct ModelTest {
    /// Stable key, e.g. `entity_intercepts`, `fixed_vs_random`.
    pub key: String,
    /// What it examines, in plain words.
    pub label: String,
    /// Its name in the textbooks.
    pub textbook_name: String,
    /// Its published source.
    pub source: String,
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
    /// Pooled OLS (null when not identified).
    pub pooled: Option<f64>,
    /// Its conventional OLS standard error.
    pub pooled_se: Option<f64>,
    /// Within (fixed effects); null when the declared effects absorb the regressor.
    pub within: Option<f64>,
    /// Random effects (Swamy–Arora); null when not computable.
    pub random: Option<f64>,
    /// (within - pooled) / pooled standard error: the move in units of the pooled SE.
    pub within_minus_pooled_in_se: Option<f64>,
    /// Pooled and within slopes have opposite signs.
    pub sign_flip: bool,
    /// The sign flips or the move exceeds 2 pooled standard errors.
    pub material: bool,
}

/// How much one regressor moves with the others in the estimation sample.
#[derive(Debug, Clone, Serialize)]
pub struct Collinearity {
    /// The regressor.
    pub variable: String,
    /// Variance inflation factor, 1 / (1 − R²) of the regressor on the intercept, any period
    /// dummies and the other regressors.
    pub vif_pooled: Option<f64>,
    /// The same after removing entity means (null when the within estimator does not
    /// identify the regressor).
    pub vif_within: Option<f64>,
    /// The other regressor it is most correlated with (null without another).
    pub closest: Option<String>,
    /// That Pearson correlation in the estimation sample.
    pub correlation: Option<f64>,
}

/// The figures of the cleaned panel written by `build`.
#[derive(Debug)]
pub struct Cleaned {
    /// Panel at a glance.
    pub panel: PanelSummary,
    /// The findings of the checks that describe the cleaned panel too
    /// (`audit::Check::on_cleaned`), in registry order.
    pub findings: crate::report::Findings,
}

/// Outlier treatment of one variable.
#[derive(Debug, Clone, Serialize)]
pub struct TreatLine {
    /// The variable.
    pub variable: String,
    /// `winsorize` or `trim`.
    pub method: String,
    /// Pooled or per period.
    pub by: CutoffGroups,
    /// The grouping columns, when cutoffs are by group.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub groups: Vec<String>,
    /// Cutoffs per group, when by group.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub group_cutoffs: Vec<GroupCutoff>,
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

/// The cutoffs of one group.
#[derive(Debug, Clone, Serialize)]
pub struct GroupCutoff {
    /// The group's values, one per grouping column, as text.
    pub group: Vec<String>,
    /// Non-missing values of the variable in the group.
    pub values: u64,
    /// Lower cutoff applied.
    pub lower: Option<f64>,
    /// Upper cutoff applied.
    pub upper: Option<f64>,
    /// Too few values for the percentiles asked: the pooled cutoffs were applied.
    pub pooled_fallback: bool,
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
