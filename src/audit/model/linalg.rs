//! Small dense linear algebra for the model diagnostics, on nalgebra: weighted cross products
//! of a few columns and the columns that raise the rank.

use nalgebra::{DMatrix, DVector};

/// Σ_i w(i) z_i z_i' over the rows z_i of `z`: a row at a time into the lower triangle, then
/// mirrored (no matrix made per row).
pub(super) fn weighted_gram(z: &DMatrix<f64>, w: impl Fn(usize) -> f64) -> DMatrix<f64> {
    let k = z.ncols();
    let mut m = DMatrix::<f64>::zeros(k, k);
    let mut row = vec![0.0; k];
    for i in 0..z.nrows() {
        for (c, v) in row.iter_mut().enumerate() {
            *v = z[(i, c)];
        }
        let wi = w(i);
        for a in 0..k {
            for b in 0..=a {
                m[(a, b)] += wi * (row[a] * row[b]);
            }
        }
    }
    for a in 0..k {
        for b in 0..a {
            m[(b, a)] = m[(a, b)];
        }
    }
    m
}

/// Columns that raise the rank when taken in `order`, from the cross-product matrix `g = X'X`
/// (or a weighted one): a column whose residual on the columns kept before it is below 1e-10
/// of its own sum of squares adds nothing; returned ascending.
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
