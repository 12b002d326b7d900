//! How much the regressors move together: each regressor's variance inflation factor in the
//! pooled design (on the intercept, any period dummies and the other regressors) and in the
//! within design (after removing entity means, the variation the fixed-effects slope rests
//! on), and the other regressor it is most correlated with. From the cross products the
//! estimators already hold: no design is formed again.

use nalgebra::DMatrix;

use crate::report::Collinearity;

/// A variance inflation factor above this is flagged (common practice, e.g. Kutner,
/// Nachtsheim & Neter, Applied Linear Regression Models, from memory; O'Brien 2007, Quality
/// & Quantity 41(5), warns against reading it as a test).
pub(super) const VIF_FLAG: f64 = 10.0;

/// The pooled design's cross products `gp` of its columns `pooled_cols` (0 the intercept,
/// `j + 1` regressor `j`, beyond `declared` a period dummy), the within design's `gw` of
/// `within_keep` (`j` regressor `j`, beyond it a dummy); one line per regressor of `names`
/// the pooled design identifies.
pub(super) fn lines(
    names: &[String],
    gp: &DMatrix<f64>,
    pooled_cols: &[usize],
    gw: &DMatrix<f64>,
    within_keep: &[usize],
) -> Vec<Collinearity> {
    let declared = names.len();
    // Regressor j's place among the pooled columns, and among the within ones.
    let ppos = |j: usize| pooled_cols.iter().position(|c| *c == j + 1);
    let wpos = |j: usize| within_keep.iter().position(|c| *c == j);
    let regressors: Vec<(usize, usize)> = (0..declared)
        .filter_map(|j| ppos(j).map(|p| (j, p)))
        .collect();
    let rows = gp[(0, 0)];
    // Cross products about the means: Σ (x_a − x̄_a)(x_b − x̄_b).
    let centred = |a: usize, b: usize| gp[(a, b)] - gp[(0, a)] * gp[(0, b)] / rows;
    let inv_p = gp.clone().try_inverse();
    let inv_w = gw.clone().try_inverse();
    // VIF = 1 / (1 − R²) of the regressor on the design's other columns: its sum of squares
    // (about its mean where there is an intercept; the within columns have mean zero) times
    // its diagonal element of the inverse cross products.
    let vif = |v: f64| Some(v).filter(|v| v.is_finite() && *v >= 1.0 - 1e-9);
    regressors
        .iter()
        .map(|&(j, p)| {
            let pooled = inv_p
                .as_ref()
                .and_then(|inv| vif(inv[(p, p)] * centred(p, p)));
            let within =
                wpos(j).and_then(|w| inv_w.as_ref().and_then(|inv| vif(inv[(w, w)] * gw[(w, w)])));
            let closest = regressors
                .iter()
                .filter(|(other, _)| *other != j)
                .map(|&(other, q)| {
                    let r = centred(p, q) / (centred(p, p) * centred(q, q)).sqrt();
                    (other, r)
                })
                .filter(|(_, r)| r.is_finite())
                .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()));
            Collinearity {
                variable: names[j].clone(),
                vif_pooled: pooled,
                vif_within: within,
                closest: closest.map(|(other, _)| names[other].clone()),
                correlation: closest.map(|(_, r)| r),
            }
        })
        .collect()
}

/// The warning for each line whose factor passes [`VIF_FLAG`] in either design.
pub(super) fn warnings(lines: &[Collinearity]) -> Vec<String> {
    lines
        .iter()
        .filter_map(|l| {
            let over: Vec<String> = [("pooled", l.vif_pooled), ("within", l.vif_within)]
                .into_iter()
                .filter_map(|(design, v)| {
                    v.filter(|v| *v > VIF_FLAG)
                        .map(|v| format!("{v:.1} {design}"))
                })
                .collect();
            (!over.is_empty()).then(|| {
                format!(
                    "`{}` moves largely with the other regressors (variance inflation factor {}, \
                     above {VIF_FLAG}, a common rule of thumb): its slope's variance is that many \
                     times what it would be were it unrelated to them; the rule flags \
                     imprecision, not a wrong model (O'Brien 2007, Quality & Quantity 41(5))",
                    l.variable,
                    over.join(", ")
                )
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_regressors_worked_by_hand() {
        // Worked by hand: x = (1, 2, 3, 4), z = (1, 3, 2, 4) with an intercept. Centred, x
        // = (-1.5, -0.5, 0.5, 1.5) and z = (-1.5, 0.5, -0.5, 1.5): sums of squares 5 each,
        // cross product 4, so r = 0.8 and VIF = 1 / (1 − 0.64) = 2.777…. The within design
        // here is the same two centred columns (one entity), VIF the same.
        let (x, z) = ([1.0, 2.0, 3.0, 4.0], [1.0, 3.0, 2.0, 4.0]);
        let cols: [&[f64]; 3] = [&[1.0; 4], &x, &z];
        let gp = DMatrix::from_fn(3, 3, |a, b| (0..4).map(|r| cols[a][r] * cols[b][r]).sum());
        let (xc, zc) = (x.map(|v| v - 2.5), z.map(|v| v - 2.5));
        let wcols: [&[f64]; 2] = [&xc, &zc];
        let gw = DMatrix::from_fn(2, 2, |a, b| (0..4).map(|r| wcols[a][r] * wcols[b][r]).sum());
        let names = ["x".to_string(), "z".to_string()];
        let lines = lines(&names, &gp, &[0, 1, 2], &gw, &[0, 1]);
        for l in &lines {
            assert!((l.vif_pooled.unwrap() - 1.0 / 0.36).abs() < 1e-12, "{l:?}");
            assert!((l.vif_within.unwrap() - 1.0 / 0.36).abs() < 1e-12, "{l:?}");
            assert!((l.correlation.unwrap() - 0.8).abs() < 1e-12);
        }
        assert_eq!(lines[0].closest.as_deref(), Some("z"));
        assert_eq!(lines[1].closest.as_deref(), Some("x"));
        assert!(warnings(&lines).is_empty());
    }
}
