//! Cutoffs per group of columns (industry x year, say) for `build`'s winsorizing and trimming:
//! the cutoffs found beforehand, the engine's table of them joined beside the rows, and the
//! report's line per group.

use polars::prelude::*;

use crate::report::GroupCutoff;
use crate::Result;

/// Cutoffs found beforehand, per group: the report's table of them, and each variable's lower
/// and upper cutoff of each group (a group `n` past the table's rows: rows without a group).
pub(super) struct Given {
    pub(super) table: DataFrame,
    pub(super) cutoffs: Vec<(Bound, Bound)>,
}

/// One cutoff of each group (None: no cutoff on that side).
pub(super) type Bound = Vec<Option<f64>>;

/// Cutoffs per group (or per period, when the panel core does not code the rows) on the
/// engine's path: a table of pairs per key, joined onto the rows, with the pooled pair where a
/// group has none.
pub(super) struct Bounds {
    pub(super) keys: Vec<Expr>,
    pub(super) table: DataFrame,
    pub(super) fill: Option<Vec<(f64, f64)>>,
}

impl Bounds {
    /// `df` with variable `i`'s cutoffs beside each row as `__lo{i}` and `__hi{i}`.
    pub(super) fn attach(&self, df: &DataFrame, i: usize) -> Result<LazyFrame> {
        let (lo, hi) = (format!("__lo{i}"), format!("__hi{i}"));
        let mut right = self.keys.clone();
        right.extend([col(lo.as_str()), col(hi.as_str())]);
        let lf = beside(
            df,
            self.keys.clone(),
            self.table.clone().lazy().select(right),
        )?;
        Ok(match &self.fill {
            Some(pooled) => lf.with_columns([
                col(lo.as_str()).fill_null(lit(pooled[i].0)),
                col(hi.as_str()).fill_null(lit(pooled[i].1)),
            ]),
            None => lf,
        })
    }
}

/// `df` with the columns of `right` (one row per key of `on`) set beside each row: the join
/// reads only the key columns, so the panel's other columns are shared, never copied.
pub(super) fn beside(df: &DataFrame, on: Vec<Expr>, right: LazyFrame) -> Result<LazyFrame> {
    let names: Vec<String> = on
        .iter()
        .map(|e| e.clone().meta().output_name().map(|n| n.to_string()))
        .collect::<PolarsResult<_>>()?;
    let added = df
        .clone()
        .lazy()
        .select(on.clone())
        .join(
            right,
            on.clone(),
            on,
            JoinArgs {
                maintain_order: MaintainOrderJoin::Left,
                ..JoinArgs::new(JoinType::Left)
            },
        )
        .drop(cols(names))
        .collect()?;
    let mut out = df.clone();
    out.hstack_mut(added.columns())?;
    Ok(out.lazy())
}

/// One line per group: its values (as text), values counted, cutoffs, and whether the pooled
/// cutoffs stood in for a group too small.
pub(super) fn group_cutoffs(
    c: &DataFrame,
    groups: &[String],
    i: usize,
) -> Result<Vec<GroupCutoff>> {
    let texts: Vec<Column> = groups
        .iter()
        .map(|g| c.column(g).and_then(|s| s.cast(&DataType::String)))
        .collect::<PolarsResult<_>>()?;
    let lo = c.column(&format!("__lo{i}"))?.f64()?;
    let hi = c.column(&format!("__hi{i}"))?.f64()?;
    let n = c.column(&format!("__n{i}"))?.cast(&DataType::UInt64)?;
    let n = n.u64()?;
    let small = c.column(&format!("__small{i}"))?.bool()?;
    Ok((0..c.height())
        .map(|j| GroupCutoff {
            group: texts
                .iter()
                .map(|t| {
                    t.str()
                        .ok()
                        .and_then(|s| s.get(j))
                        .unwrap_or("")
                        .to_string()
                })
                .collect(),
            values: n.get(j).unwrap_or(0),
            lower: lo.get(j),
            upper: hi.get(j),
            pooled_fallback: small.get(j).unwrap_or(false),
        })
        .collect())
}
