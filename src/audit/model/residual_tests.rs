//! Tests on the residuals: Wooldridge's serial-correlation test and Pesaran's CD test.

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use statrs::distribution::{ContinuousCDF, FisherSnedecor, Normal};

use super::linalg::ols;
use super::questions::Test;
use super::{reading, Sample};
use crate::report::ModelTest;

/// Wooldridge (2002, ch. 10) as in Drukker (2003): first differences within entity across
/// consecutive periods only; pooled OLS of dy on dX without intercept; regress the residual
/// on its own lag (consecutive periods); cluster-robust (by entity) Wald test that the
/// coefficient is -0.5, F(1, G - 1).
pub(super) fn wooldridge(s: &Sample, keep: &[usize]) -> Option<ModelTest> {
    let declared: Vec<usize> = keep.iter().copied().filter(|j| *j < s.declared).collect();
    let mut dy = Vec::new();
    let mut dx: Vec<Vec<f64>> = Vec::new();
    let mut who: Vec<(usize, i64)> = Vec::new();
    for r in 1..s.y.len() {
        if s.entity[r] == s.entity[r - 1] && s.period[r] == s.period[r - 1] + 1 {
            dy.push(s.y[r] - s.y[r - 1]);
            dx.push(
                declared
                    .iter()
                    .map(|j| s.x[(r, *j)] - s.x[(r - 1, *j)])
                    .collect(),
            );
            who.push((s.entity[r], s.period[r]));
        }
    }
    let m = dy.len();
    if m < declared.len() + 3 || declared.is_empty() {
        return None;
    }
    let x = DMatrix::from_fn(m, declared.len(), |r, c| dx[r][c]);
    let y = DVector::from_vec(dy);
    let b = ols(&x, &y)?;
    let u = &y - &x * b;
    // Residual on its lag, consecutive periods of the same entity only.
    let mut pairs: Vec<(usize, f64, f64)> = Vec::new();
    for r in 1..m {
        if who[r].0 == who[r - 1].0 && who[r].1 == who[r - 1].1 + 1 {
            pairs.push((who[r].0, u[r - 1], u[r]));
        }
    }
    if pairs.len() < 3 {
        return None;
    }
    let sxx: f64 = pairs.iter().map(|(_, x, _)| x * x).sum();
    let rho = pairs.iter().map(|(_, x, y)| x * y).sum::<f64>() / sxx;
    let mut score: BTreeMap<usize, f64> = BTreeMap::new();
    for (g, x, y) in &pairs {
        *score.entry(*g).or_insert(0.0) += x * (y - rho * x);
    }
    let g = score.len() as f64;
    if g < 2.0 {
        return None;
    }
    // Cluster-robust variance with the usual small-sample factor G / (G - 1) (one regressor).
    let v = g / (g - 1.0) * score.values().map(|s| s * s).sum::<f64>() / (sxx * sxx);
    let f = (rho + 0.5).powi(2) / v;
    let p = super::upper_tail(f, |x| {
        FisherSnedecor::new(1.0, g - 1.0).ok().map(|d| d.sf(x))
    });
    Some(Test::SerialCorrelation.result(
        None,
        f,
        vec![1.0, g - 1.0],
        p,
        reading(
            p,
            "serial correlation in the idiosyncratic errors: use standard errors clustered by entity",
            "no evidence of first-order serial correlation at 5%",
        ),
    ))
}

/// Pesaran (2004) CD on the within residuals: for each pair with at least 3 common periods,
/// the Pearson correlation over those periods; CD = sqrt(2 / (n (n - 1))) Σ sqrt(T_ij) ρ_ij.
/// Returns the test and the pairs skipped.
pub(super) fn pesaran_cd(resid: &DVector<f64>, s: &Sample) -> Option<(ModelTest, u64)> {
    let n = s.sizes.len();
    let mut rows: Vec<BTreeMap<i64, f64>> = vec![BTreeMap::new(); n];
    for r in 0..resid.len() {
        rows[s.entity[r]].insert(s.period[r], resid[r]);
    }
    let mut total = 0.0;
    let mut skipped = 0u64;
    for i in 0..n {
        for j in i + 1..n {
            let common: Vec<(f64, f64)> = rows[i]
                .iter()
                .filter_map(|(t, a)| rows[j].get(t).map(|b| (*a, *b)))
                .collect();
            let t = common.len();
            if t < 3 {
                skipped += 1;
                continue;
            }
            let (ma, mb) = (
                common.iter().map(|c| c.0).sum::<f64>() / t as f64,
                common.iter().map(|c| c.1).sum::<f64>() / t as f64,
            );
            let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
            for (a, b) in &common {
                sab += (a - ma) * (b - mb);
                saa += (a - ma).powi(2);
                sbb += (b - mb).powi(2);
            }
            if saa > 0.0 && sbb > 0.0 {
                total += (t as f64).sqrt() * sab / (saa * sbb).sqrt();
            }
        }
    }
    let cd = (2.0 / (n as f64 * (n as f64 - 1.0))).sqrt() * total;
    let p = super::upper_tail(cd.abs(), |x| {
        Normal::new(0.0, 1.0).ok().map(|d| 2.0 * d.sf(x))
    });
    Some((
        Test::CrossEntityCorrelation.result(
            Some("on the within residuals"),
            cd,
            vec![],
            p,
            reading(
                p,
                "the residuals are correlated across entities: consider period effects or standard errors robust to cross-sectional dependence",
                "no evidence of cross-sectional dependence at 5%",
            ),
        ),
        skipped,
    ))
}

/// The Pearson-correlation CD statistic for a residual matrix given by entity and period
/// (exposed for the hand-worked test).
pub fn cd_statistic(series: &[Vec<Option<f64>>]) -> f64 {
    let mut entity = Vec::new();
    let mut period = Vec::new();
    let mut values = Vec::new();
    let mut sizes = Vec::new();
    for (i, s) in series.iter().enumerate() {
        let mut n = 0;
        for (t, v) in s.iter().enumerate() {
            if let Some(v) = v {
                entity.push(i);
                period.push(t as i64);
                values.push(*v);
                n += 1;
            }
        }
        sizes.push(n);
    }
    let sample = Sample {
        y: DVector::zeros(values.len()),
        x: DMatrix::zeros(values.len(), 0),
        names: Vec::new(),
        declared: 0,
        entity,
        period,
        sizes,
    };
    pesaran_cd(&DVector::from_vec(values), &sample).map_or(f64::NAN, |(t, _)| t.statistic)
}
