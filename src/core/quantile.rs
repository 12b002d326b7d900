//! Quantiles by linear interpolation between order statistics (Hyndman & Fan type 7), by
//! selection rather than a full sort: one at a time, several from one nested selection, or —
//! for a whole column, read in place — from a deterministic sample that brackets each order
//! statistic, one pass that counts what lies below each bracket and keeps what lies in it,
//! and a selection within the few kept values.

use super::values::View;

mod tally;
use tally::Tally;

/// The `p` quantile of `v` by linear interpolation between order statistics (Hyndman & Fan
/// type 7, numpy's default): position (n − 1) p in the sorted values. Reorders `v`; NaN sorts
/// above every number, as the engine sorts it. None when `v` is empty.
pub fn type7(v: &mut [f64], p: f64) -> Option<f64> {
    let n = v.len();
    if n == 0 {
        return None;
    }
    let h = (n - 1) as f64 * p;
    let lo = (h.floor() as usize).min(n - 1);
    let (_, a, above) = v.select_nth_unstable_by(lo, f64::total_cmp);
    let a = *a;
    let frac = h - lo as f64;
    if frac <= 0.0 || above.is_empty() {
        return Some(a);
    }
    let b = above
        .iter()
        .copied()
        .min_by(f64::total_cmp)
        .expect("not empty");
    Some(a + (b - a) * frac)
}

/// Type-7 quantiles of `v` at each of `ps`, the same values `type7` gives one at a time, from
/// one nested selection: each order statistic needed is selected within the part the earlier
/// selections left it in, so three quantiles cost about two passes of selection over `v`, not
/// three. `v` is reordered.
pub fn type7_many(v: &mut [f64], ps: &[f64]) -> Vec<Option<f64>> {
    let n = v.len();
    if n == 0 {
        return vec![None; ps.len()];
    }
    let at = |p: f64| {
        let h = (n - 1) as f64 * p;
        let lo = (h.floor() as usize).min(n - 1);
        (lo, h - lo as f64)
    };
    let mut ks: Vec<usize> = ps
        .iter()
        .flat_map(|p| {
            let (lo, _) = at(*p);
            [lo, (lo + 1).min(n - 1)]
        })
        .collect();
    ks.sort_unstable();
    ks.dedup();
    select_each(v, &ks);
    ps.iter()
        .map(|p| {
            let (lo, frac) = at(*p);
            let a = v[lo];
            if frac <= 0.0 || lo + 1 >= n {
                Some(a)
            } else {
                Some(a + (v[lo + 1] - a) * frac)
            }
        })
        .collect()
}

/// Put the `k`-th smallest value (by `total_cmp`) at position `k` for every `k` of the sorted
/// `ks`, by selecting the middle one and recursing into either side.
fn select_each(v: &mut [f64], ks: &[usize]) {
    if ks.is_empty() {
        return;
    }
    let mid = ks.len() / 2;
    let k = ks[mid];
    let (left, _, right) = v.select_nth_unstable_by(k, f64::total_cmp);
    select_each(left, &ks[..mid]);
    let beyond: Vec<usize> = ks[mid + 1..].iter().map(|x| x - k - 1).collect();
    select_each(right, &beyond);
}

/// Where type-7 interpolation reads: (index of the lower order statistic, fraction).
fn position(n: usize, p: f64) -> (usize, f64) {
    let h = (n - 1) as f64 * p;
    let lo = (h.floor() as usize).min(n - 1);
    (lo, h - lo as f64)
}

/// The key by which `f64::total_cmp` orders: compared as integers, the same order.
fn key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ (((b >> 63) as u64) >> 1) as i64
}

/// Below this many values, `quantiles` copies them and selects (the sample would be most of
/// them anyway).
const SMALL: usize = 1 << 16;

/// Rows the sample of `quantiles` takes, evenly spaced.
const SAMPLE: usize = 1 << 14;

/// Type-7 quantiles at each of `ps` of `map(v)` over the values `v` present in `x` (`n` of
/// them), the same values `type7` gives, without reordering or copying the column: a sample
/// of evenly spaced rows brackets each order statistic needed (its rank in the sample ± four
/// standard errors), one pass counts the values below each bracket and keeps those inside it,
/// and each order statistic is selected among the kept ones. Should one fall outside its
/// bracket (rare; a count says so exactly), the values are copied and selected whole. Every
/// step is deterministic.
pub fn quantiles(x: &View, n: usize, map: impl Fn(f64) -> f64, ps: &[f64]) -> Vec<Option<f64>> {
    quantiles_visiting(x, n, map, ps, |_| |_, _| {}).0
}

/// [`quantiles`], with a caller's count riding on the pass that reads every value: `visitor`
/// is told the range of mapped values the order statistics will be selected in, as far as the
/// sample shows before that pass (None when it does not: few values, an open bracket), and
/// returns a function called as `visit(v, map(v))` on each value in row order, once. Should
/// the statistics in the end fall outside that range (the rare case where they are selected
/// from the whole values), the caller sees it in the quantiles themselves.
pub fn quantiles_visiting<V: FnMut(f64, f64)>(
    x: &View,
    n: usize,
    map: impl Fn(f64) -> f64,
    ps: &[f64],
    visitor: impl FnOnce(Option<(f64, f64)>) -> V,
) -> (Vec<Option<f64>>, V) {
    if n == 0 {
        return (vec![None; ps.len()], visitor(None));
    }
    let ks = ranks(n, ps);
    let (stats, visit) = order_stats(x, n, &map, &ks, visitor);
    (interpolate(n, ps, &ks, &stats), visit)
}

/// [`quantiles`] of each group's values (`group(r)`, below `groups`, of the rows with a value
/// in `x`), the same values, from one pass over the column rather than a copy of each group:
/// each group's order statistics are bracketed by its share of an evenly spaced sample, and
/// its values counted and kept as [`quantiles`] does. None when a group has values but too
/// few for bracketing, or an order statistic falls outside its bracket: the caller then
/// gathers the groups.
pub fn grouped_quantiles(
    x: &View,
    group: impl Fn(usize) -> usize,
    groups: usize,
    ps: &[f64],
) -> Option<Vec<Vec<Option<f64>>>> {
    let (values, ok) = x.parts();
    let present = |r: usize| ok.is_none_or(|ok| ok[r]);
    // Every `step`-th value of each group, counted within the group: evenly spaced rows of the
    // whole column would, in a panel sorted by entity with the same periods for each (a
    // balanced one), fall on a few periods only whenever the step shares a factor with their
    // number (every third row of a three-period panel is always the same period), leaving the
    // other periods without a sample and the caller to gather every group. The same pass
    // counts each group's values.
    let step = values.len().div_ceil(SAMPLE).max(1);
    let mut samples: Vec<Vec<i64>> = vec![Vec::new(); groups];
    let mut sizes = vec![0usize; groups];
    for r in (0..values.len()).filter(|r| present(*r)) {
        let g = group(r);
        if sizes[g].is_multiple_of(step) {
            samples[g].push(key(values[r]));
        }
        sizes[g] += 1;
    }
    if sizes.iter().any(|n| (1..=SMALL).contains(n)) {
        return None;
    }
    let ks: Vec<Vec<usize>> = sizes.iter().map(|n| ranks(*n, ps)).collect();
    let mut tallies = Vec::with_capacity(groups);
    for ((sample, ks), n) in samples.iter_mut().zip(&ks).zip(&sizes) {
        if *n > 0 && sample.len() < 2 {
            return None;
        }
        sample.sort_unstable();
        tallies.push(Tally::new(brackets(ks, *n, sample)));
    }
    for r in (0..values.len()).filter(|r| present(*r)) {
        tallies[group(r)].add(values[r]);
    }
    sizes
        .iter()
        .zip(&ks)
        .zip(tallies)
        .map(|((n, ks), tally)| match n {
            0 => Some(vec![None; ps.len()]),
            _ => Some(interpolate(*n, ps, ks, &tally.select(ks)?)),
        })
        .collect()
}

/// [`grouped_quantiles`], or, where it cannot bracket (a group too small, a bracket missed),
/// each group's values gathered and selected on its own ([`quantiles`]): the values two
/// selections give either way. Each group's quantiles at `ps`, groups in code order.
pub fn quantiles_by_group(
    x: &View,
    group: impl Fn(usize) -> usize,
    groups: usize,
    ps: &[f64],
) -> Vec<Vec<Option<f64>>> {
    if let Some(q) = grouped_quantiles(x, &group, groups, ps) {
        return q;
    }
    let mut sizes = vec![0usize; groups];
    for (r, _) in x.iter() {
        sizes[group(r)] += 1;
    }
    let mut gathered: Vec<Vec<f64>> = sizes.iter().map(|n| Vec::with_capacity(*n)).collect();
    for (r, v) in x.iter() {
        gathered[group(r)].push(v);
    }
    gathered
        .iter()
        .map(|g| quantiles(&View::all(g), g.len(), |v| v, ps))
        .collect()
}

/// The order statistics type-7 interpolation at `ps` reads among `n` values: sorted, distinct
/// (none when `n` is 0).
fn ranks(n: usize, ps: &[f64]) -> Vec<usize> {
    if n == 0 {
        return Vec::new();
    }
    let mut ks: Vec<usize> = ps
        .iter()
        .flat_map(|p| {
            let (lo, _) = position(n, *p);
            [lo, (lo + 1).min(n - 1)]
        })
        .collect();
    ks.sort_unstable();
    ks.dedup();
    ks
}

/// The type-7 quantiles at `ps` of `n` values from their order statistics `stats` at the
/// ranks `ks` ([`ranks`]).
fn interpolate(n: usize, ps: &[f64], ks: &[usize], stats: &[f64]) -> Vec<Option<f64>> {
    let at = |k: usize| stats[ks.binary_search(&k).expect("selected")];
    ps.iter()
        .map(|p| {
            let (lo, frac) = position(n, *p);
            let a = at(lo);
            if frac <= 0.0 || lo + 1 >= n {
                Some(a)
            } else {
                Some(a + (at(lo + 1) - a) * frac)
            }
        })
        .collect()
}

/// `f(v, map(v))` for each value `v` where `ok` says there is one, in row order (generic, so
/// that `f` is inlined into the loop).
fn each_mapped(
    values: &[f64],
    ok: Option<&[bool]>,
    map: &impl Fn(f64) -> f64,
    mut f: impl FnMut(f64, f64),
) {
    match ok {
        None => values.iter().for_each(|v| f(*v, map(*v))),
        Some(ok) => values
            .iter()
            .zip(ok)
            .filter(|(_, o)| **o)
            .for_each(|(v, _)| f(*v, map(*v))),
    }
}

/// The `k`-th smallest of the mapped values (by `total_cmp`) for each of the sorted, distinct
/// `ks`, and the visit of [`quantiles_visiting`] made once on every value.
fn order_stats<V: FnMut(f64, f64)>(
    x: &View,
    n: usize,
    map: &impl Fn(f64) -> f64,
    ks: &[usize],
    visitor: impl FnOnce(Option<(f64, f64)>) -> V,
) -> (Vec<f64>, V) {
    let (values, ok) = x.parts();
    // Every value copied and selected among; `visit` sees them on the way when given.
    let whole = |ks: &[usize], visit: Option<&mut V>| {
        let mut all = Vec::with_capacity(n);
        match visit {
            Some(visit) => each_mapped(values, ok, map, |v, a| {
                visit(v, a);
                all.push(a);
            }),
            None => each_mapped(values, ok, map, |_, a| all.push(a)),
        }
        select_each(&mut all, ks);
        ks.iter().map(|k| all[*k]).collect::<Vec<f64>>()
    };
    if n <= SMALL {
        let mut visit = visitor(None);
        return (whole(ks, Some(&mut visit)), visit);
    }
    // Every `step`-th row with a value, in row order.
    let step = values.len().div_ceil(SAMPLE).max(1);
    let mut sample: Vec<i64> = (0..values.len())
        .step_by(step)
        .filter(|r| ok.is_none_or(|ok| ok[*r]))
        .map(|r| key(map(values[r])))
        .collect();
    sample.sort_unstable();
    let m = sample.len();
    if m < 2 {
        let mut visit = visitor(None);
        return (whole(ks, Some(&mut visit)), visit);
    }
    let merged = brackets(ks, n, &sample);
    // The lowest and highest value the brackets hold, when both ends are closed.
    let range = match (merged.first(), merged.last()) {
        (Some(&(lo, _)), Some(&(_, hi))) if lo != i64::MIN && hi != i64::MAX => {
            Some((from_key(lo), from_key(hi)))
        }
        _ => None,
    };
    let mut visit = visitor(range);
    let mut tally = Tally::new(merged);
    tally.add_each(values, ok, map, &mut visit);
    let stats = tally.select(ks).unwrap_or_else(|| whole(ks, None));
    (stats, visit)
}

/// The value whose [`key`] is `k` (`key` is its own inverse on the bits).
fn from_key(k: i64) -> f64 {
    f64::from_bits((k ^ (((k >> 63) as u64) >> 1) as i64) as u64)
}

/// Each rank of `ks` (among `n` values)'s bracket of keys, from the sorted keys of an evenly
/// spaced `sample` of the values: its rank in the sample, four standard errors either side
/// (and a few ranks more), open at the ends; overlapping brackets merged, so that they are
/// disjoint and ascending.
fn brackets(ks: &[usize], n: usize, sample: &[i64]) -> Vec<(i64, i64)> {
    let m = sample.len();
    let mut brackets: Vec<(i64, i64)> = ks
        .iter()
        .map(|k| {
            let p = *k as f64 / n as f64;
            let at = p * m as f64;
            let spread = 4.0 * (m as f64 * p * (1.0 - p)).sqrt() + 8.0;
            let lo = at - spread;
            let hi = at + spread;
            let lo = if lo < 0.0 {
                i64::MIN
            } else {
                sample[lo as usize]
            };
            let hi = if hi >= (m - 1) as f64 {
                i64::MAX
            } else {
                sample[hi.ceil() as usize]
            };
            (lo, hi)
        })
        .collect();
    brackets.sort_unstable();
    let mut merged: Vec<(i64, i64)> = Vec::with_capacity(brackets.len());
    for (lo, hi) in brackets {
        match merged.last_mut() {
            Some(last) if lo <= last.1 => last.1 = last.1.max(hi),
            _ => merged.push((lo, hi)),
        }
    }
    merged
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A xorshift generator (Marsaglia 2003) from `seed`: reproducible test data.
    fn xorshift(mut seed: u64) -> impl FnMut() -> u64 {
        move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        }
    }

    #[test]
    fn many_quantiles_at_once_equal_each_one_alone() {
        // Against `type7` itself (Hyndman & Fan 1996, definition 7, numpy's default method;
        // checked by hand below, and against numpy in tests/reference): sizes 1 to 300, ties,
        // NaN and both zeros, the probabilities the outlier check asks for and the extremes.
        let mut next = xorshift(0x2545_f491_4f6c_dd1du64);
        let ps = [0.01, 0.99, 0.5, 0.0, 1.0, 0.25, 0.75];
        for n in 1..300usize {
            let v: Vec<f64> = (0..n)
                .map(|_| match next() % 20 {
                    0 => f64::NAN,
                    1 => -0.0,
                    2 => 0.0,
                    r => (next() % 50) as f64 / (r as f64),
                })
                .collect();
            let many = type7_many(&mut v.clone(), &ps);
            for (p, q) in ps.iter().zip(&many) {
                let one = type7(&mut v.clone(), *p);
                assert_eq!(one.map(f64::to_bits), q.map(f64::to_bits), "n {n}, p {p}");
            }
        }
        assert_eq!(type7_many(&mut [], &[0.5]), vec![None]);
    }

    #[test]
    fn bracketed_quantiles_equal_selection_on_whole_columns() {
        // `quantiles` against `type7` on a copy (itself checked against numpy): columns larger
        // than SMALL (so that the sample and the brackets are used) with ties, NaN, both
        // zeros, nulls, a pattern the evenly spaced sample misreads, and the absolute
        // deviations the MAD takes.
        use polars::prelude::*;
        let mut next = xorshift(0x9e37_79b9_7f4a_7c15u64);
        let ps = [0.01, 0.99, 0.5, 0.0, 1.0, 0.25, 0.75];
        let n = 3 * SMALL + 17;
        let columns: Vec<Vec<Option<f64>>> = vec![
            (0..n).map(|_| Some((next() % 1000) as f64 / 7.0)).collect(),
            (0..n)
                .map(|_| match next() % 50 {
                    0 => None,
                    1 => Some(f64::NAN),
                    2 => Some(-0.0),
                    3 => Some(0.0),
                    r => Some((next() % 100_000) as f64 * r as f64 - 1e6),
                })
                .collect(),
            // Every sampled row is 0, all others 1 or 2: the sample is no guide.
            (0..n)
                .map(|r| {
                    Some(if r % (n.div_ceil(SAMPLE)) == 0 {
                        0.0
                    } else {
                        (r % 2 + 1) as f64
                    })
                })
                .collect(),
            (0..n)
                .map(|_| Some(if next().is_multiple_of(3) { 5.0 } else { 7.0 }))
                .collect(),
        ];
        for (c, col) in columns.iter().enumerate() {
            let values = crate::core::Values::new(&Float64Chunked::from_iter_options(
                "x".into(),
                col.iter().copied(),
            ));
            let present: Vec<f64> = col.iter().flatten().copied().collect();
            // And the outlier cutoffs with the quartiles, five brackets apart (the checks'
            // shared pass, `audit::Pooled`).
            for ps in [&ps[..], &[0.01, 0.99, 0.25, 0.5, 0.75]] {
                let got = quantiles(&values.view(), present.len(), |v| v, ps);
                for (p, q) in ps.iter().zip(&got) {
                    let want = type7(&mut present.clone(), *p);
                    assert_eq!(
                        q.map(f64::to_bits),
                        want.map(f64::to_bits),
                        "column {c}, p {p}"
                    );
                }
            }
            let m = 3.5;
            let got = quantiles(&values.view(), present.len(), |v| (v - m).abs(), &[0.5]);
            let mut dev: Vec<f64> = present.iter().map(|v| (v - m).abs()).collect();
            let want = type7(&mut dev, 0.5);
            assert_eq!(
                got[0].map(f64::to_bits),
                want.map(f64::to_bits),
                "column {c}, MAD"
            );
        }
    }

    #[test]
    fn a_visit_sees_each_value_once_and_the_range_holds_the_quantiles() {
        // `quantiles_visiting` against `quantiles` (the same bits) and the column itself: each
        // present value visited once, in row order, with its mapped value; the range told
        // beforehand holds the quantiles (they interpolate between order statistics inside
        // it); a small column (selected whole) is visited too, with no range.
        use polars::prelude::*;
        let mut next = xorshift(0x2545_f491_4f6c_dd1du64);
        let n = 2 * SMALL + 5;
        let column: Vec<Option<f64>> = (0..n)
            .map(|_| match next() % 30 {
                0 => None,
                r => Some((next() % 10_000) as f64 / r as f64 - 100.0),
            })
            .collect();
        for rows in [n, SMALL / 2] {
            let values = super::super::Values::new(&Float64Chunked::from_iter_options(
                "x".into(),
                column[..rows].iter().copied(),
            ));
            let x = values.view();
            let present: Vec<f64> = column[..rows].iter().flatten().copied().collect();
            let map = |v: f64| (v - 3.0).abs();
            let ps = [0.5, 0.01];
            let (mut seen, mut told) = (Vec::new(), None);
            let (q, _) = quantiles_visiting(&x, present.len(), map, &ps, |range| {
                told = Some(range);
                |v: f64, a: f64| seen.push((v, a))
            });
            let expected: Vec<(f64, f64)> = present.iter().map(|v| (*v, map(*v))).collect();
            assert_eq!(seen, expected, "{rows} rows");
            let bits =
                |q: &[Option<f64>]| q.iter().map(|v| v.map(f64::to_bits)).collect::<Vec<_>>();
            assert_eq!(bits(&q), bits(&quantiles(&x, present.len(), map, &ps)));
            match told.expect("the visitor is made") {
                Some((lo, hi)) => {
                    assert_eq!(rows, n);
                    assert!(
                        q.iter().flatten().all(|v| lo <= *v && *v <= hi),
                        "{lo} {hi} {q:?}"
                    );
                }
                None => assert_eq!(rows, SMALL / 2),
            }
        }
    }

    #[test]
    fn grouped_quantiles_equal_each_group_selected_alone() {
        // `grouped_quantiles` against `type7` on each group's values copied (type7 itself
        // checked against numpy): three groups interleaved as periods are in a panel sorted
        // by entity, one empty, with ties, NaN, nulls; and None when a group is too small.
        use polars::prelude::*;
        let mut next = xorshift(0x2545_f491_4f6c_dd1du64);
        let n = 3 * (SMALL + 5_000);
        let group = |r: usize| [0, 2, 3][r % 3];
        let col: Vec<Option<f64>> = (0..n)
            .map(|r| match next() % 40 {
                0 => None,
                1 => Some(f64::NAN),
                v => Some((next() % 5_000) as f64 * (1 + r % 3) as f64 / v as f64),
            })
            .collect();
        let values = crate::core::Values::new(&Float64Chunked::from_iter_options(
            "x".into(),
            col.iter().copied(),
        ));
        let ps = [0.01, 0.99, 0.5];
        let got = grouped_quantiles(&values.view(), group, 4, &ps).expect("groups large enough");
        for (g, q) in got.iter().enumerate() {
            let mut mine: Vec<f64> = (0..n)
                .filter(|r| group(*r) == g)
                .filter_map(|r| col[r])
                .collect();
            for (p, q) in ps.iter().zip(q) {
                let want = type7(&mut mine, *p);
                assert_eq!(
                    q.map(f64::to_bits),
                    want.map(f64::to_bits),
                    "group {g}, p {p}"
                );
            }
        }
        let small = |r: usize| usize::from(r.is_multiple_of(100));
        assert!(grouped_quantiles(&values.view(), small, 2, &ps).is_none());
    }

    #[test]
    fn type7_quantiles_match_hand_worked_values() {
        // Sorted 1, 2, 3, 4: position 3 p. p = 0.5 -> 2.5; p = 0.1 -> 1.3; p = 1 -> 4
        // (numpy.percentile's default method gives the same, by hand).
        let q = |p: f64| type7(&mut [4.0, 1.0, 3.0, 2.0], p).unwrap();
        assert!((q(0.5) - 2.5).abs() < 1e-12);
        assert!((q(0.1) - 1.3).abs() < 1e-12);
        assert_eq!(q(1.0), 4.0);
        assert_eq!(q(0.0), 1.0);
        assert_eq!(type7(&mut [], 0.5), None);
        assert_eq!(type7(&mut [7.0], 0.99), Some(7.0));
    }
}
