//! Numbers that are not numbers. A floating-point column can hold NaN ("not a number", how
//! numpy and pandas often write a missing value into Parquet, and what a CSV reader makes of
//! `NaN`) and infinities (a division by zero upstream). Neither is a value a regression can
//! use, and either one turns every sum it enters — a mean, a variance, a within share — into
//! NaN, which the checks would then read as "no variation". They are read as missing, as the
//! derived variables' non-finite results are, and the input notes count them per column.

use polars::prelude::*;
use rayon::prelude::*;

use crate::Result;

/// The NaN and infinite cells among the values of `ca` (missing cells not counted).
fn count(ca: &Float64Chunked) -> (usize, usize) {
    let mut nan = 0;
    let mut inf = 0;
    for arr in ca.downcast_iter() {
        // Nearly always none at all: one branch-free pass over every slot says so.
        if arr
            .values()
            .chunks(4096)
            .all(|c| c.iter().fold(true, |all, v| all & v.is_finite()))
        {
            continue;
        }
        let mut tally = |v: &f64| {
            nan += usize::from(v.is_nan());
            inf += usize::from(v.is_infinite());
        };
        match arr.validity() {
            None => arr.values().iter().for_each(&mut tally),
            Some(valid) => arr
                .values()
                .iter()
                .zip(valid.iter())
                .filter(|(_, ok)| *ok)
                .for_each(|(v, _)| tally(v)),
        }
    }
    (nan, inf)
}

/// `df` with every NaN or infinite value of its floating-point columns (but those in `keep`)
/// missing, and a note for each column that held any.
pub(crate) fn non_finite_as_missing(
    df: DataFrame,
    keep: &[&str],
) -> Result<(DataFrame, Vec<String>)> {
    // The columns on every core.
    let found: Vec<(String, usize, usize)> = df
        .columns()
        .par_iter()
        .filter(|c| !keep.contains(&c.name().as_str()))
        .map(|c| {
            let (nan, inf) = match c.dtype() {
                DataType::Float64 => count(c.f64()?),
                // Rare enough to be counted through a copy.
                DataType::Float32 => count(c.cast(&DataType::Float64)?.f64()?),
                _ => (0, 0),
            };
            Ok((c.name().to_string(), nan, inf))
        })
        .filter(|r: &PolarsResult<(String, usize, usize)>| {
            r.as_ref().map_or(true, |(_, nan, inf)| nan + inf > 0)
        })
        .collect::<PolarsResult<_>>()?;
    if found.is_empty() {
        return Ok((df, Vec::new()));
    }
    let mut notes = Vec::new();
    let mut fixes = Vec::new();
    for (name, nan, inf) in found {
        let kinds: Vec<String> = [(nan, "NaN"), (inf, "infinity")]
            .into_iter()
            .filter(|(n, _)| *n > 0)
            .map(|(n, kind)| format!("{kind} {n}"))
            .collect();
        notes.push(format!(
            "column `{name}`: {} not a finite number ({}) read as missing",
            super::markers::how_many_cells(nan + inf),
            kinds.join(", ")
        ));
        let c = col(name.as_str());
        fixes.push(
            when(c.clone().is_finite())
                .then(c)
                .otherwise(lit(NULL))
                .alias(name.as_str()),
        );
    }
    Ok((df.lazy().with_columns(fixes).collect()?, notes))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Worked by hand: NaN and the two infinities become missing, every other value (and the
    // missing one already there) stays as it was, and the note counts each kind.
    #[test]
    fn nan_and_infinities_are_missing_and_counted() {
        let df = df!(
            "firm" => ["A", "A", "B", "B", "C"],
            "x" => [Some(1.5), Some(f64::NAN), Some(f64::INFINITY), None, Some(f64::NEG_INFINITY)],
            "y" => [Some(1.0f32), Some(2.0), None, Some(f32::NAN), Some(-0.5)],
            "z" => [1.0, 2.0, 3.0, 4.0, 5.0],
            "period" => [Some(f64::NAN), Some(1.0), Some(2.0), Some(3.0), Some(4.0)],
        )
        .unwrap();
        let (out, notes) = non_finite_as_missing(df, &["period"]).unwrap();
        let x: Vec<Option<f64>> = out.column("x").unwrap().f64().unwrap().iter().collect();
        assert_eq!(x, [Some(1.5), None, None, None, None]);
        let y: Vec<Option<f32>> = out.column("y").unwrap().f32().unwrap().iter().collect();
        assert_eq!(y, [Some(1.0), Some(2.0), None, None, Some(-0.5)]);
        assert_eq!(out.column("z").unwrap().null_count(), 0);
        assert!(out
            .column("period")
            .unwrap()
            .f64()
            .unwrap()
            .get(0)
            .unwrap()
            .is_nan());
        assert_eq!(
            notes,
            [
                "column `x`: 3 cells not a finite number (NaN 1, infinity 2) read as missing",
                "column `y`: 1 cell not a finite number (NaN 1) read as missing",
            ]
        );
    }

    #[test]
    fn a_frame_of_finite_numbers_is_left_alone() {
        let df = df!("x" => [Some(1.0), None, Some(-2.0)]).unwrap();
        let (out, notes) = non_finite_as_missing(df.clone(), &[]).unwrap();
        assert!(out.equals_missing(&df));
        assert!(notes.is_empty());
    }
}
