//! The report laid out as sections of blocks (pairs, tables, notes), shared by the terminal
//! and Markdown renderers so that both show the same figures in the same order. Formatting of
//! numbers happens here; nothing is computed.

use super::model::*;
use crate::audit::CutoffGroups;

/// One titled section.
pub(crate) struct Section {
    /// The label, from the project vocabulary.
    pub(crate) title: &'static str,
    /// Its content in order.
    pub(crate) blocks: Vec<Block>,
}

/// A piece of a section.
pub(crate) enum Block {
    /// Label and value rows.
    Pairs(Vec<(String, String)>),
    /// A table: header, rows; columns after the first are right-aligned.
    Table(Vec<String>, Vec<Vec<String>>),
    /// A sentence.
    Note(String),
}

/// A number with up to `digits` decimals, trailing zeros kept for alignment.
pub(crate) fn num(x: f64, digits: usize) -> String {
    if x.is_finite() {
        format!("{x:.digits$}")
    } else {
        "–".into()
    }
}

fn opt(x: Option<f64>, digits: usize) -> String {
    x.map_or("–".into(), |x| num(x, digits))
}

/// A p-value: four decimals, or "< 0.0001".
pub(crate) fn pval(p: Option<f64>) -> String {
    match p {
        Some(p) if p < 0.0001 => "< 0.0001".into(),
        Some(p) => num(p, 4),
        None => "–".into(),
    }
}

fn pairs(rows: &[(&str, String)]) -> Block {
    Block::Pairs(
        rows.iter()
            .map(|(a, b)| (a.to_string(), b.clone()))
            .collect(),
    )
}

fn strings(xs: &[&str]) -> Vec<String> {
    xs.iter().map(|s| s.to_string()).collect()
}

/// The whole report as sections.
pub(crate) fn sections(r: &Report) -> Vec<Section> {
    vec![
        glance(r),
        keys(r),
        coverage(r),
        entry_exit(r),
        variation(r),
        absorbed(r),
        missing(r),
        outliers(r),
        accounting(r),
        derived(r),
        model(r),
        sample(r),
        verdict(r),
    ]
}

fn glance(r: &Report) -> Section {
    let p = &r.panel;
    let window = match (p.first_period, p.last_period) {
        (Some(a), Some(b)) => format!("{a}..{b}"),
        _ => "none".into(),
    };
    Section {
        title: "Panel at a glance",
        blocks: vec![pairs(&[
            ("rows", p.rows.to_string()),
            ("entities", p.entities.to_string()),
            ("periods observed", p.periods.to_string()),
            ("window", window),
            ("balanced", if p.balanced { "yes" } else { "no" }.into()),
            ("unbalancedness gamma (1 = balanced)", opt(p.gamma, 4)),
            ("unbalancedness nu (1 = balanced)", opt(p.nu, 4)),
        ])],
    }
}

fn keys(r: &Report) -> Section {
    let k = &r.keys;
    let mut blocks = vec![pairs(&[
        (
            "rows missing entity or period",
            k.missing_key_rows.to_string(),
        ),
        (
            "exact copies of an earlier row",
            k.exact_duplicate_rows.to_string(),
        ),
        ("keys with exact copies", k.exact_duplicate_keys.to_string()),
        (
            "keys on rows with different values",
            k.conflicting_keys.to_string(),
        ),
        ("rows carrying those keys", k.conflicting_rows.to_string()),
        ("policy for those keys", k.policy.clone()),
    ])];
    if !k.examples.is_empty() {
        let list: Vec<String> = k
            .examples
            .iter()
            .map(|e| format!("{} in {} ({} rows)", e.entity, e.period, e.rows))
            .collect();
        blocks.push(Block::Note(format!(
            "First keys on rows with different values: {}.",
            list.join("; ")
        )));
    }
    Section {
        title: "Keys",
        blocks,
    }
}

fn shape_words(s: &Shape) -> String {
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

fn coverage(r: &Report) -> Section {
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
const HORIZONS: [usize; 4] = [1, 2, 5, 10];

fn entry_exit(r: &Report) -> Section {
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
                    format!("{} / {}", opt(v.mean_leavers, 4), v.n_leavers),
                    format!("{} / {}", opt(v.mean_stayers, 4), v.n_stayers),
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

/// How a derived variable's nulls break down, in words.
pub(crate) fn null_breakdown(d: &DerivedSummary) -> String {
    let parts: Vec<String> = d
        .null_reasons
        .iter()
        .filter(|n| n.rows > 0)
        .map(|n| format!("{}: {}", n.reason, n.rows))
        .collect();
    if parts.is_empty() {
        "none".into()
    } else {
        parts.join("; ")
    }
}

fn derived(r: &Report) -> Section {
    let rows = r
        .derived
        .iter()
        .map(|d| {
            vec![
                d.name.clone(),
                d.non_null.to_string(),
                d.nulls.to_string(),
                null_breakdown(d),
            ]
        })
        .collect();
    let mut blocks = vec![Block::Table(
        strings(&["derived variable", "with a value", "null", "why null"]),
        rows,
    )];
    for s in &r.skipped {
        blocks.push(Block::Note(format!(
            "Library ratio {} left out: no column `{}`.",
            s.name, s.missing
        )));
    }
    Section {
        title: "Derived variables",
        blocks,
    }
}

fn sample(r: &Report) -> Section {
    let rows = r
        .sample_construction
        .iter()
        .map(|s| {
            vec![
                s.step.clone(),
                s.rows_before.to_string(),
                s.removed.to_string(),
                s.rows_after.to_string(),
                s.entities_after.to_string(),
            ]
        })
        .collect();
    let mut blocks = vec![Block::Table(
        strings(&[
            "step",
            "rows before",
            "removed",
            "rows after",
            "entities after",
        ]),
        rows,
    )];
    blocks.extend(cleaning_blocks(r));
    Section {
        title: "Sample construction",
        blocks,
    }
}

fn variation(r: &Report) -> Section {
    let rows: Vec<Vec<String>> = r
        .variation
        .iter()
        .filter(|v| v.sd_total.is_some())
        .map(|v| {
            vec![
                v.variable.clone(),
                v.n.to_string(),
                opt(v.mean, 4),
                opt(v.sd_total, 4),
                opt(v.sd_between, 4),
                opt(v.sd_within, 4),
                opt(v.within_share, 3),
                v.zero_within_entities.to_string(),
            ]
        })
        .collect();
    let mut blocks = Vec::new();
    if rows.is_empty() {
        blocks.push(Block::Note("No numeric variables.".into()));
    } else {
        blocks.push(Block::Table(
            strings(&[
                "variable",
                "n",
                "mean",
                "total SD",
                "between SD",
                "within SD",
                "within share",
                "flat entities",
            ]),
            rows,
        ));
        blocks.push(Block::Note(
            "SDs over each variable's non-missing rows; total and within SDs divide by N - 1, \
             the between SD is the SD of entity means (each entity once). Within share = within \
             sum of squares / total sum of squares. Flat entities: two or more values, all equal."
                .into(),
        ));
    }
    Section {
        title: "Variation",
        blocks,
    }
}

fn absorbed(r: &Report) -> Section {
    let words = |a: Absorbed| match a {
        Absorbed::Entity => "entity effects (no change within any entity)",
        Absorbed::Period => "period effects (no change within any period)",
        Absorbed::EntityPeriod => {
            "entity + period effects together (e.g. age = period - founding year)"
        }
    };
    let mut rows: Vec<Vec<String>> = r
        .variation
        .iter()
        .filter_map(|v| {
            v.absorbed_by
                .map(|a| vec![v.variable.clone(), words(a).to_string()])
        })
        .collect();
    rows.extend(r.variation.iter().filter(|v| v.nearly_absorbed).map(|v| {
        vec![
            v.variable.clone(),
            format!(
                "nearly absorbed by entity effects: within share {}; fixed-effects estimates for it will be imprecise",
                opt(v.within_share, 4)
            ),
        ]
    }));
    let blocks = if rows.is_empty() {
        vec![Block::Note(
            "No variable is absorbed or nearly absorbed.".into(),
        )]
    } else {
        vec![
            Block::Table(strings(&["variable", "absorbed by"]), rows),
            Block::Note(
                "An absorbed variable has no variation left once those effects are removed: its \
                 coefficient is not identified in a model with them."
                    .into(),
            ),
        ]
    };
    Section {
        title: "Absorbed by fixed effects",
        blocks,
    }
}

fn missing(r: &Report) -> Section {
    let rows: Vec<Vec<String>> = r
        .missing
        .iter()
        .filter(|m| m.missing > 0)
        .map(|m| vec![m.variable.clone(), m.missing.to_string(), num(m.share, 3)])
        .collect();
    let mut blocks = if rows.is_empty() {
        vec![Block::Note("No missing values.".into())]
    } else {
        vec![Block::Table(
            strings(&["variable", "missing", "share"]),
            rows,
        )]
    };
    if !r.missing_breaks.is_empty() {
        let rows = r
            .missing_breaks
            .iter()
            .map(|b| {
                vec![
                    b.variable.clone(),
                    b.period.to_string(),
                    num(b.share_before, 3),
                    num(b.share_after, 3),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&["coverage break", "period", "missing before", "missing from"]),
            rows,
        ));
        blocks.push(Block::Note(
            "A sharp change in the missing share between consecutive periods often marks a change \
             of source or definition (or, for lags and growth rates, the window's first period)."
                .into(),
        ));
    }
    Section {
        title: "Missing values",
        blocks,
    }
}

fn outliers(r: &Report) -> Section {
    let rows: Vec<Vec<String>> = r
        .outliers
        .iter()
        .map(|o| {
            vec![
                o.variable.clone(),
                opt(o.lower, 4),
                opt(o.upper, 4),
                o.below.to_string(),
                o.above.to_string(),
                o.robust_z_beyond.to_string(),
                o.log_jumps.map_or("–".into(), |j| j.to_string()),
            ]
        })
        .collect();
    let mut blocks = Vec::new();
    if !rows.is_empty() {
        let by = r.outliers.first().map(|o| o.by);
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
            if by == Some(CutoffGroups::Period) {
                ", computed per period (not listed)"
            } else {
                " over all rows"
            }
        )));
        if r.outliers.iter().any(|o| o.small_groups) {
            blocks.push(Block::Note(
                "Warning: some periods have fewer values than 1 / p, too few for those cutoffs."
                    .into(),
            ));
        }
    }
    if r.unit_slips.is_empty() {
        blocks.push(Block::Note(
            "No unit slips found in the level variables.".into(),
        ));
    } else {
        let rows = r
            .unit_slips
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
            r.unit_slips_total,
            if r.unit_slips_total > 20 {
                "; the first 20 are shown, report.json has them all"
            } else {
                ""
            }
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

fn accounting(r: &Report) -> Section {
    let blocks = if r.rules.is_empty() {
        vec![Block::Note("No accounting rules.".into())]
    } else {
        let rows = r
            .rules
            .iter()
            .map(|l| {
                vec![
                    l.name.clone(),
                    l.expr.clone(),
                    l.action.clone(),
                    l.violations.to_string(),
                    l.unknown.to_string(),
                ]
            })
            .collect();
        vec![
            Block::Table(
                strings(&["rule", "must hold", "action", "broken", "not checkable"]),
                rows,
            ),
            Block::Note(
                "Broken: rows where the condition is false. Not checkable: an input is missing. \
                 `build` sets a `null` rule's columns to null and moves a `drop` rule's rows to \
                 the rejects ledger; `audit` only counts."
                    .into(),
            ),
        ]
    };
    Section {
        title: "Accounting rules",
        blocks,
    }
}

fn cleaning_blocks(r: &Report) -> Vec<Block> {
    let mut blocks = Vec::new();
    if !r.treatment.is_empty() {
        let rows = r
            .treatment
            .iter()
            .map(|t| {
                let cuts = match t.cutoffs.as_slice() {
                    [c] => format!("{} .. {}", opt(c.lower, 4), opt(c.upper, 4)),
                    many => format!("{} periods (report.json)", many.len()),
                };
                vec![
                    t.variable.clone(),
                    t.method.clone(),
                    format!("{} / {}", t.lower_percentile, t.upper_percentile),
                    cuts,
                    t.below.to_string(),
                    t.above.to_string(),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&["treated", "how", "percentiles", "cutoffs", "below", "above"]),
            rows,
        ));
    }
    if let Some(b) = &r.balance {
        let mut text = format!(
            "Balanced on {}..{} ({}): {} entities, {} rows.",
            b.first,
            b.last,
            if b.mode == "largest" {
                "the window keeping the most entity-periods"
            } else {
                "the given window"
            },
            b.entities,
            b.rows
        );
        if !b.runner_up.is_empty() {
            let others: Vec<String> = b
                .runner_up
                .iter()
                .map(|w| {
                    format!(
                        "{}..{} ({} entities, {} rows)",
                        w.first, w.last, w.entities, w.rows
                    )
                })
                .collect();
            text.push_str(&format!(" Next best: {}.", others.join("; ")));
        }
        blocks.push(Block::Note(text));
    }
    if let Some(c) = &r.cleaned {
        let window = match (c.panel.first_period, c.panel.last_period) {
            (Some(a), Some(b)) => format!("{a}..{b}"),
            _ => "none".into(),
        };
        blocks.push(Block::Pairs(vec![
            ("cleaned panel: rows".into(), c.panel.rows.to_string()),
            (
                "cleaned panel: entities".into(),
                c.panel.entities.to_string(),
            ),
            ("cleaned panel: window".into(), window),
            (
                "cleaned panel: balanced".into(),
                if c.panel.balanced { "yes" } else { "no" }.into(),
            ),
            (
                "cleaned panel: entities with gaps".into(),
                c.coverage.entities_with_gaps.to_string(),
            ),
            (
                "cleaned panel: singletons".into(),
                c.coverage.singletons.to_string(),
            ),
        ]));
    }
    blocks
}

fn model(r: &Report) -> Section {
    let Some(m) = &r.model else {
        return Section {
            title: "Model readiness",
            blocks: vec![Block::Note(
                "No model declared: add a [model] section (outcome, regressors) to the rules file."
                    .into(),
            )],
        };
    };
    let mut blocks = vec![Block::Note(format!(
        "Model: {} on {} with {} effects.",
        m.outcome,
        m.regressors.join(", "),
        m.effects
    ))];
    let mut pairs = vec![
        (
            "estimation sample: rows".to_string(),
            m.sample_rows.to_string(),
        ),
        (
            "estimation sample: entities".to_string(),
            m.sample_entities.to_string(),
        ),
        (
            "estimation sample: singletons".to_string(),
            m.sample_singletons.to_string(),
        ),
    ];
    for c in m.cost.iter().filter(|c| c.rows > 0) {
        pairs.push((format!("rows missing {}", c.variable), c.rows.to_string()));
    }
    pairs.push(("entity-effect SD".into(), opt(m.entity_sd, 4)));
    pairs.push(("idiosyncratic SD".into(), opt(m.idiosyncratic_sd, 4)));
    pairs.push((
        "entity-effect share of variance".into(),
        opt(m.entity_share, 3),
    ));
    blocks.push(Block::Pairs(pairs));
    if !m.tests.is_empty() {
        let rows = m
            .tests
            .iter()
            .map(|t| {
                let df: Vec<String> = t.df.iter().map(|d| num(*d, 0)).collect();
                vec![
                    t.name.clone(),
                    num(t.statistic, 3),
                    if df.is_empty() {
                        "–".into()
                    } else {
                        df.join(", ")
                    },
                    pval(t.p),
                    t.reading.clone(),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&["diagnostic", "statistic", "df", "p", "what it suggests"]),
            rows,
        ));
    }
    if !m.slopes.is_empty() {
        let rows = m
            .slopes
            .iter()
            .map(|s| {
                vec![
                    s.variable.clone(),
                    num(s.pooled, 4),
                    num(s.within, 4),
                    opt(s.random, 4),
                    s.change_within_vs_pooled
                        .map_or("–".into(), |c| format!("{c:+.1}%")),
                    if s.material { "yes" } else { "no" }.into(),
                ]
            })
            .collect();
        blocks.push(Block::Table(
            strings(&[
                "slope of",
                "pooled",
                "within",
                "random effects",
                "within vs pooled",
                "moves materially",
            ]),
            rows,
        ));
        blocks.push(Block::Note(
            "A sensitivity view: how much each slope moves between estimators. A slope that \
             changes sign or by more than half between pooled and within is driven by \
             differences between entities rather than changes within them."
                .into(),
        ));
    }
    for w in &m.warnings {
        blocks.push(Block::Note(format!("Warning: {w}.")));
    }
    blocks.push(Block::Note(format!(
        "Convention: {}.",
        m.variance_convention
    )));
    Section {
        title: "Model readiness",
        blocks,
    }
}

fn verdict(r: &Report) -> Section {
    let Some(v) = &r.verdict else {
        return Section {
            title: "Verdict",
            blocks: vec![],
        };
    };
    let word = |s: crate::audit::verdict::Status| s.label();
    let rows = v
        .checks
        .iter()
        .map(|c| {
            vec![
                c.check.clone(),
                word(c.status).to_string(),
                c.reason.clone(),
            ]
        })
        .collect();
    Section {
        title: "Verdict",
        blocks: vec![
            Block::Table(strings(&["check", "verdict", "why"]), rows),
            Block::Note(format!("Overall: {}.", word(v.overall))),
        ],
    }
}
