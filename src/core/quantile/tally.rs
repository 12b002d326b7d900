//! One pass's tally of the values against the brackets of [`super::quantiles`].

use super::{each_mapped, from_key, key, select_each};

/// Most brackets [`Tally::add_each`] places a value among without a branch per bracket.
const FIXED: usize = 5;

/// One pass's tally against the brackets: `gap[j]` counts the values between bracket j - 1
/// and bracket j; of those inside bracket j, the ones equal to its lower or upper bound are
/// counted (`at_lo[j]`, `at_hi[j]`: their key gives their value back, bit for bit) and only
/// those strictly inside are kept (`kept[j]`). A column of many equal values (a dummy, a
/// ratio that is mostly zero) so fills its brackets' bounds, not memory.
pub(super) struct Tally {
    merged: Vec<(i64, i64)>,
    gap: Vec<usize>,
    at_lo: Vec<usize>,
    at_hi: Vec<usize>,
    kept: Vec<Vec<f64>>,
}

impl Tally {
    /// A tally against the disjoint, ascending brackets of keys `merged`.
    pub(super) fn new(merged: Vec<(i64, i64)>) -> Tally {
        Tally {
            gap: vec![0; merged.len()],
            at_lo: vec![0; merged.len()],
            at_hi: vec![0; merged.len()],
            kept: vec![Vec::new(); merged.len()],
            merged,
        }
    }

    /// Count or keep `v`.
    pub(super) fn add(&mut self, v: f64) {
        let k = key(v);
        for (j, (lo, hi)) in self.merged.iter().enumerate() {
            if k < *lo {
                self.gap[j] += 1;
                break;
            }
            if k <= *hi {
                self.inside(j, k, v);
                break;
            }
        }
    }

    /// Count or keep `v`, of key `k`, inside bracket `j`.
    #[inline(always)]
    fn inside(&mut self, j: usize, k: i64, v: f64) {
        let (lo, hi) = self.merged[j];
        if k == lo {
            self.at_lo[j] += 1;
        } else if k == hi {
            self.at_hi[j] += 1;
        } else {
            self.kept[j].push(v);
        }
    }

    /// [`Tally::add`] on the mapped value `map(v)` of each value `v` of `values` present by
    /// `ok`, in row order, calling `visit(v, map(v))` on each as well. With up to [`FIXED`]
    /// brackets a value's place is found by comparing it with every bound (its place is the
    /// number of bounds it has passed: even between brackets, odd inside one) in a loop
    /// written out with every call inlined. At 10 M rows the outlier check's quantile passes
    /// over its 20 variables took 0.75 s of CPU instead of 1.05 s, its MAD passes 0.90 s
    /// instead of 1.37 s.
    pub(super) fn add_each<M: Fn(f64) -> f64, V: FnMut(f64, f64)>(
        &mut self,
        values: &[f64],
        ok: Option<&[bool]>,
        map: &M,
        visit: &mut V,
    ) {
        match self.merged.len() {
            1 => self.add_fixed::<1, M, V>(values, ok, map, visit),
            2 => self.add_fixed::<2, M, V>(values, ok, map, visit),
            3 => self.add_fixed::<3, M, V>(values, ok, map, visit),
            4 => self.add_fixed::<4, M, V>(values, ok, map, visit),
            5 => self.add_fixed::<5, M, V>(values, ok, map, visit),
            _ => each_mapped(values, ok, map, |v, a| {
                self.add(a);
                visit(v, a);
            }),
        }
    }

    /// [`Tally::add_each`] with `B` brackets, each bound held in a register.
    fn add_fixed<const B: usize, M: Fn(f64) -> f64, V: FnMut(f64, f64)>(
        &mut self,
        values: &[f64],
        ok: Option<&[bool]>,
        map: &M,
        visit: &mut V,
    ) {
        let mut pass = Fixed::<B>::new(&self.merged);
        // Written out rather than through `each_mapped`: its closure, this large, was left a
        // call per value.
        match ok {
            None => {
                for &v in values {
                    let a = map(v);
                    pass.add(self, a);
                    visit(v, a);
                }
            }
            Some(ok) => {
                for (&v, _) in values.iter().zip(ok).filter(|(_, o)| **o) {
                    let a = map(v);
                    pass.add(self, a);
                    visit(v, a);
                }
            }
        }
        for (j, gap) in self.gap.iter_mut().enumerate() {
            *gap += pass.between[0][2 * j] + pass.between[1][2 * j];
        }
    }

    /// The `k`-th smallest value for each of the sorted, distinct `ks`, selected among the
    /// kept ones (or a bound, for ranks among the values equal to it); None when one fell
    /// outside every bracket.
    pub(super) fn select(mut self, ks: &[usize]) -> Option<Vec<f64>> {
        let sizes: Vec<usize> = (0..self.merged.len())
            .map(|j| self.at_lo[j] + self.kept[j].len() + self.at_hi[j])
            .collect();
        // The values below bracket j: the gaps up to it and the brackets before it.
        let mut below = Vec::with_capacity(self.merged.len());
        let mut before = 0usize;
        for (j, gap) in self.gap.iter().enumerate() {
            below.push(before + gap);
            before += gap + sizes[j];
        }
        let mut out = Vec::with_capacity(ks.len());
        for j in 0..self.merged.len() {
            let (lo, hi) = self.merged[j];
            let (at_lo, inner) = (self.at_lo[j], self.kept[j].len());
            let ranks: Vec<usize> = ks
                .iter()
                .filter(|k| **k >= below[j] && **k < below[j] + sizes[j])
                .map(|k| k - below[j])
                .collect();
            let inside: Vec<usize> = ranks
                .iter()
                .filter(|r| (at_lo..at_lo + inner).contains(*r))
                .map(|r| r - at_lo)
                .collect();
            let bucket = &mut self.kept[j];
            select_each(bucket, &inside);
            out.extend(ranks.iter().map(|r| {
                let value = match *r {
                    r if r < at_lo => from_key(lo),
                    r if r < at_lo + inner => bucket[r - at_lo],
                    _ => from_key(hi),
                };
                (below[j] + r, value)
            }));
        }
        if out.len() < ks.len() {
            return None;
        }
        out.sort_unstable_by_key(|(k, _)| *k);
        Some(out.into_iter().map(|(_, v)| v).collect())
    }
}

/// A pass of [`Tally::add_fixed`]: the bounds of `B` brackets and the counts between them.
struct Fixed<const B: usize> {
    lo: [i64; B],
    hi: [i64; B],
    /// Values by place between the brackets (2j below bracket j, 2B above the last), in two
    /// sets taken in turn, so that two values in a row in the same place do not wait on each
    /// other's count.
    between: [[usize; 2 * FIXED + 1]; 2],
    turn: usize,
}

impl<const B: usize> Fixed<B> {
    fn new(merged: &[(i64, i64)]) -> Fixed<B> {
        let (mut lo, mut hi) = ([0i64; B], [0i64; B]);
        for (j, bounds) in merged.iter().enumerate() {
            (lo[j], hi[j]) = *bounds;
        }
        Fixed {
            lo,
            hi,
            between: [[0; 2 * FIXED + 1]; 2],
            turn: 0,
        }
    }

    /// Count `v` between the brackets, or hand it to `tally` inside one.
    #[inline(always)]
    fn add(&mut self, tally: &mut Tally, v: f64) {
        let k = key(v);
        let mut place = 0;
        for j in 0..B {
            place += usize::from(k >= self.lo[j]) + usize::from(k > self.hi[j]);
        }
        if place & 1 == 1 {
            tally.inside(place / 2, k, v);
        } else {
            self.between[self.turn & 1][place] += 1;
        }
        // Turned on every value, not only on those counted: a turn taken inside the branch
        // made the compiler branch on the bounds again (twice the time).
        self.turn += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The tally's counts and kept values, to compare two tallies.
    fn state(t: &Tally) -> (Vec<usize>, Vec<usize>, Vec<usize>, Vec<Vec<u64>>) {
        let kept = t
            .kept
            .iter()
            .map(|k| k.iter().map(|v| v.to_bits()).collect())
            .collect();
        (t.gap.clone(), t.at_lo.clone(), t.at_hi.clone(), kept)
    }

    /// A pass over a column tallies what `add` on each value in turn tallies (the
    /// definition above, one bracket at a time), for one to six brackets (the kernels of
    /// fixed size and the general loop), open ends, values on the bounds, NaN of either sign,
    /// both zeros and missing values; and it visits each present value once, in row order.
    #[test]
    fn a_pass_tallies_what_adding_each_value_does() {
        let mut values: Vec<f64> = (0..4_000)
            .map(|i| ((i * 7919) % 1_000) as f64 - 500.0)
            .collect();
        values.extend([
            f64::NAN,
            -f64::NAN,
            -0.0,
            0.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
        ]);
        let ok: Vec<bool> = (0..values.len()).map(|r| r % 13 != 0).collect();
        let bounds = [-400.0, -250.0, -100.0, 0.0, 120.0, 300.0, 420.0];
        let map = |v: f64| v * 0.5;
        for b in 1..=6 {
            for open in [false, true] {
                let mut merged: Vec<(i64, i64)> = (0..b)
                    .map(|j| (key(bounds[j] * 0.5), key(bounds[j + 1] * 0.5 - 25.0)))
                    .collect();
                if open {
                    merged[0].0 = i64::MIN;
                    merged[b - 1].1 = i64::MAX;
                }
                for ok in [None, Some(&ok[..])] {
                    let mut one = Tally::new(merged.clone());
                    let mut seen_one = Vec::new();
                    for (r, v) in values.iter().enumerate() {
                        if ok.is_none_or(|ok| ok[r]) {
                            one.add(map(*v));
                            seen_one.push((v.to_bits(), map(*v).to_bits()));
                        }
                    }
                    let mut all = Tally::new(merged.clone());
                    let mut seen_all = Vec::new();
                    all.add_each(&values, ok, &map, &mut |v: f64, a: f64| {
                        seen_all.push((v.to_bits(), a.to_bits()))
                    });
                    assert_eq!(state(&all), state(&one), "{b} brackets, open {open}");
                    assert_eq!(seen_all, seen_one);
                }
            }
        }
    }
}
