//! One pass's tally of the values against the brackets of [`super::quantiles`].

use super::{from_key, key, select_each};

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
                if k == *lo {
                    self.at_lo[j] += 1;
                } else if k == *hi {
                    self.at_hi[j] += 1;
                } else {
                    self.kept[j].push(v);
                }
                break;
            }
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
