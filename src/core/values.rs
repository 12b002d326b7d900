//! One variable's values as the kernels read them: a plain f64 slice in row order beside the
//! rows that have a value, shared with the column when it needs no conversion.

use polars::prelude::*;

use crate::Result;

/// One variable's values in row order, as f64, and which rows have one. A column that is
/// already f64 in one chunk is shared, not copied (no column-sized buffer).
#[derive(Debug, Clone, Default)]
pub struct Values {
    /// The shared column, when it can be read in place.
    shared: Option<Float64Chunked>,
    /// The values otherwise (0.0 where absent; a shared column's missing rows hold whatever
    /// the engine left there: no pass reads them).
    v: Vec<f64>,
    /// Whether each row has a value; None when every row has one.
    ok: Option<Vec<bool>>,
}

/// Values borrowed for a pass over the rows: the slice and the presence flags.
#[derive(Debug, Clone, Copy)]
pub struct View<'a> {
    v: &'a [f64],
    ok: Option<&'a [bool]>,
}

impl<'a> View<'a> {
    /// Values that are all present (a group's values gathered from a column).
    pub fn all(v: &'a [f64]) -> View<'a> {
        View { v, ok: None }
    }

    /// How many rows have a value (from the presence flags, not a pass over the values).
    pub fn count(&self) -> usize {
        match self.ok {
            None => self.v.len(),
            Some(ok) => ok.iter().filter(|present| **present).count(),
        }
    }

    /// The value of row `r`, if present.
    pub fn get(&self, r: usize) -> Option<f64> {
        match self.ok {
            None => Some(self.v[r]),
            Some(ok) => ok[r].then(|| self.v[r]),
        }
    }

    /// Rows with a value and the value, in row order.
    pub fn iter(&self) -> impl Iterator<Item = (usize, f64)> + 'a {
        let ok = self.ok;
        self.v
            .iter()
            .enumerate()
            .filter(move |(r, _)| ok.is_none_or(|ok| ok[*r]))
            .map(|(r, v)| (r, *v))
    }

    /// The values (anything where absent: read only the rows `ok` marks) and whether each row
    /// has one (none: every row has).
    pub fn parts(&self) -> (&'a [f64], Option<&'a [bool]>) {
        (self.v, self.ok)
    }

    /// The values present, in row order.
    pub fn present(&self) -> Vec<f64> {
        match self.ok {
            None => self.v.to_vec(),
            Some(_) => self.iter().map(|(_, v)| v).collect(),
        }
    }
}

impl Values {
    /// The values of a column cast to f64 (nulls are absent; NaN is a value).
    pub fn new(x: &Float64Chunked) -> Values {
        if x.null_count() == 0 {
            if x.cont_slice().is_ok() {
                return Values {
                    shared: Some(x.clone()),
                    v: Vec::new(),
                    ok: None,
                };
            }
            // No nulls: copy the buffers chunk by chunk, no per-value branching.
            let mut v = Vec::with_capacity(x.len());
            for chunk in x.downcast_iter() {
                v.extend_from_slice(chunk.values().as_slice());
            }
            return Values {
                shared: None,
                v,
                ok: None,
            };
        }
        // With nulls, in one chunk: the values shared as they stand (whatever the engine keeps
        // in the missing rows' slots is never read: every pass skips the rows without a
        // value), the presence flags from the validity bits.
        if let (1, Some(chunk)) = (x.chunks().len(), x.downcast_iter().next()) {
            let ok: Vec<bool> = match chunk.validity() {
                Some(bits) => bits.iter().collect(),
                None => vec![true; chunk.len()],
            };
            return Values {
                shared: Some(x.clone()),
                v: Vec::new(),
                ok: Some(ok),
            };
        }
        // In several chunks: chunk by chunk, the values beside the validity bits (a select, no
        // per-value branching or options).
        let mut v = Vec::with_capacity(x.len());
        let mut ok = Vec::with_capacity(x.len());
        for chunk in x.downcast_iter() {
            let values = chunk.values().as_slice();
            match chunk.validity() {
                Some(bits) => {
                    v.extend(
                        values
                            .iter()
                            .zip(bits.iter())
                            .map(|(a, present)| if present { *a } else { 0.0 }),
                    );
                    ok.extend(bits.iter());
                }
                None => {
                    v.extend_from_slice(values);
                    ok.resize(ok.len() + values.len(), true);
                }
            }
        }
        Values {
            shared: None,
            v,
            ok: Some(ok),
        }
    }

    /// The values of column `name` of `df`, cast to f64.
    pub fn of(df: &DataFrame, name: &str) -> Result<Values> {
        let c = df.column(name)?.cast(&DataType::Float64)?;
        Ok(Values::new(c.f64()?))
    }

    /// The values for a pass over the rows (take it once, outside the loop).
    pub fn view(&self) -> View<'_> {
        let v = match &self.shared {
            // One chunk (with or without missing values): its value buffer.
            Some(c) => c
                .downcast_iter()
                .next()
                .map_or(&[][..], |chunk| chunk.values().as_slice()),
            None => &self.v,
        };
        View {
            v,
            ok: self.ok.as_deref(),
        }
    }

    /// The values present, in row order.
    pub fn present(&self) -> Vec<f64> {
        self.view().present()
    }

    /// The value of row `r`, if present (in a loop, take `view()` once instead).
    pub fn get(&self, r: usize) -> Option<f64> {
        self.view().get(r)
    }

    /// Rows with a value and the value, in row order.
    pub fn iter(&self) -> impl Iterator<Item = (usize, f64)> + '_ {
        self.view().iter()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_read_in_place_copied_or_with_nulls_look_the_same() {
        // One chunk without nulls is shared; two chunks are copied; nulls are flagged.
        let one = Float64Chunked::from_slice("x".into(), &[1.0, f64::NAN, 3.0]);
        let mut two = Float64Chunked::from_slice("x".into(), &[1.0, f64::NAN]);
        two.append(&Float64Chunked::from_slice("x".into(), &[3.0]))
            .unwrap();
        assert_eq!(two.chunks().len(), 2);
        let bits =
            |x: &Values| -> Vec<(usize, u64)> { x.iter().map(|(r, v)| (r, v.to_bits())).collect() };
        let (a, b) = (Values::new(&one), Values::new(&two));
        assert!(a.shared.is_some() && b.shared.is_none());
        assert_eq!(bits(&a), bits(&b));
        assert_eq!(a.get(2), Some(3.0));
        let gaps = Float64Chunked::from_slice_options("x".into(), &[Some(1.0), None, Some(3.0)]);
        let c = Values::new(&gaps);
        // One chunk with nulls is shared too, its presence flags from the validity bits.
        assert!(c.shared.is_some());
        assert_eq!(c.iter().collect::<Vec<_>>(), vec![(0, 1.0), (2, 3.0)]);
        assert_eq!((c.get(1), c.present()), (None, vec![1.0, 3.0]));
        // Two chunks, one with nulls, one without (copied), and one chunk whose buffer holds
        // a division by zero under its null (shared): the same values as read one at a time
        // wherever a row has one.
        let mut mixed = Float64Chunked::from_slice_options("x".into(), &[Some(2.0), None]);
        mixed
            .append(&Float64Chunked::from_slice("x".into(), &[5.0, -0.0]))
            .unwrap();
        let ratio = &Float64Chunked::from_slice_options("x".into(), &[Some(1.0), None])
            / &Float64Chunked::from_slice("y".into(), &[0.0, 0.0]);
        for x in [mixed, ratio] {
            let d = Values::new(&x);
            let (v, ok) = d.view().parts();
            let want: Vec<Option<f64>> = x.iter().collect();
            assert_eq!(
                ok.map(<[bool]>::to_vec),
                Some(want.iter().map(Option::is_some).collect())
            );
            let got: Vec<Option<u64>> = v
                .iter()
                .zip(ok.unwrap())
                .map(|(a, present)| present.then(|| a.to_bits()))
                .collect();
            let want: Vec<Option<u64>> = want.iter().map(|a| a.map(f64::to_bits)).collect();
            assert_eq!(got, want);
        }
    }
}
