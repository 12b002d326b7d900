//! Outlier treatment in `build`: winsorize (replace values beyond percentile cutoffs by the
//! cutoffs) or trim (move rows with such values to the rejects ledger). Cutoffs are
//! percentiles by linear interpolation (Hyndman–Fan type 7), pooled or per period; missing
//! values never enter them.

use polars::prelude::*;
use rayon::prelude::*;

use super::group_cutoffs::{group_cutoffs, Bounds, Found, Groups};
use super::histogram::histogram;
use super::repair::LedgerPart;
use super::winsorize::{winsorize, Changed, Cutoffs, RowGroups};
use super::{drop_where, Keys};
use crate::core::{quantiles, quantiles_by_group, PanelCore, Values, BATCH};
use crate::report::CutoffGroups;
use crate::report::{Cutoff, Histogram, TreatLine};
use crate::rules::TreatSpec;
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
    /// The rules-file table that configures it.
    fn setting(self) -> &'static str {
        match self {
            Method::Winsorize => "[clean] winsorize",
            Method::Trim => "[clean] trim",
        }
    }

    fn label(self) -> &'static str {
        match self {
            Method::Winsorize => "winsorize",
            Method::Trim => "trim",
        }
    }
}

/// What a treatment did.
pub struct Treated {
    /// The panel treated.
    pub panel: DataFrame,
    /// The rows trimming removed, in ledger form.
    pub removed: Option<DataFrame>,
    /// One report line per variable.
    pub lines: Vec<TreatLine>,
    /// A corrections-ledger line (entity, period, column, old, new, reason) for every value
    /// winsorizing changed: variable by variable, each in the panel's row order (none unless
    /// asked for).
    pub changed: Vec<LedgerPart>,
}

/// How the typed path groups the rows: each row's group (`rows.of(r)`, one of `count`), and
/// what names the groups in the cutoffs table: periods, or groups of columns (none: pooled).
struct Grouping<'a> {
    rows: RowGroups<'a>,
    count: usize,
    periods: Option<&'a [i64]>,
    columns: Option<&'a Groups>,
}

/// The corrections ledger's reason for a value winsorizing raised / lowered.
const RAISED: &str = "winsorized: below its lower cutoff";
const LOWERED: &str = "winsorized: above its upper cutoff";

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
    /// The treatment a `[clean] winsorize` or `trim` table asks for (its values typed and
    /// checked as the rules file was read); the names stay as written until
    /// [`Treatment::resolve`].
    pub fn from_spec(method: Method, spec: &TreatSpec) -> Treatment {
        let c = &spec.cutoffs;
        Treatment {
            method,
            variables: spec.variables.clone(),
            lower: c.lower,
            upper: c.upper,
            by: c.by,
            groups: c.groups.clone(),
        }
    }

    /// The names of the variables and grouping columns mapped to the panel's columns
    /// (`resolve` maps canonical names), each checked to exist.
    pub fn resolve(
        self,
        resolve: impl Fn(&str) -> String,
        columns: &[String],
    ) -> Result<Treatment> {
        let setting = self.method.setting();
        // Each name mapped and checked; `missing` says what a name that is no column was.
        let all = |names: &[String], missing: &dyn Fn(&str) -> String| {
            names
                .iter()
                .map(|name| {
                    let r = resolve(name);
                    if columns.contains(&r) {
                        Ok(r)
                    } else {
                        Err(Error::Setting {
                            setting,
                            message: missing(name),
                        })
                    }
                })
                .collect::<Result<Vec<_>>>()
        };
        let groups = all(&self.groups, &|c| {
            format!("`by` names `{c}`, which is not a column")
        })?;
        let variables = all(&self.variables, &|v| {
            format!("names `{v}`, which is not a column or derived variable")
        })?;
        // Each variable is treated once, from its values before treatment.
        let repeated = (1..variables.len()).find(|i| variables[..*i].contains(&variables[*i]));
        if let Some(i) = repeated {
            let v = &variables[i];
            return Err(Error::Setting {
                setting,
                message: format!("names `{v}` twice"),
            });
        }
        Ok(Treatment {
            variables,
            groups,
            ..self
        })
    }

    /// Apply to `df`; with `record`, the corrections-ledger lines of the values winsorizing
    /// changed too (a dry run has no ledger to write).
    pub fn apply(
        &self,
        df: DataFrame,
        k: &Keys,
        core: Option<&PanelCore>,
        record: bool,
    ) -> Result<Treated> {
        let x = |v: &str| col(v).cast(DataType::Float64);
        match (self.by, core) {
            (CutoffGroups::Period, Some(core)) if core.rows() == df.height() => {
                let group = RowGroups::Codes(&core.period);
                let periods = Some(&core.periods[..]);
                let grouping = Grouping {
                    rows: group,
                    count: core.periods.len(),
                    periods,
                    columns: None,
                };
                return self.by_codes(df, k, grouping, record);
            }
            // One group of every row, on the typed path.
            (CutoffGroups::Pooled, _) => {
                let grouping = Grouping {
                    rows: RowGroups::One,
                    count: 1,
                    periods: None,
                    columns: None,
                };
                return self.by_codes(df, k, grouping, record);
            }
            (CutoffGroups::Groups, _) => {
                // Per group, on the typed path as by period; a group with fewer values than
                // 1 / (the smaller tail) gets the pooled cutoffs instead (the stated fallback),
                // as do rows whose group is missing.
                let groups = Groups::of(&df, &self.groups, self.lower, self.upper)?;
                let group = RowGroups::Codes(&groups.codes.codes);
                let count = groups.codes.count();
                let grouping = Grouping {
                    rows: group,
                    count,
                    periods: None,
                    columns: Some(&groups),
                };
                return self.by_codes(df, k, grouping, record);
            }
            (CutoffGroups::Period, _) => {}
        }
        // Per period when no panel core codes the rows: the engine's cutoffs per period,
        // joined beside the rows.
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
        let cutoffs = df
            .clone()
            .lazy()
            .group_by([col(k.period)])
            .agg(aggs)
            .sort([k.period], Default::default())
            .collect()?;
        let bounds = Bounds {
            keys: vec![col(k.period)],
            table: cutoffs.clone(),
        };
        // The charts of the values before treatment, so that each old column can go once
        // replaced.
        let histograms = self
            .variables
            .par_iter()
            .map(|v| Ok(histogram(&Values::of(&df, v)?.view())))
            .collect::<Result<Vec<Histogram>>>()?;
        // One variable at a time: its cutoffs set beside each row, its flags, its counts and
        // its new values, so that the panel never holds more than one variable's helpers.
        let mut current = df;
        let mut counts: Vec<(u64, u64)> = Vec::new();
        let mut changed = Vec::new();
        for (i, v) in self.variables.iter().enumerate() {
            let [lo, hi, below, above] =
                ["lo", "hi", "below", "above"].map(|h| format!("__{h}{i}"));
            let marked = bounds.attach(&current, i)?.with_columns([
                x(v).lt(col(lo.as_str()))
                    .fill_null(lit(false))
                    .alias(below.as_str()),
                x(v).gt(col(hi.as_str()))
                    .fill_null(lit(false))
                    .alias(above.as_str()),
            ]);
            let n = marked
                .clone()
                .select([
                    col(below.as_str()).sum().cast(DataType::UInt64),
                    col(above.as_str()).sum().cast(DataType::UInt64),
                ])
                .collect()?;
            let get = |c: usize| {
                n.columns()[c]
                    .u64()
                    .ok()
                    .and_then(|s| s.get(0))
                    .unwrap_or(0)
            };
            counts.push((get(0), get(1)));
            if record && self.method == Method::Winsorize && get(0) + get(1) > 0 {
                let (raised, lowered) = (col(below.as_str()), col(above.as_str()));
                let moved = marked
                    .clone()
                    .filter(raised.clone().or(lowered))
                    .select([
                        col(k.entity),
                        col(k.period),
                        // As the column holds it: a whole number stays one (`1`, not `1.0`).
                        col(v.as_str()).alias(OLD),
                        when(raised.clone())
                            .then(col(lo.as_str()))
                            .otherwise(col(hi.as_str()))
                            .alias(NEW),
                        raised.alias(RAISED_),
                    ])
                    .collect()?;
                changed.push(winsorized_part(moved, k, v)?);
            }
            let result = match self.method {
                Method::Winsorize => when(col(below.as_str()))
                    .then(col(lo.as_str()))
                    .when(col(above.as_str()))
                    .then(col(hi.as_str()))
                    .otherwise(x(v))
                    .alias(v.as_str()),
                Method::Trim => col(below.as_str())
                    .or(col(above.as_str()))
                    .alias(format!("__beyond{i}")),
            };
            current = marked
                .with_column(result)
                .drop(cols([lo, hi, below, above]))
                .collect()?;
        }
        let lines = self.lines(&cutoffs, &counts, k, histograms)?;
        self.treated(current, k, lines, changed)
    }

    /// What either path hands back: the panel `current` finished (trimmed rows to the
    /// ledger), the treatment's lines and the ledger parts of the values it changed.
    fn treated(
        &self,
        current: DataFrame,
        k: &Keys,
        lines: Vec<TreatLine>,
        changed: Vec<LedgerPart>,
    ) -> Result<Treated> {
        let (panel, removed) = self.finish(current, k)?;
        Ok(Treated {
            panel,
            removed,
            lines,
            changed,
        })
    }

    /// Winsorized: the frame as it is. Trimmed: rows beyond a variable's cutoffs (flagged in
    /// `__beyond{i}`) go to the ledger, the first such variable naming the reason.
    fn finish(&self, current: DataFrame, k: &Keys) -> Result<(DataFrame, Option<DataFrame>)> {
        Ok(match self.method {
            Method::Winsorize => (current, None),
            Method::Trim => {
                // The first variable beyond its cutoffs names the reason.
                let mut reason = lit(NULL).cast(DataType::String);
                for (i, v) in self.variables.iter().enumerate().rev() {
                    reason = when(col(format!("__beyond{i}").as_str()))
                        .then(lit(format!("`{v}` beyond its trimming cutoffs")))
                        .otherwise(reason);
                }
                let beyond: Vec<String> = (0..self.variables.len())
                    .map(|i| format!("__beyond{i}"))
                    .collect();
                let (kept, removed) = drop_where(current, reason, "trim", k)?;
                let kept = kept.lazy().drop(cols(beyond)).collect()?;
                (kept, Some(removed))
            }
        })
    }

    /// One report line per variable from the cutoffs table and the counts.
    fn lines(
        &self,
        cutoffs: &DataFrame,
        counts: &[(u64, u64)],
        k: &Keys,
        histograms: Vec<Histogram>,
    ) -> Result<Vec<TreatLine>> {
        let mut lines = Vec::new();
        for ((i, v), histogram) in self.variables.iter().enumerate().zip(histograms) {
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
                group_cutoffs(cutoffs, &self.groups, i)?
            } else {
                Vec::new()
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
                below: counts[i].0,
                above: counts[i].1,
                histogram,
            });
        }
        Ok(lines)
    }

    /// Cutoffs per group of rows (`group.of(r)` of `n` groups: one for pooled cutoffs, the
    /// periods by the panel core's codes) by selection (type 7, as the engine's linear
    /// quantile), then each variable's new values (or trimming flags) in one typed pass: no
    /// group-by, no join, a few variables' values in memory at a time. `periods` names the
    /// groups in the cutoffs table when they are periods.
    fn by_codes(
        &self,
        df: DataFrame,
        k: &Keys,
        grouping: Grouping,
        record: bool,
    ) -> Result<Treated> {
        let Grouping {
            rows: group,
            count: nt,
            periods,
            columns: groups,
        } = grouping;
        let rows = df.height();
        let mut found = Vec::new();
        let mut counts = Vec::new();
        let mut changed = Vec::new();
        // Each variable's type before winsorizing makes it floats: the old values of a
        // column of whole numbers are written as whole numbers.
        let types: Vec<DataType> = self
            .variables
            .iter()
            .map(|v| Ok(df.column(v)?.dtype().clone()))
            .collect::<Result<_>>()?;
        let mut current = df;
        type Measured = (Option<Column>, (u64, u64), Found, Histogram);
        // A variable's cutoffs, its chart and, when trimming, its flags and counts (reading
        // the panel; winsorizing changes the column afterwards, below).
        let one = |i: usize, v: &String, current: &DataFrame| -> Result<Measured> {
            let values = Values::of(current, v)?;
            let x = values.view();
            let chart = histogram(&x);
            // Both cutoffs of every group from one bracketing pass over the column, or each
            // group gathered where that pass cannot bracket (`core::quantiles_by_group`).
            let (mut lo, mut hi): (Vec<Option<f64>>, Vec<Option<f64>>) =
                quantiles_by_group(&x, |r| group.of(r), nt, &[self.lower, self.upper])
                    .into_iter()
                    .map(|q| (q[0], q[1]))
                    .unzip();
            // Groups of columns: the pooled cutoffs where a group is too small.
            let fallback = groups.map(|groups| {
                let q = quantiles(&x, x.count(), |v| v, &[self.lower, self.upper]);
                groups.fall_back(&x, &mut lo, &mut hi, (q[0], q[1]))
            });
            let (mut below, mut above) = (0u64, 0u64);
            let flags = match self.method {
                Method::Winsorize => None,
                Method::Trim => {
                    let cut = Cutoffs {
                        group,
                        lo: &lo,
                        hi: &hi,
                    };
                    let flags: BooleanChunked = (0..rows)
                        .map(|r| {
                            Some(x.get(r).is_some_and(|value| {
                                let (b, a) = cut.beyond(r, value);
                                below += u64::from(b);
                                above += u64::from(a);
                                b || a
                            }))
                        })
                        .collect();
                    Some(flags.into_column().with_name(format!("__beyond{i}").into()))
                }
            };
            Ok((flags, (below, above), (lo, hi, fallback), chart))
        };
        // A few variables at a time in parallel. Winsorizing takes each column out of the
        // panel once its cutoffs are known and sets its values within its own buffer
        // (`winsorize`), then puts it back in its place; trimming adds its flags.
        let order = current.get_column_names_owned();
        let indexed: Vec<(usize, &String)> = self.variables.iter().enumerate().collect();
        let mut histograms = Vec::new();
        for batch in indexed.chunks(BATCH) {
            let done = batch
                .par_iter()
                .map(|(i, v)| one(*i, v, &current))
                .collect::<Result<Vec<Measured>>>()?;
            let taken = match self.method {
                Method::Winsorize => batch
                    .iter()
                    .map(|(_, v)| Ok(Some(current.drop_in_place(v)?)))
                    .collect::<Result<Vec<_>>>()?,
                Method::Trim => vec![None; batch.len()],
            };
            let done = done
                .into_par_iter()
                .zip(taken)
                .map(|((flags, count, cut, chart), column)| {
                    let (column, count, moved) = match column {
                        Some(column) => {
                            let (lo, hi, _) = &cut;
                            let cut = Cutoffs { group, lo, hi };
                            let (column, moved) = winsorize(column, &cut)?;
                            (Some(column), moved.counts(), Some(moved))
                        }
                        None => (flags, count, None),
                    };
                    Ok((column, count, cut, chart, moved))
                })
                .collect::<Result<Vec<_>>>()?;
            for (column, count, cut, chart, moved) in done {
                if let Some(column) = column {
                    current.with_column(column)?;
                }
                counts.push(count);
                found.push(cut);
                histograms.push(chart);
                changed.push(moved);
            }
        }
        if self.method == Method::Winsorize {
            current = current.select(order)?;
        }
        let cutoffs = match groups {
            Some(groups) => groups.cutoff_table(&found)?,
            None => {
                let mut table: Vec<Column> = periods
                    .map(|p| Column::new(k.period.into(), p.to_vec()))
                    .into_iter()
                    .collect();
                for (i, (lo, hi, _)) in found.into_iter().enumerate() {
                    table.push(Column::new(format!("__lo{i}").into(), lo));
                    table.push(Column::new(format!("__hi{i}").into(), hi));
                }
                DataFrame::new(nt, table)?
            }
        };
        let changed = self
            .variables
            .iter()
            .zip(&types)
            .zip(changed)
            .filter(|_| record)
            .filter_map(|(v, moved)| Some((v, moved?)))
            .filter(|(_, moved)| !moved.rows.is_empty())
            .map(|((v, was), moved)| ledger_part(&current, k, (v, was), moved))
            .collect::<Result<_>>()?;
        let lines = self.lines(&cutoffs, &counts, k, histograms)?;
        self.treated(current, k, lines, changed)
    }
}

/// A winsorized value's old and new value and tail (raised to the lower cutoff or not), as a
/// corrections-ledger part holds them beside the keys.
const OLD: &str = "__old";
const NEW: &str = "__new";
const RAISED_: &str = "__raised";

/// The corrections-ledger part of the values winsorizing `moved` in `v` (of type `was`
/// before), whose new values `panel` holds: the rows' keys gathered, their old and new values
/// and tails as they are.
fn ledger_part(
    panel: &DataFrame,
    k: &Keys,
    (v, was): (&str, &DataType),
    moved: Changed,
) -> Result<LedgerPart> {
    let rows = IdxCa::from_vec(PlSmallStr::EMPTY, moved.rows);
    let mut lines = panel.select([k.entity, k.period])?.take(&rows)?;
    let new = panel.column(v)?.take(&rows)?.with_name(NEW.into());
    lines.with_column(new)?;
    // Whole numbers read as floats for the pass: exact, and written back as they came.
    let old = Column::new(OLD.into(), moved.old);
    let old = if was.is_integer() {
        old.cast(was)?
    } else {
        old
    };
    lines.with_column(old)?;
    lines.with_column(Column::new(RAISED_.into(), moved.raised))?;
    winsorized_part(lines, k, v)
}

/// `lines` (the keys, [`OLD`], [`NEW`], [`RAISED_`]) of variable `v` as a corrections-ledger
/// part: the text made a slice at a time as the ledger is written.
fn winsorized_part(lines: DataFrame, k: &Keys, v: &str) -> Result<LedgerPart> {
    let shape = vec![
        col(k.entity),
        col(k.period),
        lit(v).alias("column"),
        col(OLD).cast(DataType::String).alias("old"),
        col(NEW).cast(DataType::String).alias("new"),
        when(col(RAISED_))
            .then(lit(RAISED))
            .otherwise(lit(LOWERED))
            .alias("reason"),
    ];
    Ok(LedgerPart {
        rows: crate::core::spelled_out(&lines)?,
        shape,
    })
}

#[cfg(test)]
mod tests;
