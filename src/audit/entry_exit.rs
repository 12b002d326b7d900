//! Entry and exit: per period, the entities present, entering, leaving and returning after a
//! gap; survival by entry cohort; and leavers against stayers at entry (`attrition.rs`).

use std::collections::HashMap;

use super::verdict::{CheckVerdict, LevelKey, Levels};
use super::{attrition, Check, Context};
use crate::core::PanelCore;
use crate::report::layout::{num, opt, opt_level, pval, strings, Block, Section};
use crate::report::{EntryExit as Line, EntryExitFigures as Figures, Finding, Report, Survival};
use crate::Result;

/// Entry, exit, survival and attrition.
pub struct EntryExit;

impl Check for EntryExit {
    fn name(&self) -> &'static str {
        "entry and exit"
    }

    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>> {
        let mut f = Figures::default();
        (f.attrition_groups, f.attrition) = attrition::compare(ctx)?;
        let Some((first, last)) = ctx.window()? else {
            return Ok(Box::new(f));
        };
        // One pass over the panel core's distinct keys, entity by entity.
        let (counts, seen) = counts(&ctx.core);
        f.entry_exit = (first..=last)
            .map(|p| {
                let [present, entrants, leavers, reentrants] =
                    counts.get(&p).copied().unwrap_or_default();
                Line {
                    period: p,
                    present,
                    entrants: (p > first).then_some(entrants),
                    leavers: (p < last).then_some(leavers),
                    reentrants,
                }
            })
            .collect();

        f.survival = (first..=last)
            .filter_map(|cohort| {
                let size = *seen.get(&(cohort, 0))?;
                let shares = (0..=last - cohort)
                    .map(|k| seen.get(&(cohort, k)).copied().unwrap_or(0) as f64 / size as f64)
                    .collect();
                Some(Survival {
                    cohort,
                    entities: size,
                    shares,
                })
            })
            .collect();
        Ok(Box::new(f))
    }

    fn levels(&self) -> Vec<LevelKey> {
        vec![attrition::ATTRITION]
    }

    fn verdict(&self, r: &Report, lv: &Levels) -> Option<CheckVerdict> {
        attrition::verdict(r.findings.get::<Figures>()?, lv)
    }
}

impl Finding for Figures {
    fn entries(&self) -> Vec<(&'static str, &dyn crate::report::ToJson)> {
        vec![
            ("entry_exit", &self.entry_exit),
            ("survival", &self.survival),
            ("attrition_groups", &self.attrition_groups),
            ("attrition", &self.attrition),
        ]
    }

    fn sections(&self, _report: &Report) -> Vec<Section> {
        vec![section(self)]
    }
}

/// Survival horizons shown in the text reports (JSON has every k).
const HORIZONS: [usize; 4] = [1, 2, 5, 10];

fn section(r: &Figures) -> Section {
    let dash = |x: Option<u64>| x.map_or("–".to_string(), |x| x.to_string());
    let rows = r
        .entry_exit
        .iter()
        .map(|l| {
            vec![
                l.period.to_string(),
                l.present.to_string(),
                dash(l.entrants),
                dash(l.leavers),
                l.reentrants.to_string(),
            ]
        })
        .collect();
    let mut blocks = vec![
        Block::Table(
            strings(&[
                "period",
                "present",
                "entrants",
                "leavers",
                "back after a gap",
            ]),
            rows,
        ),
        Block::Note(
            "Entrants are first seen in that period and leavers last seen in it; neither is \
             counted at the window's edges (–), where entry and exit cannot be observed."
                .into(),
        ),
    ];
    let longest = r.survival.iter().map(|s| s.shares.len()).max().unwrap_or(0);
    let horizons: Vec<usize> = HORIZONS.iter().copied().filter(|h| *h < longest).collect();
    if !horizons.is_empty() {
        let mut header = strings(&["entry cohort", "entities"]);
        header.extend(horizons.iter().map(|h| format!("seen {h} later")));
        let rows = r
            .survival
            .iter()
            .map(|s| {
                let mut row = vec![s.cohort.to_string(), s.entities.to_string()];
                row.extend(
                    horizons
                        .iter()
                        .map(|h| s.shares.get(*h).map_or("–".into(), |x| num(*x, 2))),
                );
                row
            })
            .collect();
        blocks.push(Block::Table(header, rows));
        blocks.push(Block::Note(
            "Share of each entry cohort observed k periods after its first; the first cohort \
             holds every entity present at the window's start."
                .into(),
        ));
    }
    let a = &r.attrition_groups;
    if !r.attrition.is_empty() {
        let rows = r
            .attrition
            .iter()
            .map(|v| {
                vec![
                    v.variable.clone(),
                    format!("{} / {}", opt_level(v.mean_leavers), v.n_leavers),
                    format!("{} / {}", opt_level(v.mean_stayers), v.n_stayers),
                    opt(v.t, 2),
                    opt(v.df, 1),
                    pval(v.p),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&[
                "at first period",
                "leavers: mean / n",
                "stayers: mean / n",
                "Welch t",
                "df",
                "p",
            ]),
            rows,
        ));
        let unvalued: Vec<String> = r
            .attrition
            .iter()
            .filter(|v| v.n_leavers + v.n_stayers == 0)
            .map(|v| format!("`{}`", v.variable))
            .collect();
        if !unvalued.is_empty() {
            blocks.push(Block::Note(format!(
                "No value at any entity's first period (–): {}. A lag, difference or growth \
                 rate has none there by construction; `[audit] compare` names the variables to \
                 compare.",
                unvalued.join(", ")
            )));
        }
    }
    blocks.push(Block::Note(format!(
        "{} entities left before the window's last period, {} stayed. A difference between \
         leavers and stayers at entry is a warning signal to look at attrition, not a test of \
         selection bias.",
        a.leavers, a.stayers
    )));
    Section {
        title: "Entry and exit",
        blocks,
    }
}

/// Per period value: entities present, entering (their first period), leaving (their last)
/// and returning after a gap; per (entry cohort, periods since entry): entities present.
type Counts = (HashMap<i64, [u64; 4]>, HashMap<(i64, i64), u64>);

/// Up to this many distinct periods the cohort counts are a dense table of period codes
/// (8 MiB at most); beyond, a map of the pairs seen.
const DENSE_PERIODS: usize = 1024;

fn counts(core: &PanelCore) -> Counts {
    tally(core, core.periods.len() <= DENSE_PERIODS)
}

/// [`counts`], the cohorts in a dense table of period codes or in a map of the pairs seen.
fn tally(core: &PanelCore, dense: bool) -> Counts {
    let nt = core.periods.len();
    // Tallied by period code (no hashing per entity and period), named by value at the end.
    let mut by_period = vec![[0u64; 4]; nt];
    let mut table = vec![0u64; if dense { nt * nt } else { 0 }];
    let mut pairs: HashMap<(u32, u32), u64> = HashMap::new();
    let mut periods: Vec<u32> = Vec::new();
    for rows in core.starts.windows(2) {
        // The entity's distinct period codes, ascending (copies of a key sit together).
        periods.clear();
        for &t in &core.period[rows[0]..rows[1]] {
            if periods.last() != Some(&t) {
                periods.push(t);
            }
        }
        let (Some(&first), Some(&last)) = (periods.first(), periods.last()) else {
            continue;
        };
        let mut previous: Option<i64> = None;
        for &t in &periods {
            let value = core.periods[t as usize];
            let c = &mut by_period[t as usize];
            c[0] += 1;
            c[1] += u64::from(t == first);
            c[2] += u64::from(t == last);
            c[3] += u64::from(previous.is_some_and(|p| value - p > 1));
            previous = Some(value);
            if dense {
                table[first as usize * nt + t as usize] += 1;
            } else {
                *pairs.entry((first, t)).or_default() += 1;
            }
        }
    }
    if dense {
        pairs.extend(
            table
                .iter()
                .enumerate()
                .filter(|(_, n)| **n > 0)
                .map(|(i, n)| (((i / nt) as u32, (i % nt) as u32), *n)),
        );
    }
    let value = |t: u32| core.periods[t as usize];
    let by_period = by_period
        .into_iter()
        .enumerate()
        .filter(|(_, c)| c[0] > 0)
        .map(|(t, c)| (value(t as u32), c))
        .collect();
    let cohorts = pairs
        .into_iter()
        .map(|((first, t), n)| ((value(first), value(t) - value(first)), n))
        .collect();
    (by_period, cohorts)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::coded as core;

    #[test]
    fn counts_match_a_hand_count_in_both_tallies() {
        // Source: counted by hand from the rows below (entry = first period, exit = last,
        // return = a period after a gap; cohorts by first period and periods since).
        // a: 2001, 2002, 2004 (returns after a gap); b: 2002, 2003; c: 2001 twice (a copy).
        let f = ["a", "a", "a", "b", "b", "c", "c"];
        let y = [2001, 2002, 2004, 2002, 2003, 2001, 2001];
        let core = core(&f, &y);
        let want_periods: HashMap<i64, [u64; 4]> = [
            (2001, [2, 2, 1, 0]),
            (2002, [2, 1, 0, 0]),
            (2003, [1, 0, 1, 0]),
            (2004, [1, 0, 1, 1]),
        ]
        .into();
        let want_cohorts: HashMap<(i64, i64), u64> = [
            ((2001, 0), 2),
            ((2001, 1), 1),
            ((2001, 3), 1),
            ((2002, 0), 1),
            ((2002, 1), 1),
        ]
        .into();
        for dense in [true, false] {
            let (periods, cohorts) = tally(&core, dense);
            assert_eq!(periods, want_periods, "dense {dense}");
            assert_eq!(cohorts, want_cohorts, "dense {dense}");
        }
    }

    #[test]
    fn many_periods_are_tallied_without_the_dense_table() {
        // More distinct periods than the dense table takes: one entity a period, and one
        // entity present in the first and the last.
        // Source: counted by hand, as above.
        let n = DENSE_PERIODS + 10;
        let names: Vec<String> = (0..n).map(|i| format!("e{i:05}")).collect();
        let mut f: Vec<&str> = names.iter().map(String::as_str).collect();
        let mut y: Vec<i64> = (0..n as i64).collect();
        f.extend(["z", "z"]);
        y.extend([0, n as i64 - 1]);
        let (periods, cohorts) = counts(&core(&f, &y));
        assert_eq!(periods.len(), n);
        assert_eq!(periods[&0], [2, 2, 1, 0]);
        assert_eq!(periods[&(n as i64 - 1)], [2, 1, 2, 1]);
        assert_eq!(cohorts[&(0, 0)], 2);
        assert_eq!(cohorts[&(0, n as i64 - 1)], 1);
        assert_eq!(cohorts.values().sum::<u64>(), n as u64 + 2);
    }
}
