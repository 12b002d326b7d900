//! Quantiles by linear interpolation between order statistics (Hyndman & Fan type 7), by
//! selection rather than a full sort: one at a time, or several from one nested selection.

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn many_quantiles_at_once_equal_each_one_alone() {
        // Against `type7` itself (Hyndman & Fan 1996, definition 7, numpy's default method;
        // checked by hand below, and against numpy in tests/reference): sizes 1 to 300, ties,
        // NaN and both zeros, the probabilities the outlier check asks for and the extremes.
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        let ps = [0.01, 0.99, 0.5, 0.0, 1.0, 0.25];
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
