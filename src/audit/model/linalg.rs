//! Small dense linear algebra for the model diagnostics, on nalgebra: least squares by
//! Cholesky, entity means and demeaning, and the columns that raise the rank.

use nalgebra::{DMatrix, DVector};

pub(super) fn with_intercept(x: &DMatrix<f64>) -> DMatrix<f64> {
    x.clone().insert_column(0, 1.0)
}

pub(super) fn ols(x: &DMatrix<f64>, y: &DVector<f64>) -> Option<DVector<f64>> {
    let xtx = x.transpose() * x;
    xtx.cholesky().map(|c| c.solve(&(x.transpose() * y)))
}

/// Entity means of every column of `x` and of `y` (rows of an entity are contiguous).
pub(super) fn means(
    x: &DMatrix<f64>,
    y: &DVector<f64>,
    entity: &[usize],
    sizes: &[usize],
) -> (DMatrix<f64>, Vec<f64>) {
    let mut xm = DMatrix::<f64>::zeros(sizes.len(), x.ncols());
    let mut ym = vec![0.0; sizes.len()];
    for r in 0..x.nrows() {
        let i = entity[r];
        for c in 0..x.ncols() {
            xm[(i, c)] += x[(r, c)];
        }
        ym[i] += y[r];
    }
    for (i, t) in sizes.iter().enumerate() {
        let t = *t as f64;
        for c in 0..x.ncols() {
            xm[(i, c)] /= t;
        }
        ym[i] /= t;
    }
    (xm, ym)
}

pub(super) fn demean(x: &DMatrix<f64>, entity: &[usize], sizes: &[usize]) -> DMatrix<f64> {
    let zero = DVector::zeros(x.nrows());
    let (m, _) = means(x, &zero, entity, sizes);
    DMatrix::from_fn(x.nrows(), x.ncols(), |r, c| x[(r, c)] - m[(entity[r], c)])
}

/// Columns of `x` that raise the rank when taken in `order` (a column whose residual on the
/// columns kept before it is below 1e-10 of its own sum of squares adds nothing); returned
/// ascending. Works on the cross-product matrix, so the cost is one pass over the rows.
pub(super) fn identified(x: &DMatrix<f64>, order: &[usize]) -> Vec<usize> {
    identified_gram(&(x.transpose() * x), order)
}

/// As [`identified`], from the cross-product matrix `g = X'X` (or a weighted one).
pub(super) fn identified_gram(g: &DMatrix<f64>, order: &[usize]) -> Vec<usize> {
    let mut kept: Vec<usize> = Vec::new();
    for &j in order {
        let norm = g[(j, j)];
        if !(norm > 0.0 && norm.is_finite()) {
            continue;
        }
        let resid = if kept.is_empty() {
            norm
        } else {
            // Scale to unit diagonal (a correlation-like matrix) before solving.
            let scale: Vec<f64> = kept.iter().map(|k| g[(*k, *k)].sqrt()).collect();
            let gkk = DMatrix::from_fn(kept.len(), kept.len(), |r, c| {
                g[(kept[r], kept[c])] / (scale[r] * scale[c])
            });
            let gkj = DVector::from_fn(kept.len(), |r, _| g[(kept[r], j)] / scale[r]);
            match gkk.cholesky() {
                Some(ch) => norm - gkj.dot(&ch.solve(&gkj)),
                None => norm,
            }
        };
        if resid > 1e-10 * norm {
            kept.push(j);
        }
    }
    kept.sort_unstable();
    kept
}
