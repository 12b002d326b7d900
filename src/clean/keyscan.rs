//! The key columns read in one typed pass: whether the rows are in key order, how many
//! entities they hold, and which rows share their key with a neighbour. (The engine would
//! compare each key column with a shifted copy of itself: a copy of the column per
//! comparison.)

use polars::prelude::*;

use crate::Result;

/// What one pass over the entity (text) and period (whole number) columns finds.
#[derive(Debug, PartialEq)]
pub(super) struct KeyScan {
    /// Every row's (entity, period) is at or after the previous row's (missing keys compared
    /// as the engine compares them: an unknown answer does not break the order).
    pub in_order: bool,
    /// Runs of the same entity, not counting missing ones: the distinct entities, when the
    /// rows are in key order.
    pub entities: u64,
    /// Positions of the rows whose key equals the previous or the next row's, ascending.
    pub repeated: Vec<IdxSize>,
}

/// Scan the key columns `entity` and `period` of `df`.
pub(super) fn scan(df: &DataFrame, entity: &str, period: &str) -> Result<KeyScan> {
    let ids = df.column(entity)?.str()?;
    let periods = df.column(period)?.i64()?;
    let mut out = KeyScan {
        in_order: true,
        entities: 0,
        repeated: Vec::new(),
    };
    // The usual case, each column in one chunk without a missing key: the names' runs read
    // in place (`core::same_as_previous`), the text compared for order only where it changes.
    // (The engine gives a column's values as a slice only in one chunk without nulls.)
    if let (Some(same), Ok(periods)) = (crate::core::same_as_previous(ids), periods.cont_slice()) {
        let array = ids.downcast_as_array();
        out.entities = u64::from(!periods.is_empty());
        let mut previous_repeated = false;
        for (r, (same_entity, p)) in same.zip(periods.windows(2)).enumerate() {
            let r = r + 1;
            if same_entity {
                out.in_order &= p[1] >= p[0];
            } else {
                out.entities += 1;
                out.in_order &= array.value(r) > array.value(r - 1);
            }
            let same = same_entity && p[1] == p[0];
            if same {
                if !previous_repeated {
                    out.repeated.push((r - 1) as IdxSize);
                }
                out.repeated.push(r as IdxSize);
            }
            previous_repeated = same;
        }
        return Ok(out);
    }
    let mut previous: Option<(Option<&str>, Option<i64>)> = None;
    // Whether the previous row is already among the repeated ones.
    let mut previous_repeated = false;
    for (r, (e, p)) in ids.iter().zip(periods.iter()).enumerate() {
        let (e0, p0) = previous.unwrap_or((None, None));
        out.entities += u64::from(e.is_some() && (previous.is_none() || e != e0));
        out.in_order &= at_or_after((e0, p0), (e, p));
        let same =
            matches!((e0, e, p0, p), (Some(e0), Some(e), Some(p0), Some(p)) if e == e0 && p == p0);
        if same {
            if !previous_repeated {
                out.repeated.push((r - 1) as IdxSize);
            }
            out.repeated.push(r as IdxSize);
        }
        previous_repeated = same;
        previous = Some((e, p));
    }
    Ok(out)
}

/// Whether key `b` is at or after key `a`, missing values read as the engine reads them
/// (three-valued logic; an unknown answer counts as in order).
fn at_or_after(a: (Option<&str>, Option<i64>), b: (Option<&str>, Option<i64>)) -> bool {
    let after = a.0.zip(b.0).map(|(a, b)| b > a);
    let same = a.0.zip(b.0).map(|(a, b)| b == a);
    let not_before = a.1.zip(b.1).map(|(a, b)| b >= a);
    let same_and_not_before = match (same, not_before) {
        (Some(false), _) | (_, Some(false)) => Some(false),
        (Some(true), Some(true)) => Some(true),
        _ => None,
    };
    match (after, same_and_not_before) {
        (Some(true), _) | (_, Some(true)) => true,
        (Some(false), Some(false)) => false,
        _ => true,
    }
}

/// Distinct entities in `df`, whose rows are in key order: the runs of its entity column.
pub(crate) fn sorted_entities(df: &DataFrame, entity: &str) -> Result<u64> {
    let ids = df.column(entity)?.str()?;
    let mut previous: Option<Option<&str>> = None;
    let mut n = 0u64;
    for e in ids.iter() {
        n += u64::from(e.is_some() && previous != Some(e));
        previous = Some(e);
    }
    Ok(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against the engine's own comparisons with shifted copies of the key columns (what
    /// this pass replaces), on keys with ties, missing values, out-of-order rows and several
    /// chunks.
    #[test]
    fn the_same_as_the_engine_comparing_shifted_columns() {
        let e = [
            "A", "A", "A", "B", "B", "B", "C", "", "C", "C", "D", "D", "A",
        ];
        let p = [1, 1, 2, 1, 1, 1, 3, 4, 4, 4, 1, 0, 9];
        type Keys<'a> = (Vec<Option<&'a str>>, Vec<Option<i64>>);
        let cases: Vec<Keys> = vec![
            (
                e.iter().map(|s| Some(*s)).collect(),
                p.iter().map(|v| Some(*v)).collect(),
            ),
            (
                e.iter()
                    .enumerate()
                    .map(|(i, s)| (i % 4 != 2).then_some(*s))
                    .collect(),
                p.iter()
                    .enumerate()
                    .map(|(i, v)| (i % 5 != 1).then_some(*v))
                    .collect(),
            ),
            (
                e[..10].iter().map(|s| Some(*s)).collect(),
                p[..10].iter().map(|v| Some(*v)).collect(),
            ),
            (vec![Some("A")], vec![Some(1)]),
            // Names longer than a view holds: equal names in different places of the buffer.
            (
                [
                    "a firm with a long name",
                    "a firm with a long name",
                    "a firm with a longer name",
                    "a firm with a long name",
                ]
                .map(Some)
                .to_vec(),
                vec![Some(1), Some(1), Some(1), Some(2)],
            ),
            (
                vec![
                    Some("A"),
                    Some("A"),
                    Some("A"),
                    Some("B"),
                    Some("B"),
                    Some("C"),
                ],
                vec![Some(1), Some(1), Some(2), Some(1), Some(1), Some(0)],
            ),
        ];
        for (ids, periods) in cases {
            let whole = df!("e" => ids.clone(), "p" => periods.clone()).unwrap();
            let mut chunked = whole.slice(0, 3);
            chunked.vstack_mut(&whole.slice(3, ids.len())).unwrap();
            for df in [whole, chunked] {
                let (e, p) = (col("e"), col("p"));
                let same = |offset: i64| {
                    e.clone()
                        .eq(e.clone().shift(lit(offset)))
                        .and(p.clone().eq(p.clone().shift(lit(offset))))
                        .fill_null(lit(false))
                };
                let at_or_after = e
                    .clone()
                    .gt(e.clone().shift(lit(1)))
                    .or(e
                        .clone()
                        .eq(e.clone().shift(lit(1)))
                        .and(p.clone().gt_eq(p.clone().shift(lit(1)))))
                    .fill_null(lit(true));
                let runs = e
                    .clone()
                    .neq_missing(e.clone().shift(lit(1)))
                    .and(e.clone().is_not_null())
                    .sum()
                    .cast(DataType::UInt64);
                let engine = df
                    .clone()
                    .lazy()
                    .select([at_or_after.all(true).alias("ordered"), runs.alias("runs")])
                    .collect()
                    .unwrap();
                let repeated = df
                    .clone()
                    .lazy()
                    .with_row_index("pos", None)
                    .filter(same(1).or(same(-1)))
                    .collect()
                    .unwrap();
                let expected = KeyScan {
                    in_order: engine.column("ordered").unwrap().bool().unwrap().get(0)
                        == Some(true),
                    entities: engine
                        .column("runs")
                        .unwrap()
                        .u64()
                        .unwrap()
                        .get(0)
                        .unwrap(),
                    repeated: repeated
                        .column("pos")
                        .unwrap()
                        .idx()
                        .unwrap()
                        .into_no_null_iter()
                        .collect(),
                };
                assert_eq!(scan(&df, "e", "p").unwrap(), expected, "{df}");
                assert_eq!(sorted_entities(&df, "e").unwrap(), expected.entities);
            }
        }
    }
}
