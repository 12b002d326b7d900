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
                let missing = |v: Option<f64>| match v {
                    Some(v) => num(v, 4),
                    None => "not identified".into(),
                };
                vec![
                    s.variable.clone(),
                    missing(s.pooled),
                    opt(s.pooled_se, 4),
                    missing(s.within),
                    opt(s.random, 4),
                    s.within_minus_pooled_in_se
                        .map_or("–".into(), |z| format!("{z:+.2}")),
                    if s.sign_flip { "yes" } else { "no" }.into(),
                    if s.material { "yes" } else { "no" }.into(),
                ]
            })
            .collect();
        blocks.push(Block::Table(
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
        blocks.push(Block::Note(
            "A sensitivity view: how far each slope moves between estimators, in units of the \
             pooled standard error (meaningful even when a slope is near zero). A slope whose \
             sign flips or that moves by more than 2 pooled SEs between pooled and within is \
             driven by differences between entities rather than changes within them. Each \
             estimator shows only what it identifies: the within estimator does not identify a \
             regressor the declared effects absorb."
                .into(),
        ));
        if !m.hausman_compares.is_empty() {
            blocks.push(Block::Note(format!(
                "The Hausman test compares the regressors both estimators identify: {}.",
                m.hausman_compares.join(", ")
            )));
        }
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

pub(super) fn verdict(r: &Report) -> Section {
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
