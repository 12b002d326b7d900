//! Robust z-scores in one pass: the MAD of a column about its median, from the absolute
//! deviations as the quantile pass reads them, with the values beyond the percentile cutoffs
//! and, as far as the MAD's bracket allows, those whose robust z is beyond the threshold
//! counted on the way (the outlier check's second pass over each variable).

use crate::core::{quantiles_visiting, View};

/// The MAD's scale for a normal distribution, 1 / Φ⁻¹(3/4).
pub const MAD_SCALE: f64 = 1.482_602_218_505_602;

/// What the pass for the MAD counts besides.
pub(super) struct MadPass {
    /// Values below and above the pooled `cutoffs` (none when there are none).
    pub(super) below: u64,
    pub(super) above: u64,
    /// 1.4826 × the median absolute deviation from `m`.
    pub(super) mad: Option<f64>,
    /// Values whose robust z is beyond the threshold (None with a MAD of zero: not defined).
    pub(super) robust_z_beyond: Option<u64>,
    /// Whether the robust z was counted in the same pass (else in a pass of its own; the
    /// tests hold that the first is the usual case).
    #[cfg_attr(not(test), allow(dead_code))]
    fused: bool,
}

/// The MAD of the values of `x` (`n` of them) about the median `m`, from their absolute
/// deviations computed as they are read; in the same pass the values beyond the `cutoffs`
/// and, as far as the MAD's bracket allows, the values whose robust z is beyond `z`.
/// |v - m| / d is exactly |(v - m) / d|, so the count is the one the z-scores give.
pub(super) fn mad_pass(
    x: &View,
    n: usize,
    m: f64,
    cutoffs: (Option<f64>, Option<f64>),
    z: f64,
) -> MadPass {
    let mut counts = None;
    let (q, _) = quantiles_visiting(
        x,
        n,
        |v| (v - m).abs(),
        &[0.5],
        |range| {
            let counts = counts.insert(Beyond::new(cutoffs, range, z, n));
            move |v, a| counts.visit(v, a)
        },
    );
    let beyond = counts.expect("the visitor is always made");
    let mad = q[0].map(|d| d * MAD_SCALE);
    let (mut robust_z_beyond, mut fused) = (None, false);
    if let Some(d) = mad.filter(|d| *d > 0.0) {
        let (count, in_pass) = match beyond.z_count(d) {
            Some(count) => (count, true),
            // The MAD fell outside its bracket (or there was none): one more pass.
            None => (
                x.iter().filter(|(_, v)| (v - m).abs() / d > z).count() as u64,
                false,
            ),
        };
        (robust_z_beyond, fused) = (Some(count), in_pass);
    }
    MadPass {
        below: beyond.below,
        above: beyond.above,
        mad,
        robust_z_beyond,
        fused,
    }
}

/// The counts that ride on the pass reading each value's absolute deviation from the median
/// (for the MAD): values beyond the pooled cutoffs, and values whose robust z is beyond the
/// threshold whatever the MAD within its bracket turns out to be. Those that could go either
/// way (a narrow band of deviations) are kept and decided once the MAD is known.
struct Beyond {
    lower: Option<f64>,
    upper: Option<f64>,
    below: u64,
    above: u64,
    /// The MAD's bounds from its bracket and the deviations above which a value is surely
    /// beyond and below which it surely is not; None when not known before the pass.
    band: Option<Band>,
    /// Values surely beyond.
    sure: u64,
    /// Deviations inside the band.
    unsure: Vec<f64>,
    /// The most deviations kept in the band before giving it up for a pass of its own.
    room: usize,
    z: f64,
}

#[derive(Clone, Copy)]
struct Band {
    /// The MAD's lowest and highest value, from its bracket.
    d_lo: f64,
    d_hi: f64,
    /// A deviation above `sure` has a robust z beyond the threshold for any MAD up to
    /// `d_hi`; one below `never` has not for any MAD from `d_lo`.
    sure: f64,
    never: f64,
}

impl Beyond {
    fn new(
        cutoffs: (Option<f64>, Option<f64>),
        range: Option<(f64, f64)>,
        z: f64,
        n: usize,
    ) -> Beyond {
        let (lower, upper) = cutoffs;
        // A relative margin far above the rounding of a quotient and a product (a few 1e-16),
        // so that the comparisons below decide only what the exact division would.
        const MARGIN: f64 = 1e-9;
        let band = range.and_then(|(q_lo, q_hi)| {
            let (d_lo, d_hi) = (q_lo * MAD_SCALE, q_hi * MAD_SCALE);
            let (sure, never) = (z * d_hi * (1.0 + MARGIN), z * d_lo * (1.0 - MARGIN));
            let usable = d_lo > 0.0 && z > 0.0 && sure.is_finite() && never > 0.0;
            usable.then_some(Band {
                d_lo,
                d_hi,
                sure,
                never,
            })
        });
        Beyond {
            lower,
            upper,
            below: 0,
            above: 0,
            band,
            sure: 0,
            unsure: Vec::new(),
            room: (n / 16).max(4096),
            z,
        }
    }

    /// Count a value `v` with absolute deviation `a` from the median (inlined into the pass).
    #[inline(always)]
    fn visit(&mut self, v: f64, a: f64) {
        self.below += u64::from(self.lower.is_some_and(|l| v < l));
        self.above += u64::from(self.upper.is_some_and(|u| v > u));
        if let Some(band) = self.band {
            if a > band.sure {
                self.sure += 1;
            } else if a >= band.never {
                self.unsure.push(a);
                if self.unsure.len() > self.room {
                    self.band = None;
                    self.unsure = Vec::new();
                }
            }
        }
    }

    /// The values whose robust z is beyond the threshold, with the MAD `d`; None when `d` is
    /// outside the bracket the pass counted for (or there was none).
    fn z_count(&self, d: f64) -> Option<u64> {
        self.band.filter(|b| b.d_lo <= d && d <= b.d_hi)?;
        Some(self.sure + self.unsure.iter().filter(|a| **a / d > self.z).count() as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::{type7, Values};
    use polars::prelude::*;

    /// The robust z counted in the MAD's pass against its definition value by value: the
    /// median and the MAD by `type7` (Hyndman & Fan type 7, numpy's default, itself checked
    /// against numpy in tests/reference), then |v - m| / (1.4826 MAD) > z. Columns larger than
    /// the quantiles' sampling threshold, so that the bracket and its band are used: spread
    /// values with far tails, small whole numbers whose deviations land exactly on the
    /// threshold, missing values and NaN, and a constant (a MAD of zero: the robust z undefined, no count).
    #[test]
    fn robust_z_counted_in_the_mads_pass_equals_its_definition() {
        let mut seed = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        let n = 200_003;
        let spread: Vec<Option<f64>> = (0..n)
            .map(|i| {
                let v = ((next() % 100_000) as f64 - 50_000.0) / 7.0;
                Some(if i % 97 == 0 { v * 40.0 } else { v })
            })
            .collect();
        // Median 5, MAD 2 (so d = 2.9652): deviations of whole numbers sit on z * d for the
        // thresholds below only by the float arithmetic, and many values share each.
        let ties: Vec<Option<f64>> = (0..n).map(|_| Some((next() % 11) as f64)).collect();
        let gaps: Vec<Option<f64>> = (0..n)
            .map(|_| match next() % 40 {
                0 => None,
                1 => Some(f64::NAN),
                r => Some((next() % 1000) as f64 * r as f64),
            })
            .collect();
        let constant: Vec<Option<f64>> = vec![Some(3.0); n];
        let mut used_band = 0;
        for (name, column) in [
            ("spread", spread),
            ("ties", ties),
            ("gaps", gaps),
            ("constant", constant),
        ] {
            let values = Values::new(&Float64Chunked::from_iter_options(
                "x".into(),
                column.iter().copied(),
            ));
            let x = values.view();
            let present: Vec<f64> = column.iter().flatten().copied().collect();
            let m = type7(&mut present.clone(), 0.5).unwrap();
            let mut dev: Vec<f64> = present.iter().map(|v| (v - m).abs()).collect();
            let d = type7(&mut dev, 0.5).unwrap() * MAD_SCALE;
            for z in [0.5, 1.0, 2.0 / MAD_SCALE, 3.5] {
                let pass = mad_pass(&x, present.len(), m, (Some(-100.0), Some(100.0)), z);
                // A MAD of zero leaves the robust z undefined: no count.
                let expected = (d > 0.0)
                    .then(|| present.iter().filter(|v| (*v - m).abs() / d > z).count() as u64);
                assert_eq!(pass.robust_z_beyond, expected, "{name}, z {z}");
                assert_eq!(pass.mad.map(f64::to_bits), Some(d.to_bits()), "{name}");
                let below = present.iter().filter(|v| **v < -100.0).count() as u64;
                let above = present.iter().filter(|v| **v > 100.0).count() as u64;
                assert_eq!((pass.below, pass.above), (below, above), "{name}");
                used_band += usize::from(pass.fused);
            }
        }
        // The band is used (not only the pass of its own) on the spread and missing columns.
        assert!(used_band >= 8, "the band was used {used_band} times");
    }
}
