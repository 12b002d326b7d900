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

fn counts(core: &PanelCore) -> Counts {
    let mut by_period: HashMap<i64, [u64; 4]> = HashMap::new();
    let mut cohorts: HashMap<(i64, i64), u64> = HashMap::new();
    let mut periods: Vec<i64> = Vec::new();
    for i in 0..core.entities() {
        // The entity's distinct periods, ascending (copies of a key sit together).
        periods.clear();
        for r in core.starts[i]..core.starts[i + 1] {
            let t = core.periods[core.period[r] as usize];
            if periods.last() != Some(&t) {
                periods.push(t);
            }
        }
        let (Some(&first), Some(&last)) = (periods.first(), periods.last()) else {
            continue;
        };
        let mut previous = None;
        for &t in &periods {
            let c = by_period.entry(t).or_default();
            c[0] += 1;
            c[1] += u64::from(t == first);
            c[2] += u64::from(t == last);
            c[3] += u64::from(previous.is_some_and(|p| t - p > 1));
            previous = Some(t);
            *cohorts.entry((first, t - first)).or_default() += 1;
        }
    }
    (by_period, cohorts)
}
