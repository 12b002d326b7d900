//! Report data of the structural checks: coverage, entry and exit, attrition.

use serde::Serialize;

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

/// The entry-and-exit check's figures: turnover per period, survival per entry cohort, and
/// leavers against stayers at entry.
#[derive(Debug, Clone, Default)]
pub struct EntryExitFigures {
    /// Entities present, entering, leaving and returning, per period.
    pub entry_exit: Vec<EntryExit>,
    /// Share of each entry cohort still observed k periods after entry.
    pub survival: Vec<Survival>,
    /// How many entities left before the window's end and how many stayed.
    pub attrition_groups: AttritionGroups,
    /// Leavers against stayers at their first observed period, one line per variable.
    pub attrition: Vec<AttritionTest>,
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
