//! The estimation sample: rows with every model variable, as plain vectors grouped by entity,
//! with period dummies when period effects are declared.

use nalgebra::{DMatrix, DVector};
use polars::prelude::*;

use super::Effects;
use crate::Result;

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

pub(super) fn extract(
    df: &DataFrame,
    e: &str,
    p: &str,
    names: &[String],
    effects: Effects,
) -> Result<Sample> {
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
