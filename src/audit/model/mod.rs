//! Model readiness: for the model declared in `[model]`, the estimation sample and the
//! diagnostics that decide between pooled OLS, fixed effects (within) and random effects —
//! F test for entity effects, Breusch–Pagan LM (Baltagi–Li form when unbalanced), Hausman,
//! Wooldridge's serial-correlation test and Pesaran's CD test — plus how much the slopes move
//! between estimators. Linear algebra by nalgebra; this is a diagnostic, not an estimation
//! report.

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor, Normal};

use super::verdict::{counted, level_key, line, worst, CheckVerdict, LevelKey, Levels, Status};
use super::Context;
use crate::report::{ErrorSplit, ModelReport, Report, Slope, VariationLine};
use crate::Result;

mod collinearity;
mod gram;
mod linalg;
mod questions;
mod residual_tests;

use questions::Test;
mod sample;
mod thumbs;

use gram::{solve, Design, Means};
use linalg::{identified_gram, weighted_gram};
pub use residual_tests::cd_statistic;
use residual_tests::{pesaran_cd, wooldridge};
use sample::{extract, Sample};
use thumbs::warnings;

/// Effects the user plans.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Effects {
    /// Entity effects.
    Entity,
    /// Entity and period effects (period dummies in every estimator).
    EntityPeriod,
}

/// The declared model, names resolved to columns.
#[derive(Debug, Clone)]
pub struct ModelSpec {
    /// Outcome column.
    pub outcome: String,
    /// Regressor columns.
    pub regressors: Vec<String>,
    /// Add the outcome's one-period lag.
    pub lagged_outcome: bool,
    /// Effects.
    pub effects: Effects,
}

/// Pesaran's CD test is skipped above this many entities (n² / 2 pairs).
const CD_MAX_ENTITIES: usize = 3000;

/// Model rules of thumb that apply.
pub const MODEL_WARNINGS: LevelKey = level_key!("model_warnings", Warn);

/// The model-readiness line of the verdict: regressors no estimator identifies, and the rules
/// of thumb that apply. None without a declared model.
pub fn verdict(r: &Report, lv: &Levels) -> Option<CheckVerdict> {
    use Status::*;
    let m = r.model.as_ref()?;
    let not_identified: Vec<&String> = m
        .not_identified
        .iter()
        .chain(&m.not_identified_within)
        .collect();
    let mut findings = Vec::new();
    for (names, what) in [
        (&m.not_identified, "identified by no estimator"),
        (
            &m.not_identified_within,
            "not identified by the within estimator",
        ),
    ] {
        if !names.is_empty() {
            findings.push((
                lv.of(&super::variation::ABSORBED_REGRESSOR),
                format!("{what}: {}", names.join(", ")),
            ));
        }
    }
    let thumbs = m.warnings.len().saturating_sub(not_identified.len());
    if thumbs > 0 {
        findings.push((
            lv.of(&MODEL_WARNINGS),
            counted(
                thumbs as u64,
                "rule of thumb applies",
                "rules of thumb apply",
            ),
        ));
    }
    Some(if m.questions.iter().all(|q| q.tests.is_empty()) {
        line(
            "Model readiness",
            Fail,
            "no diagnostic could be computed".into(),
        )
    } else if findings.is_empty() {
        line("Model readiness", Pass, "no rule of thumb applies".into())
    } else {
        worst("Model readiness", findings)
    })
}

fn p_chi2(stat: f64, df: f64) -> Option<f64> {
    upper_tail(stat, |x| ChiSquared::new(df).ok().map(|d| d.sf(x.max(0.0))))
}

/// A p-value from a distribution's survival function, or none when the statistic or the
/// result is not a finite number (a degenerate sample: zero variance, no degrees of freedom).
/// The distribution library panics on NaN arguments; they never reach it.
pub(crate) fn upper_tail(stat: f64, sf: impl FnOnce(f64) -> Option<f64>) -> Option<f64> {
    if !stat.is_finite() {
        return None;
    }
    sf(stat).filter(|p| p.is_finite())
}

/// Model readiness of the declared model on `ctx`'s panel, given the variation lines of that
/// same panel (at least those of the model's variables); none without a model.
pub fn readiness(ctx: &Context, variation: &[VariationLine]) -> Result<Option<ModelReport>> {
    ctx.model
        .as_ref()
        .map(|spec| diagnose(ctx, spec, variation))
        .transpose()
}

fn diagnose(ctx: &Context, spec: &ModelSpec, variation: &[VariationLine]) -> Result<ModelReport> {
    let mut names: Vec<String> = spec.regressors.clone();
    if spec.lagged_outcome {
        names.push(format!("lag({}, 1)", spec.outcome));
    }
    let (s, costs) = extract(ctx, spec, &names)?;
    let n_rows = s.y.len();
    let n = s.sizes.len();
    let mut out = ModelReport {
        outcome: spec.outcome.clone(),
        regressors: names.clone(),
        effects: match spec.effects {
            Effects::Entity => "entity".into(),
            Effects::EntityPeriod => "entity+period".into(),
        },
        sample_rows: n_rows as u64,
        sample_entities: n as u64,
        cost: costs
            .into_iter()
            .map(|(variable, rows)| crate::report::VariableCost { variable, rows })
            .collect(),
        sample_singletons: s.sizes.iter().filter(|t| **t == 1).count() as u64,
        questions: questions::group(Vec::new(), false),
        error_split: Default::default(),
        variance_convention: "period effects, when declared, are period dummies in every \
            estimator; Swamy–Arora variance components (Baltagi–Chang form when unbalanced) from \
            the between regression on the pooled columns that vary between entities; \
            idiosyncratic variance from the within residuals, N - n - K df (K: regressors and \
            period dummies the within estimator identifies); in the Hausman test the within \
            covariance uses that variance and the random-effects covariance the residual variance \
            of the quasi-demeaned regression, N - K - 1 df, over the regressors both estimators \
            identify; a slope moves materially when its sign flips or the within slope lies more \
            than 2 conventional pooled standard errors from the pooled slope"
            .into(),
        slopes: Vec::new(),
        not_identified: Vec::new(),
        not_identified_within: Vec::new(),
        hausman_compares: Vec::new(),
        collinearity: Vec::new(),
        warnings: Vec::new(),
    };
    let d = s.declared;
    let k_all = s.columns();
    if n < 2 || n_rows <= n + k_all + 1 {
        out.warnings.push(s.too_few(&out.cost));
        return Ok(out);
    }
    // Values whose squares summed over the sample pass the largest floating-point number
    // make every cross product infinite; values all below about 1e-154 (not all zero) have
    // squares below the smallest normal one, and their cross products vanish. Either way the
    // regressor would read as not identified.
    let too_large = |v: f64| !(v * v * n_rows as f64).is_finite();
    let too_small = |v: f64| v > 0.0 && v * v < f64::MIN_POSITIVE;
    let scales: [(&dyn Fn(f64) -> bool, &str); 2] = [
        (&too_large, "too large to square and sum"),
        (&too_small, "too small to square"),
    ];
    for (beyond, what) in scales {
        let named: Vec<&str> = std::iter::once((s.y.amax(), spec.outcome.as_str()))
            .chain((0..d).map(|j| (s.x.column(j).amax(), s.names[j].as_str())))
            .filter(|(m, _)| beyond(*m))
            .map(|(_, name)| name)
            .collect();
        if !named.is_empty() {
            out.warnings.push(format!(
                "not computable: the values of {} are {what} in floating-point numbers, so no \
                 diagnostic was computed (rescale them, e.g. to millions or millionths)",
                named.join(", ")
            ));
            return Ok(out);
        }
    }
    // An outcome that takes one value leaves nothing to explain: every residual would be
    // rounding noise, and the tests would read it as findings.
    if s.y.iter().all(|v| *v == s.y[0]) {
        out.warnings.push(format!(
            "not computable: the outcome `{}` takes a single value in the estimation sample, \
             so there is nothing to explain and no diagnostic was computed",
            spec.outcome
        ));
        return Ok(out);
    }
    let dummies: Vec<usize> = (d..k_all).collect();

    // What each estimator identifies. Pooled OLS and random effects: the intercept, the period
    // dummies, then the declared regressors, each kept if it adds to the rank (time-invariant
    // regressors are kept). Within: the same after removing entity means, period dummies first,
    // so that a regressor spanned by entity + period effects (experience rising by one a year
    // for everyone) is the one found not identified. From cross products (`gram.rs`): the
    // designs themselves, dummies included, are never formed.
    let means = Means::of(&s);
    let (zero, one) = (vec![0.0; n], vec![1.0; n]);
    let pooled_design = Design {
        s: &s,
        means: &means,
        theta: &zero,
        intercept: true,
    };
    let within_design = Design {
        s: &s,
        means: &means,
        theta: &one,
        intercept: false,
    };
    let pooled_gram = pooled_design.gram();
    let order_p: Vec<usize> = std::iter::once(0)
        .chain(dummies.iter().map(|j| j + 1))
        .chain((0..d).map(|j| j + 1))
        .collect();
    let pooled_cols = identified_gram(&pooled_gram.g, &order_p);
    let pooled_keep: Vec<usize> = pooled_cols
        .iter()
        .filter(|c| **c > 0)
        .map(|c| c - 1)
        .collect();
    let within_gram = within_design.gram();
    let order_w: Vec<usize> = dummies.iter().copied().chain(0..d).collect();
    let within_keep: Vec<usize> = identified_gram(&within_gram.g, &order_w)
        .into_iter()
        .filter(|j| pooled_keep.contains(j))
        .collect();
    for j in 0..d {
        if !pooled_keep.contains(&j) {
            out.not_identified.push(s.names[j].clone());
        } else if !within_keep.contains(&j) {
            out.not_identified_within.push(s.names[j].clone());
        }
    }

    // Pooled OLS with an intercept (and the period dummies).
    let (gp, cp) = pooled_gram.select(&pooled_cols);
    let k_p = pooled_cols.len();
    let Some(b_p) = solve(&gp, &cp) else {
        out.warnings
            .push("not computable: the pooled regression is singular".into());
        return Ok(out);
    };
    let e_p = pooled_design.residuals(&pooled_cols, &b_p);
    let rss_p = e_p.norm_squared();
    // The regressors fitting the outcome exactly leave residuals of rounding noise alone.
    let mean_y = s.y.mean();
    let tss = s.y.iter().map(|v| (v - mean_y).powi(2)).sum::<f64>();
    if rss_p <= EXACT_FIT * tss {
        out.warnings.push(format!(
            "not computable: the regressors (with the intercept and any period dummies) fit \
             the outcome `{}` exactly, so the residuals are rounding noise and no diagnostic \
             was computed",
            spec.outcome
        ));
        return Ok(out);
    }
    let se_p: Vec<f64> = match gp.clone().try_inverse() {
        Some(inv) => (0..k_p)
            .map(|c| (rss_p / (n_rows - k_p) as f64 * inv[(c, c)]).sqrt())
            .collect(),
        None => vec![f64::NAN; k_p],
    };
    // Within: entity dummies, by demeaning.
    let (gw, cw) = within_gram.select(&within_keep);
    let k_w = within_keep.len();
    let b_w = if k_w == 0 {
        DVector::zeros(0)
    } else {
        match solve(&gw, &cw) {
            Some(b) => b,
            None => {
                out.warnings
                    .push("not computable: the within regression is singular".into());
                return Ok(out);
            }
        }
    };
    out.collinearity = collinearity::lines(&s.names[..d], &gp, &pooled_cols, &gw, &within_keep);
    let e_w = within_design.residuals(&within_keep, &b_w);
    let rss_w = e_w.norm_squared();
    let df_w = (n_rows - n - k_w) as f64;
    let s2_nu = rss_w / df_w;

    // F test for entity effects: pooled against within, on the rank each model has.
    let df_f = (n + k_w) as f64 - k_p as f64;
    let f = ((rss_p - rss_w) / df_f) / (rss_w / df_w);
    let p_f = upper_tail(f, |x| FisherSnedecor::new(df_f, df_w).ok().map(|d| d.sf(x)));
    let mut tests = vec![Test::EntityIntercepts.result(
        None,
        f,
        vec![df_f, df_w],
        p_f,
        reading(
            p_f,
            "entity effects matter: pooled OLS would mix them into the error",
            "no evidence of entity effects at 5%: pooled OLS may be adequate",
        ),
    )];
    // Breusch–Pagan LM (Baltagi–Li for unbalanced panels), Honda, period and two-way forms.
    let nf = n_rows as f64;
    let sum_e2 = rss_p;
    let mut by_entity = vec![0.0; n];
    for (r, ent) in s.entity.iter().enumerate() {
        by_entity[*ent] += e_p[r];
    }
    let a = by_entity.iter().map(|v| v * v).sum::<f64>() / sum_e2;
    let sum_t2: f64 = s.sizes.iter().map(|t| (*t as f64).powi(2)).sum();
    let scale_i = nf * nf / (2.0 * (sum_t2 - nf));
    let lm = scale_i * (a - 1.0).powi(2);
    let p_lm = p_chi2(lm, 1.0);
    let balanced = s.sizes.iter().all(|t| *t == s.sizes[0]);
    tests.push(Test::EntityVariance.result(
        (!balanced).then_some("Baltagi–Li form"),
        lm,
        vec![1.0],
        p_lm,
        reading(
            p_lm,
            "the entity-effect variance is not zero: pooled OLS is not adequate",
            "no evidence of random entity effects at 5%",
        ),
    ));
    let honda = scale_i.sqrt() * (a - 1.0);
    let p_h = upper_tail(honda, |x| Normal::new(0.0, 1.0).ok().map(|d| d.sf(x)));
    tests.push(Test::EntityVarianceOneSided.result(
        None,
        honda,
        vec![],
        p_h,
        reading(
            p_h,
            "entity effects present (one-sided)",
            "no evidence of entity effects (one-sided) at 5%",
        ),
    ));
    let mut by_period: BTreeMap<i64, (f64, f64)> = BTreeMap::new();
    for (r, t) in s.period.iter().enumerate() {
        let slot = by_period.entry(*t).or_insert((0.0, 0.0));
        slot.0 += e_p[r];
        slot.1 += 1.0;
    }
    let b = by_period.values().map(|(v, _)| v * v).sum::<f64>() / sum_e2;
    let sum_n2: f64 = by_period.values().map(|(_, c)| c * c).sum();
    let lm_t = nf * nf / (2.0 * (sum_n2 - nf)) * (b - 1.0).powi(2);
    let p_t = p_chi2(lm_t, 1.0);
    tests.push(Test::PeriodVariance.result(
        None,
        lm_t,
        vec![1.0],
        p_t,
        reading(
            p_t,
            "period effects matter: add period effects",
            "no evidence of period effects at 5%",
        ),
    ));
    let p_2 = p_chi2(lm + lm_t, 2.0);
    tests.push(Test::EitherVariance.result(
        None,
        lm + lm_t,
        vec![2.0],
        p_2,
        reading(
            p_2,
            "entity or period effects (or both) matter",
            "no evidence of either effect at 5%",
        ),
    ));

    // Swamy–Arora variance components, Baltagi–Chang (1994) for unbalanced panels, from the
    // between regression on the pooled columns that vary between entities (with period
    // dummies in a balanced panel, their entity means are all alike and drop out).
    // Entity means of the pooled columns: 1 for the intercept, 1 / T_i in each of the
    // entity's periods for a dummy.
    let mut xbar = DMatrix::<f64>::zeros(n, k_p);
    for (p, c) in pooled_cols.iter().enumerate() {
        match *c {
            0 => xbar.column_mut(p).fill(1.0),
            c if c <= d => xbar.set_column(p, &means.x.column(c - 1)),
            _ => {}
        }
    }
    let place: BTreeMap<usize, usize> = pooled_cols
        .iter()
        .enumerate()
        .filter(|(_, c)| **c > d)
        .map(|(p, c)| (c - d, p))
        .collect();
    for (i, start, t) in s.spans() {
        for r in start..start + t {
            if let Some(p) = place.get(&s.slot[r]) {
                xbar[(i, *p)] += 1.0 / t as f64;
            }
        }
    }
    let ybar = &means.y;
    let size = |i: usize| s.sizes[i] as f64;
    let between_cols = identified_gram(&weighted_gram(&xbar, size), &(0..k_p).collect::<Vec<_>>());
    let xb = xbar.select_columns(&between_cols);
    let k_b = xb.ncols();
    let xpx = weighted_gram(&xb, size);
    let xzzx = weighted_gram(&xb, |i| size(i) * size(i));
    let xpy = DVector::<f64>::from_fn(k_b, |c, _| {
        (0..n).map(|i| size(i) * ybar[i] * xb[(i, c)]).sum()
    });
    let mut entity_var = None;
    if n > k_b {
        if let Some(inv) = xpx.clone().try_inverse() {
            let b_b = &inv * &xpy;
            let rss_b: f64 = (0..n)
                .map(|i| s.sizes[i] as f64 * (ybar[i] - (xb.row(i) * &b_b)[0]).powi(2))
                .sum();
            let denom = nf - (&inv * &xzzx).trace();
            let s2_mu = ((rss_b - (n - k_b) as f64 * s2_nu) / denom).max(0.0);
            if s2_mu.is_finite() && s2_nu.is_finite() && s2_mu + s2_nu > 0.0 {
                entity_var = Some(s2_mu);
                out.error_split = ErrorSplit {
                    persistent_sd: Some(s2_mu.sqrt()),
                    transient_sd: Some(s2_nu.sqrt()),
                    persistent_share: Some(s2_mu / (s2_mu + s2_nu)),
                };
            }
        }
    }
    if entity_var.is_none() {
        out.warnings.push(
            "not computable: the variance components (the between regression has no degrees \
             of freedom left or a zero error variance), so no random-effects estimate and no \
             Hausman test"
                .into(),
        );
    }

    // Random effects (quasi-demeaning of the pooled design) and the Hausman test on the
    // regressors both estimators identify.
    let mut b_re = None;
    let mut hausman_unreliable = false;
    if let Some(s2_mu) = entity_var {
        let theta: Vec<f64> = s
            .sizes
            .iter()
            .map(|t| 1.0 - (s2_nu / (*t as f64 * s2_mu + s2_nu)).sqrt())
            .collect();
        let random = Design {
            s: &s,
            means: &means,
            theta: &theta,
            intercept: true,
        };
        let (gre, cre) = random.gram().select(&pooled_cols);
        if let (Some(b), Some(inv_re)) = (solve(&gre, &cre), gre.clone().try_inverse()) {
            let both: Vec<usize> = (0..d).filter(|j| within_keep.contains(j)).collect();
            let inv_w = gw.clone().try_inverse();
            if both.is_empty() {
                out.warnings.push(
                    "not computable: the Hausman test, since no declared regressor is \
                     identified by both the within and the random-effects estimator"
                        .into(),
                );
            } else if let Some(inv_w) = inv_w {
                let wpos = |j: usize| within_keep.iter().position(|c| *c == j).expect("kept");
                let ppos = |j: usize| pooled_cols.iter().position(|c| *c == j + 1).expect("kept");
                let m = both.len();
                let dvec = DVector::from_fn(m, |r, _| b_w[wpos(both[r])] - b[ppos(both[r])]);
                let vw =
                    DMatrix::from_fn(m, m, |r, c| s2_nu * inv_w[(wpos(both[r]), wpos(both[c]))]);
                // V_RE from the random-effects regression's own residual variance.
                let e_re = random.residuals(&pooled_cols, &b);
                let s2_re = e_re.norm_squared() / (n_rows - k_p) as f64;
                let vre =
                    DMatrix::from_fn(m, m, |r, c| s2_re * inv_re[(ppos(both[r]), ppos(both[c]))]);
                let diff = vw - vre;
                let pd = diff.clone().cholesky().is_some();
                let inv = if pd {
                    diff.clone().try_inverse()
                } else {
                    diff.clone().pseudo_inverse(1e-12).ok()
                };
                out.hausman_compares = both.iter().map(|j| s.names[*j].clone()).collect();
                if let Some(inv) = inv {
                    let h = (dvec.transpose() * inv * &dvec)[0];
                    let p_hs = p_chi2(h, m as f64);
                    let reading = if pd {
                        reading(p_hs, "the random-effects assumption is rejected: prefer the within (fixed-effects) estimator", "no evidence against random effects at 5%: they are consistent and more efficient if the assumption holds")
                    } else {
                        "the covariance difference is not positive definite: the statistic uses a generalized inverse and is unreliable; read the slope comparison instead".to_string()
                    };
                    hausman_unreliable = !pd;
                    tests.push(Test::FixedVsRandom.result(
                        (!pd).then_some("difference not positive definite"),
                        h,
                        vec![m as f64],
                        p_hs,
                        reading,
                    ));
                }
            }
            b_re = Some(b);
        }
    }
    // Wooldridge's test for serial correlation in the idiosyncratic errors.
    match wooldridge(&s, &within_keep) {
        Ok(t) => tests.push(t),
        Err(why) => out.warnings.push(format!(
            "not computable: the Wooldridge test for serial correlation, since {why}"
        )),
    }
    // Pesaran's CD test on the within residuals.
    if n > CD_MAX_ENTITIES {
        out.warnings.push(format!(
            "Pesaran CD test skipped: {n} entities make too many pairs (limit {CD_MAX_ENTITIES})"
        ));
    } else {
        match pesaran_cd(&e_w, &s) {
            Ok((t, skipped)) => {
                if skipped > 0 {
                    out.warnings.push(format!("Pesaran CD test: {skipped} entity pairs with fewer than 3 common periods were skipped"));
                }
                tests.push(t);
            }
            Err(why) => out
                .warnings
                .push(format!("not computable: the Pesaran CD test, since {why}")),
        }
    }

    // Slopes across estimators, each where the estimator identifies it.
    for j in 0..d {
        let ppos = pooled_cols.iter().position(|c| *c == j + 1);
        let pooled = ppos.map(|p| b_p[p]);
        let pooled_se = ppos.map(|p| se_p[p]).filter(|v| v.is_finite());
        let within = within_keep.iter().position(|c| *c == j).map(|p| b_w[p]);
        let random = b_re.as_ref().and_then(|b| ppos.map(|p| b[p]));
        let shift = match (pooled, within, pooled_se) {
            (Some(a), Some(b), Some(se)) if se > 0.0 => Some((b - a) / se),
            _ => None,
        };
        let sign_flip = matches!((pooled, within), (Some(a), Some(b)) if a * b < 0.0);
        out.slopes.push(Slope {
            variable: s.names[j].clone(),
            pooled,
            pooled_se,
            within,
            random,
            within_minus_pooled_in_se: shift,
            sign_flip,
            material: sign_flip || shift.is_some_and(|z| z.abs() > MATERIAL_SE),
        });
    }
    out.questions = questions::group(tests, hausman_unreliable);
    warnings(variation, spec, &s, &b_w, &within_keep, &mut out);
    Ok(out)
}

/// A pooled residual sum of squares at or below this share of the outcome's total sum of
/// squares is an exact fit: far below any real residual variation, far above rounding (about
/// N · 1e-32 of it).
const EXACT_FIT: f64 = 1e-20;

/// A within slope more than this many pooled standard errors from the pooled slope "moves
/// materially" (common practice: about two standard errors).
const MATERIAL_SE: f64 = 2.0;

pub(super) fn reading(p: Option<f64>, yes: &str, no: &str) -> String {
    match p {
        Some(p) if p < 0.05 => yes.to_string(),
        Some(_) => no.to_string(),
        None => "not computable (the statistic is not a finite number)".to_string(),
    }
}
