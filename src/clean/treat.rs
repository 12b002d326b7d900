//! Outlier treatment in `build`: winsorize (replace values beyond percentile cutoffs by the
//! cutoffs) or trim (move rows with such values to the rejects ledger). Cutoffs are
//! percentiles by linear interpolation (Hyndman–Fan type 7), pooled or per period; missing
//! values never enter them.

use polars::prelude::*;

use super::{drop_where, Keys};
use crate::audit::CutoffGroups;
use crate::core::{type7, Values};
use crate::report::{Cutoff, GroupCutoff, Histogram, TreatLine};
use crate::rules::{TreatBy, TreatSpec};
use crate::{Error, Result};

/// Winsorize or trim.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Replace values beyond the cutoffs by the cutoffs.
    Winsorize,
    /// Drop rows with values beyond the cutoffs.
    Trim,
}

impl Method {
    fn label(self) -> &'static str {
        match self {
            Method::Winsorize => "winsorize",
            Method::Trim => "trim",
        }
    }
}

/// One treatment, validated.
#[derive(Debug, Clone)]
pub struct Treatment {
    /// Winsorize or trim.
    pub method: Method,
    /// The columns treated.
    pub variables: Vec<String>,
    /// Lower percentile, as a fraction.
    pub lower: f64,
    /// Upper percentile, as a fraction.
    pub upper: f64,
    /// Pooled, per period, or per group of `groups`.
    pub by: CutoffGroups,
    /// The grouping columns when `by` is `Groups`.
    pub groups: Vec<String>,
}

impl Treatment {
    /// Validate a `[clean] winsorize` or `trim` table; `resolve` maps canonical names.
    pub fn from_spec(
        method: Method,
        spec: &TreatSpec,
        resolve: impl Fn(&str) -> String,
        columns: &[String],
    ) -> Result<Treatment> {
        let setting = match method {
            Method::Winsorize => "[clean] winsorize",
            Method::Trim => "[clean] trim",
        };
        let bad = |message: &str| Error::Setting {
            setting,
            message: message.to_string(),
        };
        let lower = spec.lower.unwrap_or(0.01);
        let upper = spec.upper.unwrap_or(0.99);
        if !(0.0 <= lower && lower < upper && upper <= 1.0) {
            return Err(bad(
                "needs 0 <= lower < upper <= 1 (fractions, e.g. 0.01 and 0.99)",
            ));
        }
        let (by, groups) = match &spec.by {
            None => (CutoffGroups::Pooled, Vec::new()),
            Some(TreatBy::Word(w)) if w == "pooled" => (CutoffGroups::Pooled, Vec::new()),
            Some(TreatBy::Word(w)) if w == "period" => (CutoffGroups::Period, Vec::new()),
            Some(TreatBy::Word(_)) => {
                return Err(bad(
                    "`by` must be \"pooled\", \"period\" or a list of grouping columns",
                ))
            }
            Some(TreatBy::Columns(list)) => {
                if list.is_empty() {
                    return Err(bad("`by` lists no grouping column"));
                }
                let resolved = list
                    .iter()
                    .map(|c| {
                        let r = resolve(c);
                        if columns.contains(&r) {
                            Ok(r)
                        } else {
                            Err(bad(&format!("`by` names `{c}`, which is not a column")))
                        }
                    })
                    .collect::<Result<Vec<_>>>()?;
                (CutoffGroups::Groups, resolved)
            }
        };
        let variables = spec
            .variables
            .iter()
            .map(|v| {
                let r = resolve(v);
                if columns.contains(&r) {
                    Ok(r)
                } else {
                    Err(bad(&format!(
                        "names `{v}`, which is not a column or derived variable"
                    )))
                }
            })
            .collect::<Result<_>>()?;
        Ok(Treatment {
            method,
            variables,
            lower,
            upper,
            by,
            groups,
        })
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

    /// Apply to `df`; returns the treated frame, the ledger part (trim) and one line per variable.
    pub fn apply(
        &self,
        df: DataFrame,
        k: &Keys,
    ) -> Result<(DataFrame, Option<DataFrame>, Vec<TreatLine>)> {
        let x = |v: &str| col(v).cast(DataType::Float64);
        let df_before = df.clone();
        let mut aggs = Vec::new();
        for (i, v) in self.variables.iter().enumerate() {
            aggs.push(
                x(v).quantile(lit(self.lower), QuantileMethod::Linear)
                    .alias(format!("__lo{i}")),
            );
            aggs.push(
                x(v).quantile(lit(self.upper), QuantileMethod::Linear)
                    .alias(format!("__hi{i}")),
            );
        }
        let (cutoffs, joined) = match self.by {
            CutoffGroups::Pooled => {
                let c = df.clone().lazy().select(aggs).collect()?;
                let mut lits = Vec::new();
                for name in c.get_column_names() {
                    let value = c.column(name)?.f64()?.get(0);
                    lits.push(lit(value.unwrap_or(f64::NAN)).alias(name.as_str()));
                }
                let j = df.clone().lazy().with_columns(lits);
                (c, j)
            }
            CutoffGroups::Groups => {
                // Per group; a group with fewer values than 1 / (the smaller tail) gets the
                // pooled cutoffs instead (the stated fallback), as do rows whose group is missing.
                let smallest = (1.0 / self.lower.min(1.0 - self.upper)).ceil() as u32;
                let pooled = df.clone().lazy().select(aggs.clone()).collect()?;
                let mut group_aggs = aggs.clone();
                for (i, v) in self.variables.iter().enumerate() {
                    group_aggs.push(x(v).count().alias(format!("__n{i}")));
                }
                let keys: Vec<Expr> = self.groups.iter().map(|g| col(g.as_str())).collect();
                let mut fallback = Vec::new();
                for (i, _) in self.variables.iter().enumerate() {
                    let small = col(format!("__n{i}").as_str()).lt(lit(smallest));
                    for side in ["lo", "hi"] {
                        let name = format!("__{side}{i}");
                        let whole = pooled.column(&name)?.f64()?.get(0).unwrap_or(f64::NAN);
                        fallback.push(
                            when(small.clone())
                                .then(lit(whole))
                                .otherwise(col(name.as_str()))
                                .alias(name.as_str()),
                        );
                    }
                    fallback.push(small.alias(format!("__small{i}")));
                }
                let c = df
                    .clone()
                    .lazy()
                    .filter(
                        self.groups
                            .iter()
                            .fold(lit(true), |acc, g| acc.and(col(g.as_str()).is_not_null())),
                    )
                    .group_by(keys.clone())
                    .agg(group_aggs)
                    .with_columns(fallback)
                    .sort(
                        self.groups.iter().map(String::as_str).collect::<Vec<_>>(),
                        Default::default(),
                    )
                    .collect()?;
                let mut fill = Vec::new();
                for (i, _) in self.variables.iter().enumerate() {
                    for side in ["lo", "hi"] {
                        let name = format!("__{side}{i}");
                        let whole = pooled.column(&name)?.f64()?.get(0).unwrap_or(f64::NAN);
                        fill.push(
                            col(name.as_str())
                                .fill_null(lit(whole))
                                .alias(name.as_str()),
                        );
                    }
                }
                let mut right: Vec<Expr> = keys.clone();
                for (i, _) in self.variables.iter().enumerate() {
                    right.push(col(format!("__lo{i}").as_str()));
                    right.push(col(format!("__hi{i}").as_str()));
                }
                let j = Self::beside(&df, keys, c.clone().lazy().select(right))?.with_columns(fill);
                (c, j)
            }
            CutoffGroups::Period => {
                let c = df
                    .clone()
                    .lazy()
                    .group_by([col(k.period)])
                    .agg(aggs)
                    .sort([k.period], Default::default())
                    .collect()?;
                let j = Self::beside(&df, vec![col(k.period)], c.clone().lazy())?;
                (c, j)
            }
        };
        let mut flags = Vec::new();
        for (i, v) in self.variables.iter().enumerate() {
            let (lo, hi) = (
                col(format!("__lo{i}").as_str()),
                col(format!("__hi{i}").as_str()),
            );
            flags.push(
                x(v).lt(lo)
                    .fill_null(lit(false))
                    .alias(format!("__below{i}")),
            );
            flags.push(
                x(v).gt(hi)
                    .fill_null(lit(false))
                    .alias(format!("__above{i}")),
            );
        }
        // Lazily: the counts read only the treated columns and their cutoffs, and the
        // treated panel never holds the helper columns all at once.
        let marked = joined.with_columns(flags);
        let mut counts = Vec::new();
        for i in 0..self.variables.len() {
            counts.push(
                col(format!("__below{i}").as_str())
                    .sum()
                    .cast(DataType::UInt64),
            );
            counts.push(
                col(format!("__above{i}").as_str())
                    .sum()
                    .cast(DataType::UInt64),
            );
        }
        let counts = marked.clone().select(counts).collect()?;
        let helpers: Vec<String> = (0..self.variables.len())
            .flat_map(|i| ["lo", "hi", "below", "above"].map(|h| format!("__{h}{i}")))
            .collect();
        let (out, removed) = match self.method {
            Method::Winsorize => {
                let replace: Vec<Expr> = self
                    .variables
                    .iter()
                    .enumerate()
                    .map(|(i, v)| {
                        when(col(format!("__below{i}").as_str()))
                            .then(col(format!("__lo{i}").as_str()))
                            .when(col(format!("__above{i}").as_str()))
                            .then(col(format!("__hi{i}").as_str()))
                            .otherwise(x(v))
                            .alias(v.as_str())
                    })
                    .collect();
                let out = marked.with_columns(replace).drop(cols(helpers)).collect()?;
                (out, None)
            }
            Method::Trim => {
                let mut reason = lit(NULL).cast(DataType::String);
                for (i, v) in self.variables.iter().enumerate().rev() {
                    let beyond =
                        col(format!("__below{i}").as_str()).or(col(format!("__above{i}").as_str()));
                    reason = when(beyond)
                        .then(lit(format!("`{v}` beyond its trimming cutoffs")))
                        .otherwise(reason);
                }
                let (kept, removed) = drop_where(marked.collect()?, reason, "trim", k)?;
                let kept = kept.lazy().drop(cols(helpers)).collect()?;
                (kept, Some(removed))
            }
        };
        let mut lines = Vec::new();
        for (i, v) in self.variables.iter().enumerate() {
            let lo = cutoffs.column(&format!("__lo{i}"))?.f64()?;
            let hi = cutoffs.column(&format!("__hi{i}"))?.f64()?;
            let periods = match self.by {
                CutoffGroups::Pooled | CutoffGroups::Groups => None,
                CutoffGroups::Period => Some(cutoffs.column(k.period)?.i64()?),
            };
            let rows = if self.by == CutoffGroups::Groups {
                0
            } else {
                cutoffs.height()
            };
            let cut = (0..rows)
                .map(|j| Cutoff {
                    period: periods.and_then(|p| p.get(j)),
                    lower: lo.get(j),
                    upper: hi.get(j),
                })
                .collect();
            let group_cutoffs = if self.by == CutoffGroups::Groups {
                group_cutoffs(&cutoffs, &self.groups, i)?
            } else {
                Vec::new()
            };
            let n = |c: usize| {
                counts.columns()[c]
                    .u64()
                    .ok()
                    .and_then(|s| s.get(0))
                    .unwrap_or(0)
            };
            lines.push(TreatLine {
                variable: v.clone(),
                method: self.method.label().to_string(),
                by: self.by,
                groups: self.groups.clone(),
                group_cutoffs,
                lower_percentile: self.lower * 100.0,
                upper_percentile: self.upper * 100.0,
                cutoffs: cut,
                below: n(2 * i),
                above: n(2 * i + 1),
                histogram: histogram(&df_before, v)?,
            });
        }
        Ok((out, removed, lines))
    }
}

/// One line per group: its values (as text), values counted, cutoffs, and whether the pooled
/// cutoffs stood in for a group too small.
fn group_cutoffs(c: &DataFrame, groups: &[String], i: usize) -> Result<Vec<GroupCutoff>> {
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

/// Bins of the chart of a treated variable.
const BINS: usize = 30;

/// Equal-width bins between the 0.5th and 99.5th percentiles; values beyond fall in the end
/// bins. Missing values are left out.
fn histogram(df: &DataFrame, v: &str) -> Result<Histogram> {
    // One typed pass: the 0.5% and 99.5% points by selection (type 7), then the counts.
    let mut x = Values::of(df, v)?.present();
    let (Some(lo), Some(hi)) = (type7(&mut x, 0.005), type7(&mut x, 0.995)) else {
        return Ok(Histogram::default());
    };
    let width = if hi > lo {
        (hi - lo) / BINS as f64
    } else {
        1.0
    };
    let mut counts = vec![0u64; BINS];
    for b in x
        .iter()
        .map(|x| ((x - lo) / width).floor().clamp(0.0, (BINS - 1) as f64))
        .filter(|b| !b.is_nan())
    {
        counts[b as usize] += 1;
    }
    Ok(Histogram {
        start: lo,
        width,
        counts,
    })
}
