//! Each firm-year of either vintage with its row in each (null where it is absent): by one
//! merge of the two vintages' keys when both are sorted by entity and period (bundles always
//! are, many raw files too), else by the engine's join of the keys alone.

use std::cmp::Ordering;

use polars::prelude::*;

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

/// The pairs by one merge of the two key columns, in key order, when each vintage's keys
/// rise strictly row by row; None when one does not (the join then). No hash table: at 10 M
/// firm-years a side the engine's join of the keys held more memory than the two vintages'
/// panels.
fn merged(old: &Keyed, new: &Keyed, e: &str, p: &str) -> Result<Option<DataFrame>> {
    let columns = |v: &Keyed| -> Result<(StringChunked, Int64Chunked)> {
        let entity = v.df.column(v.entity)?.str()?.clone();
        let period = v.df.column(v.period)?.i64()?.clone();
        Ok((entity, period))
    };
    let (old_keys, new_keys) = (columns(old)?, columns(new)?);
    let (Some(a), Some(b)) = (
        rising(&old_keys.0, &old_keys.1),
        rising(&new_keys.0, &new_keys.1),
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
            (Some(x), Some(y)) => x.cmp(y),
            (Some(_), None) => Ordering::Less,
            _ => Ordering::Greater,
        };
        let (key, row_old, row_new) = match order {
            Ordering::Less => (a[i], Some(i), None),
            Ordering::Greater => (b[j], None, Some(j)),
            Ordering::Equal => (a[i], Some(i), Some(j)),
        };
        i += usize::from(row_old.is_some());
        j += usize::from(row_new.is_some());
        entities.push(key.0);
        periods.push(key.1);
        at_old.push(row_old.map(|r| r as IdxSize));
        at_new.push(row_new.map(|r| r as IdxSize));
    }
    let pairs = DataFrame::new_infer_height(vec![
        Column::new(e.into(), entities),
        Column::new(p.into(), periods),
        IdxCa::from_iter_options("__io".into(), at_old.into_iter()).into_column(),
        IdxCa::from_iter_options("__in".into(), at_new.into_iter()).into_column(),
    ])?;
    Ok(Some(pairs))
}

/// The keys of a vintage's rows in row order when each passes the one before (entity, then
/// period; text by its bytes); None at the first that does not, or a missing key.
fn rising<'a>(entity: &'a StringChunked, period: &'a Int64Chunked) -> Option<Vec<(&'a str, i64)>> {
    let mut keys: Vec<(&str, i64)> = Vec::with_capacity(entity.len());
    for (e, p) in entity.iter().zip(period.iter()) {
        let key = (e?, p?);
        if keys.last().is_some_and(|last| *last >= key) {
            return None;
        }
        keys.push(key);
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
    /// the same keys, sorted, gives the same pairs; an unsorted side or a repeated key is left
    /// to the join.
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
        let shuffled = df!("f" => ["a", "B", "a", "a", "c"], "y" => [2i64, 2, 1, 3, 1])?;
        assert!(merged(&old, &keyed(&shuffled), "f", "y")?.is_none());
        let repeated = df!("f" => ["a", "a"], "y" => [1i64, 1])?;
        assert!(merged(&old, &keyed(&repeated), "f", "y")?.is_none());
        Ok(())
    }
}
