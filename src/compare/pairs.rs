//! Each firm-year of either vintage with its row in each (null where it is absent): by one
//! merge of the two vintages' keys in key order (bundles are sorted by them, and many raw
//! files; others' keys are sorted first), else — a key repeated, which a vintage as read
//! does not have — by the engine's join of the keys alone.

use std::cmp::Ordering;

use polars::prelude::*;
use rayon::prelude::*;

use crate::Result;

/// A vintage's rows and the names of its keys.
pub(super) struct Keyed<'a> {
    pub df: &'a DataFrame,
    pub entity: &'a str,
    pub period: &'a str,
}

/// The pairs as a frame: the entity and period (named `e` and `p`), the row in the old vintage
/// (`__io`) and in the new (`__in`).
pub(super) fn pairs(old: &Keyed, new: &Keyed, e: &str, p: &str) -> Result<DataFrame> {
    match merged(old, new, e, p)? {
        Some(pairs) => Ok(pairs),
        None => joined(old, new, e, p),
    }
}

/// The pairs by the engine's full join of the two vintages' keys alone, in no set order.
fn joined(old: &Keyed, new: &Keyed, e: &str, p: &str) -> Result<DataFrame> {
    let rows_of = |v: &Keyed, index: &str| {
        v.df.clone()
            .lazy()
            .select([col(v.entity).alias(e), col(v.period).alias(p)])
            .with_row_index(index, None)
    };
    Ok(rows_of(old, "__io")
        .join(
            rows_of(new, "__in"),
            [col(e), col(p)],
            [col(e), col(p)],
            JoinArgs::new(JoinType::Full).with_coalesce(JoinCoalesce::CoalesceColumns),
        )
        .collect()?)
}

/// The pairs by one merge of the two vintages' keys in key order; None when a key is
/// missing or repeated (the join then). No hash table: at 10 M firm-years a side the engine's
/// join of the keys held more memory than the two vintages' panels.
fn merged(old: &Keyed, new: &Keyed, e: &str, p: &str) -> Result<Option<DataFrame>> {
    let columns = |v: &Keyed| -> Result<(StringChunked, Int64Chunked)> {
        let entity = v.df.column(v.entity)?.str()?.clone();
        let period = v.df.column(v.period)?.i64()?.clone();
        Ok((entity, period))
    };
    let (old_keys, new_keys) = (columns(old)?, columns(new)?);
    let (Some(a), Some(b)) = (
        in_key_order(&old_keys.0, &old_keys.1),
        in_key_order(&new_keys.0, &new_keys.1),
    ) else {
        return Ok(None);
    };
    let n = a.len().max(b.len());
    let mut entities: Vec<&str> = Vec::with_capacity(n);
    let mut periods: Vec<i64> = Vec::with_capacity(n);
    let mut at_old: Vec<Option<IdxSize>> = Vec::with_capacity(n);
    let mut at_new: Vec<Option<IdxSize>> = Vec::with_capacity(n);
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        let order = match (a.get(i), b.get(j)) {
            (Some(x), Some(y)) => (x.0, x.1).cmp(&(y.0, y.1)),
            (Some(_), None) => Ordering::Less,
            _ => Ordering::Greater,
        };
        let (key, row_old, row_new) = match order {
            Ordering::Less => (a[i], Some(a[i].2), None),
            Ordering::Greater => (b[j], None, Some(b[j].2)),
            Ordering::Equal => (a[i], Some(a[i].2), Some(b[j].2)),
        };
        i += usize::from(row_old.is_some());
        j += usize::from(row_new.is_some());
        entities.push(key.0);
        periods.push(key.1);
        at_old.push(row_old);
        at_new.push(row_new);
    }
    let pairs = DataFrame::new_infer_height(vec![
        Column::new(e.into(), entities),
        Column::new(p.into(), periods),
        IdxCa::from_iter_options("__io".into(), at_old.into_iter()).into_column(),
        IdxCa::from_iter_options("__in".into(), at_new.into_iter()).into_column(),
    ])?;
    Ok(Some(pairs))
}

/// A vintage's keys (entity, then period; text by its bytes) with their rows, in key order:
/// as they stand when each passes the one before, else sorted; None at a missing key or a
/// repeated one.
fn in_key_order<'a>(
    entity: &'a StringChunked,
    period: &'a Int64Chunked,
) -> Option<Vec<(&'a str, i64, IdxSize)>> {
    let mut keys: Vec<(&str, i64, IdxSize)> = Vec::with_capacity(entity.len());
    let mut rising = true;
    for (r, (e, p)) in entity.iter().zip(period.iter()).enumerate() {
        let key = (e?, p?, r as IdxSize);
        rising &= keys
            .last()
            .is_none_or(|last| (last.0, last.1) < (key.0, key.1));
        keys.push(key);
    }
    if !rising {
        keys.par_sort_unstable_by(|x, y| (x.0, x.1).cmp(&(y.0, y.1)));
        if keys
            .windows(2)
            .any(|w| (w[0].0, w[0].1) == (w[1].0, w[1].1))
        {
            return None;
        }
    }
    Some(keys)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn keyed<'a>(df: &'a DataFrame) -> Keyed<'a> {
        Keyed {
            df,
            entity: "f",
            period: "y",
        }
    }

    /// Worked by hand: two sorted vintages merged in key order (a firm-year removed, one
    /// added, a firm new, text ordered by its bytes, `B` before `a`); the engine's full join of
    /// the same keys, sorted, gives the same pairs, and so does a side whose rows come in
    /// another order (its keys sorted first); a repeated key is left to the join.
    #[test]
    fn sorted_vintages_merge_to_the_joins_pairs() -> Result<()> {
        let old = df!("f" => ["B", "B", "a", "a"], "y" => [1i64, 2, 1, 3])?;
        let new = df!("f" => ["B", "a", "a", "a", "c"], "y" => [2i64, 1, 2, 3, 1])?;
        let expected = df!(
            "f" => ["B", "B", "a", "a", "a", "c"],
            "y" => [1i64, 2, 1, 2, 3, 1],
            "__io" => [Some(0 as IdxSize), Some(1), Some(2), None, Some(3), None],
            "__in" => [None, Some(0 as IdxSize), Some(1), Some(2), Some(3), Some(4)],
        )?;
        let (old, new) = (keyed(&old), keyed(&new));
        let by_merge = merged(&old, &new, "f", "y")?.expect("both sorted");
        assert!(by_merge.equals_missing(&expected), "{by_merge}");
        let by_join = joined(&old, &new, "f", "y")?
            .sort(["f", "y"], Default::default())?
            .select(["f", "y", "__io", "__in"])?;
        assert!(by_join.equals_missing(&expected), "{by_join}");
        // The new vintage's rows in another order: its keys sorted first, the same pairs with
        // its own row numbers.
        let shuffled = df!("f" => ["a", "B", "a", "a", "c"], "y" => [2i64, 2, 1, 3, 1])?;
        let by_sort = merged(&old, &keyed(&shuffled), "f", "y")?.expect("no key repeated");
        let rows = IdxCa::new(
            "__in".into(),
            [None, Some(1), Some(2), Some(0), Some(3), Some(4)],
        );
        let mut expected = expected;
        expected.with_column(rows.into_column())?;
        assert!(by_sort.equals_missing(&expected), "{by_sort}");
        let repeated = df!("f" => ["a", "a"], "y" => [1i64, 1])?;
        assert!(merged(&old, &keyed(&repeated), "f", "y")?.is_none());
        Ok(())
    }
}
