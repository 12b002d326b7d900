//! The estimation sample: rows with every model variable, as plain vectors grouped by entity.
//! Period dummies, when period effects are declared, are not formed: each row carries its
//! period's place among the sample's periods, and `gram.rs` adds the dummies' cross products
//! from it (a column per period would be N × T numbers).

use nalgebra::{DMatrix, DVector};

use super::{Effects, ModelSpec};
use crate::audit::Context;
use crate::core::Values;
use crate::Result;

/// The estimation sample as plain vectors, grouped by entity (rows of an entity contiguous).
pub(super) struct Sample {
    pub(super) y: DVector<f64>,
    /// The declared regressors, one column each (no period dummies).
    pub(super) x: DMatrix<f64>,
    pub(super) names: Vec<String>,
    pub(super) declared: usize,
    pub(super) entity: Vec<usize>,
    pub(super) period: Vec<i64>,
    pub(super) sizes: Vec<usize>,
    /// Each row's period as its place among the sample's distinct periods, ascending.
    pub(super) slot: Vec<usize>,
    /// Period dummies in the design: one per period after the first under period effects,
    /// none under entity effects. Dummy `k` is the period in slot `k + 1`.
    pub(super) dummies: usize,
    /// The panel's firm-years (its distinct keys), before any variable is missing.
    pub(super) firm_years: usize,
}

impl Sample {
    /// The columns of the design after any intercept: the declared regressors, then the
    /// period dummies.
    pub(super) fn columns(&self) -> usize {
        self.declared + self.dummies
    }

    /// Why a sample too small for any diagnostic is so, from each variable's missing rows
    /// (`cost`): a variable with no value at all, which empties it on its own, is named.
    pub(super) fn too_few(&self, cost: &[crate::report::VariableCost]) -> String {
        let (n_rows, n, k_all) = (self.y.len(), self.sizes.len(), self.columns());
        let empty: Vec<String> = cost
            .iter()
            .filter(|c| self.firm_years > 0 && c.rows as usize == self.firm_years)
            .map(|c| format!("`{}`", c.variable))
            .collect();
        match empty.len() {
            0 => format!(
                "not computable: too few rows ({n_rows}) for {n} entities and {k_all} \
                 regressors (period dummies included), so no diagnostic was computed"
            ),
            1 => format!(
                "not computable: {} has no value in any firm-year, so the estimation sample is \
                 empty and no diagnostic was computed",
                empty[0]
            ),
            _ => format!(
                "not computable: {} have no value in any firm-year, so the estimation sample \
                 is empty and no diagnostic was computed",
                empty.join(", ")
            ),
        }
    }

    /// Each entity's first row and its rows' count.
    pub(super) fn spans(&self) -> impl Iterator<Item = (usize, usize, usize)> + '_ {
        let mut start = 0;
        self.sizes.iter().enumerate().map(move |(i, t)| {
            start += t;
            (i, start - t, *t)
        })
    }
}

/// The estimation sample of `spec` on the panel of `ctx`, from its core and typed columns: the
/// first row of each key (the panel is sorted by entity and period, so the copies of a key
/// that `audit` keeps sit together), with the outcome's lag where asked (the key before, when
/// it is the same entity's previous period), kept where the outcome and every regressor
/// (`names`: the regressors, then the lag) have a finite value. Also each variable's missing
/// values over the keys, the rows it costs.
pub(super) fn extract(
    ctx: &Context,
    spec: &ModelSpec,
    names: &[String],
) -> Result<(Sample, Vec<(String, u64)>)> {
    let core = &ctx.core;
    let outcome = Values::of(ctx.df, &spec.outcome)?;
    let regressors = spec
        .regressors
        .iter()
        .map(|r| Values::of(ctx.df, r))
        .collect::<Result<Vec<_>>>()?;
    let y = outcome.view();
    let xs: Vec<_> = regressors.iter().map(Values::view).collect();
    let same_key = |r: usize| {
        r > 0 && core.entity[r] == core.entity[r - 1] && core.period[r] == core.period[r - 1]
    };
    let keys: Vec<usize> = (0..core.rows()).filter(|r| !same_key(*r)).collect();
    let lag: Vec<Option<f64>> = match spec.lagged_outcome {
        true => std::iter::once(None)
            .chain(keys.windows(2).map(|w| {
                let (q, r) = (w[0], w[1]);
                let previous =
                    core.entity[q] == core.entity[r] && core.period_of(q) + 1 == core.period_of(r);
                previous.then(|| y.get(q)).flatten()
            }))
            .take(keys.len())
            .collect(),
        false => Vec::new(),
    };
    // Variable `j` of names at key `k` (row `r`).
    let value = |k: usize, r: usize, j: usize| match xs.get(j) {
        Some(x) => x.get(r),
        None => lag[k],
    };
    let d = names.len();
    let mut costs = vec![(
        spec.outcome.clone(),
        keys.iter().filter(|r| y.get(**r).is_none()).count() as u64,
    )];
    for (j, name) in names.iter().enumerate() {
        let missing = keys.iter().enumerate();
        let missing = missing.filter(|(k, r)| value(*k, **r, j).is_none()).count();
        costs.push((name.clone(), missing as u64));
    }
    let finite = |v: Option<f64>| v.is_some_and(f64::is_finite);
    let kept: Vec<(usize, usize)> = keys
        .iter()
        .enumerate()
        .filter(|(k, r)| finite(y.get(**r)) && (0..d).all(|j| finite(value(*k, **r, j))))
        .map(|(k, r)| (k, *r))
        .collect();
    let n_rows = kept.len();
    let y = DVector::from_iterator(n_rows, kept.iter().map(|(_, r)| y.get(*r).unwrap_or(0.0)));
    let mut x = DMatrix::<f64>::zeros(n_rows, d);
    for (i, (k, r)) in kept.iter().enumerate() {
        for j in 0..d {
            x[(i, j)] = value(*k, *r, j).unwrap_or(0.0);
        }
    }
    // Entities numbered in order, those with no row in the sample left out.
    let mut entity = Vec::with_capacity(n_rows);
    let mut sizes: Vec<usize> = Vec::new();
    let mut last = None;
    for (_, r) in &kept {
        if last != Some(core.entity[*r]) {
            sizes.push(0);
            last = Some(core.entity[*r]);
        }
        *sizes.last_mut().expect("pushed") += 1;
        entity.push(sizes.len() - 1);
    }
    // The sample's periods: the core's, less those with no row in the sample.
    let mut used = vec![false; core.periods.len()];
    for (_, r) in &kept {
        used[core.period[*r] as usize] = true;
    }
    let rank: Vec<usize> = used
        .iter()
        .scan(0, |seen, u| {
            *seen += usize::from(*u);
            Some(*seen - usize::from(*u))
        })
        .collect();
    let distinct: Vec<i64> = (core.periods.iter().zip(&used))
        .filter(|(_, u)| **u)
        .map(|(t, _)| *t)
        .collect();
    let dummies = match spec.effects {
        Effects::EntityPeriod => distinct.len().saturating_sub(1),
        Effects::Entity => 0,
    };
    let mut all_names = names.to_vec();
    all_names.extend(
        distinct
            .iter()
            .skip(1)
            .take(dummies)
            .map(|t| format!("period {t}")),
    );
    let sample = Sample {
        y,
        x,
        names: all_names,
        declared: d,
        entity,
        period: kept.iter().map(|(_, r)| core.period_of(*r)).collect(),
        sizes,
        slot: kept
            .iter()
            .map(|(_, r)| rank[core.period[*r] as usize])
            .collect(),
        dummies,
        firm_years: keys.len(),
    };
    Ok((sample, costs))
}
