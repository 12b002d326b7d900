//! Model readiness: for the model declared in `[model]`, the estimation sample and the
//! diagnostics that decide between pooled OLS, fixed effects (within) and random effects —
//! F test for entity effects, Breusch–Pagan LM (Baltagi–Li form when unbalanced), Hausman,
//! Wooldridge's serial-correlation test and Pesaran's CD test — plus how much the slopes move
//! between estimators. Linear algebra by nalgebra; this is a diagnostic, not an estimation
//! report.

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use polars::prelude::*;
use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor, Normal};

use super::{Check, Context};
use crate::report::{ModelReport, ModelTest, Report, Slope, VariationLine};
use crate::Result;

mod linalg;
mod residual_tests;

use linalg::{demean, independent_columns, means, ols, with_intercept};
pub use residual_tests::cd_statistic;
use residual_tests::{pesaran_cd, wooldridge};

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

/// Model readiness.
pub struct Model;

impl Check for Model {
    fn name(&self) -> &'static str {
        "model readiness"
    }

    fn run(&self, ctx: &Context, report: &mut Report) -> Result<()> {
        if let Some(spec) = &ctx.model {
            let model = diagnose(ctx, spec, &report.variation)?;
            report.model = Some(model);
        }
        Ok(())
    }
}

/// The estimation sample as plain vectors, grouped by entity (rows of an entity contiguous).
pub(super) struct Sample {
    pub(super) y: DVector<f64>,
    pub(super) x: DMatrix<f64>,
    pub(super) names: Vec<String>,
    pub(super) declared: usize,
    pub(super) entity: Vec<usize>,
    pub(super) period: Vec<i64>,
    pub(super) sizes: Vec<usize>,
}

fn p_chi2(stat: f64, df: f64) -> Option<f64> {
    ChiSquared::new(df).ok().map(|d| d.sf(stat.max(0.0)))
}

fn diagnose(ctx: &Context, spec: &ModelSpec, variation: &[VariationLine]) -> Result<ModelReport> {
    let (e, p) = (ctx.entity, ctx.period);
    let mut names: Vec<String> = spec.regressors.clone();
    // Unique keys, sorted; the lag (if asked) reads the previous period of the same entity.
    let mut cols = vec![
        col(e),
        col(p),
        col(spec.outcome.as_str())
            .cast(DataType::Float64)
            .alias("__y"),
    ];
    for (i, r) in spec.regressors.iter().enumerate() {
        cols.push(
            col(r.as_str())
                .cast(DataType::Float64)
                .alias(format!("__x{i}")),
        );
    }
    let mut lf = ctx
        .df
        .clone()
        .lazy()
        .select(cols)
        .unique_stable_generic(Some(vec![col(e), col(p)]), UniqueKeepStrategy::First);
    if spec.lagged_outcome {
        let back = col(e)
            .eq(col(e).shift(lit(1)))
            .and(col(p).eq(col(p).shift(lit(1)) + lit(1)));
        let i = names.len();
        lf = lf.with_column(
            when(back)
                .then(col("__y").shift(lit(1)))
                .otherwise(lit(NULL))
                .alias(format!("__x{i}")),
        );
        names.push(format!("lag({}, 1)", spec.outcome));
    }
    let frame = lf.collect()?;
    let mut costs = vec![(
        spec.outcome.clone(),
        frame.column("__y")?.null_count() as u64,
    )];
    for (i, n) in names.iter().enumerate() {
        costs.push((
            n.clone(),
            frame.column(&format!("__x{i}"))?.null_count() as u64,
        ));
    }
    let mut ok = col("__y").is_not_null().and(col("__y").is_finite());
    for i in 0..names.len() {
        let c = col(format!("__x{i}").as_str());
        ok = ok.and(c.clone().is_not_null()).and(c.is_finite());
    }
    let sample = frame.lazy().filter(ok).collect()?;
    let s = extract(&sample, e, p, &names, spec.effects)?;
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
        tests: Vec::new(),
        entity_sd: None,
        idiosyncratic_sd: None,
        entity_share: None,
        variance_convention: "Swamy–Arora variance components (Baltagi–Chang form when unbalanced); \
            idiosyncratic variance from the within residuals, N - n - K df; in the Hausman test the \
            within covariance uses that variance and the random-effects covariance the residual \
            variance of the quasi-demeaned regression, N - K - 1 df"
            .into(),
        slopes: Vec::new(),
        warnings: Vec::new(),
    };
    let k = s.x.ncols();
    if n < 2 || n_rows <= n + k + 1 {
        out.warnings.push(format!(
            "too few rows ({n_rows}) for {n} entities and {k} regressors: no diagnostics computed"
        ));
        return Ok(out);
    }
    // Rank: a regressor that adds nothing after entity demeaning is not identified.
    let xw = demean(&s.x, &s.entity, &s.sizes);
    let keep = independent_columns(&xw);
    for j in (0..k).filter(|j| !keep.contains(j)) {
        if j < s.declared {
            out.warnings.push(format!(
                "`{}` is a linear combination of the entity effects and the other regressors \
                 (rank deficiency): it is left out of every estimator below",
                s.names[j]
            ));
        }
    }
    let x = s.x.select_columns(&keep);
    let xw = xw.select_columns(&keep);
    let kept_names: Vec<String> = keep.iter().map(|j| s.names[*j].clone()).collect();
    let k = x.ncols();
    let declared_kept: Vec<usize> = keep
        .iter()
        .enumerate()
        .filter(|(_, j)| **j < s.declared)
        .map(|(i, _)| i)
        .collect();

    // Pooled OLS with an intercept.
    let xp = with_intercept(&x);
    let Some(b_p) = ols(&xp, &s.y) else {
        out.warnings
            .push("the pooled regression is singular: no diagnostics computed".into());
        return Ok(out);
    };
    let e_p = &s.y - &xp * &b_p;
    let rss_p = e_p.norm_squared();
    // Within.
    let yw = demean(
        &DMatrix::from_column_slice(n_rows, 1, s.y.as_slice()),
        &s.entity,
        &s.sizes,
    )
    .column(0)
    .into_owned();
    let Some(b_w) = ols(&xw, &yw) else {
        out.warnings
            .push("the within regression is singular: no diagnostics computed".into());
        return Ok(out);
    };
    let e_w = &yw - &xw * &b_w;
    let rss_w = e_w.norm_squared();
    let df_w = (n_rows - n - k) as f64;
    let s2_nu = rss_w / df_w;

    // F test for entity effects.
    let f = ((rss_p - rss_w) / (n as f64 - 1.0)) / (rss_w / df_w);
    let p_f = FisherSnedecor::new(n as f64 - 1.0, df_w)
        .ok()
        .map(|d| d.sf(f));
    out.tests.push(ModelTest {
        name: "F test for entity effects".into(),
        statistic: f,
        df: vec![n as f64 - 1.0, df_w],
        p: p_f,
        reading: reading(
            p_f,
            "entity effects matter: pooled OLS would mix them into the error",
            "no evidence of entity effects at 5%: pooled OLS may be adequate",
        ),
    });

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
    out.tests.push(ModelTest {
        name: if s.sizes.iter().all(|t| *t == s.sizes[0]) {
            "Breusch–Pagan LM for entity effects"
        } else {
            "Breusch–Pagan LM for entity effects (Baltagi–Li form)"
        }
        .into(),
        statistic: lm,
        df: vec![1.0],
        p: p_lm,
        reading: reading(
            p_lm,
            "the entity-effect variance is not zero: pooled OLS is not adequate",
            "no evidence of random entity effects at 5%",
        ),
    });
    let honda = scale_i.sqrt() * (a - 1.0);
    let p_h = Normal::new(0.0, 1.0).ok().map(|d| d.sf(honda));
    out.tests.push(ModelTest {
        name: "Honda one-sided test for entity effects".into(),
        statistic: honda,
        df: vec![],
        p: p_h,
        reading: reading(
            p_h,
            "entity effects present (one-sided)",
            "no evidence of entity effects (one-sided) at 5%",
        ),
    });
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
    out.tests.push(ModelTest {
        name: "Breusch–Pagan LM for period effects".into(),
        statistic: lm_t,
        df: vec![1.0],
        p: p_t,
        reading: reading(
            p_t,
            "period effects matter: add period effects",
            "no evidence of period effects at 5%",
        ),
    });
    let p_2 = p_chi2(lm + lm_t, 2.0);
    out.tests.push(ModelTest {
        name: "Breusch–Pagan LM for entity and period effects".into(),
        statistic: lm + lm_t,
        df: vec![2.0],
        p: p_2,
        reading: reading(
            p_2,
            "entity or period effects (or both) matter",
            "no evidence of either effect at 5%",
        ),
    });

    // Swamy–Arora variance components, Baltagi–Chang (1994) for unbalanced panels.
    let (xbar, ybar) = means(&xp, &s.y, &s.entity, &s.sizes);
    let mut xpx = DMatrix::<f64>::zeros(k + 1, k + 1);
    let mut xzzx = DMatrix::<f64>::zeros(k + 1, k + 1);
    let mut xpy = DVector::<f64>::zeros(k + 1);
    for (i, t) in s.sizes.iter().enumerate() {
        let t = *t as f64;
        let xi = xbar.row(i).transpose();
        xpx += t * &xi * xi.transpose();
        xzzx += t * t * &xi * xi.transpose();
        xpy += t * ybar[i] * &xi;
    }
    let mut entity_var = None;
    if let Some(inv) = xpx.clone().try_inverse() {
        let b_b = &inv * &xpy;
        let rss_b: f64 = (0..n)
            .map(|i| s.sizes[i] as f64 * (ybar[i] - (xbar.row(i) * &b_b)[0]).powi(2))
            .sum();
        let denom = nf - (&inv * &xzzx).trace();
        let s2_mu = ((rss_b - (n as f64 - k as f64 - 1.0) * s2_nu) / denom).max(0.0);
        entity_var = Some(s2_mu);
        out.entity_sd = Some(s2_mu.sqrt());
        out.idiosyncratic_sd = Some(s2_nu.sqrt());
        out.entity_share = Some(s2_mu / (s2_mu + s2_nu));
    }

    // Random effects (quasi-demeaning) and the Hausman test.
    let mut b_re = None;
    if let Some(s2_mu) = entity_var {
        let theta: Vec<f64> = s
            .sizes
            .iter()
            .map(|t| 1.0 - (s2_nu / (*t as f64 * s2_mu + s2_nu)).sqrt())
            .collect();
        let mut xs = xp.clone();
        let mut ys = s.y.clone();
        for r in 0..n_rows {
            let i = s.entity[r];
            ys[r] -= theta[i] * ybar[i];
            for c in 0..=k {
                xs[(r, c)] -= theta[i] * xbar[(i, c)];
            }
        }
        if let (Some(b), Some(inv_re), Some(inv_w)) = (
            ols(&xs, &ys),
            (xs.transpose() * &xs).try_inverse(),
            (xw.transpose() * &xw).try_inverse(),
        ) {
            let idx: Vec<usize> = declared_kept.clone();
            let d = DVector::from_iterator(idx.len(), idx.iter().map(|j| b_w[*j] - b[j + 1]));
            let vw = DMatrix::from_fn(idx.len(), idx.len(), |r, c| s2_nu * inv_w[(idx[r], idx[c])]);
            // V_RE from the random-effects regression's own residual variance (N - K - 1 df).
            let e_re = &ys - &xs * &b;
            let s2_re = e_re.norm_squared() / (n_rows as f64 - k as f64 - 1.0);
            let vre = DMatrix::from_fn(idx.len(), idx.len(), |r, c| {
                s2_re * inv_re[(idx[r] + 1, idx[c] + 1)]
            });
            let diff = vw - vre;
            let pd = diff.clone().cholesky().is_some();
            let inv = if pd {
                diff.clone().try_inverse()
            } else {
                diff.clone().pseudo_inverse(1e-12).ok()
            };
            if let Some(inv) = inv {
                let h = (d.transpose() * inv * &d)[0];
                let p_hs = p_chi2(h, idx.len() as f64);
                let reading = if pd {
                    reading(p_hs, "the random-effects assumption is rejected: prefer the within (fixed-effects) estimator", "no evidence against random effects at 5%: they are consistent and more efficient if the assumption holds")
                } else {
                    "the covariance difference is not positive definite: the statistic uses a generalized inverse and is unreliable; read the slope comparison instead".to_string()
                };
                out.tests.push(ModelTest {
                    name: if pd {
                        "Hausman test, within vs random effects"
                    } else {
                        "Hausman test, within vs random effects (difference not positive definite)"
                    }
                    .into(),
                    statistic: h,
                    df: vec![idx.len() as f64],
                    p: p_hs,
                    reading,
                });
            }
            b_re = Some(b);
        }
    }

    // Wooldridge's test for serial correlation in the idiosyncratic errors.
    if let Some(t) = wooldridge(&s, &keep) {
        out.tests.push(t);
    }
    // Pesaran's CD test on the within residuals.
    if n > CD_MAX_ENTITIES {
        out.warnings.push(format!(
            "Pesaran CD test skipped: {n} entities make too many pairs (limit {CD_MAX_ENTITIES})"
        ));
    } else if let Some((t, skipped)) = pesaran_cd(&e_w, &s) {
        if skipped > 0 {
            out.warnings.push(format!("Pesaran CD test: {skipped} entity pairs with fewer than 3 common periods were skipped"));
        }
        out.tests.push(t);
    }

    // Slopes across estimators.
    for (pos, j) in declared_kept.iter().enumerate() {
        let _ = pos;
        let pooled = b_p[j + 1];
        let within = b_w[*j];
        let random = b_re.as_ref().map(|b| b[j + 1]);
        let change = if pooled != 0.0 {
            Some((within - pooled) / pooled.abs() * 100.0)
        } else {
            None
        };
        let material = within.signum() != pooled.signum() || change.is_some_and(|c| c.abs() > 50.0);
        out.slopes.push(Slope {
            variable: kept_names[*j].clone(),
            pooled,
            within,
            random,
            change_within_vs_pooled: change,
            material,
        });
    }
    warnings(variation, spec, &s, &b_w, &kept_names, &mut out);
    Ok(out)
}

pub(super) fn reading(p: Option<f64>, yes: &str, no: &str) -> String {
    match p {
        Some(p) if p < 0.05 => yes.to_string(),
        Some(_) => no.to_string(),
        None => "not computable".to_string(),
    }
}

fn warnings(
    variation: &[VariationLine],
    spec: &ModelSpec,
    s: &Sample,
    b_w: &DVector<f64>,
    names: &[String],
    out: &mut ModelReport,
) {
    let n = s.sizes.len();
    if n < 20 {
        out.warnings.push(format!("only {n} entities: cluster-robust standard errors are unreliable with so few clusters (Cameron & Miller 2015, J. Human Resources 50(2))"));
    } else if n < 50 {
        out.warnings.push(format!("{n} entities: cluster-robust inference may be unreliable with fewer than about 50 clusters (Cameron & Miller 2015, J. Human Resources 50(2))"));
    }
    let mean_t = s.y.len() as f64 / n as f64;
    if spec.lagged_outcome {
        if let Some(j) = names.iter().position(|v| v.starts_with("lag(")) {
            let rho = b_w[j];
            let bias = -(1.0 + rho) / (mean_t - 1.0);
            out.warnings.push(format!(
                "lagged outcome with entity effects and mean T = {mean_t:.1}: the within estimate of its coefficient ({rho:.3}) is biased by about {bias:.3} (Nickell 1981, Econometrica 49(6), approximation -(1 + rho) / (T - 1))"
            ));
        }
    }
    if out.sample_singletons > 0 {
        out.warnings.push(format!(
            "{} entities have a single row in the estimation sample: under entity effects they add nothing but can overstate significance when kept (Correia 2015)",
            out.sample_singletons
        ));
    }
    for v in &spec.regressors {
        if let Some(line) = variation.iter().find(|l| &l.variable == v) {
            if line.absorbed_by.is_some() || line.nearly_absorbed {
                out.warnings.push(format!(
                    "`{v}` is {} (see Absorbed by fixed effects): its within estimate is {}",
                    if line.nearly_absorbed {
                        "nearly absorbed by entity effects"
                    } else {
                        "absorbed by fixed effects"
                    },
                    if line.nearly_absorbed {
                        "imprecise"
                    } else {
                        "not identified"
                    }
                ));
            }
        }
    }
}

fn extract(df: &DataFrame, e: &str, p: &str, names: &[String], effects: Effects) -> Result<Sample> {
    let n_rows = df.height();
    let ents = df.column(e)?.str()?;
    let periods: Vec<i64> = df.column(p)?.i64()?.into_no_null_iter().collect();
    let mut entity = Vec::with_capacity(n_rows);
    let mut sizes: Vec<usize> = Vec::new();
    let mut last: Option<&str> = None;
    for v in ents.iter() {
        if v != last {
            sizes.push(0);
            last = v;
        }
        *sizes.last_mut().expect("pushed") += 1;
        entity.push(sizes.len() - 1);
    }
    let y = DVector::from_iterator(n_rows, df.column("__y")?.f64()?.into_no_null_iter());
    let mut columns: Vec<Vec<f64>> = Vec::new();
    for i in 0..names.len() {
        columns.push(
            df.column(&format!("__x{i}"))?
                .f64()?
                .into_no_null_iter()
                .collect(),
        );
    }
    let mut all_names = names.to_vec();
    if effects == Effects::EntityPeriod {
        let mut distinct: Vec<i64> = periods.clone();
        distinct.sort();
        distinct.dedup();
        for t in distinct.iter().skip(1) {
            columns.push(
                periods
                    .iter()
                    .map(|q| if q == t { 1.0 } else { 0.0 })
                    .collect(),
            );
            all_names.push(format!("period {t}"));
        }
    }
    let x = DMatrix::from_fn(n_rows, columns.len(), |r, c| columns[c][r]);
    Ok(Sample {
        y,
        x,
        names: all_names,
        declared: names.len(),
        entity,
        period: periods,
        sizes,
    })
}
