//! Cleaning steps that remove rows: missing keys, exact copies, conflicting duplicate keys.
//! Every removed row goes to the rejects ledger with its step and reason; every step records
//! its effect for the sample-construction table.

pub mod balance;
mod group_cutoffs;
mod histogram;
mod keep;
mod keyscan;
pub(crate) use keyscan::sorted_entities;
pub mod repair;
pub mod treat;
mod winsorize;

use polars::prelude::*;

use crate::load::ROW;
use crate::report::{KeyExample, KeysSummary, SampleStep};
pub use crate::rules::{DuplicatePolicy, SingletonPolicy};
use crate::{Error, Result};
pub use keep::{keep_rows, settle};

/// Ledger column: the cleaning step that removed the row (`step` in the output).
pub const STEP: &str = "__step";
/// Ledger column: why the row was removed (`reason` in the output).
pub const REASON: &str = "__reason";
/// Ledger column: the row that was kept instead, where there is one (`related_row`).
pub const RELATED: &str = "__related";

/// The step, in the ledger and the sample construction, of rows with every cell empty.
const BLANK_STEP: &str = "blank rows";

/// The panel after the key steps, with what they removed.
pub struct KeyResult {
    /// The rows in key order, those dropped still among them: the rows kept are those
    /// `pending` marks (every row when None). The copy that drops the others, into one chunk
    /// per column, is left to [`settle`] or to the next step that drops rows, so that both
    /// go in one copy of the panel.
    pub kept: DataFrame,
    /// Which rows of `kept` the key steps keep (None: every row).
    pub pending: Option<BooleanChunked>,
    /// Rows removed, in ledger form (source_row, step, reason, related_row, raw columns).
    pub rejected: Vec<DataFrame>,
    /// Counts for the report.
    pub keys: KeysSummary,
    /// One line per step.
    pub steps: Vec<SampleStep>,
}

/// Names the key steps need.
pub struct Keys<'a> {
    /// The input file, for messages.
    pub file: &'a std::path::Path,
    /// The entity column.
    pub entity: &'a str,
    /// The period column.
    pub period: &'a str,
    /// The raw columns (values compared for exact copies).
    pub columns: &'a [String],
}

/// Split off missing keys, collapse exact copies, apply the duplicate policy. The rows kept
/// come out sorted by entity, period and row, and every later step keeps that order.
pub fn resolve_keys(raw: DataFrame, k: &Keys, policy: &DuplicatePolicy) -> Result<KeyResult> {
    let (entity, period) = (k.entity, k.period);
    let mut rejected = Vec::new();

    // 1. Missing entity or period; among those rows, the blank ones (every cell empty: a
    // spreadsheet's empty row, a CSV file's trailing `,,,`), which carry nothing to lose and
    // have their own step and reason.
    let e_null = col(entity).is_null();
    let p_null = col(period).is_null();
    let every: Vec<Expr> = k
        .columns
        .iter()
        .map(|c| col(c.as_str()).is_null())
        .collect();
    let blank = match every.is_empty() {
        true => lit(false),
        false => all_horizontal(every)?,
    };
    let missing = raw
        .clone()
        .lazy()
        .filter(e_null.clone().or(p_null.clone()))
        .with_columns([
            when(blank.clone())
                .then(lit(BLANK_STEP))
                .otherwise(lit("missing keys"))
                .alias(STEP),
            when(blank)
                .then(lit("blank row: every cell empty"))
                .when(e_null.clone().and(p_null.clone()))
                .then(lit("entity and period missing"))
                .when(e_null.clone())
                .then(lit("entity missing"))
                .otherwise(lit("period missing"))
                .alias(REASON),
            lit(NULL).cast(IDX_DTYPE).alias(RELATED),
        ])
        .collect()?;
    let rows_read = raw.height() as u64;
    // Sorted once: the rows of a key sit together, and entities can be counted by their runs.
    // Files usually arrive in key order already; then the rows (numbered in file order) are
    // sorted by entity, period and row as they stand, and the sort is skipped.
    // Without a missing key (the usual case) the rows stay where they are: no copy.
    let keyless = raw.column(entity)?.null_count() + raw.column(period)?.null_count();
    let df = if keyless == 0 {
        raw
    } else {
        raw.lazy().filter(e_null.or(p_null).not()).collect()?
    };
    // The key columns in one chunk each first: the key scan reads them in place as one chunk
    // (and the panel core later does the same).
    let mut df = df;
    for name in [entity, period] {
        let whole = df.column(name)?.rechunk();
        df.with_column(whole)?;
    }
    // In key order the other columns stay in the chunks they were read in until the rows
    // to drop are known: then each is copied once, into one chunk (`settle`, `keep_rows`).
    let mut found = keyscan::scan(&df, entity, period)?;
    let df = if found.in_order {
        df
    } else {
        let sorted = df
            .lazy()
            .sort([entity, period, ROW], Default::default())
            .collect()?;
        found = keyscan::scan(&sorted, entity, period)?;
        sorted
    };
    let entities_kept = found.entities;
    // An entity seen only on rows missing their period counts among the entities read.
    let only_missing = entities_only_in(&missing, &df, entity)?;
    let mut steps = vec![SampleStep {
        step: "rows read".into(),
        rows_before: rows_read,
        removed: 0,
        rows_after: rows_read,
        entities_after: entities_kept + only_missing,
    }];
    let blank_rows = missing
        .column(STEP)?
        .str()?
        .iter()
        .filter(|s| *s == Some(BLANK_STEP))
        .count() as u64;
    if blank_rows > 0 {
        steps.push(SampleStep::counted(
            &steps,
            BLANK_STEP,
            rows_read - blank_rows,
            entities_kept + only_missing,
        ));
    }
    steps.push(SampleStep::counted(
        &steps,
        "missing keys",
        df.height() as u64,
        entities_kept,
    ));
    let missing_key_rows = missing.height() as u64 - blank_rows;
    rejected.push(ledger(missing, k.columns)?);

    // 2. Exact copies: same key and the same value in every column. Only rows whose key
    // appears more than once can be copies or conflicts: in the sorted panel they have a
    // neighbour with the same key, and only they are looked at (with their position).
    let key = [col(entity), col(period)];
    let positions_looked_at = IdxCa::from_vec(POS.into(), found.repeated);
    let mut repeated = df.take(&positions_looked_at)?;
    repeated.insert_column(0, positions_looked_at.into_column())?;
    let value_cols: Vec<Expr> = k.columns.iter().map(|c| col(c.as_str())).collect();
    let first_of_copy = col(ROW).min().over(value_cols)?;
    let repeated = repeated
        .lazy()
        .with_column(first_of_copy.alias(RELATED))
        .collect()?;
    let is_copy = col(RELATED).neq(col(ROW));
    let copies = repeated
        .clone()
        .lazy()
        .filter(is_copy.clone())
        .with_columns([
            lit("exact copies").alias(STEP),
            lit("exact copy of an earlier row (related_row)").alias(REASON),
        ])
        .collect()?;
    let repeated = repeated
        .lazy()
        .filter(is_copy.not())
        .drop(cols([RELATED]))
        .collect()?;
    let mut dropped: Vec<IdxSize> = positions(&copies)?;
    // A copy leaves its earlier twin, of the same entity: no entity is lost.
    steps.push(SampleStep::counted(
        &steps,
        "exact copies",
        df.height() as u64 - dropped.len() as u64,
        entities_kept,
    ));
    let exact_duplicate_rows = copies.height() as u64;
    let exact_duplicate_keys = copies
        .clone()
        .lazy()
        .select([col(entity), col(period)])
        .unique(None, UniqueKeepStrategy::First)
        .collect()?
        .height() as u64;
    rejected.push(ledger(copies.drop(POS)?, k.columns)?);

    // 3. Conflicting keys: the same key on rows with different values.
    let repeated = repeated
        .lazy()
        .with_column(len().over(key.clone())?.alias("__key_rows"))
        .collect()?;
    let conflicting = repeated
        .clone()
        .lazy()
        .filter(col("__key_rows").gt(lit(1)))
        .sort([ROW], Default::default())
        .collect()?;
    let conflicting_rows = conflicting.height() as u64;
    let key_counts = conflicting
        .clone()
        .lazy()
        .group_by_stable(key.clone())
        .agg([len().alias("rows")])
        .collect()?;
    let conflicting_keys = key_counts.height() as u64;
    let examples = key_examples(&key_counts, entity, period)?;
    if conflicting_keys > 0 && *policy == DuplicatePolicy::Fail {
        let first = examples.first().expect("a conflicting key exists");
        return Err(Error::ConflictingKeys {
            file: k.file.to_path_buf(),
            keys: conflicting_keys,
            entity: first.entity.clone(),
            period: first.period,
        });
    }
    let kept_row = match policy {
        DuplicatePolicy::KeepFirst => Some(col(ROW).min().over(key.clone())?),
        DuplicatePolicy::KeepLast => Some(col(ROW).max().over(key.clone())?),
        DuplicatePolicy::DropAll => Some(lit(NULL).cast(IDX_DTYPE)),
        DuplicatePolicy::PreferMax(c) | DuplicatePolicy::PreferMin(c) => {
            let descending = matches!(policy, DuplicatePolicy::PreferMax(_));
            let order = SortMultipleOptions::default()
                .with_order_descending_multi([descending, false])
                .with_nulls_last(true);
            Some(
                col(ROW)
                    .sort_by([col(c.as_str()), col(ROW)], order)
                    .first()
                    .over(key.clone())?,
            )
        }
        DuplicatePolicy::Fail | DuplicatePolicy::Report => None,
    };
    if let Some(kept_row) = kept_row {
        let marked = repeated
            .lazy()
            .with_column(
                when(col("__key_rows").gt(lit(1)))
                    .then(kept_row)
                    .otherwise(col(ROW))
                    .alias(RELATED),
            )
            .drop(cols(["__key_rows"]))
            .collect()?;
        let removed = marked
            .lazy()
            .filter(col(RELATED).neq(col(ROW)).or(col(RELATED).is_null()))
            .with_columns([
                lit("duplicate keys").alias(STEP),
                lit(format!(
                    "same entity and period as other rows with different values; policy {}",
                    policy.label()
                ))
                .alias(REASON),
            ])
            .collect()?;
        dropped.extend(positions(&removed)?);
        rejected.push(ledger(removed.drop(POS)?, k.columns)?);
    }
    // The copies and removed rows are only marked, by their position (the order stays
    // sorted): dropping them copies every column, which the next step that drops rows can
    // do in the same copy.
    let pending = (!dropped.is_empty()).then(|| {
        let mut keep = vec![true; df.height()];
        for p in &dropped {
            keep[*p as usize] = false;
        }
        BooleanChunked::from_slice("keep".into(), &keep)
    });
    let rows_kept = pending
        .as_ref()
        .map_or(df.height(), |keep| keep.sum().unwrap_or(0) as usize);
    // Only dropping every row of a key can lose an entity.
    let entities = match &pending {
        Some(keep) if *policy == DuplicatePolicy::DropAll && conflicting_keys > 0 => {
            keyscan::sorted_entities(&df.select([entity])?.filter(keep)?, entity)?
        }
        _ => entities_kept,
    };
    steps.push(SampleStep::counted(
        &steps,
        "duplicate keys",
        rows_kept as u64,
        entities,
    ));

    Ok(KeyResult {
        kept: df,
        pending,
        rejected,
        keys: KeysSummary {
            missing_key_rows,
            blank_rows,
            exact_duplicate_rows,
            exact_duplicate_keys,
            conflicting_keys,
            conflicting_rows,
            policy: policy.label(),
            examples,
            year_end_changes: None,
            // Judged on the panel as read, once its core is built.
            alike_entities: 0,
            alike_examples: Vec::new(),
        },
        steps,
    })
}

/// The position column of the rows looked at for copies and conflicts.
const POS: &str = "__pos";

/// The positions (`POS`) of `df`'s rows.
fn positions(df: &DataFrame) -> Result<Vec<IdxSize>> {
    Ok(df.column(POS)?.idx()?.iter().flatten().collect())
}

/// Entities of `few` (a handful of rows) that `sorted` (sorted by entity) does not have.
fn entities_only_in(few: &DataFrame, sorted: &DataFrame, entity: &str) -> Result<u64> {
    let ids = sorted.column(entity)?.str()?.rechunk();
    let ids = ids.downcast_as_array();
    let mut absent: Vec<String> = few
        .column(entity)?
        .str()?
        .iter()
        .flatten()
        .filter(|e| {
            // Binary search over the sorted column.
            let (mut lo, mut hi) = (0usize, ids.len());
            while lo < hi {
                let mid = (lo + hi) / 2;
                match ids.value(mid).cmp(e) {
                    std::cmp::Ordering::Less => lo = mid + 1,
                    std::cmp::Ordering::Greater => hi = mid,
                    std::cmp::Ordering::Equal => return false,
                }
            }
            true
        })
        .map(str::to_string)
        .collect();
    absent.sort();
    absent.dedup();
    Ok(absent.len() as u64)
}

/// Move rows where `reason` (a string expression) is not null into the ledger. The reason may
/// read other rows (a window over the entity): it is evaluated on the whole frame, before any
/// row is dropped.
pub fn drop_where(
    df: DataFrame,
    reason: Expr,
    step: &str,
    k: &Keys,
) -> Result<(DataFrame, DataFrame)> {
    let marked = df.lazy().with_column(reason.alias(REASON)).collect()?;
    let hit = marked.column(REASON)?.is_not_null();
    drop_marked(marked, &hit, col(REASON), &[REASON], step, k, None)
}

/// Move the rows `hit` marks into the ledger, with `reason` (a string expression, read on
/// those rows only) and without the `helper` columns; only among the rows `within` marks
/// (every row when None; the others an earlier step removed, whose copy is done here with
/// this step's). Rows dropped leave each column in one chunk.
pub fn drop_marked(
    df: DataFrame,
    hit: &BooleanChunked,
    reason: Expr,
    helpers: &[&str],
    step: &str,
    k: &Keys,
    within: Option<&BooleanChunked>,
) -> Result<(DataFrame, DataFrame)> {
    // Rows an earlier step removed (`within` false) are not this step's to remove.
    let hit = match within {
        Some(within) => hit & within,
        None => hit.clone(),
    };
    // Of the rows removed, only the columns the ledger holds and the reason reads are copied
    // (not the derived variables: a balancing step may move most of the panel).
    let mut needed = vec![ROW.to_string()];
    needed.extend(k.columns.iter().cloned());
    for root in reason.clone().meta().root_names() {
        if !needed.iter().any(|n| n == root.as_str()) {
            needed.push(root.to_string());
        }
    }
    let removed = df
        .select(needed)?
        .filter(&hit)?
        .lazy()
        .with_columns([
            reason.alias(REASON),
            lit(step.to_string()).alias(STEP),
            lit(NULL).cast(IDX_DTYPE).alias(RELATED),
        ])
        .collect()?;
    // In place: the old frame is let go column by column as the rows kept are copied.
    let mut df = df;
    for helper in helpers {
        df.drop_in_place(helper)?;
    }
    // One copy of each column drops this step's rows and the earlier step's together.
    let kept = match within {
        Some(within) => keep_rows(df, &(within & &!&hit))?,
        None if hit.any() => keep_rows(df, &!&hit)?,
        // Nothing hit (a clean panel): the frame as it is, not a copy of every column.
        None => df,
    };
    Ok((kept, ledger(removed, k.columns)?))
}

/// Drop singletons by the policy; returns the kept rows and the ledger part, if any.
pub fn drop_singletons(
    df: DataFrame,
    policy: SingletonPolicy,
    k: &Keys,
) -> Result<(DataFrame, Option<DataFrame>)> {
    let (entity, period) = (k.entity, k.period);
    let (drop, reason) = match policy {
        SingletonPolicy::Keep => return Ok((df, None)),
        SingletonPolicy::Entity => (
            df.clone()
                .lazy()
                .select([len().over([col(entity)])?.eq(lit(1)).alias("__drop")])
                .collect()?
                .column("__drop")?
                .bool()?
                .clone(),
            "entity observed in one period only",
        ),
        // The panel arrives sorted by entity and period: the panel core peels it.
        SingletonPolicy::EntityPeriod => (
            !&BooleanChunked::from_slice(
                "__drop".into(),
                &crate::core::PanelCore::new(&df, entity, period)?.two_way_kept(),
            ),
            "its entity or period had a single row under entity and period effects (dropped iteratively)",
        ),
    };
    // The rows kept within the columns' own buffers, and no copy when none is dropped.
    let reason = lit(reason.to_string());
    let (kept, removed) = drop_marked(df, &drop, reason, &[], "singletons", k, None)?;
    Ok((kept, Some(removed)))
}

/// Put rejected rows in ledger column order.
pub fn ledger(df: DataFrame, columns: &[String]) -> Result<DataFrame> {
    let mut select = vec![col(ROW), col(STEP), col(REASON), col(RELATED)];
    select.extend(columns.iter().map(|c| col(c.as_str())));
    Ok(df.lazy().select(select).collect()?)
}

fn key_examples(key_counts: &DataFrame, entity: &str, period: &str) -> Result<Vec<KeyExample>> {
    let head = key_counts.head(Some(5));
    let e = head.column(entity)?.str()?;
    let p = head.column(period)?.i64()?;
    let n = head.column("rows")?.cast(&DataType::UInt64)?;
    let n = n.u64()?;
    Ok((0..head.height())
        .map(|i| KeyExample {
            entity: e.get(i).unwrap_or_default().to_string(),
            period: p.get(i).unwrap_or_default(),
            rows: n.get(i).unwrap_or_default(),
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frame() -> DataFrame {
        df!(
            ROW => [1u32, 2, 3, 4, 5, 6, 7],
            "firm" => [Some("a"), Some("a"), Some("a"), None, Some("b"), Some("b"), Some("c")],
            "year" => [Some(1i64), Some(1), Some(2), Some(3), Some(1), Some(1), None],
            "x" => [1.0, 1.0, 5.0, 2.0, 3.0, 4.0, 9.0],
        )
        .unwrap()
    }

    #[test]
    fn rows_already_in_key_order_come_out_as_a_sorted_frame_would() {
        // The frame is in key order once its missing keys are set aside; reversed, it is not
        // and must be sorted. Both give the same rows in the same order.
        let ordered = frame();
        let in_order = |df: &DataFrame| {
            let df = df.drop_nulls::<String>(None).unwrap();
            keyscan::scan(&df, "firm", "year").unwrap().in_order
        };
        assert!(in_order(&ordered));
        let reversed = ordered.reverse();
        assert!(!in_order(&reversed));
        let a = run_on(ordered, DuplicatePolicy::KeepLast).unwrap();
        let b = run_on(reversed, DuplicatePolicy::KeepLast).unwrap();
        assert!(a.kept.equals_missing(&b.kept), "{}\n{}", a.kept, b.kept);
        assert_eq!(
            a.kept.column(ROW).unwrap().u32().unwrap().to_vec(),
            vec![Some(1), Some(3), Some(6)]
        );
    }

    fn run(policy: DuplicatePolicy) -> Result<KeyResult> {
        run_on(frame(), policy)
    }

    fn run_on(df: DataFrame, policy: DuplicatePolicy) -> Result<KeyResult> {
        let columns = ["firm", "year", "x"].map(String::from);
        let keys = Keys {
            file: std::path::Path::new("t.csv"),
            entity: "firm",
            period: "year",
            columns: &columns,
        };
        // The rows kept, copied down as the pipeline's next step would.
        let mut r = resolve_keys(df, &keys, &policy)?;
        r.kept = settle(r.kept, r.pending.take().as_ref())?;
        Ok(r)
    }

    fn rows(df: &DataFrame) -> Vec<u32> {
        let mut rows: Vec<u32> = df
            .column(ROW)
            .unwrap()
            .u32()
            .unwrap()
            .into_no_null_iter()
            .collect();
        rows.sort();
        rows
    }

    #[test]
    fn every_row_is_kept_or_rejected_once() {
        for policy in [
            DuplicatePolicy::KeepFirst,
            DuplicatePolicy::KeepLast,
            DuplicatePolicy::DropAll,
            DuplicatePolicy::PreferMax("x".into()),
            DuplicatePolicy::PreferMin("x".into()),
            DuplicatePolicy::Report,
        ] {
            let r = run(policy.clone()).unwrap();
            let mut all = rows(&r.kept);
            for d in &r.rejected {
                all.extend(rows(d));
            }
            all.sort();
            assert_eq!(all, [1, 2, 3, 4, 5, 6, 7], "{policy:?}");
        }
    }

    #[test]
    fn policies_keep_the_row_they_promise() {
        // Rows 5 and 6 share key (b, 1) with x = 3 and 4; row 2 copies row 1 exactly.
        let kept = |p| rows(&run(p).unwrap().kept);
        assert_eq!(kept(DuplicatePolicy::KeepFirst), [1, 3, 5]);
        assert_eq!(kept(DuplicatePolicy::KeepLast), [1, 3, 6]);
        assert_eq!(kept(DuplicatePolicy::DropAll), [1, 3]);
        assert_eq!(kept(DuplicatePolicy::PreferMax("x".into())), [1, 3, 6]);
        assert_eq!(kept(DuplicatePolicy::PreferMin("x".into())), [1, 3, 5]);
        let r = run(DuplicatePolicy::Report).unwrap();
        assert_eq!(r.keys.missing_key_rows, 2);
        assert_eq!(r.keys.exact_duplicate_rows, 1);
        assert_eq!((r.keys.conflicting_keys, r.keys.conflicting_rows), (1, 2));
        let err = run(DuplicatePolicy::Fail).err().unwrap().to_string();
        assert!(err.contains("entity `b`, period 1"), "{err}");
    }
}
