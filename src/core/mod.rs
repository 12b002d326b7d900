//! The panel core: integer codes for entities and periods, built once from a panel sorted by
//! (entity, period), and the typed kernels the checks share — per-variable moments, within,
//! between and period variation, and the exact residual on entity + period effects.
//!
//! The kernels walk plain slices of codes beside one variable's values, in row order, so every
//! sum runs in the same order on every run (byte-identical reports) and no frame is copied.

use nalgebra::{DMatrix, DVector};
use polars::prelude::*;
use rayon::prelude::*;

use crate::Result;

mod groups;
mod keys;
mod quantile;
mod singletons;
mod slip;
mod text;
mod values;

pub use groups::{fewest_for_cutoffs, GroupCodes};
pub use keys::same_as_previous;
pub use quantile::{
    grouped_quantiles, quantiles, quantiles_by_group, quantiles_visiting, type7, type7_many,
};
pub use slip::{magnitude, slips};
pub use text::{
    codes, hold_text_as_codes, is_coded, repeats_in, sample_starts, spelled_out,
    spelled_out_schema, without_zeros, Spelling, TEXT_SAMPLE,
};
pub use values::{Values, View};

/// How many variables the kernels hold in memory at once (several per core, few enough that
/// memory holds a handful of columns' values rather than the whole panel's).
pub const BATCH: usize = 4;

/// `f` on every item, [`BATCH`] items at a time in parallel; each batch's results, in the
/// items' order, go to `take` before the next batch starts, so that memory holds a few items'
/// results rather than all.
pub fn in_batches<T: Sync, R: Send>(
    items: &[T],
    f: impl Fn(&T) -> Result<R> + Sync,
    mut take: impl FnMut(&[T], Vec<R>) -> Result<()>,
) -> Result<()> {
    for batch in items.chunks(BATCH) {
        let done = batch.par_iter().map(&f).collect::<Result<Vec<R>>>()?;
        take(batch, done)?;
    }
    Ok(())
}

/// Entity and period codes of a panel sorted by entity and period.
#[derive(Debug, Clone, Default)]
pub struct PanelCore {
    /// Entity code of each row, 0-based, rising with the sort order.
    pub entity: Vec<u32>,
    /// Period code of each row: the index into `periods`.
    pub period: Vec<u32>,
    /// The distinct periods, ascending.
    pub periods: Vec<i64>,
    /// The rows of entity `i` are `starts[i]..starts[i + 1]`.
    pub starts: Vec<usize>,
    /// The period system of the two-way residual for a variable with a value on every row:
    /// it depends only on which rows have one, so it is built once, on first use.
    complete_system: std::sync::OnceLock<Vec<f64>>,
}

/// What the moments' passes leave for the two-way residual: each entity's sum and count of
/// values, each period's count of values, the period sums of the entity-demeaned values and
/// their sum of squares.
#[derive(Debug, Clone)]
pub struct TwoWaySums {
    e_sum: Vec<f64>,
    e_n: Vec<u32>,
    p_n: Vec<u64>,
    b: Vec<f64>,
    wss: f64,
}

/// The two-way residual sum of squares is read from the period system's solution, without a
/// pass of its own, when it is at least this share of the sum of squares around the entity
/// means; below it, the difference of two sums that nearly cancel would lose digits (an age
/// whose residual is zero), and the residual is summed row by row instead.
const RESIDUAL_BY_DIFFERENCE: f64 = 1e-2;

impl PanelCore {
    /// Codes for `df`, which must be sorted by `entity` then `period`; rows missing a key are
    /// not expected (the key steps remove them) and count as one more entity or period.
    pub fn new(df: &DataFrame, entity: &str, period: &str) -> Result<PanelCore> {
        // The two keys' codes are independent passes over the rows: one on each core.
        let (entities, periods) =
            rayon::join(|| entity_codes(df, entity), || period_codes(df, period));
        let ((codes, starts), (period, periods)) = (entities?, periods?);
        Ok(PanelCore {
            entity: codes,
            period,
            periods,
            starts,
            complete_system: Default::default(),
        })
    }

    /// Rows.
    pub fn rows(&self) -> usize {
        self.entity.len()
    }

    /// Entities.
    pub fn entities(&self) -> usize {
        self.starts.len().saturating_sub(1)
    }

    /// The period of row `r` (its value, not its code).
    #[inline]
    pub fn period_of(&self, r: usize) -> i64 {
        self.periods[self.period[r] as usize]
    }

    /// Variation figures of one variable given as f64 values in row order (nulls skipped).
    /// The two-way residual is left for [`PanelCore::two_way`].
    pub fn moments(&self, x: &Values) -> Moments {
        self.moments_and_sums(x).0
    }

    /// [`PanelCore::moments`], and the sums the two-way residual starts from, gathered in
    /// the same two passes over the rows.
    pub fn moments_and_sums(&self, x: &Values) -> (Moments, TwoWaySums) {
        match x.view().parts() {
            (values, None) => self.moments_with(values, |_| true),
            (values, Some(ok)) => self.moments_with(values, |r| ok[r]),
        }
    }

    /// [`PanelCore::moments_and_sums`] over `values` where `present(r)`. Entity by entity
    /// (their rows are contiguous), so that each entity's sums stay in registers; every sum
    /// still runs in row order.
    fn moments_with(
        &self,
        values: &[f64],
        present: impl Fn(usize) -> bool,
    ) -> (Moments, TwoWaySums) {
        let (ne, nt) = (self.entities(), self.periods.len());
        let mut e_sum = vec![0.0; ne];
        let mut e_n = vec![0u32; ne];
        let mut flat = 0u64;
        let mut p_sum = vec![0.0; nt];
        let mut p_n = vec![0u64; nt];
        let (mut sum, mut n) = (0.0, 0u64);
        for (e, rows) in self.starts.windows(2).enumerate() {
            let (mut s, mut c) = (0.0, 0u32);
            // Flat: every value equal to the entity's first (NaN equals nothing, so an entity
            // holding one is not counted as flat; 0.0 and -0.0 are equal).
            let first = (rows[0]..rows[1])
                .find(|&r| present(r))
                .map_or(f64::NAN, |r| values[r]);
            let mut same = true;
            // The entity's rows as slices: no bounds check per row. A row without a value
            // adds +0.0 and 0 (selects, not a branch that missing values make unpredictable):
            // the sums start at +0.0 and so never become -0.0, and adding +0.0 to anything
            // else leaves it as it was, bit for bit.
            let (v_rows, t_rows) = (&values[rows[0]..rows[1]], &self.period[rows[0]..rows[1]]);
            for (i, (&v, &t)) in v_rows.iter().zip(t_rows).enumerate() {
                let k = present(rows[0] + i);
                let x = if k { v } else { 0.0 };
                s += x;
                c += u32::from(k);
                same &= !k | (v == first);
                let t = t as usize;
                p_sum[t] += x;
                p_n[t] += u64::from(k);
                sum += x;
                n += u64::from(k);
            }
            e_sum[e] = s;
            e_n[e] = c;
            flat += u64::from(c > 1 && same);
        }
        let mean = sum / n as f64;
        // Each entity's mean, computed where it is read rather than kept in a list of its
        // own: two entity-length buffers of fresh memory per variable fewer.
        let e_mean = |e: usize| {
            let c = e_n[e];
            if c > 0 {
                e_sum[e] / c as f64
            } else {
                0.0
            }
        };
        let p_mean: Vec<f64> = p_sum
            .iter()
            .zip(&p_n)
            .map(|(s, c)| if *c > 0 { s / *c as f64 } else { 0.0 })
            .collect();
        let (mut tss, mut wss, mut pss) = (0.0, 0.0, 0.0);
        // b of the two-way system: period sums of the entity-demeaned values.
        let mut b = vec![0.0; nt];
        for (e, rows) in self.starts.windows(2).enumerate() {
            let m = e_mean(e);
            let (v_rows, t_rows) = (&values[rows[0]..rows[1]], &self.period[rows[0]..rows[1]]);
            for (i, (&v, &t)) in v_rows.iter().zip(t_rows).enumerate() {
                let k = present(rows[0] + i);
                let t = t as usize;
                let (d, w, p) = if k {
                    (v - mean, v - m, v - p_mean[t])
                } else {
                    (0.0, 0.0, 0.0)
                };
                tss += d * d;
                wss += w * w;
                pss += p * p;
                b[t] += w;
            }
        }
        // Between: SD of the entity means, each entity with a value once, n - 1.
        let observed = || (0..e_n.len()).filter(|e| e_n[*e] > 0).map(e_mean);
        let k = e_n.iter().filter(|c| **c > 0).count();
        let sd_between = if k > 1 {
            let k = k as f64;
            let mm = observed().sum::<f64>() / k;
            (observed().map(|m| (m - mm).powi(2)).sum::<f64>() / (k - 1.0)).sqrt()
        } else {
            f64::NAN
        };
        let moments = Moments {
            n,
            mean,
            tss,
            wss,
            pss,
            sd_between,
            flat,
        };
        (
            moments,
            TwoWaySums {
                e_sum,
                e_n,
                p_n,
                b,
                wss,
            },
        )
    }

    /// Residual sum of squares of `x` on entity and period effects together, exactly: remove
    /// entity means, then solve the small period system (Frisch–Waugh–Lovell; the T × T matrix
    /// is assembled from each entity's period counts). Rows with a null are left out.
    pub fn two_way(&self, x: &Values) -> f64 {
        let (_, sums) = self.moments_and_sums(x);
        self.two_way_from(x, &sums)
    }

    /// The period system's matrix A = D' M D = diag(n_t) - sum_i c_i c_i' / T_i, c_i the
    /// entity's counts per period over the rows where `x` has a value (`sums.e_n` of them;
    /// n_t is `sums.p_n`).
    fn period_system(&self, x: &View, sums: &TwoWaySums) -> Vec<f64> {
        let e_n = &sums.e_n;
        let (ne, nt) = (self.entities(), self.periods.len());
        let ok = x.parts().1;
        let mut a = vec![0.0; nt * nt];
        let mut seen: Vec<(usize, f64)> = Vec::new();
        // Entities with one row per period share their part of A by the set of periods they
        // have (a bit mask when there are at most 128 periods): sum_i c_i c_i' / T_i is, per
        // set, the set's all-ones block times (entities with that set) / (its size). So A
        // costs one pass over the rows plus one block per distinct set, not T_i^2 per entity.
        let by_mask = nt <= 128;
        let mut blocks: std::collections::HashMap<u128, f64, MaskHash> = Default::default();
        for (i, rows) in self.starts.windows(2).enumerate().take(ne) {
            if e_n[i] == 0 {
                continue;
            }
            seen.clear();
            let mut mask = 0u128;
            let mut repeats = false;
            // Only which rows have a value matters here, not the values (a third of the
            // memory a pass over the values would read).
            for r in rows[0]..rows[1] {
                if ok.is_none_or(|ok| ok[r]) {
                    let t = self.period[r] as usize;
                    match seen.last_mut() {
                        Some((s, c)) if *s == t => {
                            *c += 1.0;
                            repeats = true;
                        }
                        _ => seen.push((t, 1.0)),
                    }
                    if by_mask {
                        mask |= 1u128 << t;
                    }
                }
            }
            if by_mask && !repeats {
                *blocks.entry(mask).or_insert(0.0) += 1.0 / e_n[i] as f64;
                continue;
            }
            let inv = 1.0 / e_n[i] as f64;
            for &(t, ct) in &seen {
                let row = &mut a[t * nt..(t + 1) * nt];
                for &(s, cs) in &seen {
                    row[s] -= ct * cs * inv;
                }
            }
        }
        // diag(n_t), the moments' period counts, added once (each entity's counts added to
        // A's diagonal in turn took 40 % of this function's time in the profile); exact, so
        // the order against the subtractions above moves nothing but, where an entity has a
        // period twice, the last bits.
        for (t, n) in sums.p_n.iter().enumerate() {
            a[t * nt + t] += *n as f64;
        }
        // In a fixed order (by mask), so the sums do not depend on the hash map's order.
        let mut blocks: Vec<(u128, f64)> = blocks.into_iter().collect();
        blocks.sort_unstable_by_key(|(mask, _)| *mask);
        let mut members = Vec::with_capacity(nt);
        for (mask, w) in blocks {
            members.clear();
            members.extend((0..nt).filter(|t| mask >> t & 1 == 1));
            for &t in &members {
                let row = &mut a[t * nt..(t + 1) * nt];
                for &s in &members {
                    row[s] -= w;
                }
            }
        }
        a
    }

    /// [`PanelCore::two_way`] from the sums of [`PanelCore::moments_and_sums`] on the same
    /// `x`: the period system (built once for variables with a value on every row) and its
    /// solution. The period effects explain b'beta of the entity-demeaned sum of squares (the
    /// normal equations A beta = b, Frisch–Waugh–Lovell), so the residual is what is left of
    /// it; only where that is a small part of it (see [`RESIDUAL_BY_DIFFERENCE`]) is it summed
    /// by one more pass over the rows.
    pub fn two_way_from(&self, x: &Values, sums: &TwoWaySums) -> f64 {
        let x = x.view();
        let nt = self.periods.len();
        let a = if x.parts().1.is_none() {
            self.complete_system
                .get_or_init(|| self.period_system(&x, sums))
                .clone()
        } else {
            self.period_system(&x, sums)
        };
        let b = DVector::from_vec(sums.b.clone());
        let beta = solve_psd(DMatrix::from_row_slice(nt, nt, &a), &b);
        let left = sums.wss - b.dot(&beta);
        if left >= RESIDUAL_BY_DIFFERENCE * sums.wss {
            return left;
        }
        match x.parts() {
            (values, None) => self.residual(values, |_| true, &beta, sums),
            (values, Some(ok)) => self.residual(values, |r| ok[r], &beta, sums),
        }
    }

    /// The residual sum of squares once the period effects `beta` are known: the fitted
    /// period part of each row, entity-demeaned, is beta_t - the mean of beta over the
    /// entity's rows; the residual is what is left of x~ (rows where `present(r)`).
    fn residual(
        &self,
        values: &[f64],
        present: impl Fn(usize) -> bool,
        beta: &DVector<f64>,
        sums: &TwoWaySums,
    ) -> f64 {
        let (e_sum, e_n) = (&sums.e_sum, &sums.e_n);
        let beta = beta.as_slice();
        let mut rss = 0.0;
        for (i, rows) in self.starts.windows(2).enumerate() {
            if e_n[i] == 0 {
                continue;
            }
            // The entity's rows as slices (no bounds check per row), with their row numbers;
            // a row without a value adds +0.0 (see `moments_with`).
            let (start, end) = (rows[0], rows[1]);
            let rows = || {
                values[start..end]
                    .iter()
                    .zip(&self.period[start..end])
                    .enumerate()
                    .map(|(j, (&v, &t))| (present(start + j), v, t as usize))
            };
            let m = e_sum[i] / e_n[i] as f64;
            let mut mb = 0.0;
            for (k, _, t) in rows() {
                mb += if k { beta[t] } else { 0.0 };
            }
            mb /= e_n[i] as f64;
            for (k, v, t) in rows() {
                let left = if k { v - m - (beta[t] - mb) } else { 0.0 };
                rss += left * left;
            }
        }
        rss
    }
}

/// Each row's entity code in a panel sorted by `entity`, and where each entity's rows start
/// (with the row count last).
fn entity_codes(df: &DataFrame, entity: &str) -> Result<(Vec<u32>, Vec<usize>)> {
    let ids = df.column(entity)?.cast(&DataType::String)?;
    let ids = ids.str()?;
    let mut codes = Vec::with_capacity(df.height());
    let mut starts = Vec::new();
    if let Some(same) = keys::same_as_previous(ids) {
        if !ids.is_empty() {
            starts.push(0);
            codes.push(0);
        }
        for (r, same) in same.enumerate() {
            if !same {
                starts.push(r + 1);
            }
            codes.push((starts.len() - 1) as u32);
        }
    } else {
        let mut last: Option<Option<&str>> = None;
        for (r, id) in ids.iter().enumerate() {
            if last != Some(id) {
                starts.push(r);
                last = Some(id);
            }
            codes.push((starts.len() - 1) as u32);
        }
    }
    starts.push(df.height());
    Ok((codes, starts))
}

/// Each row's period code and the distinct periods, ascending.
fn period_codes(df: &DataFrame, period: &str) -> Result<(Vec<u32>, Vec<i64>)> {
    let p = df.column(period)?.cast(&DataType::Int64)?;
    let p = p.i64()?;
    if let (Some(lo), Some(hi)) = (p.min(), p.max()) {
        if hi.abs_diff(lo) < 1 << 16 {
            // A short range (years, quarters): each period marked in a table over the range,
            // a store a row (a search a row, in a panel sorted by entity whose period changes
            // on every row, took a third of the stage at 10 M).
            let mut seen = vec![false; hi.abs_diff(lo) as usize + 1];
            let mut mark = |v: i64| seen[v.abs_diff(lo) as usize] = true;
            match p.cont_slice() {
                Ok(values) => values.iter().for_each(|v| mark(*v)),
                Err(_) => p.iter().flatten().for_each(mark),
            }
            let periods: Vec<i64> = (lo..=hi)
                .zip(&seen)
                .filter_map(|(v, seen)| seen.then_some(v))
                .collect();
            return Ok((keys::period_codes(p, &periods), periods));
        }
    }
    // Few distinct periods over a long range: a sorted list grown by binary search, skipping
    // repeats.
    let mut periods: Vec<i64> = Vec::new();
    let mut previous = None;
    for v in p.iter().flatten() {
        if previous != Some(v) {
            if let Err(at) = periods.binary_search(&v) {
                periods.insert(at, v);
            }
            previous = Some(v);
        }
    }
    Ok((keys::period_codes(p, &periods), periods))
}

/// Hashing of the period-set masks in `two_way`: the mask folded to 64 bits and mixed by the
/// SplitMix64 finalizer. The default SipHash, keyed against hostile input that a mask of our
/// own making cannot be, cost more than the rest of the loop over the entities.
#[derive(Default, Clone, Copy)]
struct MaskHash;

impl std::hash::BuildHasher for MaskHash {
    type Hasher = MaskHasher;
    fn build_hasher(&self) -> MaskHasher {
        MaskHasher(0)
    }
}

/// See [`MaskHash`].
struct MaskHasher(u64);

impl std::hash::Hasher for MaskHasher {
    fn finish(&self) -> u64 {
        let mut x = self.0;
        x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        x ^ (x >> 31)
    }
    fn write(&mut self, bytes: &[u8]) {
        for b in bytes {
            self.0 = self.0.rotate_left(8) ^ u64::from(*b);
        }
    }
    fn write_u128(&mut self, x: u128) {
        self.0 ^= (x as u64) ^ ((x >> 64) as u64).rotate_left(32);
    }
}

/// Solve `a x = b` for a symmetric positive semi-definite `a` by its pseudo-inverse (the period
/// system has rank T − 1 at most, less when the panel falls into unconnected parts).
fn solve_psd(a: DMatrix<f64>, b: &DVector<f64>) -> DVector<f64> {
    if a.nrows() == 0 {
        return DVector::zeros(0);
    }
    let scale = a.diagonal().amax().max(f64::MIN_POSITIVE);
    let eig = a.symmetric_eigen();
    let tol = scale * 1e-12 * eig.eigenvalues.len() as f64;
    let mut x = DVector::<f64>::zeros(b.len());
    for (k, lambda) in eig.eigenvalues.iter().enumerate() {
        if *lambda > tol {
            let v = eig.eigenvectors.column(k);
            x += v * (v.dot(b) / lambda);
        }
    }
    x
}

/// Sums of one variable, from [`PanelCore::moments`].
#[derive(Debug, Clone, Copy)]
pub struct Moments {
    /// Rows with a value.
    pub n: u64,
    /// Mean.
    pub mean: f64,
    /// Total sum of squares around the mean.
    pub tss: f64,
    /// Sum of squares around the entity means.
    pub wss: f64,
    /// Sum of squares around the period means.
    pub pss: f64,
    /// SD of the entity means (n − 1), NaN with fewer than two entities.
    pub sd_between: f64,
    /// Entities with two or more values, all equal.
    pub flat: u64,
}

/// The panel core of entities `f` and periods `y` (sorted by both), for unit tests.
#[cfg(test)]
pub(crate) fn coded(f: &[&str], y: &[i64]) -> PanelCore {
    let df = df!("f" => f, "y" => y).unwrap();
    PanelCore::new(&df, "f", "y").unwrap()
}

#[cfg(test)]
mod tests;
