//! Tests on the residuals: Wooldridge's serial-correlation test and Pesaran's CD test.

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use statrs::distribution::{ContinuousCDF, FisherSnedecor, Normal};

use super::questions::Test;
use super::{reading, Sample};
use crate::report::ModelTest;

/// Wooldridge (2002, ch. 10) as in Drukker (2003): first differences within entity across
/// consecutive periods only; pooled OLS of dy on dX without intercept; regress the residual
/// on its own lag (consecutive periods); cluster-robust (by entity) Wald test that the
/// coefficient is -0.5, F(1, G - 1). With no regressor the differences of the outcome are
/// the residuals. Why it is not computable, when it is not.
pub(super) fn wooldridge(s: &Sample, keep: &[usize]) -> Result<ModelTest, String> {
    let declared: Vec<usize> = keep.iter().copied().filter(|j| *j < s.declared).collect();
    let k = declared.len();
    // Rows whose entity has the period before: one first difference each. A pair of
    // residuals is two such rows in a row (the same entity's consecutive differences).
    let differenced =
        |r: usize| r > 0 && s.entity[r] == s.entity[r - 1] && s.period[r] == s.period[r - 1] + 1;
    let paired = |r: usize| differenced(r) && differenced(r - 1);
    let diff = |r: usize, dx: &mut [f64]| {
        for (c, j) in declared.iter().enumerate() {
            dx[c] = s.x[(r, *j)] - s.x[(r - 1, *j)];
        }
        s.y[r] - s.y[r - 1]
    };
    // Pooled OLS of the differences, without intercept, from their cross products: read a
    // row at a time, as are the residuals below (nothing of the sample's length is made).
    let mut dx = vec![0.0; k];
    let (mut g, mut c, mut m) = (DMatrix::<f64>::zeros(k, k), DVector::<f64>::zeros(k), 0);
    // Summed a block of rows at a time, as the estimators' cross products are.
    let (mut g_part, mut c_part) = (g.clone(), c.clone());
    for r in (1..s.y.len()).filter(|r| differenced(*r)) {
        let dy = diff(r, &mut dx);
        m += 1;
        for a in 0..k {
            c_part[a] += dx[a] * dy;
            for b in 0..=a {
                g_part[(a, b)] += dx[a] * dx[b];
            }
        }
        if m % super::gram::BLOCK == 0 {
            g += &g_part;
            c += &c_part;
            g_part.fill(0.0);
            c_part.fill(0.0);
        }
    }
    g += &g_part;
    c += &c_part;
    if m < k + 3 {
        return Err(format!(
            "only {m} first differences over consecutive periods exist, fewer than the {} it needs",
            k + 3
        ));
    }
    for a in 0..k {
        for b in 0..a {
            g[(b, a)] = g[(a, b)];
        }
    }
    let b = if k == 0 {
        DVector::zeros(0)
    } else {
        super::gram::solve(&g, &c)
            .ok_or("the differenced regressors are collinear (one moves in step with others)")?
    };
    let mut residual = |r: usize| {
        let dy = diff(r, &mut dx);
        dy - dx.iter().zip(b.iter()).map(|(x, b)| x * b).sum::<f64>()
    };
    // Residual on its lag, consecutive periods of the same entity only.
    let pairs: Vec<usize> = (2..s.y.len()).filter(|r| paired(*r)).collect();
    if pairs.len() < 3 {
        return Err(format!(
            "only {} pairs of consecutive first differences exist, fewer than 3",
            pairs.len()
        ));
    }
    let lagged: Vec<(usize, f64, f64)> = pairs
        .iter()
        .map(|r| (s.entity[*r], residual(r - 1), residual(*r)))
        .collect();
    let sxx: f64 = lagged.iter().map(|(_, x, _)| x * x).sum();
    let rho = lagged.iter().map(|(_, x, y)| x * y).sum::<f64>() / sxx;
    // Each entity's score, in entity order; entities without a pair are no cluster.
    let mut score: Vec<Option<f64>> = vec![None; s.sizes.len()];
    for (g, x, y) in &lagged {
        *score[*g].get_or_insert(0.0) += x * (y - rho * x);
    }
    let score: Vec<f64> = score.into_iter().flatten().collect();
    let g = score.len() as f64;
    if g < 2.0 || sxx == 0.0 {
        return Err(if g < 2.0 {
            "only one entity has consecutive first differences".to_string()
        } else {
            "the residuals of the differenced regression are all zero".to_string()
        });
    }
    // Cluster-robust variance with the usual small-sample factor G / (G - 1) (one regressor).
    let v = g / (g - 1.0) * score.iter().map(|s| s * s).sum::<f64>() / (sxx * sxx);
    let f = (rho + 0.5).powi(2) / v;
    let p = super::upper_tail(f, |x| {
        FisherSnedecor::new(1.0, g - 1.0).ok().map(|d| d.sf(x))
    });
    Ok(Test::SerialCorrelation.result(
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
/// Returns the test and the pairs skipped; why it is not computable when no pair is used.
pub(super) fn pesaran_cd(resid: &DVector<f64>, s: &Sample) -> Result<(ModelTest, u64), String> {
    let n = s.sizes.len();
    let mut rows: Vec<BTreeMap<i64, f64>> = vec![BTreeMap::new(); n];
    for r in 0..resid.len() {
        rows[s.entity[r]].insert(s.period[r], resid[r]);
    }
    let mut total = 0.0;
    let (mut skipped, mut used) = (0u64, 0u64);
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
            used += 1;
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
    if used == 0 {
        return Err(if n < 2 {
            "there is only one entity".to_string()
        } else {
            "no two entities share 3 periods".to_string()
        });
    }
    let cd = (2.0 / (n as f64 * (n as f64 - 1.0))).sqrt() * total;
    let p = super::upper_tail(cd.abs(), |x| {
        Normal::new(0.0, 1.0).ok().map(|d| 2.0 * d.sf(x))
    });
    Ok((
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
        firm_years: values.len(),
        slot: vec![0; values.len()],
        entity,
        period,
        sizes,
        dummies: 0,
    };
    pesaran_cd(&DVector::from_vec(values), &sample).map_or(f64::NAN, |(t, _)| t.statistic)
}
