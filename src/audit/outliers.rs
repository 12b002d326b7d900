//! Outliers and unit slips: percentile cutoffs (Hyndman–Fan type 7, pooled, by period or by
//! groups) with the counts beyond them, robust z-scores from the median and the MAD, and in
//! the level variables within-entity jumps in log levels and unit slips (`unit_slips.rs`).
//! Missing values never enter a cutoff.

use super::robust_z::mad_pass;
pub use super::robust_z::MAD_SCALE;
use super::verdict::{
    counted, level_key, line as verdict_line, worst, CheckVerdict, LevelKey, Levels, Status,
};
use super::{unit_slips, Check, Context, Pooled, Settings};
use crate::core::{
    fewest_for_cutoffs, in_batches, quantiles, quantiles_by_group, GroupCodes, PanelCore, Values,
    View,
};
use crate::report::layout::{opt_level, strings, Block, Section};
pub use crate::report::CutoffGroups;
use crate::report::{Finding, OutlierLine, Report, ToJson, UnitSlip};
use crate::Result;

/// Suspected unit slips.
pub const UNIT_SLIPS: LevelKey = level_key!("unit_slips", Warn);

/// Outliers and unit slips.
pub struct Outliers;

/// The figures of the outlier and unit-slip check.
#[derive(Debug, Clone, Default)]
pub struct Figures {
    /// Per numeric variable: values beyond the cutoffs and robust z-scores.
    pub lines: Vec<OutlierLine>,
    /// Suspected unit slips in level variables (at most 10,000 listed).
    pub slips: Vec<UnitSlip>,
    /// How many unit slips were found in all.
    pub total: u64,
    /// How many level variables were searched for unit slips.
    pub searched: u64,
    /// Rows whose entity was observed in the period before: the changes searched.
    pub pairs: u64,
}

impl Check for Outliers {
    fn name(&self) -> &'static str {
        "outliers and unit slips"
    }

    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>> {
        let mut f = Figures::default();
        let s = &ctx.settings;
        let vars = &ctx.numeric;
        // Typed kernels over the panel core, variables in parallel: each order statistic by
        // selection (no full sort), each count in one pass.
        // A few variables at a time, so that memory holds a few columns' values, not all.
        ctx.items(vars.len() + ctx.levels.len());
        in_batches(
            vars,
            |v| {
                let x = Values::of(ctx.df, v)?;
                let pooled = ctx.pooled(v, &x.view());
                Ok(line(
                    &ctx.core,
                    ctx.outlier_groups.as_ref(),
                    v,
                    &x,
                    pooled,
                    s,
                ))
            },
            |batch, lines| {
                f.lines.extend(lines);
                ctx.done(batch.len());
                Ok(())
            },
        )?;
        let found = unit_slips::search(ctx)?;
        for (v, jumps) in found.jumps {
            if let Some(line) = f.lines.iter_mut().find(|l| l.variable == v) {
                line.log_jumps = Some(jumps);
            }
        }
        f.total = found.total;
        f.searched = found.searched;
        f.pairs = found.pairs;
        f.slips = found.slips;
        Ok(Box::new(f))
    }

    fn levels(&self) -> Vec<LevelKey> {
        vec![UNIT_SLIPS]
    }

    fn verdict(&self, report: &Report, lv: &Levels) -> Option<CheckVerdict> {
        use Status::*;
        let r = report.findings.get::<Figures>()?;
        let mut outliers = Vec::new();
        if r.total > 0 {
            outliers.push((
                lv.of(&UNIT_SLIPS),
                counted(r.total, "suspected unit slip", "suspected unit slips"),
            ));
        }
        if r.lines.iter().any(|o| o.small_groups) {
            outliers.push((Warn, "some periods are too small for their cutoffs".into()));
        }
        Some(if !outliers.is_empty() {
            worst("Outliers and unit slips", outliers)
        } else if r.searched == 0 {
            verdict_line(
                "Outliers and unit slips",
                NotChecked,
                "no level variable to search for unit slips".into(),
            )
        } else if r.pairs == 0 {
            verdict_line(
                "Outliers and unit slips",
                NotChecked,
                "no entity is observed in two consecutive periods, so no change was searched \
                 for unit slips"
                    .into(),
            )
        } else {
            verdict_line(
                "Outliers and unit slips",
                Pass,
                format!(
                    "no unit slips in {}",
                    counted(r.searched, "level variable", "level variables")
                ),
            )
        })
    }
}

impl Finding for Figures {
    fn entries(&self) -> Vec<(&'static str, &dyn ToJson)> {
        vec![
            ("outliers", &self.lines),
            ("unit_slips", &self.slips),
            ("unit_slips_total", &self.total),
            ("unit_slips_searched", &self.searched),
            ("unit_slips_pairs", &self.pairs),
        ]
    }

    fn sections(&self, report: &Report) -> Vec<Section> {
        vec![section(self, report)]
    }
}

fn section(f: &Figures, r: &Report) -> Section {
    let rows: Vec<Vec<String>> = f
        .lines
        .iter()
        .map(|o| {
            vec![
                o.variable.clone(),
                opt_level(o.lower),
                opt_level(o.upper),
                o.below.to_string(),
                o.above.to_string(),
                o.robust_z_beyond.map_or("–".into(), |n| n.to_string()),
                o.log_jumps.map_or("–".into(), |j| j.to_string()),
            ]
        })
        .collect();
    let mut blocks = Vec::new();
    if !rows.is_empty() {
        let by = f.lines.first().map(|o| o.by);
        blocks.push(Block::Table(
            strings(&[
                "variable",
                "lower cut",
                "upper cut",
                "below",
                "above",
                "robust z beyond",
                "log jumps",
            ]),
            rows,
        ));
        blocks.push(Block::Note(format!(
            "Cutoffs are percentiles (linear interpolation, Hyndman-Fan type 7){}; robust z = \
             (value - median) / (1.4826 MAD); log jumps count changes in the log level between \
             consecutive periods of an entity beyond the threshold (level variables only).",
            match by {
                Some(CutoffGroups::Period) => ", computed per period (not listed)".to_string(),
                Some(CutoffGroups::Groups) => format!(
                    ", computed per group of {} (not listed); a group with fewer values than \
                     1 / (the smaller tail), or a row without a group, takes the pooled cutoffs",
                    f.lines
                        .first()
                        .map(|o| o.groups.join(" × "))
                        .unwrap_or_default()
                ),
                _ => " over all rows".to_string(),
            }
        )));
        let undefined: Vec<String> = f
            .lines
            .iter()
            .filter(|o| o.robust_z_beyond.is_none())
            .map(|o| format!("`{}`", o.variable))
            .collect();
        if !undefined.is_empty() {
            blocks.push(Block::Note(format!(
                "Robust z not computable (–): {} (a MAD of zero, half the values or more equal \
                 to the median, as in an indicator or a mostly-zero amount; or no value).",
                undefined.join(", ")
            )));
        }
        if by == Some(CutoffGroups::Groups) {
            let fell: Vec<String> = f
                .lines
                .iter()
                .filter_map(|o| {
                    o.pooled_fallback_groups
                        .filter(|n| *n > 0)
                        .map(|n| format!("{} {n}", o.variable))
                })
                .collect();
            if !fell.is_empty() {
                blocks.push(Block::Note(format!(
                    "Groups on the pooled cutoffs (too few values): {}.",
                    fell.join(", ")
                )));
            }
        } else if f.lines.iter().any(|o| o.small_groups) {
            blocks.push(Block::Note(
                "Warning: some periods have fewer values than 1 / p, too few for those cutoffs."
                    .into(),
            ));
        }
    }
    if f.slips.is_empty() {
        blocks.push(Block::Note(
            match (f.searched, f.pairs) {
                (0, _) => "No level variable to search for unit slips.",
                (_, 0) => {
                    "Unit slips not searched: no entity is observed in two consecutive periods."
                }
                _ => "No unit slips found in the level variables.",
            }
            .into(),
        ));
    } else {
        let rows = f
            .slips
            .iter()
            .take(20)
            .map(|u| {
                vec![
                    u.entity.clone(),
                    u.period.to_string(),
                    u.variable.clone(),
                    factor(u.factor),
                    if u.reverses { "yes" } else { "no" }.into(),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&[
                "unit slip: entity",
                "period",
                "variable",
                "times previous",
                "back next period",
            ]),
            rows,
        ));
        blocks.push(Block::Note(format!(
            "{} suspected unit slips in all (a ratio near 1000 or 1,000,000, or their inverse, to \
             the previous period){}.",
            f.total,
            if f.total > 20 {
                "; the first 20 are shown, report.json has them all"
            } else {
                ""
            }
        )));
    }
    if let Some(rep) = &r.repairs {
        let mut parts = Vec::new();
        if let Some(f) = &rep.corrections_file {
            parts.push(format!(
                "the corrections file `{f}` changed {} cells",
                rep.corrected_cells
            ));
        }
        if rep.unit_slips != "report" {
            parts.push(format!(
                "{} unit slips that jump back the next period were {} (`[repair] unit_slips = \"{}\"`); a slip without a jump back is never repaired and is listed above",
                rep.unit_slips_repaired,
                if rep.unit_slips == "rescale" {
                    "divided by their factor"
                } else {
                    "set to null"
                },
                rep.unit_slips
            ));
        }
        blocks.push(Block::Note(format!(
            "Repaired before the checks: {}. Every changed cell is in corrections.csv.",
            parts.join("; ")
        )));
    }
    Section {
        title: "Outliers and unit slips",
        blocks,
    }
}

fn factor(f: f64) -> String {
    if f >= 1.0 {
        format!("x {}", f as u64)
    } else {
        format!("/ {}", (1.0 / f).round() as u64)
    }
}

/// The outlier line of one variable.
fn line(
    core: &PanelCore,
    groups: Option<&GroupCodes>,
    variable: &str,
    x: &Values,
    pooled: Pooled,
    s: &Settings,
) -> OutlierLine {
    let (lo, hi) = (s.lower, s.upper);
    let x = x.view();
    // The column is read in place: quantiles by bracketing (core::quantiles), no copy.
    let n = x.count();
    let (mut below, mut above) = (0u64, 0u64);
    let smallest = fewest_for_cutoffs(lo, hi) as u64;
    let mut fallback = None;
    let (lower, upper, min_group) = match (s.by, groups) {
        (CutoffGroups::Groups, Some(codes)) => {
            // Per group; a group too small, or a row without a group, takes the pooled cutoffs
            // (as winsorizing by groups does), shared with the variation's quartiles
            // (`Context::pooled`).
            let pooled_cutoffs = (pooled.lower, pooled.upper);
            // The values of each group (codes 0, 1, ...), and those of rows without one last.
            let loose = codes.loose();
            let slot = |r: usize| codes.codes[r] as usize;
            let mut sizes = vec![0usize; codes.count()];
            for (r, _) in x.iter() {
                sizes[slot(r)] += 1;
            }
            let mut by: Vec<Vec<f64>> = sizes.iter().map(|n| Vec::with_capacity(*n)).collect();
            for (r, v) in x.iter() {
                by[slot(r)].push(v);
            }
            let mut fell_back = 0u64;
            for (code, g) in by.iter_mut().enumerate().filter(|(_, g)| !g.is_empty()) {
                let small = code == loose || (g.len() as u64) < smallest;
                let (l, u) = if small {
                    fell_back += u64::from(code != loose);
                    pooled_cutoffs
                } else {
                    let q = quantiles(&View::all(g), g.len(), |v| v, &[lo, hi]);
                    (q[0], q[1])
                };
                for v in g.iter() {
                    below += u64::from(l.is_some_and(|l| *v < l));
                    above += u64::from(u.is_some_and(|u| *v > u));
                }
            }
            fallback = Some(fell_back);
            (None, None, n as u64)
        }
        (CutoffGroups::Pooled | CutoffGroups::Groups, _) => {
            // The cutoffs, shared with the variation's quartiles (`Context::pooled`). Counted
            // below, in the same pass as the robust z.
            (pooled.lower, pooled.upper, n as u64)
        }
        (CutoffGroups::Period, _) => {
            let nt = core.periods.len();
            let period = |r: usize| core.period[r] as usize;
            // Every period's cutoffs from one bracketing pass over the column (or each period
            // gathered where it cannot bracket), then the values beyond them counted.
            let cutoffs = quantiles_by_group(&x, period, nt, &[lo, hi]);
            let mut sizes = vec![0u64; nt];
            for (r, v) in x.iter() {
                let t = period(r);
                sizes[t] += 1;
                below += u64::from(cutoffs[t][0].is_some_and(|l| v < l));
                above += u64::from(cutoffs[t][1].is_some_and(|u| v > u));
            }
            (None, None, sizes.into_iter().min().unwrap_or(0))
        }
    };
    // Robust z from the pooled median (`Context::pooled`) and MAD; with a MAD of zero it is
    // not defined.
    let (mut robust_z_beyond, mut mad) = (None, None);
    if let Some(m) = pooled.median {
        let pass = mad_pass(&x, n, m, (lower, upper), s.robust_z);
        below += pass.below;
        above += pass.above;
        mad = pass.mad;
        robust_z_beyond = pass.robust_z_beyond;
    }
    OutlierLine {
        variable: variable.to_string(),
        by: s.by,
        lower,
        upper,
        below,
        above,
        mad,
        robust_z_beyond,
        log_jumps: None,
        small_groups: (s.by == CutoffGroups::Period && min_group < smallest)
            || fallback.is_some_and(|n| n > 0),
        groups: match s.by {
            CutoffGroups::Groups => s.group_columns.clone(),
            _ => Vec::new(),
        },
        pooled_fallback_groups: fallback,
    }
}

#[cfg(test)]
mod tests {
    use polars::prelude::*;

    use super::*;

    /// Type-7 quantile by its definition (numpy's default, linear interpolation between the
    /// order statistics at (n − 1) p; common practice) over a sorted copy: an implementation
    /// that shares nothing with the check's bracketing.
    fn by_definition(sorted: &[f64], p: f64) -> f64 {
        let h = (sorted.len() - 1) as f64 * p;
        let lo = h.floor() as usize;
        let hi = (lo + 1).min(sorted.len() - 1);
        sorted[lo] + (sorted[hi] - sorted[lo]) * (h - lo as f64)
    }

    /// The values beyond each period's 1st and 99th percentiles, counted by the check, against
    /// the definition over each period's sorted values: once with periods large enough for
    /// the one bracketing pass over the column, once with periods so small that each is
    /// gathered and selected on its own; missing values left out, ties and a missing period
    /// value (an empty group) included.
    #[test]
    fn beyond_each_periods_cutoffs() {
        for firms in [80_000usize, 7] {
            let years = [2001i64, 2002, 2003];
            let (mut f, mut y, mut x) = (Vec::new(), Vec::new(), Vec::new());
            for i in 0..firms {
                for (j, year) in years.iter().enumerate() {
                    let r = i * years.len() + j;
                    f.push(format!("e{i:06}"));
                    y.push(*year);
                    // Period 2003 holds no value at all; every 13th row is missing.
                    let value = match j {
                        0 => ((r * 7_919) % 10_007) as f64,
                        1 => ((r * 104_729) % 997) as f64 * 0.5,
                        _ => f64::NAN,
                    };
                    x.push((j < 2 && !r.is_multiple_of(13)).then_some(value));
                }
            }
            let names: Vec<&str> = f.iter().map(String::as_str).collect();
            let core = crate::core::coded(&names, &y);
            let df = df!("x" => x.clone()).unwrap();
            let values = Values::of(&df, "x").unwrap();
            let settings = Settings {
                by: CutoffGroups::Period,
                ..Settings::default()
            };
            let pooled = Pooled::of(&values.view(), &settings);
            let got = line(&core, None, "x", &values, pooled, &settings);
            // Both ways are taken: one pass for the large periods, each gathered for the small.
            let period = |r: usize| core.period[r] as usize;
            let one_pass =
                crate::core::grouped_quantiles(&values.view(), period, 3, &[0.01, 0.99]).is_some();
            assert_eq!(one_pass, firms > 10, "{firms} firms");
            let (mut below, mut above, mut smallest) = (0u64, 0u64, u64::MAX);
            for year in years {
                let mut v: Vec<f64> = (0..x.len())
                    .filter(|r| y[*r] == year)
                    .filter_map(|r| x[r])
                    .collect();
                smallest = smallest.min(v.len() as u64);
                if v.is_empty() {
                    continue;
                }
                v.sort_by(f64::total_cmp);
                let (lo, hi) = (by_definition(&v, 0.01), by_definition(&v, 0.99));
                below += v.iter().filter(|a| **a < lo).count() as u64;
                above += v.iter().filter(|a| **a > hi).count() as u64;
            }
            assert!(
                below > 0 && above > 0 || firms < 10,
                "{firms} firms: something beyond"
            );
            assert_eq!((got.below, got.above), (below, above), "{firms} firms");
            assert_eq!(smallest, 0, "the empty period");
            assert!(got.small_groups, "{firms} firms: a period too small");
        }
    }
}
