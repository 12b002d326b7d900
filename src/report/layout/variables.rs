//! Layout of the variable sections: variation, absorption, missing values, outliers and
//! unit slips, accounting rules, derived variables.

use super::*;

pub(super) fn variation(r: &Report) -> Section {
    let mut blocks = Vec::new();
    match &r.cleaned {
        Some(c) => {
            blocks.push(Block::Note(
                "The cleaned panel, as handed over (after treatment, balancing and singletons):"
                    .into(),
            ));
            blocks.extend(variation_blocks(&c.variation));
            blocks.push(Block::Note(
                "The panel as read (after the key steps and accounting rules, before treatment):"
                    .into(),
            ));
            blocks.extend(variation_blocks(&r.variation));
        }
        None => blocks.extend(variation_blocks(&r.variation)),
    }
    Section {
        title: "Variation",
        blocks,
    }
}

fn variation_blocks(lines: &[VariationLine]) -> Vec<Block> {
    let rows: Vec<Vec<String>> = lines
        .iter()
        .filter(|v| v.sd_total.is_some())
        .map(|v| {
            vec![
                v.variable.clone(),
                v.n.to_string(),
                opt_level(v.mean),
                opt_level(v.sd_total),
                opt_level(v.sd_between),
                opt_level(v.sd_within),
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
    blocks
}

pub(super) fn absorbed(r: &Report) -> Section {
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

pub(super) fn missing(r: &Report) -> Section {
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

pub(super) fn outliers(r: &Report) -> Section {
    let rows: Vec<Vec<String>> = r
        .outliers
        .iter()
        .map(|o| {
            vec![
                o.variable.clone(),
                opt_level(o.lower),
                opt_level(o.upper),
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
            match by {
                Some(CutoffGroups::Period) => ", computed per period (not listed)".to_string(),
                Some(CutoffGroups::Groups) => format!(
                    ", computed per group of {} (not listed); a group with fewer values than \
                     1 / (the smaller tail), or a row without a group, takes the pooled cutoffs",
                    r.outliers
                        .first()
                        .map(|o| o.groups.join(" × "))
                        .unwrap_or_default()
                ),
                _ => " over all rows".to_string(),
            }
        )));
        if by == Some(CutoffGroups::Groups) {
            let fell: Vec<String> = r
                .outliers
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
        } else if r.outliers.iter().any(|o| o.small_groups) {
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

pub(super) fn factor(f: f64) -> String {
    if f >= 1.0 {
        format!("x {}", f as u64)
    } else {
        format!("/ {}", (1.0 / f).round() as u64)
    }
}

pub(super) fn accounting(r: &Report) -> Section {
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

pub(super) fn derived(r: &Report) -> Section {
    let rows = r
        .derived
        .iter()
        .map(|d| {
            vec![
                d.name.clone(),
                if d.label.is_empty() {
                    "–".into()
                } else {
                    d.label.clone()
                },
                d.non_null.to_string(),
                d.nulls.to_string(),
                null_breakdown(d),
            ]
        })
        .collect();
    let mut blocks = vec![Block::Table(
        strings(&[
            "derived variable",
            "label (from the rules)",
            "with a value",
            "null",
            "why null",
        ]),
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
