//! Variation and absorption: for every numeric variable, total, between and within standard
//! deviations, the within share of the sum of squares, entities without within variation, and
//! whether entity effects, period effects or both would absorb it (the two-way case solved
//! exactly by the panel core, unbalanced panels included).

use polars::prelude::*;

use super::spread::{most_common, number_codes, spread, spread_blocks, text_blocks};
use super::verdict::{self, counted, level_key, worst, CheckVerdict, LevelKey, Levels, Status};
use super::{own, Check, Context, Pooled};
use crate::core::{in_batches, PanelCore, Values};
use crate::report::layout::{opt, opt_level, strings, Block, Section};
use crate::report::{
    Absorbed, Finding, Report, ToJson, VariationFigures as Figures, VariationLine,
    VARIATION_CONVENTION,
};
use crate::Result;

/// A share of the sum of squares below this counts as no variation at all.
pub const ABSORBED_SHARE: f64 = 1e-10;

/// A model regressor absorbed by fixed effects or not identified (model readiness judges it
/// too).
pub const ABSORBED_REGRESSOR: LevelKey = level_key!("absorbed_regressor", Fail);
/// Variables nearly absorbed by entity effects.
pub const NEARLY_ABSORBED: LevelKey = level_key!("nearly_absorbed", Warn);

/// Variation and absorption.
pub struct Variation;

/// The variation lines of the numeric variables `vars`.
pub(super) fn lines(ctx: &Context, vars: &[String]) -> Result<Vec<VariationLine>> {
    // One typed pass per variable over the panel core's codes, the variables in parallel;
    // each sum runs in row order, so the figures are the same on every run.
    // A few variables at a time, so that memory holds a few columns' values, not all.
    let core = &ctx.core;
    let mut lines: Vec<VariationLine> = Vec::with_capacity(vars.len());
    ctx.items(vars.len());
    in_batches(
        vars,
        |v| {
            let x = Values::of(ctx.df, v)?;
            let q = ctx.pooled(v, &x.view());
            Ok(line(core, v, &x, q, ctx.settings.nearly_absorbed))
        },
        |batch, part| {
            lines.extend(part);
            ctx.done(batch.len());
            Ok(())
        },
    )?;
    Ok(lines)
}

impl Check for Variation {
    fn name(&self) -> &'static str {
        "variation"
    }

    fn run(&self, ctx: &Context) -> Result<Box<dyn Finding>> {
        let mut lines = lines(ctx, &ctx.numeric)?;
        lines.extend(categorical(ctx)?);
        Ok(Box::new(Figures { lines }))
    }

    fn on_cleaned(&self) -> bool {
        true
    }

    fn levels(&self) -> Vec<LevelKey> {
        vec![ABSORBED_REGRESSOR, NEARLY_ABSORBED]
    }

    /// Only the treated variables' lines are computed again; the others' values did not
    /// change.
    fn after_treatment(
        &self,
        ctx: &Context,
        read: &dyn Finding,
        treated: &[String],
    ) -> Result<Box<dyn Finding>> {
        let Some(read) = own::<Figures>(read) else {
            return self.run(ctx);
        };
        let again: Vec<String> = ctx
            .numeric
            .iter()
            .filter(|v| treated.contains(v))
            .cloned()
            .collect();
        let fresh = lines(ctx, &again)?;
        let lines = read
            .lines
            .iter()
            .map(|l| {
                fresh
                    .iter()
                    .find(|f| f.variable == l.variable)
                    .unwrap_or(l)
                    .clone()
            })
            .collect();
        Ok(Box::new(Figures { lines }))
    }

    fn verdict(&self, r: &Report, lv: &Levels) -> Option<CheckVerdict> {
        use Status::*;
        let variation = &r.findings.get::<Figures>()?.lines;
        // A model regressor counts as absorbed only under the effects the model declares. One
        // that no estimator identifies counts only when it varies by entity or period alone
        // (in the panel the model is estimated on); a combination of the other regressors is
        // the model check's finding, not the fixed effects'.
        let estimated = r
            .cleaned
            .as_ref()
            .and_then(|c| c.findings.get::<Figures>())
            .map_or(variation, |f| &f.lines);
        let by_effects = |v: &String| {
            estimated
                .iter()
                .any(|l| l.variable == *v && l.absorbed_by.is_some())
        };
        let absorbed_regressor: Vec<&str> = r
            .model
            .iter()
            .flat_map(|m| {
                m.not_identified_within
                    .iter()
                    .chain(m.not_identified.iter().filter(|v| by_effects(v)))
            })
            .map(String::as_str)
            .collect();
        let nearly: Vec<&str> = variation
            .iter()
            .filter(|v| v.nearly_absorbed)
            .map(|v| v.variable.as_str())
            .collect();
        let absorbed = variation.iter().filter(|v| v.absorbed_by.is_some()).count();
        let mut absorption = Vec::new();
        if !absorbed_regressor.is_empty() {
            absorption.push((
                lv.of(&ABSORBED_REGRESSOR),
                format!(
                    "model regressors absorbed by fixed effects: {}",
                    absorbed_regressor.join(", ")
                ),
            ));
        }
        if !nearly.is_empty() {
            absorption.push((
                lv.of(&NEARLY_ABSORBED),
                format!("nearly absorbed: {}", nearly.join(", ")),
            ));
        }
        let unexamined: Vec<&str> = variation
            .iter()
            .filter(|v| v.not_computable.is_some())
            .map(|v| v.variable.as_str())
            .collect();
        Some(if variation.is_empty() {
            verdict::line(
                "Absorbed by fixed effects",
                NotChecked,
                "no variable besides the keys".into(),
            )
        } else if unexamined.len() == variation.len() {
            verdict::line(
                "Absorbed by fixed effects",
                NotChecked,
                format!(
                    "no variable's variation is computable ({})",
                    unexamined.join(", ")
                ),
            )
        } else if absorption.is_empty() {
            let left_out = match unexamined.is_empty() {
                true => String::new(),
                false => format!("; not computable: {}", unexamined.join(", ")),
            };
            verdict::line(
                "Absorbed by fixed effects",
                Pass,
                format!(
                    "{} absorbed (time-invariant traits or macro series), none nearly{left_out}",
                    counted(absorbed as u64, "variable", "variables")
                ),
            )
        } else {
            worst("Absorbed by fixed effects", absorption)
        })
    }
}

impl Finding for Figures {
    fn entries(&self) -> Vec<(&'static str, &dyn ToJson)> {
        vec![
            ("variation_convention", &VARIATION_CONVENTION),
            ("variation", &self.lines),
        ]
    }

    fn cleaned_entries(&self) -> Vec<(&'static str, &dyn ToJson)> {
        vec![("variation", &self.lines)]
    }

    fn sections(&self, report: &Report) -> Vec<Section> {
        vec![variation(self, report), absorbed(self)]
    }
}

fn variation(read: &Figures, r: &Report) -> Section {
    let mut blocks = Vec::new();
    match r.cleaned.as_ref().and_then(|c| c.findings.get::<Figures>()) {
        Some(c) => {
            blocks.push(Block::Note(
                "The cleaned panel, as handed over (after treatment, balancing and singletons):"
                    .into(),
            ));
            blocks.extend(variation_blocks(&c.lines));
            blocks.extend(spread_blocks(&c.lines));
            blocks.extend(text_blocks(&c.lines));
            blocks.push(Block::Note(
                "The panel as read (after the key steps and accounting rules, before treatment):"
                    .into(),
            ));
            blocks.extend(variation_blocks(&read.lines));
        }
        None => {
            blocks.extend(variation_blocks(&read.lines));
            blocks.extend(spread_blocks(&read.lines));
            blocks.extend(text_blocks(&read.lines));
        }
    }
    Section {
        title: "Variation",
        blocks,
    }
}

fn variation_blocks(lines: &[VariationLine]) -> Vec<Block> {
    let rows: Vec<Vec<String>> = lines
        .iter()
        // Numeric variables: those with figures and those without, said why below.
        .filter(|v| v.sd_total.is_some() || v.not_computable.is_some())
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
    let missing: Vec<String> = lines
        .iter()
        .filter_map(|v| {
            let why = v.not_computable.as_ref()?;
            Some(format!("`{}` ({why})", v.variable))
        })
        .collect();
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
    if !missing.is_empty() {
        blocks.push(Block::Note(format!(
            "Not computable (–): {}.",
            missing.join("; ")
        )));
    }
    blocks
}

fn absorbed(read: &Figures) -> Section {
    let words = |a: Absorbed| match a {
        Absorbed::Entity => "entity effects (no change within any entity)",
        Absorbed::Period => "period effects (no change within any period)",
        Absorbed::EntityPeriod => {
            "entity + period effects together (e.g. age = period - founding year)"
        }
    };
    let mut rows: Vec<Vec<String>> = read
        .lines
        .iter()
        .filter_map(|v| {
            v.absorbed_by
                .map(|a| vec![v.variable.clone(), words(a).to_string()])
        })
        .collect();
    rows.extend(read.lines.iter().filter(|v| v.nearly_absorbed).map(|v| {
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

/// The variation line of one numeric variable; the two-way residual only when neither
/// effect alone absorbs it.
fn line(core: &PanelCore, variable: &str, x: &Values, q: Pooled, nearly: f64) -> VariationLine {
    let (m, sums) = core.moments_and_sums(x);
    let n = m.n as f64;
    let sd = |ss: f64| {
        if n > 1.0 {
            (ss / (n - 1.0)).sqrt()
        } else {
            f64::NAN
        }
    };
    let share = |ss: f64| if m.tss > 0.0 { ss / m.tss } else { 0.0 };
    let (within_share, period_share) = (share(m.wss), share(m.pss));
    // Values near the largest floating-point number overflow their squares' sums: the
    // shares are then not numbers, and would read as no variation at all.
    let overflow = n >= 2.0 && ![m.tss, m.wss, m.pss].iter().all(|s| s.is_finite());
    // Values that differ by less than about 1e-154 have squares below the smallest normal
    // floating-point number: the sum of squares underflows to (nearly) zero, which would read
    // as a constant. Told apart from a constant by one pass, only in that case.
    let underflow = n >= 2.0 && m.tss < f64::MIN_POSITIVE && {
        let mut values = x.view().iter().map(|(_, v)| v);
        let first = values.next().unwrap_or_default();
        values.any(|v| v != first)
    };
    let not_computable = match m.n {
        0 => Some("no values".to_string()),
        1 => Some("a single value".to_string()),
        _ if overflow => Some("values too large to square in floating-point numbers".to_string()),
        _ if underflow => Some(
            "values too close together to square in floating-point numbers (rescale them)"
                .to_string(),
        ),
        _ => None,
    };
    let mut absorbed_by = if not_computable.is_some() {
        None
    } else if within_share < ABSORBED_SHARE {
        Some(Absorbed::Entity)
    } else if period_share < ABSORBED_SHARE {
        Some(Absorbed::Period)
    } else {
        None
    };
    let mut two_way_share = None;
    if not_computable.is_none() && absorbed_by.is_none() {
        let s = share(core.two_way_from(x, &sums));
        two_way_share = finite(s);
        if s < ABSORBED_SHARE {
            absorbed_by = Some(Absorbed::EntityPeriod);
        }
    }
    VariationLine {
        variable: variable.to_string(),
        spread: spread(q),
        text_values: None,
        n: m.n,
        mean: finite(m.mean),
        sd_total: finite(sd(m.tss)),
        sd_between: finite(m.sd_between),
        sd_within: finite(sd(m.wss)),
        within_share: finite(if n > 0.0 && !overflow && !underflow {
            within_share
        } else {
            f64::NAN
        }),
        two_way_share,
        zero_within_entities: m.flat,
        absorbed_by,
        nearly_absorbed: not_computable.is_none() && absorbed_by.is_none() && within_share < nearly,
        not_computable,
    }
}

/// Text and other non-numeric variables: only whether each entity (or each period) holds
/// a single value, which makes the variable's dummies absorbed by those effects. One pass over
/// the sorted panel per variable for entities; periods by the panel core's codes.
pub(super) fn categorical(ctx: &Context) -> Result<Vec<VariationLine>> {
    let others: Vec<&String> = ctx
        .variables
        .iter()
        .filter(|v| !ctx.numeric.contains(v))
        .collect();
    // One column at a time on each core: each compares its whole column, text held as codes
    // by its codes (equal codes, equal text).
    let one = |v: &&String| -> Result<VariationLine> {
        let column = ctx.df.column(v)?;
        let n = column.len() - column.null_count();
        let compared = match crate::core::codes(column)? {
            Some(codes) => Compared::Codes(codes),
            // Number codes declared categorical (an industry code): codes of their own.
            None => match number_codes(column)? {
                Some(codes) => Compared::Codes(codes),
                None => Compared::Text(column.cast(&DataType::String)?),
            },
        };
        let core = &ctx.core;
        let one_value = |group: &[u32], groups: usize| -> Result<bool> {
            Ok(match &compared {
                Compared::Codes(codes) => holds_one_value(group, groups, codes.iter()),
                Compared::Text(text) => holds_one_value(group, groups, text.str()?.iter()),
            })
        };
        let text_values = match &compared {
            Compared::Codes(codes) => most_common(codes, column, &core.starts)?,
            Compared::Text(_) => None,
        };
        // Codes: an entity holds one value when it is not among those whose value changes,
        // counted above; text: its own pass.
        let one_per_entity = match &text_values {
            Some(t) => t.entities_changing == 0,
            None => one_value(&core.entity, core.entities())?,
        };
        let absorbed_by = if n < 2 {
            None
        } else if one_per_entity {
            Some(Absorbed::Entity)
        } else if one_value(&core.period, core.periods.len())? {
            Some(Absorbed::Period)
        } else {
            None
        };
        Ok(VariationLine {
            variable: v.to_string(),
            n: n as u64,
            mean: None,
            sd_total: None,
            sd_between: None,
            sd_within: None,
            within_share: None,
            two_way_share: None,
            zero_within_entities: 0,
            spread: None,
            text_values,
            absorbed_by,
            nearly_absorbed: false,
            not_computable: None,
        })
    };
    let mut lines = Vec::with_capacity(others.len());
    in_batches(&others, one, |_, done| {
        lines.extend(done);
        Ok(())
    })?;
    Ok(lines)
}

/// A non-numeric variable as [`categorical`] compares it: text held as codes by its codes,
/// anything else as text.
enum Compared {
    Codes(UInt32Chunked),
    Text(Column),
}

/// Whether each group holds a single value: the first value seen in each group, compared
/// with the rest (missing values skipped).
fn holds_one_value<T: PartialEq + Copy>(
    group: &[u32],
    groups: usize,
    values: impl Iterator<Item = Option<T>>,
) -> bool {
    let mut first: Vec<Option<T>> = vec![None; groups];
    for (g, value) in group.iter().zip(values) {
        let Some(value) = value else { continue };
        match first[*g as usize] {
            None => first[*g as usize] = Some(value),
            Some(f) if f != value => return false,
            Some(_) => {}
        }
    }
    true
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}
