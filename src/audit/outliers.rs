//! Outliers and unit slips: percentile cutoffs (Hyndman–Fan type 7, pooled, by period or by
//! groups) with the counts beyond them, robust z-scores from the median and the MAD, and in
//! the level variables within-entity jumps in log levels and unit slips (`unit_slips.rs`).
//! Missing values never enter a cutoff.

use super::verdict::{
    counted, level_key, line as verdict_line, worst, CheckVerdict, LevelKey, Levels, Status,
};
use super::{unit_slips, Check, Context, Settings, NO_GROUP};
use crate::core::{in_batches, quantiles, quantiles_visiting, PanelCore, Values, View};
use crate::report::layout::{opt_level, strings, Block, Section};
pub use crate::report::CutoffGroups;
use crate::report::{Finding, OutlierLine, Report, ToJson, UnitSlip};
use crate::Result;

/// The MAD's scale for a normal distribution, 1 / Φ⁻¹(3/4).
pub const MAD_SCALE: f64 = 1.482_602_218_505_602;

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
                Ok(line(&ctx.core, ctx.outlier_groups.as_deref(), v, &x, s))
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
    groups: Option<&[u32]>,
    variable: &str,
    x: &Values,
    s: &Settings,
) -> OutlierLine {
    let (lo, hi) = (s.lower, s.upper);
    let x = x.view();
    // The column is read in place: quantiles by bracketing (core::quantiles), no copy.
    let n = x.count();
    let (mut below, mut above) = (0u64, 0u64);
    // A group needs 1 / (the smaller tail) values for its own cutoffs (100 at 1%).
    let smallest = (1.0 / lo.min(1.0 - hi)).ceil() as u64;
    let mut fallback = None;
    let mut median: Option<Option<f64>> = None;
    let (lower, upper, min_group) = match (s.by, groups) {
        (CutoffGroups::Groups, Some(codes)) => {
            // Per group; a group too small, or a row without a group, takes the pooled cutoffs
            // (as winsorizing by groups does).
            let q = quantiles(&x, n, |v| v, &[lo, hi]);
            let pooled = (q[0], q[1]);
            // The values of each group (codes 0, 1, ...), and those of rows without one last.
            let loose = codes.iter().filter(|c| **c != NO_GROUP).max();
            let loose = loose.map_or(0, |c| *c as usize + 1);
            let slot = |r: usize| match codes[r] {
                NO_GROUP => loose,
                c => c as usize,
            };
            let mut sizes = vec![0usize; loose + 1];
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
                    pooled
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
            // The cutoffs and the median (for the robust z below) from one pass.
            // Counted below, in the same pass as the robust z.
            let q = quantiles(&x, n, |v| v, &[lo, hi, 0.5]);
            median = Some(q[2]);
            (q[0], q[1], n as u64)
        }
        (CutoffGroups::Period, _) => {
            let mut groups: Vec<Vec<f64>> = vec![Vec::new(); core.periods.len()];
            for (r, v) in x.iter() {
                groups[core.period[r] as usize].push(v);
            }
            let mut smallest = u64::MAX;
            for g in &mut groups {
                smallest = smallest.min(g.len() as u64);
                let q = quantiles(&View::all(g), g.len(), |v| v, &[lo, hi]);
                let (l, u) = (q[0], q[1]);
                for v in g.iter() {
                    below += u64::from(l.is_some_and(|l| *v < l));
                    above += u64::from(u.is_some_and(|u| *v > u));
                }
            }
            (None, None, if groups.is_empty() { 0 } else { smallest })
        }
    };
    // Robust z from the pooled median and MAD; with a MAD of zero it is not defined.
    let median = match median {
        Some(m) => m,
        None => quantiles(&x, n, |v| v, &[0.5])[0],
    };
    let (mut robust_z_beyond, mut mad) = (None, None);
    if let Some(m) = median {
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

/// What the pass for the MAD counts besides.
struct MadPass {
    /// Values below and above the pooled `cutoffs` (none when there are none).
    below: u64,
    above: u64,
    /// 1.4826 × the median absolute deviation from `m`.
    mad: Option<f64>,
    /// Values whose robust z is beyond the threshold (None with a MAD of zero: not defined).
    robust_z_beyond: Option<u64>,
    /// Whether the robust z was counted in the same pass (else in a pass of its own; the
    /// tests hold that the first is the usual case).
    #[cfg_attr(not(test), allow(dead_code))]
    fused: bool,
}

/// The MAD of the values of `x` (`n` of them) about the median `m`, from their absolute
/// deviations computed as they are read; in the same pass the values beyond the `cutoffs`
/// and, as far as the MAD's bracket allows, the values whose robust z is beyond `z`.
/// |v - m| / d is exactly |(v - m) / d|, so the count is the one the z-scores give.
fn mad_pass(x: &View, n: usize, m: f64, cutoffs: (Option<f64>, Option<f64>), z: f64) -> MadPass {
    let mut counts = None;
    let (q, _) = quantiles_visiting(
        x,
        n,
        |v| (v - m).abs(),
        &[0.5],
        |range| {
            let counts = counts.insert(Beyond::new(cutoffs, range, z, n));
            move |v, a| counts.visit(v, a)
        },
    );
    let beyond = counts.expect("the visitor is always made");
    let mad = q[0].map(|d| d * MAD_SCALE);
    let (mut robust_z_beyond, mut fused) = (None, false);
    if let Some(d) = mad.filter(|d| *d > 0.0) {
        let (count, in_pass) = match beyond.z_count(d) {
            Some(count) => (count, true),
            // The MAD fell outside its bracket (or there was none): one more pass.
            None => (
                x.iter().filter(|(_, v)| (v - m).abs() / d > z).count() as u64,
                false,
            ),
        };
        (robust_z_beyond, fused) = (Some(count), in_pass);
    }
    MadPass {
        below: beyond.below,
        above: beyond.above,
        mad,
        robust_z_beyond,
        fused,
    }
}

/// The counts that ride on the pass reading each value's absolute deviation from the median
/// (for the MAD): values beyond the pooled cutoffs, and values whose robust z is beyond the
/// threshold whatever the MAD within its bracket turns out to be. Those that could go either
/// way (a narrow band of deviations) are kept and decided once the MAD is known.
struct Beyond {
    lower: Option<f64>,
    upper: Option<f64>,
    below: u64,
    above: u64,
    /// The MAD's bounds from its bracket and the deviations above which a value is surely
    /// beyond and below which it surely is not; None when not known before the pass.
    band: Option<Band>,
    /// Values surely beyond.
    sure: u64,
    /// Deviations inside the band.
    unsure: Vec<f64>,
    /// The most deviations kept in the band before giving it up for a pass of its own.
    room: usize,
    z: f64,
}

#[derive(Clone, Copy)]
struct Band {
    /// The MAD's lowest and highest value, from its bracket.
    d_lo: f64,
    d_hi: f64,
    /// A deviation above `sure` has a robust z beyond the threshold for any MAD up to
    /// `d_hi`; one below `never` has not for any MAD from `d_lo`.
    sure: f64,
    never: f64,
}

impl Beyond {
    fn new(
        cutoffs: (Option<f64>, Option<f64>),
        range: Option<(f64, f64)>,
        z: f64,
        n: usize,
    ) -> Beyond {
        let (lower, upper) = cutoffs;
        // A relative margin far above the rounding of a quotient and a product (a few 1e-16),
        // so that the comparisons below decide only what the exact division would.
        const MARGIN: f64 = 1e-9;
        let band = range.and_then(|(q_lo, q_hi)| {
            let (d_lo, d_hi) = (q_lo * MAD_SCALE, q_hi * MAD_SCALE);
            let (sure, never) = (z * d_hi * (1.0 + MARGIN), z * d_lo * (1.0 - MARGIN));
            let usable = d_lo > 0.0 && z > 0.0 && sure.is_finite() && never > 0.0;
            usable.then_some(Band {
                d_lo,
                d_hi,
                sure,
                never,
            })
        });
        Beyond {
            lower,
            upper,
            below: 0,
            above: 0,
            band,
            sure: 0,
            unsure: Vec::new(),
            room: (n / 16).max(4096),
            z,
        }
    }

    /// Count a value `v` with absolute deviation `a` from the median (inlined into the pass).
    #[inline(always)]
    fn visit(&mut self, v: f64, a: f64) {
        self.below += u64::from(self.lower.is_some_and(|l| v < l));
        self.above += u64::from(self.upper.is_some_and(|u| v > u));
        if let Some(band) = self.band {
            if a > band.sure {
                self.sure += 1;
            } else if a >= band.never {
                self.unsure.push(a);
                if self.unsure.len() > self.room {
                    self.band = None;
                    self.unsure = Vec::new();
                }
            }
        }
    }

    /// The values whose robust z is beyond the threshold, with the MAD `d`; None when `d` is
    /// outside the bracket the pass counted for (or there was none).
    fn z_count(&self, d: f64) -> Option<u64> {
        self.band.filter(|b| b.d_lo <= d && d <= b.d_hi)?;
        Some(self.sure + self.unsure.iter().filter(|a| **a / d > self.z).count() as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::type7;
    use polars::prelude::*;

    /// The robust z counted in the MAD's pass against its definition value by value: the
    /// median and the MAD by `type7` (Hyndman & Fan type 7, numpy's default, itself checked
    /// against numpy in tests/reference), then |v - m| / (1.4826 MAD) > z. Columns larger than
    /// the quantiles' sampling threshold, so that the bracket and its band are used: spread
    /// values with far tails, small whole numbers whose deviations land exactly on the
    /// threshold, missing values and NaN, and a constant (a MAD of zero: the robust z undefined, no count).
    #[test]
    fn robust_z_counted_in_the_mads_pass_equals_its_definition() {
        let mut seed = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        let n = 200_003;
        let spread: Vec<Option<f64>> = (0..n)
            .map(|i| {
                let v = ((next() % 100_000) as f64 - 50_000.0) / 7.0;
                Some(if i % 97 == 0 { v * 40.0 } else { v })
            })
            .collect();
        // Median 5, MAD 2 (so d = 2.9652): deviations of whole numbers sit on z * d for the
        // thresholds below only by the float arithmetic, and many values share each.
        let ties: Vec<Option<f64>> = (0..n).map(|_| Some((next() % 11) as f64)).collect();
        let gaps: Vec<Option<f64>> = (0..n)
            .map(|_| match next() % 40 {
                0 => None,
                1 => Some(f64::NAN),
                r => Some((next() % 1000) as f64 * r as f64),
            })
            .collect();
        let constant: Vec<Option<f64>> = vec![Some(3.0); n];
        let mut used_band = 0;
        for (name, column) in [
            ("spread", spread),
            ("ties", ties),
            ("gaps", gaps),
            ("constant", constant),
        ] {
            let values = Values::new(&Float64Chunked::from_iter_options(
                "x".into(),
                column.iter().copied(),
            ));
            let x = values.view();
            let present: Vec<f64> = column.iter().flatten().copied().collect();
            let m = type7(&mut present.clone(), 0.5).unwrap();
            let mut dev: Vec<f64> = present.iter().map(|v| (v - m).abs()).collect();
            let d = type7(&mut dev, 0.5).unwrap() * MAD_SCALE;
            for z in [0.5, 1.0, 2.0 / MAD_SCALE, 3.5] {
                let pass = mad_pass(&x, present.len(), m, (Some(-100.0), Some(100.0)), z);
                // A MAD of zero leaves the robust z undefined: no count.
                let expected = (d > 0.0)
                    .then(|| present.iter().filter(|v| (*v - m).abs() / d > z).count() as u64);
                assert_eq!(pass.robust_z_beyond, expected, "{name}, z {z}");
                assert_eq!(pass.mad.map(f64::to_bits), Some(d.to_bits()), "{name}");
                let below = present.iter().filter(|v| **v < -100.0).count() as u64;
                let above = present.iter().filter(|v| **v > 100.0).count() as u64;
                assert_eq!((pass.below, pass.above), (below, above), "{name}");
                used_band += usize::from(pass.fused);
            }
        }
        // The band is used (not only the pass of its own) on the spread and missing columns.
        assert!(used_band >= 8, "the band was used {used_band} times");
    }
}
