//! The cross products of the model's designs, read off the sample's rows without forming the
//! designs. Every estimator here regresses rows less a share θ_i of their entity's mean: θ = 0
//! pooled OLS, θ = 1 within (entity demeaning), θ_i between the two random effects
//! (quasi-demeaning). The columns are an intercept (pooled and random effects), the declared
//! regressors, then the period dummies under period effects. A dummy column would be N numbers
//! with one 1 per entity; its cross products are sums over the rows of its period and over
//! each entity's periods instead, so the cost is O(N K² + Σ T_i²) and the memory K², whatever
//! the number of periods. Deviations are formed as each row is read, as the explicit designs
//! formed them, so nothing is lost to cancellation.

use nalgebra::{DMatrix, DVector};

use super::Sample;

/// Entity means of the declared regressors (n × K) and of the outcome.
pub(super) struct Means {
    pub(super) x: DMatrix<f64>,
    pub(super) y: Vec<f64>,
}

impl Means {
    pub(super) fn of(s: &Sample) -> Means {
        let d = s.declared;
        let mut x = DMatrix::<f64>::zeros(s.sizes.len(), d);
        let mut y = vec![0.0; s.sizes.len()];
        for (i, start, t) in s.spans() {
            for r in start..start + t {
                y[i] += s.y[r];
                for j in 0..d {
                    x[(i, j)] += s.x[(r, j)];
                }
            }
            let t = t as f64;
            y[i] /= t;
            for j in 0..d {
                x[(i, j)] /= t;
            }
        }
        Means { x, y }
    }
}

/// A transformed design: the rows less θ_i times their entity's mean, with or without an
/// intercept column.
pub(super) struct Design<'a> {
    pub(super) s: &'a Sample,
    pub(super) means: &'a Means,
    /// θ_i per entity.
    pub(super) theta: &'a [f64],
    pub(super) intercept: bool,
}

/// `g = Z'Z`, `c = Z'w` of a transformed design `Z` and outcome `w`.
pub(super) struct Gram {
    pub(super) g: DMatrix<f64>,
    pub(super) c: DVector<f64>,
}

impl Gram {
    /// The cross products of the columns `cols`: their Gram matrix and their products with
    /// the outcome.
    pub(super) fn select(&self, cols: &[usize]) -> (DMatrix<f64>, DVector<f64>) {
        let g = DMatrix::from_fn(cols.len(), cols.len(), |r, c| self.g[(cols[r], cols[c])]);
        let c = DVector::from_fn(cols.len(), |r, _| self.c[cols[r]]);
        (g, c)
    }
}

impl Design<'_> {
    /// Columns before the dummies: the intercept (if any) and the declared regressors.
    fn plain(&self) -> usize {
        usize::from(self.intercept) + self.s.declared
    }

    /// Row `r` (of entity `i`) less θ_i times the entity mean, in the plain columns, into `u`;
    /// returns the transformed outcome.
    fn row(&self, r: usize, i: usize, u: &mut [f64]) -> f64 {
        let (s, th) = (self.s, self.theta[i]);
        let a = usize::from(self.intercept);
        if self.intercept {
            u[0] = 1.0 - th;
        }
        for j in 0..s.declared {
            u[a + j] = s.x[(r, j)] - th * self.means.x[(i, j)];
        }
        s.y[r] - th * self.means.y[i]
    }

    /// The entity mean of row `i`'s plain columns, as `row` lays them out.
    fn mean(&self, i: usize, j: usize) -> f64 {
        match (self.intercept, j) {
            (true, 0) => 1.0,
            (true, j) => self.means.x[(i, j - 1)],
            (false, j) => self.means.x[(i, j)],
        }
    }

    /// The cross products of the whole design (every column) and with the outcome.
    ///
    /// With v_r the row's dummies less θ_i times their entity means (1 / T_i in each of the
    /// entity's periods), and one row per entity and period: Σ_r u_r v_rt = Σ over the rows of
    /// period t of (u_r − θ_i (1 − θ_i) ū_i), since Σ over an entity's rows of u_r is
    /// T_i (1 − θ_i) ū_i; and Σ_r v_r v_r' = diag(rows per period) − Σ_i θ_i (2 − θ_i) / T_i
    /// o_i o_i', o_i the entity's periods.
    pub(super) fn gram(&self) -> Gram {
        let s = self.s;
        let q = self.plain();
        let k = q + s.dummies;
        // Summed a block of rows at a time, each block's sums then added to the totals: a
        // running sum over millions of rows would carry the rounding of every addition to a
        // large total (the explicit product's kernel sums in blocks too).
        let (mut g_all, mut c_all) = (DMatrix::<f64>::zeros(k, k), DVector::<f64>::zeros(k));
        let mut g = DMatrix::<f64>::zeros(k, k);
        let mut c = DVector::<f64>::zeros(k);
        let mut block = 0;
        let mut u = vec![0.0; q];
        // Columns of the dummies of row r: none for the first period.
        let dummy = |r: usize| (s.dummies > 0 && s.slot[r] > 0).then(|| q + s.slot[r] - 1);
        for (i, start, t) in s.spans() {
            let th = self.theta[i];
            let shrink = th * (1.0 - th);
            for r in start..start + t {
                let w = self.row(r, i, &mut u);
                for a in 0..q {
                    c[a] += u[a] * w;
                    for b in 0..=a {
                        g[(a, b)] += u[a] * u[b];
                    }
                }
                if let Some(col) = dummy(r) {
                    for (a, ua) in u.iter().enumerate() {
                        g[(col, a)] += ua - shrink * self.mean(i, a);
                    }
                    c[col] += w - shrink * self.means.y[i];
                }
            }
            block += t;
            if block >= BLOCK {
                g_all += &g;
                c_all += &c;
                g.fill(0.0);
                c.fill(0.0);
                block = 0;
            }
            if s.dummies > 0 {
                let f = th * (2.0 - th) / t as f64;
                for r in start..start + t {
                    let Some(a) = dummy(r) else { continue };
                    g[(a, a)] += 1.0;
                    for r2 in start..=r {
                        if let Some(b) = dummy(r2) {
                            g[(a.max(b), a.min(b))] -= f;
                        }
                    }
                }
            }
        }
        g_all += &g;
        c_all += &c;
        let mut g = g_all;
        for a in 0..k {
            for b in 0..a {
                g[(b, a)] = g[(a, b)];
            }
        }
        Gram { g, c: c_all }
    }

    /// Each row's residual from the coefficients `b` of the columns `cols` (in the layout of
    /// `gram`): the transformed outcome less the transformed row times `b`.
    pub(super) fn residuals(&self, cols: &[usize], b: &DVector<f64>) -> DVector<f64> {
        let s = self.s;
        let q = self.plain();
        let mut beta = vec![0.0; q + s.dummies];
        for (p, col) in cols.iter().enumerate() {
            beta[*col] = b[p];
        }
        // A row's dummy coefficient (none for the first period).
        let bd = |r: usize| match s.slot[r] {
            0 => 0.0,
            slot if s.dummies > 0 => beta[q + slot - 1],
            _ => 0.0,
        };
        let mut e = DVector::<f64>::zeros(s.y.len());
        let mut u = vec![0.0; q];
        for (i, start, t) in s.spans() {
            let th = self.theta[i];
            let dummies_mean = (start..start + t).map(bd).sum::<f64>() / t as f64;
            for r in start..start + t {
                let w = self.row(r, i, &mut u);
                let fit: f64 = u.iter().zip(&beta).map(|(x, b)| x * b).sum::<f64>() + bd(r)
                    - th * dummies_mean;
                e[r] = w - fit;
            }
        }
        e
    }
}

/// Rows summed before their sums join the totals (see `Design::gram`).
pub(super) const BLOCK: usize = 4096;

/// Least squares from cross products, by Cholesky; none when `g` is singular.
pub(super) fn solve(g: &DMatrix<f64>, c: &DVector<f64>) -> Option<DVector<f64>> {
    g.clone().cholesky().map(|ch| ch.solve(c))
}
