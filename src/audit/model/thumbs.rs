//! Rules of thumb about the declared model, each with its source, and one warning per
//! regressor the declared effects absorb.

use nalgebra::DVector;

use super::{Effects, ModelSpec, Sample};
use crate::report::{ModelReport, VariationLine};

pub(super) fn warnings(
    variation: &[VariationLine],
    spec: &ModelSpec,
    s: &Sample,
    b_w: &DVector<f64>,
    within_keep: &[usize],
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
        let lag = s.declared - 1;
        if let Some(p) = within_keep.iter().position(|c| *c == lag) {
            let rho = b_w[p];
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
    // One warning per regressor, for the effects declared.
    let effects = match spec.effects {
        Effects::Entity => "entity effects",
        Effects::EntityPeriod => "entity and period effects",
    };
    for v in &out.not_identified {
        out.warnings.push(format!(
            "`{v}` is a linear combination of the other regressors (and any period dummies): no \
             estimator identifies it, so it is left out of all three"
        ));
    }
    for v in &out.not_identified_within {
        out.warnings.push(format!(
            "`{v}` is not identified by the within estimator with {effects}: it {}; pooled OLS and \
             random effects keep it",
            match spec.effects {
                Effects::Entity => "never changes within an entity",
                Effects::EntityPeriod =>
                    "is a sum of an entity part and a period part (like age = year - founding year) or never changes within an entity",
            }
        ));
    }
    let moving_together = super::collinearity::warnings(&out.collinearity);
    out.warnings.extend(moving_together);
    for v in &spec.regressors {
        let identified = !out.not_identified.contains(v) && !out.not_identified_within.contains(v);
        if let Some(line) = variation.iter().find(|l| &l.variable == v) {
            if identified && line.nearly_absorbed {
                out.warnings.push(format!(
                    "`{v}` is nearly absorbed by entity effects (within share {}): its within \
                     estimate is imprecise",
                    line.within_share.map_or("–".into(), |w| format!("{w:.3}"))
                ));
            }
        }
    }
}
