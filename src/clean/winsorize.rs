//! Winsorizing one column against per-group cutoffs: within the column's own buffer when it
//! is one chunk of floats that nothing else holds (no new buffer, so no fresh memory for the
//! system to hand over), else into a new column.

use polars::prelude::*;

use super::keep::sole_chunk;
use crate::core::Values;
use crate::Result;

/// Each row's group: one group of every row, or the row's code (its period's, from the panel
/// core). Read by an inlined match per row rather than a call through a function pointer,
/// which cost as much as the rest of the pass.
#[derive(Clone, Copy)]
pub(super) enum RowGroups<'a> {
    One,
    Codes(&'a [u32]),
}

impl RowGroups<'_> {
    /// Row `r`'s group.
    #[inline(always)]
    pub(super) fn of(self, r: usize) -> usize {
        match self {
            RowGroups::One => 0,
            RowGroups::Codes(codes) => codes[r] as usize,
        }
    }
}

/// Per-group cutoffs: row `r` is in group `group.of(r)`, whose lower and upper cutoffs are
/// `lo[group.of(r)]` and `hi[group.of(r)]` (None: no cutoff on that side).
pub(super) struct Cutoffs<'a> {
    pub group: RowGroups<'a>,
    pub lo: &'a [Option<f64>],
    pub hi: &'a [Option<f64>],
}

impl Cutoffs<'_> {
    /// Whether row `r`'s `value` is below / above its group's cutoffs (NaN is neither).
    #[inline(always)]
    pub(super) fn beyond(&self, r: usize, value: f64) -> (bool, bool) {
        let t = self.group.of(r);
        (
            self.lo[t].is_some_and(|l| value < l),
            self.hi[t].is_some_and(|h| value > h),
        )
    }

    /// Row `r`'s `value` winsorized, and whether it was below / above its group's cutoffs.
    #[inline(always)]
    fn clip(&self, r: usize, value: f64) -> (f64, bool, bool) {
        let t = self.group.of(r);
        match (self.lo[t], self.hi[t]) {
            (Some(l), _) if value < l => (l, true, false),
            (_, Some(h)) if value > h => (h, false, true),
            _ => (value, false, false),
        }
    }
}

/// The values a pass changed, in row order: each one's row, its old value and whether it was
/// raised to its lower cutoff (else lowered to its upper one).
#[derive(Debug, Default, Clone, PartialEq)]
pub(super) struct Changed {
    pub rows: Vec<IdxSize>,
    pub old: Vec<f64>,
    pub raised: Vec<bool>,
}

impl Changed {
    /// Row `r`'s `old` value, if the pass moved it to a cutoff.
    #[inline(always)]
    fn note(&mut self, r: usize, old: f64, below: bool, above: bool) {
        if below || above {
            self.rows.push(r as IdxSize);
            self.old.push(old);
            self.raised.push(below);
        }
    }

    /// How many values were raised to the lower cutoff and lowered to the upper one.
    pub(super) fn counts(&self) -> (u64, u64) {
        let raised = self.raised.iter().filter(|r| **r).count() as u64;
        (raised, self.raised.len() as u64 - raised)
    }
}

/// `column` winsorized (as floats, under its name; missing values stay missing), and the
/// values it changed.
pub(super) fn winsorize(column: Column, cut: &Cutoffs) -> Result<(Column, Changed)> {
    match in_place(column, cut) {
        (column, Some(changed)) => Ok((column, changed)),
        (column, None) => copied(&column, cut),
    }
}

/// Within the column's own buffer, with the values changed; the column back, unchanged and
/// without them, when it is not one chunk of floats that nothing else holds. The slots of missing
/// values are left as they are (no pass reads them, and the Parquet writer skips them).
fn in_place(column: Column, cut: &Cutoffs) -> (Column, Option<Changed>) {
    if column.dtype() != &DataType::Float64
        || column.as_series().is_none()
        || column.n_chunks() != 1
    {
        return (column, None);
    }
    let ca: Float64Chunked = column.take_materialized_series().take_inner();
    let (name, mut chunk) = sole_chunk(ca);
    let validity = chunk.validity().cloned();
    let Some(values) = chunk.get_mut_values() else {
        return (Float64Chunked::with_chunk(name, chunk).into_column(), None);
    };
    let mut changed = Changed::default();
    let mut set = |r: usize, v: &mut f64| {
        let (new, below, above) = cut.clip(r, *v);
        changed.note(r, *v, below, above);
        *v = new;
    };
    match &validity {
        None => values.iter_mut().enumerate().for_each(|(r, v)| set(r, v)),
        Some(bits) => values
            .iter_mut()
            .zip(bits.iter())
            .enumerate()
            .filter(|(_, (_, present))| *present)
            .for_each(|(r, (v, _))| set(r, v)),
    }
    (
        Float64Chunked::with_chunk(name, chunk).into_column(),
        Some(changed),
    )
}

/// Into a new column of floats.
fn copied(column: &Column, cut: &Cutoffs) -> Result<(Column, Changed)> {
    let name = column.name().clone();
    let floats = column.cast(&DataType::Float64)?;
    let values = Values::new(floats.f64()?);
    let x = values.view();
    let mut changed = Changed::default();
    let mut clip = |r: usize, value: f64| {
        let (new, below, above) = cut.clip(r, value);
        changed.note(r, value, below, above);
        new
    };
    let column = match x.parts() {
        // Every row has a value: the new values straight into one buffer.
        (values, None) => {
            let new: Vec<f64> = values
                .iter()
                .enumerate()
                .map(|(r, value)| clip(r, *value))
                .collect();
            Float64Chunked::from_vec(name, new).into_column()
        }
        _ => {
            let new: Float64Chunked = (0..column.len())
                .map(|r| x.get(r).map(|value| clip(r, value)))
                .collect();
            new.into_column().with_name(name)
        }
    };
    Ok((column, changed))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// In place and copied give the same values, and name the same changed values, as the
    /// definition of winsorizing (common practice) applied value by value: a value below its
    /// group's lower cutoff becomes that cutoff, above the upper the upper; missing values and
    /// NaN stay. In place keeps the column's own buffer. (The cutoffs and counts on real data are checked against
    /// numpy in tests/reference and tests/handoff.)
    #[test]
    fn in_place_and_copied_agree_with_the_definition() {
        let n = 1_000;
        let x: Vec<Option<f64>> = (0..n)
            .map(|i| match i % 11 {
                0 => None,
                5 => Some(f64::NAN),
                _ => Some(((i * 37) % 101) as f64 - 50.0),
            })
            .collect();
        let codes: Vec<u32> = (0..n as u32).map(|r| r % 3).collect();
        let lo = [Some(-40.0), None, Some(-10.0)];
        let hi = [Some(40.0), Some(0.0), None];
        let cut = Cutoffs {
            group: RowGroups::Codes(&codes),
            lo: &lo,
            hi: &hi,
        };
        let mut expected = Vec::new();
        let (mut below, mut above) = (0, 0);
        let mut moved = Changed::default();
        for (r, v) in x.iter().enumerate() {
            expected.push(v.map(|v| {
                let t = r % 3;
                let mut note = |raised| {
                    moved.rows.push(r as IdxSize);
                    moved.old.push(v);
                    moved.raised.push(raised);
                };
                match (lo[t], hi[t]) {
                    (Some(l), _) if v < l => {
                        below += 1;
                        note(true);
                        l
                    }
                    (_, Some(h)) if v > h => {
                        above += 1;
                        note(false);
                        h
                    }
                    _ => v,
                }
            }));
        }
        assert!(below > 0 && above > 0);
        let same = |got: &Column| {
            let got: Vec<Option<f64>> = got.f64().unwrap().iter().collect();
            for (g, e) in got.iter().zip(&expected) {
                match (g, e) {
                    (Some(g), Some(e)) => assert!(g == e || (g.is_nan() && e.is_nan())),
                    _ => assert_eq!(g.is_none(), e.is_none()),
                }
            }
        };
        // Nothing else holds it: its own buffer.
        let own = Column::new("x".into(), x.clone());
        let buffer = |c: &Column| c.f64().unwrap().downcast_as_array().values().as_ptr();
        let before = buffer(&own);
        let (got, changed) = winsorize(own, &cut).unwrap();
        same(&got);
        assert_eq!(changed, moved);
        assert_eq!(changed.counts(), (below, above));
        assert_eq!(before, buffer(&got), "winsorized within its own buffer");
        // Held elsewhere too: copied, the other holder unchanged.
        let shared = Column::new("x".into(), x.clone());
        let other = shared.clone();
        let (got, changed) = winsorize(shared, &cut).unwrap();
        same(&got);
        assert_eq!(changed, moved);
        let untouched: Vec<Option<f64>> = other.f64().unwrap().iter().collect();
        assert_eq!(
            format!("{untouched:?}"),
            format!("{x:?}"),
            "the other holder keeps its values"
        );
        // One group of every row (pooled cutoffs), against the definition again.
        let pooled = Cutoffs {
            group: RowGroups::One,
            lo: &[Some(-20.0)],
            hi: &[Some(20.0)],
        };
        let (got, changed) = winsorize(Column::new("x".into(), x.clone()), &pooled).unwrap();
        let want: Vec<Option<f64>> = x.iter().map(|v| v.map(|v| v.clamp(-20.0, 20.0))).collect();
        let got: Vec<Option<f64>> = got.f64().unwrap().iter().collect();
        assert_eq!(format!("{got:?}"), format!("{want:?}"));
        let beyond = |f: fn(f64) -> bool| x.iter().flatten().filter(|v| f(**v)).count() as u64;
        assert_eq!(
            changed.counts(),
            (beyond(|v| v < -20.0), beyond(|v| v > 20.0))
        );
        // Integers: copied into floats.
        let ints = Column::new("k".into(), (0..n as i64).collect::<Vec<_>>());
        let (got, _) = winsorize(ints, &cut).unwrap();
        assert_eq!(got.dtype(), &DataType::Float64);
        assert_eq!(got.name().as_str(), "k");
    }
}
