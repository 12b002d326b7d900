//! Layout of the closing sections: model readiness, sample construction and cleaning,
//! verdict.

use super::*;

pub(super) fn model(r: &Report) -> Section {
    let Some(m) = &r.model else {
        return Section {
            title: "Model readiness",
            blocks: vec![Block::Note(
                "No model declared: add a [model] section (outcome, regressors) to the rules file."
                    .into(),
            )],
        };
    };
    let effects = if m.effects == "entity" {
        format!("`{}`", r.input.entity)
    } else {
        format!("`{}` and `{}`", r.input.entity, r.input.period)
    };
    // No regressors is a model too: the tests of effects then describe the outcome itself.
    let on = if m.regressors.is_empty() {
        "an intercept alone".to_string()
    } else {
        m.regressors.join(", ")
    };
    let mut blocks = vec![Block::Note(format!(
        "Model: {} on {on}, with fixed effects for {effects}.",
        m.outcome
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
    blocks.push(Block::Pairs(pairs));
    for q in &m.questions {
        blocks.push(Block::Heading(q.question.clone()));
        blocks.push(Block::Note(format!("Reading: {}.", q.answer)));
        if !q.tests.is_empty() {
            blocks.push(tests_table(&q.tests));
            let names: Vec<String> = q
                .tests
                .iter()
                .map(|t| format!("{} ({})", t.textbook_name, t.source))
                .collect();
            blocks.push(Block::Note(format!(
                "In the textbooks, row by row: {}.",
                names.join("; ")
            )));
        }
        match q.key.as_str() {
            "pool_or_not" => blocks.push(error_split(&m.error_split)),
            "fixed_or_random" => blocks.extend(slopes(m)),
            _ => {}
        }
    }
    blocks.extend(collinearity(m));
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

fn tests_table(tests: &[ModelTest]) -> Block {
    let rows = tests
        .iter()
        .map(|t| {
            let df: Vec<String> = t.df.iter().map(|d| num(*d, 0)).collect();
            vec![
                t.label.clone(),
                stat(t.statistic),
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
    Block::Table(
        strings(&["evidence of", "statistic", "df", "p", "what it suggests"]),
        rows,
    )
}

fn error_split(e: &ErrorSplit) -> Block {
    Block::Pairs(vec![
        (
            "SD of the persistent firm differences".into(),
            opt_level(e.persistent_sd),
        ),
        (
            "SD of the transient part, period to period".into(),
            opt_level(e.transient_sd),
        ),
        (
            "share of the unexplained variance that is persistent".into(),
            opt(e.persistent_share, 3),
        ),
    ])
}

fn slopes(m: &ModelReport) -> Vec<Block> {
    let mut out = Vec::new();
    if !m.slopes.is_empty() {
        let rows = m
            .slopes
            .iter()
            .map(|s| {
                let missing = |v: Option<f64>| match v {
                    Some(v) => level(v),
                    None => "not identified".into(),
                };
                vec![
                    s.variable.clone(),
                    missing(s.pooled),
                    opt_level(s.pooled_se),
                    missing(s.within),
                    opt_level(s.random),
                    s.within_minus_pooled_in_se
                        .map_or("–".into(), |z| format!("{z:+.2}")),
                    if s.sign_flip { "yes" } else { "no" }.into(),
                    if s.material { "yes" } else { "no" }.into(),
                ]
            })
            .collect();
        out.push(Block::Table(
            strings(&[
                "slope of",
                "pooled",
                "pooled SE",
                "within",
                "random effects",
                "within − pooled, in pooled SEs",
                "sign flips",
                "moves materially",
            ]),
            rows,
        ));
        out.push(Block::Note(
            "A sensitivity view: how far each slope moves between estimators, in units of the \
             pooled standard error (meaningful even when a slope is near zero). A slope whose \
             sign flips or that moves by more than 2 pooled SEs between pooled and within is \
             driven by differences between entities rather than changes within them. Each \
             estimator shows only what it identifies: the within estimator does not identify a \
             regressor the declared effects absorb."
                .into(),
        ));
        if !m.hausman_compares.is_empty() {
            out.push(Block::Note(format!(
                "The Hausman test compares the regressors both estimators identify: {}.",
                m.hausman_compares.join(", ")
            )));
        }
    }
    out
}

/// How much the regressors move together, when there is one or more.
fn collinearity(m: &ModelReport) -> Vec<Block> {
    if m.collinearity.is_empty() {
        return Vec::new();
    }
    let factor = |v: Option<f64>| v.map_or("–".into(), |v| format!("{v:.2}"));
    let rows = m
        .collinearity
        .iter()
        .map(|c| {
            vec![
                c.variable.clone(),
                factor(c.vif_pooled),
                factor(c.vif_within),
                c.closest.clone().unwrap_or_else(|| "–".into()),
                c.correlation.map_or("–".into(), |r| format!("{r:+.3}")),
            ]
        })
        .collect();
    vec![
        Block::Heading("Do the regressors move together? (collinearity)".into()),
        Block::Table(
            strings(&[
                "regressor",
                "variance inflation, pooled",
                "variance inflation, within",
                "most correlated with",
                "correlation",
            ]),
            rows,
        ),
        Block::Note(
            "Variance inflation factor: 1 / (1 - R²) of the regressor on the other columns of \
             the design (pooled: the intercept, any period dummies and the other regressors; \
             within: the same after removing entity means, the variation a fixed-effects slope \
             rests on). The variance of the regressor's slope is that many times what it would \
             be were the regressor unrelated to the others. Correlation: Pearson, over the \
             estimation sample."
                .into(),
        ),
    ]
}

pub(super) fn sample(r: &Report) -> Section {
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

pub(super) fn cleaning_blocks(r: &Report) -> Vec<Block> {
    let mut blocks = Vec::new();
    if !r.treatment.is_empty() {
        let rows = r
            .treatment
            .iter()
            .map(|t| {
                let cuts = match t.cutoffs.as_slice() {
                    _ if !t.groups.is_empty() => {
                        let fallback = t.group_cutoffs.iter().filter(|g| g.pooled_fallback).count();
                        format!(
                            "by {}: {} groups, {} too small for these percentiles and given the pooled cutoffs (report.json)",
                            t.groups.join(" × "),
                            t.group_cutoffs.len(),
                            fallback
                        )
                    }
                    [c] => format!("{} .. {}", opt_level(c.lower), opt_level(c.upper)),
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
        let replaced = r
            .treatment
            .iter()
            .any(|t| t.method == "winsorize" && t.below + t.above > 0);
        if replaced {
            blocks.push(Block::Note(
                "`build` lists each value winsorizing replaced in the bundle's corrections.csv, \
                 with its old value and its cutoff."
                    .into(),
            ));
        }
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
        let (gaps, singletons) = c
            .findings
            .get::<Coverage>()
            .map_or(("–".to_string(), "–".to_string()), |v| {
                (v.entities_with_gaps.to_string(), v.singletons.to_string())
            });
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
            ("cleaned panel: entities with gaps".into(), gaps),
            ("cleaned panel: singletons".into(), singletons),
        ]));
    }
    blocks
}

pub(super) fn verdict(r: &Report) -> Section {
    let Some(v) = &r.verdict else {
        return Section {
            title: "Verdict",
            blocks: vec![],
        };
    };
    let word = |s: Status| s.label();
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

/// The verdict as the reports open with it: the overall status and one line per check that
/// warns or fails, each with the anchor of its section.
pub(crate) struct Headline {
    /// The overall status word.
    pub(crate) overall: &'static str,
    /// How many checks are at each level, worst first, e.g. "2 fail, 5 warn, 1 pass".
    pub(crate) tally: String,
    /// (status word, check, anchor of its section, reason) for each warning or failing check.
    pub(crate) lines: Vec<(&'static str, String, String, String)>,
}

pub(crate) fn headline(r: &Report) -> Option<Headline> {
    let v = r.verdict.as_ref()?;
    let titles: Vec<&str> = sections(r).iter().map(|s| s.title).collect();
    let mut lines: Vec<_> = v
        .checks
        .iter()
        .filter(|c| c.status >= Status::Warn)
        .map(|c| {
            let anchor = if titles.contains(&c.check.as_str()) {
                slug(&c.check)
            } else {
                "verdict".into()
            };
            (c.status.label(), c.check.clone(), anchor, c.reason.clone())
        })
        .collect();
    // Failures before warnings; within a level, report order.
    lines.sort_by_key(|l| std::cmp::Reverse(l.0 == "fail"));
    let tally = [Status::Fail, Status::Warn, Status::Pass, Status::NotChecked]
        .iter()
        .filter_map(|s| {
            let n = v.checks.iter().filter(|c| c.status == *s).count();
            (n > 0).then(|| format!("{n} {}", s.label()))
        })
        .collect::<Vec<_>>()
        .join(", ");
    Some(Headline {
        overall: v.overall.label(),
        tally,
        lines,
    })
}
