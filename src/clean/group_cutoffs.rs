//! Cutoffs per group of columns (industry x year, say) for `build`'s winsorizing and trimming:
//! the cutoffs found beforehand, the engine's table of them joined beside the rows, and the
//! report's line per group.

use polars::prelude::*;

use crate::core::{fewest_for_cutoffs, GroupCodes, View};
use crate::report::GroupCutoff;
use crate::Result;

/// The groups of columns (industry x year, say) that cutoffs are found for: their values, one
/// row a group in the columns' order, and each row's group, its place in that table (rows
/// with a missing grouping value in a last group, `loose`, on the pooled cutoffs).
pub(super) struct Groups {
    pub(super) codes: GroupCodes,
    /// The fewest values a group needs for cutoffs of its own: 1 / (the smaller tail).
    smallest: usize,
}

/// A variable's lower and upper cutoffs of each group, and where groups of columns set the
/// pooled ones in.
pub(super) type Found = (Vec<Option<f64>>, Vec<Option<f64>>, Option<Fallback>);

/// A variable's cutoffs of each group with the pooled ones standing in where a group is too
/// small: its values counted per group, and which groups fell back.
pub(super) struct Fallback {
    pub(super) values: Vec<u64>,
    pub(super) small: Vec<bool>,
}

impl Groups {
    /// The groups of `columns` in `df` ([`GroupCodes`]), for cutoffs at `lower` and `upper`.
    pub(super) fn of(df: &DataFrame, columns: &[String], lower: f64, upper: f64) -> Result<Groups> {
        Ok(Groups {
            codes: GroupCodes::of(df, columns)?,
            smallest: fewest_for_cutoffs(lower, upper),
        })
    }

    /// The cutoffs `lo` and `hi` of each group (the loose one last) with `pooled` set in for
    /// the loose group and every group with fewer than `smallest` values of `x`.
    pub(super) fn fall_back(
        &self,
        x: &View,
        lo: &mut [Option<f64>],
        hi: &mut [Option<f64>],
        pooled: (Option<f64>, Option<f64>),
    ) -> Fallback {
        let mut values = vec![0u64; self.codes.count()];
        for (r, _) in x.iter() {
            values[self.codes.codes[r] as usize] += 1;
        }
        let loose = self.codes.loose();
        let small: Vec<bool> = values
            .iter()
            .enumerate()
            .map(|(g, n)| g == loose || (*n as usize) < self.smallest)
            .collect();
        for (g, _) in small.iter().enumerate().filter(|(_, s)| **s) {
            (lo[g], hi[g]) = pooled;
        }
        Fallback { values, small }
    }

    /// The report's table of cutoffs: the groups' values, then each variable's lower and upper
    /// cutoffs, values counted and fallback (`__lo{i}`, `__hi{i}`, `__n{i}`, `__small{i}`).
    pub(super) fn cutoff_table(&self, found: &[Found]) -> Result<DataFrame> {
        let n = self.codes.loose();
        let mut table = self.codes.table.clone();
        for (i, (lo, hi, fallback)) in found.iter().enumerate() {
            table.with_column(Column::new(format!("__lo{i}").into(), &lo[..n]))?;
            table.with_column(Column::new(format!("__hi{i}").into(), &hi[..n]))?;
            if let Some(fallback) = fallback {
                let values = &fallback.values[..n];
                table.with_column(Column::new(format!("__n{i}").into(), values))?;
                let small = &fallback.small[..n];
                table.with_column(Column::new(format!("__small{i}").into(), small))?;
            }
        }
        Ok(table)
    }
}

/// Cutoffs per period, when the panel core does not code the rows, on the engine's path: a
/// table of pairs per key, joined onto the rows.
pub(super) struct Bounds {
    pub(super) keys: Vec<Expr>,
    pub(super) table: DataFrame,
}

impl Bounds {
    /// `df` with variable `i`'s cutoffs beside each row as `__lo{i}` and `__hi{i}`.
    pub(super) fn attach(&self, df: &DataFrame, i: usize) -> Result<LazyFrame> {
        let (lo, hi) = (format!("__lo{i}"), format!("__hi{i}"));
        let mut right = self.keys.clone();
        right.extend([col(lo.as_str()), col(hi.as_str())]);
        beside(
            df,
            self.keys.clone(),
            self.table.clone().lazy().select(right),
        )
    }
}

/// `df` with the columns of `right` (one row per key of `on`) set beside each row: the join
/// reads only the key columns, so the panel's other columns are shared, never copied.
fn beside(df: &DataFrame, on: Vec<Expr>, right: LazyFrame) -> Result<LazyFrame> {
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
