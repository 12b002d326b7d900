//! Unit tests of the panel core: codes, singletons, moments and the two-way residual.

use super::coded as core;
use super::*;

#[test]
fn codes_follow_the_sort_order() {
    let c = core(&["a", "a", "b", "c", "c"], &[2001, 2003, 2002, 2001, 2002]);
    assert_eq!(c.entity, [0, 0, 1, 2, 2]);
    assert_eq!(c.periods, [2001, 2002, 2003]);
    assert_eq!(c.period, [0, 2, 1, 0, 1]);
    assert_eq!(c.starts, [0, 2, 3, 5]);
    // Codes worked by hand, the same by every path: long names (equal ones in different
    // places of the buffer), a missing name, several chunks, a period range too wide for
    // a table, a missing period (code 0, as the binary search gives).
    let long = [
        "a firm with a long name",
        "a firm with a long name",
        "another firm's long name",
    ];
    let by_path = |f: Vec<Option<&str>>, y: Vec<Option<i64>>, chunked: bool| {
        let whole = df!("f" => f, "y" => y).unwrap();
        let df = if chunked {
            let mut df = whole.slice(0, 1);
            df.vstack_mut(&whole.slice(1, whole.height())).unwrap();
            df
        } else {
            whole
        };
        let c = PanelCore::new(&df, "f", "y").unwrap();
        (c.entity, c.period, c.periods, c.starts)
    };
    for chunked in [false, true] {
        let (e, p, periods, starts) = by_path(
            long.map(Some).to_vec(),
            vec![Some(1), Some(1 << 40), Some(5)],
            chunked,
        );
        assert_eq!(
            (e, p, periods, starts),
            (
                vec![0, 0, 1],
                vec![0, 2, 1],
                vec![1, 5, 1 << 40],
                vec![0, 2, 3]
            )
        );
        let (e, p, periods, starts) = by_path(
            vec![Some("a"), Some("a"), None],
            vec![Some(2001), None, Some(2003)],
            chunked,
        );
        assert_eq!(
            (e, p, periods, starts),
            (
                vec![0, 0, 1],
                vec![0, 0, 1],
                vec![2001, 2003],
                vec![0, 2, 3]
            )
        );
        // The widest range a table covers (65,535 apart, from a negative period) and the
        // narrowest it does not: the same codes either way.
        for (lo, hi) in [(-3, 65_532), (0, 65_536)] {
            let (e, p, periods, starts) = by_path(
                vec![Some("a"), Some("a"), Some("b")],
                vec![Some(hi), Some(lo), Some(lo)],
                chunked,
            );
            assert_eq!(
                (e, p, periods, starts),
                (vec![0, 0, 1], vec![1, 0, 0], vec![lo, hi], vec![0, 2, 3])
            );
        }
    }
}

#[test]
fn age_is_absorbed_and_a_two_by_two_interaction_is_not() {
    // age = year - founded is entity part + period part: no residual (worked by hand).
    let f = ["a", "a", "a", "b", "b", "c", "c", "c"];
    let y = [1i64, 2, 3, 2, 3, 1, 2, 3];
    let c = core(&f, &y);
    let founded = [0.0, 0.0, 0.0, -5.0, -5.0, 3.0, 3.0, 3.0];
    let age: Float64Chunked = y
        .iter()
        .zip(founded)
        .map(|(y, f)| Some(*y as f64 - f))
        .collect();
    assert!(c.two_way(&Values::new(&age)) < 1e-20);
    // Balanced 2 x 2 with x = 1 only in (b, 2): the residual of the interaction is
    // +-1/4 in every cell, so the RSS is 4 / 16 = 0.25 (worked by hand).
    let c = core(&["a", "a", "b", "b"], &[1, 2, 1, 2]);
    let x: Float64Chunked = [0.0, 0.0, 0.0, 1.0].into_iter().map(Some).collect();
    assert!((c.two_way(&Values::new(&x)) - 0.25).abs() < 1e-12);
    // A null leaves its row out: with (a, 1) missing, three rows fit three effects exactly.
    let x: Float64Chunked = [None, Some(0.0), Some(0.0), Some(1.0)]
        .into_iter()
        .collect();
    assert!(c.two_way(&Values::new(&x)).abs() < 1e-20);
}

#[test]
fn iterated_singletons_peel_to_the_two_core() {
    // (A,1) (A,2) (B,2) (B,3) (C,3): C goes, then period 3 has one key, and so on until
    // nothing is left (worked by hand, as in audit/tests.rs).
    let c = core(&["A", "A", "B", "B", "C"], &[1, 2, 2, 3, 3]);
    assert_eq!(c.two_way_singletons(), 5);
    // A 2 x 2 block survives; the extra singleton D and a copied key do not change that.
    let c = core(&["A", "A", "A", "B", "B", "D"], &[1, 2, 2, 1, 2, 1]);
    assert_eq!(c.two_way_singletons(), 1);
    assert_eq!(c.two_way_kept(), [true, true, true, true, true, false]);
    // Every row its own key: the 2 x 2 block of A and B stays, C goes.
    let c = core(&["A", "A", "B", "B", "C"], &[1, 2, 1, 2, 1]);
    assert_eq!(c.two_way_singletons(), 1);
    assert_eq!(c.two_way_kept(), [true, true, true, true, false]);
}

#[test]
fn rows_without_a_value_are_left_out_bit_for_bit() {
    // By definition the moments and the two-way residual leave out the rows without a
    // value: the same figures as on the panel without those rows, to the bit, whatever
    // the engine keeps in a missing row's slot (NaN here) and where the rows fall (an
    // entity's first row, its middle, its last).
    let f = ["a", "a", "a", "b", "b", "b", "c", "c", "d", "d"];
    let y = [1, 2, 3, 1, 2, 3, 1, 2, 2, 3];
    let v = [
        f64::NAN,
        2.0,
        4.0,
        1.0,
        f64::NAN,
        7.0,
        3.0,
        3.5,
        f64::NAN,
        6.0,
    ];
    let ok = [
        false, true, true, true, false, true, true, true, false, true,
    ];
    let bits: polars_arrow::bitmap::Bitmap = ok.iter().copied().collect();
    let x = Float64Chunked::from_vec_validity("x".into(), v.to_vec(), Some(bits));
    let x = Values::new(&x);
    let kept = |r: &usize| ok[*r];
    let rows: Vec<usize> = (0..f.len()).filter(kept).collect();
    let sub = core(
        &rows.iter().map(|&r| f[r]).collect::<Vec<_>>(),
        &rows.iter().map(|&r| y[r]).collect::<Vec<_>>(),
    );
    let xs: Float64Chunked = rows.iter().map(|&r| Some(v[r])).collect();
    let xs = Values::new(&xs);
    let (full, part) = (core(&f, &y).moments(&x), sub.moments(&xs));
    assert_eq!(full.n, 7);
    for (a, b) in [
        (full.mean, part.mean),
        (full.tss, part.tss),
        (full.wss, part.wss),
        (full.pss, part.pss),
        (full.sd_between, part.sd_between),
        (core(&f, &y).two_way(&x), sub.two_way(&xs)),
    ] {
        assert_eq!(a.to_bits(), b.to_bits(), "{a} against {b}");
    }
    assert_eq!((full.n, full.flat), (part.n, part.flat));
}

#[test]
fn moments_match_a_hand_computation() {
    // a: 1, 3; b: 5, 5 (flat). Mean 3.5; TSS 6.25+0.25+2.25+2.25 = 11; WSS 1+1 = 2;
    // between SD of (2, 5) = sqrt(4.5).
    let c = core(&["a", "a", "b", "b"], &[1, 2, 1, 2]);
    let x: Float64Chunked = [1.0, 3.0, 5.0, 5.0].into_iter().map(Some).collect();
    let m = c.moments(&Values::new(&x));
    assert_eq!(m.n, 4);
    assert!((m.mean - 3.5).abs() < 1e-12);
    assert!((m.tss - 11.0).abs() < 1e-12);
    assert!((m.wss - 2.0).abs() < 1e-12);
    assert!((m.sd_between - 4.5f64.sqrt()).abs() < 1e-12);
    assert_eq!(m.flat, 1);
    // Flat, worked by hand: c (0.0, -0.0) is; d (NaN, NaN), e (2, NaN), f (one row) not.
    let c = core(&["c", "c", "d", "d", "e", "e", "f"], &[1, 2, 1, 2, 1, 2, 1]);
    let x: Float64Chunked = [0.0, -0.0, f64::NAN, f64::NAN, 2.0, f64::NAN, 7.0]
        .into_iter()
        .map(Some)
        .collect();
    assert_eq!(c.moments(&Values::new(&x)).flat, 1);
}

/// Residual sum of squares of `x` on entity and period dummies by least squares on the full
/// design (nalgebra's SVD): the definition the exact two-way residual must meet.
fn dummy_rss(f: &[&str], y: &[i64], x: &[f64]) -> f64 {
    let mut ents: Vec<&str> = f.to_vec();
    ents.dedup();
    let mut pers: Vec<i64> = y.to_vec();
    pers.sort_unstable();
    pers.dedup();
    let k = ents.len() + pers.len() - 1;
    let d = DMatrix::from_fn(x.len(), k, |r, c| {
        let hit = if c < ents.len() {
            f[r] == ents[c]
        } else {
            y[r] == pers[c - ents.len() + 1]
        };
        f64::from(u8::from(hit))
    });
    let b = DVector::from_column_slice(x);
    let beta = d.clone().svd(true, true).solve(&b, 1e-12).unwrap();
    (b - d * beta).norm_squared()
}

/// The exact two-way residual of `x` within 1e-9 relative of [`dummy_rss`].
fn meets_dummies(f: &[&str], y: &[i64], x: &[f64]) {
    let xs: Float64Chunked = x.iter().map(|v| Some(*v)).collect();
    let ours = core(f, y).two_way(&Values::new(&xs));
    let theirs = dummy_rss(f, y, x);
    assert!(
        (ours - theirs).abs() <= 1e-9 * theirs,
        "{ours} against {theirs}"
    );
}

#[test]
fn two_way_meets_least_squares_on_dummies_with_repeats_and_many_periods() {
    // A period twice for one entity (the path that subtracts entity by entity), gaps, and
    // more than 128 periods (no period-set masks): against least squares on the dummies.
    let f = ["a", "a", "a", "a", "b", "b", "b", "c", "c", "c", "d", "d"];
    let y = [1, 2, 2, 4, 1, 2, 3, 2, 3, 4, 1, 4];
    let x = [1.0, 4.0, 2.5, 3.0, 2.0, 7.0, 1.5, 0.5, 6.0, 2.0, 3.5, 9.0];
    meets_dummies(&f, &y, &x);

    let (mut f, mut y, mut x) = (Vec::new(), Vec::new(), Vec::new());
    for (e, name) in ["p", "q", "r"].iter().enumerate() {
        for t in 0..140i64 {
            if (t + e as i64) % 7 != 3 {
                f.push(*name);
                y.push(2000 + t);
                x.push(((t * 37 + e as i64 * 11) % 23) as f64 + 0.1 * e as f64);
            }
        }
    }
    meets_dummies(&f, &y, &x);
}

#[test]
fn extremes_and_quartiles_skip_the_rows_without_a_value() {
    // The checks' shared pooled pass (audit::Pooled) against the plain definitions: the least
    // and the greatest of the values present, found one by one, and type-7 quartiles of a
    // copy (`type7`, itself checked against numpy). Columns of every length from 0 to 40,
    // and two beyond the size under which the values are copied (so that the visit rides on
    // the bracketing pass), a missing row's slot holding a value below and above every real
    // one; a column with no value at all has none.
    let settings = crate::audit::Settings::default();
    for len in (0..40usize).chain([2 * 4096 + 13, 2 * 65_536 + 13]) {
        let v: Vec<f64> = (0..len).map(|i| ((i * 7919) % 23) as f64 - 11.0).collect();
        let ok: Vec<bool> = (0..len).map(|i| i % 3 != 1).collect();
        let slots: Vec<f64> = v
            .iter()
            .zip(&ok)
            .enumerate()
            .map(|(i, (x, o))| match (o, i % 2) {
                (true, _) => *x,
                (false, 0) => -1e9,
                (false, _) => 1e9,
            })
            .collect();
        let bits: polars_arrow::bitmap::Bitmap = ok.iter().copied().collect();
        let x = Float64Chunked::from_vec_validity("x".into(), slots, Some(bits));
        let x = Values::new(&x);
        let present: Vec<f64> = v
            .iter()
            .zip(&ok)
            .filter(|(_, o)| **o)
            .map(|(x, _)| *x)
            .collect();
        let got = crate::audit::Pooled::of(&x.view(), &settings);
        assert_eq!(
            got.min,
            present.iter().copied().reduce(f64::min),
            "length {len}"
        );
        assert_eq!(
            got.max,
            present.iter().copied().reduce(f64::max),
            "length {len}"
        );
        for (p, q) in [(0.25, got.p25), (0.5, got.median), (0.75, got.p75)] {
            assert_eq!(
                q,
                crate::core::type7(&mut present.clone(), p),
                "length {len}, p {p}"
            );
        }
    }
}
