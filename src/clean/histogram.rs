//! The chart of a treated variable: equal-width bins over its central 99 %.

use crate::core::{quantiles, View};
use crate::report::Histogram;

/// Bins of the chart of a treated variable.
const BINS: usize = 30;

/// Equal-width bins between the 0.5th and 99.5th percentiles; values beyond fall in the end
/// bins. Missing values are left out.
pub(super) fn histogram(view: &View) -> Histogram {
    // The 0.5% and 99.5% points (type 7, by bracketed selection over the column read in
    // place), then the counts in one pass.
    let n = view.count();
    let q = quantiles(view, n, |x| x, &[0.005, 0.995]);
    let (Some(lo), Some(hi)) = (q[0], q[1]) else {
        return Histogram::default();
    };
    let width = if hi > lo {
        (hi - lo) / BINS as f64
    } else {
        1.0
    };
    let mut counts = vec![0u64; BINS];
    let last = (BINS - 1) as f64;
    for (_, x) in view.iter() {
        let t = (x - lo) / width;
        // The floor of `t` clamped to the bins; within them truncation is the floor (no call
        // to the floor function per value).
        let b = match t {
            t if t.is_nan() => continue,
            t if t <= 0.0 => 0,
            t if t >= last => BINS - 1,
            t => t as usize,
        };
        counts[b] += 1;
    }
    Histogram {
        start: lo,
        width,
        counts,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::Values;
    use polars::prelude::*;

    /// The bins are the floor of (x − start) / width clamped to the end bins, written out
    /// directly (equal-width binning as commonly defined: common practice), for values on the edges of
    /// bins, beyond both ends, infinite and missing; and the counts add up to the values
    /// present.
    #[test]
    fn bins_are_the_clamped_floor_of_the_scaled_values() {
        let mut x: Vec<Option<f64>> = (0..1_000).map(|i| Some(i as f64 / 10.0)).collect();
        x.extend([
            Some(-50.0),
            Some(500.0),
            Some(f64::INFINITY),
            Some(f64::NEG_INFINITY),
            None,
        ]);
        let df = df!("x" => x.clone()).unwrap();
        let values = Values::of(&df, "x").unwrap();
        let h = histogram(&values.view());
        assert_eq!(h.counts.len(), BINS);
        let mut want = vec![0u64; BINS];
        for v in x.iter().flatten() {
            let b = ((v - h.start) / h.width).floor();
            want[b.clamp(0.0, (BINS - 1) as f64) as usize] += 1;
        }
        assert_eq!(h.counts, want);
        assert_eq!(h.counts.iter().sum::<u64>(), 1_004);
    }
}
