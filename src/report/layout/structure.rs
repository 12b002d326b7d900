//! Layout of the structural sections: coverage, entry and exit.

use super::*;

pub(super) fn shape_words(s: &Shape) -> String {
    let span = if s.first == s.last {
        format!("only {}", s.first)
    } else {
        format!("{} to {}", s.first, s.last)
    };
    match s.gap_periods {
        0 => format!("{span}, no gaps"),
        1 => format!("{span}, 1 period missing"),
        g => format!("{span}, {g} periods missing"),
    }
}

pub(super) fn coverage(r: &Report) -> Section {
    let c = &r.coverage;
    let d = &c.per_entity;
    let mut blocks = vec![pairs(&[
        (
            "observations per entity: min / q1 / median / q3 / max",
            format!(
                "{} / {} / {} / {} / {}",
                num(d.min, 0),
                num(d.q1, 2),
                num(d.median, 1),
                num(d.q3, 2),
                num(d.max, 0)
            ),
        ),
        ("observations per entity: mean", num(d.mean, 2)),
        ("spells (runs of consecutive periods)", c.spells.to_string()),
        ("entities with gaps", c.entities_with_gaps.to_string()),
        ("periods missing inside spans", c.gap_periods.to_string()),
        ("longest gap (periods)", c.longest_gap.to_string()),
        ("singletons (one period only)", c.singletons.to_string()),
        (
            "rows lost to singletons under entity + period effects",
            c.singletons_two_way.to_string(),
        ),
    ])];
    if !c.shapes.is_empty() {
        let rows = c
            .shapes
            .iter()
            .map(|s| vec![shape_words(s), s.entities.to_string()])
            .collect();
        blocks.push(Block::Table(
            strings(&["most common coverage", "entities"]),
            rows,
        ));
        blocks.push(Block::Note(format!(
            "{} distinct coverage shapes in all.",
            c.distinct_shapes
        )));
    }
    Section {
        title: "Coverage",
        blocks,
    }
}

/// Survival horizons shown in the text reports (JSON has every k).
pub(super) const HORIZONS: [usize; 4] = [1, 2, 5, 10];

pub(super) fn entry_exit(r: &Report) -> Section {
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
