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

/// Columns that raise the rank, in order (a column whose residual on the earlier ones is
/// below 1e-10 of its own norm adds nothing).
pub(super) fn independent_columns(x: &DMatrix<f64>) -> Vec<usize> {
    let mut kept: Vec<usize> = Vec::new();
    for j in 0..x.ncols() {
        let col = x.column(j).into_owned();
        let norm = col.norm_squared();
        if norm <= 0.0 {
            continue;
        }
        let resid = if kept.is_empty() {
            norm
        } else {
            let basis = x.select_columns(&kept);
            match ols(&basis, &col) {
                Some(b) => (&col - &basis * b).norm_squared(),
                None => norm,
            }
        };
        if resid > 1e-10 * norm {
            kept.push(j);
        }
    }
    kept
}
