//! A vintage's keys in key order (bundles are sorted by them, and many raw files; others' keys
//! are sorted first, by an integer head of each name), from which its repeated keys and its
//! entities are counted; and each firm-year of either vintage with its row in each (null
//! where it is absent) by one merge of the two vintages' keys in that order, with the entities
//! found on one side only.

use std::cmp::Ordering;

use polars::prelude::*;
use polars_arrow::array::Utf8ViewArray;
use rayon::prelude::*;

use crate::Result;

/// A vintage's keys — the entity and the period, neither missing — and its rows in key order
/// (entity, then period; text by its bytes).
pub(super) struct Keys {
    entity: StringChunked,
    period: Int64Chunked,
    /// The keys in key order, each with its row; None when the rows stand in it.
    sorted: Option<Vec<Sorted>>,
}

/// A key as sorted: the head of its name (see [`head`]), its period and its row. Read in
/// order, the merge compares these integers and touches a name only where two heads tie.
#[derive(Clone, Copy)]
struct Sorted {
    head: u64,
    len: u8,
    period: i64,
    row: IdxSize,
}

/// The first eight bytes of `name`, as a number that orders as the bytes do (zeros after a
/// shorter name), and its length up to nine: two names of at most eight bytes order as these
/// two do, a longer one by its bytes.
fn head(name: &str) -> (u64, u8) {
    let bytes = name.as_bytes();
    let mut first = [0u8; 8];
    let n = bytes.len().min(8);
    first[..n].copy_from_slice(&bytes[..n]);
    (u64::from_be_bytes(first), bytes.len().min(9) as u8)
}

impl Keys {
    /// The keys of `entity` and `period` (one value a row, none missing), in key order: as
    /// they stand when each key passes the one before, else sorted.
    pub(super) fn of(entity: &Column, period: &Column) -> Result<Keys> {
        let entity = entity.str()?.rechunk().into_owned();
        let period = period.i64()?.rechunk().into_owned();
        debug_assert_eq!(entity.null_count() + period.null_count(), 0);
        let mut keys = Keys {
            entity,
            period,
            sorted: None,
        };
        let n = keys.len();
        let rising = (1..n).all(|i| keys.key_at(i - 1) < keys.key_at(i));
        if !rising {
            let (names, periods) = (keys.names(), keys.periods());
            let mut sorted: Vec<Sorted> = (0..n)
                .into_par_iter()
                .map(|r| {
                    let (head, len) = head(names.value(r));
                    Sorted {
                        head,
                        len,
                        period: periods[r],
                        row: r as IdxSize,
                    }
                })
                .collect();
            sorted.par_sort_unstable_by(|a, b| {
                by_heads((a.head, a.len), (b.head, b.len), || {
                    names.value(a.row as usize).cmp(names.value(b.row as usize))
                })
                .then(a.period.cmp(&b.period))
            });
            keys.sorted = Some(sorted);
        }
        Ok(keys)
    }

    fn names(&self) -> &Utf8ViewArray {
        self.entity.downcast_as_array()
    }

    fn periods(&self) -> &[i64] {
        self.period
            .cont_slice()
            .expect("one chunk, no missing value")
    }

    fn len(&self) -> usize {
        self.entity.len()
    }

    /// The row `i`-th in key order.
    fn row(&self, i: usize) -> usize {
        match &self.sorted {
            None => i,
            Some(sorted) => sorted[i].row as usize,
        }
    }

    /// The name `i`-th in key order.
    fn name_at(&self, i: usize) -> &str {
        self.names().value(self.row(i))
    }

    /// The key `i`-th in key order.
    fn key_at(&self, i: usize) -> (&str, i64) {
        let r = self.row(i);
        (self.names().value(r), self.periods()[r])
    }

    /// The head of the name and the period `i`-th in key order.
    fn head_at(&self, i: usize) -> ((u64, u8), i64) {
        match &self.sorted {
            None => (head(self.names().value(i)), self.periods()[i]),
            Some(sorted) => ((sorted[i].head, sorted[i].len), sorted[i].period),
        }
    }

    /// How the key `i`-th in key order here compares with the key `j`-th in `other`: by the
    /// names' heads where a side is sorted (its heads at hand), else by the names themselves.
    fn cmp_at(&self, i: usize, other: &Keys, j: usize) -> Ordering {
        if self.sorted.is_none() && other.sorted.is_none() {
            return self.key_at(i).cmp(&other.key_at(j));
        }
        let ((a, p), (b, q)) = (self.head_at(i), other.head_at(j));
        by_heads(a, b, || self.name_at(i).cmp(other.name_at(j))).then(p.cmp(&q))
    }

    /// Whether each row's key is on another row too (in row order); None when no key is.
    pub(super) fn repeated(&self) -> Option<BooleanChunked> {
        let n = self.len();
        let mut repeated = vec![false; n];
        let mut any = false;
        for i in 1..n {
            if self.cmp_at(i - 1, self, i) == Ordering::Equal {
                repeated[self.row(i - 1)] = true;
                repeated[self.row(i)] = true;
                any = true;
            }
        }
        any.then(|| BooleanChunked::from_slice("repeated".into(), &repeated))
    }

    /// How many entities.
    pub(super) fn entities(&self) -> u64 {
        let n = self.len();
        let same = |i: usize| match &self.sorted {
            None => self.name_at(i - 1) == self.name_at(i),
            Some(_) => {
                let (a, b) = (self.head_at(i - 1).0, self.head_at(i).0);
                by_heads(a, b, || self.name_at(i - 1).cmp(self.name_at(i))) == Ordering::Equal
            }
        };
        (0..n).filter(|&i| i == 0 || !same(i)).count() as u64
    }
}

/// How two names compare by their heads, their bytes (`names`) only where the heads cannot
/// tell: equal first eight bytes and one name longer than eight.
fn by_heads(a: (u64, u8), b: (u64, u8), names: impl FnOnce() -> Ordering) -> Ordering {
    a.0.cmp(&b.0).then_with(|| {
        if a.1 <= 8 && b.1 <= 8 {
            a.1.cmp(&b.1)
        } else {
            names()
        }
    })
}

/// Each firm-year of either vintage (keys unique on each side), by one merge in key order.
pub(super) struct Merged {
    /// The entity and period (named `e` and `p`), the row in the old vintage (`__io`) and in
    /// the new (`__in`).
    pub pairs: DataFrame,
    /// Entities only in the new vintage, in key order.
    pub entities_added: Vec<String>,
    /// Entities only in the old vintage, in key order.
    pub entities_removed: Vec<String>,
}

/// The firm-years of `old` and `new` merged in key order. No hash table: at 10 M firm-years
/// a side the engine's join of the keys held more memory than the two vintages' panels.
pub(super) fn merged(old: &Keys, new: &Keys, e: &str, p: &str) -> Result<Merged> {
    let (a, b) = (old.len(), new.len());
    let n = a.max(b);
    let mut entities: Vec<&str> = Vec::with_capacity(n);
    let mut periods: Vec<i64> = Vec::with_capacity(n);
    let mut at_old: Vec<Option<IdxSize>> = Vec::with_capacity(n);
    let mut at_new: Vec<Option<IdxSize>> = Vec::with_capacity(n);
    let (mut added, mut removed) = (Vec::new(), Vec::new());
    // The entity of the run being merged, and whether each side has a row of it.
    let mut run: Option<(&str, bool, bool)> = None;
    let mut close = |run: Option<(&str, bool, bool)>| match run {
        Some((name, false, _)) => added.push(name.to_string()),
        Some((name, _, false)) => removed.push(name.to_string()),
        _ => {}
    };
    let (mut i, mut j) = (0, 0);
    while i < a || j < b {
        let order = match (i < a, j < b) {
            (true, true) => old.cmp_at(i, new, j),
            (true, false) => Ordering::Less,
            _ => Ordering::Greater,
        };
        // A key in both is read from the old vintage's side.
        let (key, row_old, row_new) = match order {
            Ordering::Less => (old.key_at(i), Some(old.row(i)), None),
            Ordering::Greater => (new.key_at(j), None, Some(new.row(j))),
            Ordering::Equal => (old.key_at(i), Some(old.row(i)), Some(new.row(j))),
        };
        i += usize::from(row_old.is_some());
        j += usize::from(row_new.is_some());
        match &mut run {
            Some((name, in_old, in_new)) if *name == key.0 => {
                *in_old |= row_old.is_some();
                *in_new |= row_new.is_some();
            }
            _ => {
                close(run);
                run = Some((key.0, row_old.is_some(), row_new.is_some()));
            }
        }
        entities.push(key.0);
        periods.push(key.1);
        at_old.push(row_old.map(|r| r as IdxSize));
        at_new.push(row_new.map(|r| r as IdxSize));
    }
    close(run);
    let pairs = DataFrame::new_infer_height(vec![
        Column::new(e.into(), entities),
        Column::new(p.into(), periods),
        IdxCa::from_iter_options("__io".into(), at_old.into_iter()).into_column(),
        IdxCa::from_iter_options("__in".into(), at_new.into_iter()).into_column(),
    ])?;
    Ok(Merged {
        pairs,
        entities_added: added,
        entities_removed: removed,
    })
}

/// Entities removed and added that are one id written two ways: the same but for leading
/// zeros (`00123` and `123`), as a spreadsheet that read the ids as numbers writes them.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Rewritten {
    /// How many added entities are a removed one written otherwise.
    pub entities: u64,
    /// The first such pair (removed, added), in key order of the removed.
    pub example: (String, String),
}

/// The ids of `removed` that come back among `added` but for their leading zeros.
pub(super) fn rewritten(removed: &[String], added: &[String]) -> Option<Rewritten> {
    let bare = |id: &str| crate::core::without_zeros(id.trim()).to_string();
    let mut by_bare: std::collections::HashMap<String, &str> =
        removed.iter().map(|r| (bare(r), r.as_str())).collect();
    let mut pairs: Vec<(&str, &str)> = added
        .iter()
        .filter_map(|a| by_bare.remove(&bare(a)).map(|r| (r, a.as_str())))
        .collect();
    pairs.sort_unstable();
    let first = pairs.first()?;
    Some(Rewritten {
        entities: pairs.len() as u64,
        example: (first.0.to_string(), first.1.to_string()),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: `007` and `0100` come back as `7` and `100`; `12` is a new firm; `000`
    /// comes back as `0`; each removed id is paired once.
    #[test]
    fn ids_that_lost_their_zeros() {
        let ids = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        let found = rewritten(
            &ids(&["0100", "007", "000", "55"]),
            &ids(&["0", "100", "12", "7", "07"]),
        );
        assert_eq!(
            found,
            Some(Rewritten {
                entities: 3,
                example: ("000".into(), "0".into()),
            })
        );
        assert_eq!(rewritten(&ids(&["A1"]), &ids(&["B1"])), None);
    }

    fn keys(df: &DataFrame) -> Keys {
        Keys::of(df.column("f").unwrap(), df.column("y").unwrap()).unwrap()
    }

    /// The pairs by the engine's full join of the two vintages' keys, sorted: the reference
    /// the merge is held to.
    fn joined(old: &DataFrame, new: &DataFrame) -> DataFrame {
        let rows_of = |v: &DataFrame, index: &str| {
            v.clone()
                .lazy()
                .select([col("f"), col("y")])
                .with_row_index(index, None)
        };
        rows_of(old, "__io")
            .join(
                rows_of(new, "__in"),
                [col("f"), col("y")],
                [col("f"), col("y")],
                JoinArgs::new(JoinType::Full).with_coalesce(JoinCoalesce::CoalesceColumns),
            )
            .sort(["f", "y"], Default::default())
            .select([col("f"), col("y"), col("__io"), col("__in")])
            .collect()
            .unwrap()
    }

    /// Worked by hand: two sorted vintages merged in key order (a firm-year removed, one
    /// added, a firm new, one gone, text ordered by its bytes, `B` before `a`); the engine's
    /// full join of the same keys, sorted, gives the same pairs, and so does a side whose rows
    /// come in another order (its keys sorted first).
    #[test]
    fn sorted_vintages_merge_to_the_joins_pairs() -> Result<()> {
        let old = df!("f" => ["B", "B", "a", "a", "d"], "y" => [1i64, 2, 1, 3, 1])?;
        let new = df!("f" => ["B", "a", "a", "a", "c"], "y" => [2i64, 1, 2, 3, 1])?;
        let expected = df!(
            "f" => ["B", "B", "a", "a", "a", "c", "d"],
            "y" => [1i64, 2, 1, 2, 3, 1, 1],
            "__io" => [Some(0 as IdxSize), Some(1), Some(2), None, Some(3), None, Some(4)],
            "__in" => [None, Some(0 as IdxSize), Some(1), Some(2), Some(3), Some(4), None],
        )?;
        let by_merge = merged(&keys(&old), &keys(&new), "f", "y")?;
        assert!(
            by_merge.pairs.equals_missing(&expected),
            "{}",
            by_merge.pairs
        );
        assert_eq!(by_merge.entities_added, ["c"]);
        assert_eq!(by_merge.entities_removed, ["d"]);
        assert!(joined(&old, &new).equals_missing(&expected));
        // The new vintage's rows in another order: its keys sorted first, the same pairs with
        // its own row numbers.
        let shuffled = df!("f" => ["a", "B", "a", "a", "c"], "y" => [2i64, 2, 1, 3, 1])?;
        let by_sort = merged(&keys(&old), &keys(&shuffled), "f", "y")?;
        assert!(by_sort.pairs.equals_missing(&joined(&old, &shuffled)));
        let rows = IdxCa::new(
            "__in".into(),
            [None, Some(1), Some(2), Some(0), Some(3), Some(4), None],
        );
        let mut expected = expected;
        expected.with_column(rows.into_column())?;
        assert!(by_sort.pairs.equals_missing(&expected), "{}", by_sort.pairs);
        Ok(())
    }

    /// Names longer than the eight bytes of the head, names that are prefixes of others,
    /// and a byte of zero, shuffled: sorted as the engine sorts the keys, repeated keys found
    /// by row, entities counted. Worked by hand, and against the engine's sort.
    #[test]
    fn keys_sorted_by_prefix_as_the_engine_sorts_them() -> Result<()> {
        let names = [
            "firm-000002",
            "firm-000001",
            "firm",
            "firm\0",
            "fir",
            "firm-000001",
            "firm-0000010",
            "firm",
            "Firm",
            "firm-000002",
        ];
        let years = [2i64, 1, 5, 1, 1, 3, 1, 4, 1, 2];
        let df = df!("f" => names, "y" => years)?;
        let k = keys(&df);
        let ours: Vec<(String, i64)> = (0..k.len())
            .map(|i| {
                let (name, year) = k.key_at(i);
                (name.to_string(), year)
            })
            .collect();
        let sorted = df.sort(["f", "y"], Default::default())?;
        let engine: Vec<(String, i64)> = sorted
            .column("f")?
            .str()?
            .iter()
            .zip(sorted.column("y")?.i64()?.iter())
            .map(|(f, y)| (f.unwrap().to_string(), y.unwrap()))
            .collect();
        assert_eq!(ours, engine);
        // `firm-000002` in 2 is on rows 0 and 9; seven entities.
        let repeated: Vec<bool> = k.repeated().unwrap().iter().map(Option::unwrap).collect();
        let expected: Vec<bool> = (0..10).map(|r| r == 0 || r == 9).collect();
        assert_eq!(repeated, expected);
        assert_eq!(k.entities(), 7);
        let unique = df!("f" => ["b", "a"], "y" => [1i64, 1])?;
        assert!(keys(&unique).repeated().is_none());
        Ok(())
    }
}
