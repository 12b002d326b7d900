//! `compare`: two vintages of one panel (two raw downloads, or two bundles) side by side.
//! Firm-years and entities added and removed, columns added and removed, and every cell of
//! the firm-years in both that changed beyond a tolerance, with a change ledger (CSV) and a
//! summary in the report formats. The firm-years are paired once (`pairs.rs`: a merge of the
//! two vintages' keys in key order); then each shared column is gathered from both
//! vintages in the matched order (read as it is where that is its own) and compared, one
//! column at a time — a bundle's read from its panel.parquet then, its keys alone held
//! throughout. A column removed whose values a column added holds is named beside it
//! (`renamed.rs`).

use std::path::Path;

use polars::prelude::*;
use serde::Serialize;

use crate::bundle::Manifest;
use crate::config::InputConfig;
pub use crate::config::{CompareConfig, Side, Tolerance};
use crate::report::{level, strings, Block, Page, Section};
use crate::{Error, Result};
use cells::{gather, Kind};

mod cells;
mod page;
mod pairs;
mod renamed;

pub(crate) use page::page;
use renamed::same_values;
pub use renamed::SameValues;

/// One vintage as compared.
#[derive(Debug, Clone, Serialize)]
pub struct VintageSummary {
    /// The file or folder.
    pub path: String,
    /// `raw file` or `bundle`.
    pub kind: &'static str,
    /// Rows read (a bundle: rows of its cleaned panel).
    pub rows_read: u64,
    /// Rows without an entity or period, left out.
    pub rows_without_key: u64,
    /// Exact copies of an earlier row, counted once.
    pub exact_copies: u64,
    /// Firm-years compared.
    pub firm_years: u64,
    /// Entities.
    pub entities: u64,
}

/// What changed in one column shared by both vintages, over the firm-years in both.
#[derive(Debug, Clone, Serialize)]
pub struct ColumnChanges {
    /// The column.
    pub column: String,
    /// A derived variable (known when the side is a bundle).
    pub derived: bool,
    /// `number`, `text`, or `number and text` (numbers on one side, text on the other: cells
    /// that read as numbers on both sides compared as numbers, the others as text).
    pub compared_as: &'static str,
    /// Cells changed beyond the tolerance, counting values that appeared or vanished.
    pub cells_changed: u64,
    /// Of those, values present in the old vintage and missing in the new.
    pub became_missing: u64,
    /// Of those, values missing in the old vintage and present in the new.
    pub became_present: u64,
    /// The largest absolute change among changed numbers.
    pub largest_change: Option<f64>,
    /// Of the cells changed, text the same but for letter case or surrounding spaces (text
    /// columns only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub case_or_spaces_only: Option<u64>,
}

/// The comparison, as `--format json` writes it.
#[derive(Debug, Clone, Serialize)]
pub struct Comparison {
    /// The earlier vintage.
    pub old: VintageSummary,
    /// The later vintage.
    pub new: VintageSummary,
    /// The entity and period columns (as the old vintage names them).
    pub keys: (String, String),
    /// The tolerance used.
    pub tolerance: Tolerance,
    /// Firm-years in both.
    pub firm_years_in_both: u64,
    /// Firm-years only in the new vintage.
    pub firm_years_added: u64,
    /// Firm-years only in the old vintage.
    pub firm_years_removed: u64,
    /// Entities only in the new vintage.
    pub entities_added: Vec<String>,
    /// Entities only in the old vintage.
    pub entities_removed: Vec<String>,
    /// Entities added that are removed ones but for leading zeros, where there are some.
    pub ids_rewritten: Option<pairs::Rewritten>,
    /// Columns only in the new vintage.
    pub columns_added: Vec<String>,
    /// Columns only in the old vintage.
    pub columns_removed: Vec<String>,
    /// A column only in the old vintage and one only in the new holding the same values on
    /// every firm-year in both: perhaps one column renamed.
    pub same_values: Vec<SameValues>,
    /// Every shared column.
    pub columns: Vec<ColumnChanges>,
    /// Whether any cell was compared: false when the vintages share no column besides the
    /// keys or no firm-year (the cells were not checked, which is not "unchanged").
    pub cells_checked: bool,
    /// Anything changed beyond the tolerance: rows, entities, columns or cells.
    pub changed: bool,
}

struct Vintage {
    summary: VintageSummary,
    /// Every column of a raw file; the two keys of a bundle, whose other columns are read
    /// from `panel` one at a time as they are compared.
    df: DataFrame,
    /// A bundle's panel.parquet, as scanned.
    panel: Option<LazyFrame>,
    /// Every column's type.
    schema: SchemaRef,
    /// The keys in key order.
    keys: pairs::Keys,
    entity: String,
    period: String,
    derived: Vec<String>,
}

impl Vintage {
    /// The column `c`, in the vintage's own row order.
    fn column(&self, c: &str) -> Result<Column> {
        Ok(match &self.panel {
            None => self.df.column(c)?.clone(),
            Some(lf) => lf.clone().select([col(c)]).collect()?.column(c)?.clone(),
        })
    }
}

fn bundle_vintage(dir: &Path) -> Result<Vintage> {
    let manifest_path = dir.join("manifest.json");
    let text = std::fs::read_to_string(&manifest_path).map_err(Error::io(&manifest_path))?;
    let manifest: Manifest = serde_json::from_str(&text).map_err(|e| Error::Manifest {
        path: manifest_path.clone(),
        message: e.to_string(),
    })?;
    let dict_path = dir.join("dictionary.json");
    let (derived, bookkeeping) = match std::fs::read_to_string(&dict_path) {
        Ok(text) => {
            let dict: serde_json::Value = serde_json::from_str(&text)?;
            let entries = dict["columns"].as_array().cloned().unwrap_or_default();
            let names = |pred: &dyn Fn(&serde_json::Value) -> bool| -> Vec<String> {
                entries
                    .iter()
                    .filter(|e| pred(e))
                    .filter_map(|e| e["name"].as_str().map(str::to_string))
                    .collect()
            };
            (
                names(&|e| {
                    e["definition"]
                        .as_str()
                        .is_some_and(|d| d.starts_with("derived"))
                }),
                names(&|e| e["source"] == "panelready"),
            )
        }
        // A bundle made before dictionary.json: its row-number column has the default name.
        Err(_) => (Vec::new(), vec!["source_row".to_string()]),
    };
    let panel = dir.join("panel.parquet");
    if !panel.is_file() {
        return Err(Error::NoInput { file: panel });
    }
    let (entity, period) = (
        manifest.input.entity.as_str(),
        manifest.input.period.as_str(),
    );
    let mut lf = LazyFrame::scan_parquet(
        PlRefPath::try_from_path(&panel)?,
        ScanArgsParquet::default(),
    )?
    .drop(by_name(
        bookkeeping.iter().map(String::as_str),
        false,
        false,
    ))
    .with_columns([
        col(entity).cast(DataType::String),
        col(period).cast(DataType::Int64),
    ]);
    let schema = lf.collect_schema()?;
    // The keys now (in one chunk each, which `Keys` then shares rather than copies); every
    // other column when it is compared, so that memory holds two columns of each vintage.
    let mut df = lf.clone().select([col(entity), col(period)]).collect()?;
    df.rechunk_mut_par();
    let rows = df.height() as u64;
    // `build` writes one row per firm-year, none without a key: a panel that has such rows
    // was written by something else, and its firm-years cannot be paired.
    let (e, p) = (df.column(entity)?, df.column(period)?);
    let keys = match e.null_count() + p.null_count() {
        0 => Some(pairs::Keys::of(e, p)?).filter(|k| k.repeated().is_none()),
        _ => None,
    };
    let Some(keys) = keys else {
        return Err(Error::Unreadable {
            file: panel,
            at: String::new(),
            message: format!(
                "a row without `{entity}` or `{period}`, or a firm-year on two rows: not a \
                 panel `build` wrote"
            ),
        });
    };
    let entities = keys.entities();
    Ok(Vintage {
        summary: VintageSummary {
            path: dir.display().to_string(),
            kind: "bundle",
            rows_read: rows,
            rows_without_key: 0,
            exact_copies: 0,
            firm_years: rows,
            entities,
        },
        df,
        panel: Some(lf),
        schema,
        keys,
        entity: manifest.input.entity,
        period: manifest.input.period,
        derived,
    })
}

fn raw_vintage(cfg: &InputConfig) -> Result<Vintage> {
    let loaded = crate::load::load(cfg, &[], None)?;
    let (e, p) = (cfg.entity.as_str(), cfg.period.as_str());
    let row = crate::load::ROW;
    let rows_read = loaded.rows;
    let df = loaded.df;
    // Rows without a key left out: a copy of the file only when there are some.
    let keyless = df.column(e)?.null_count() + df.column(p)?.null_count() > 0;
    let keyed = match keyless {
        false => df,
        true => df
            .lazy()
            .filter(col(e).is_not_null().and(col(p).is_not_null()))
            .collect()?,
    };
    let rows_without_key = rows_read - keyed.height() as u64;
    // Exact copies are looked for among the rows whose key repeats only (whole rows hashed
    // there, the keys alone sorted elsewhere, the file's row number aside), the first of each
    // kept in place.
    let keys = pairs::Keys::of(keyed.column(e)?, keyed.column(p)?)?;
    let (mut unique, keys) = match keys.repeated() {
        None => (keyed, keys),
        Some(repeated) => {
            let rows = keyed.with_row_index("__at".into(), None)?;
            let values: Vec<String> = keyed
                .get_column_names()
                .iter()
                .filter(|c| c.as_str() != row)
                .map(|c| c.to_string())
                .collect();
            let first = rows.filter(&repeated)?.unique_stable(
                Some(&values),
                UniqueKeepStrategy::First,
                None,
            )?;
            // A key still on two rows has rows with different values: it cannot be matched to
            // one row of the other vintage (the first such key named, with its first two rows).
            let conflicting = first.select([e, p])?.is_duplicated()?;
            if let Some(r) = conflicting.iter().position(|c| c == Some(true)) {
                let entity = first.column(e)?.str()?.get(r).unwrap_or("").to_string();
                let period = first.column(p)?.i64()?.get(r).unwrap_or(0);
                let same = first
                    .clone()
                    .lazy()
                    .filter(col(e).eq(lit(entity.clone())).and(col(p).eq(lit(period))))
                    .select([col(row).cast(DataType::UInt64)])
                    .collect()?;
                let rows = same.column(row)?.u64()?;
                return Err(Error::CompareKey {
                    file: cfg.path.clone(),
                    entity,
                    period,
                    first: rows.get(0).unwrap_or(0),
                    second: rows.get(1).unwrap_or(0),
                });
            }
            let mut keep: Vec<bool> = repeated.iter().map(|r| r != Some(true)).collect();
            for r in first.column("__at")?.idx()?.into_no_null_iter() {
                keep[r as usize] = true;
            }
            let unique = keyed.filter(&BooleanChunked::from_slice("keep".into(), &keep))?;
            let keys = pairs::Keys::of(unique.column(e)?, unique.column(p)?)?;
            (unique, keys)
        }
    };
    unique.drop_in_place(row)?;
    let exact_copies = rows_read - rows_without_key - unique.height() as u64;
    let entities = keys.entities();
    Ok(Vintage {
        summary: VintageSummary {
            path: cfg.path.display().to_string(),
            kind: "raw file",
            rows_read,
            rows_without_key,
            exact_copies,
            firm_years: unique.height() as u64,
            entities,
        },
        schema: unique.schema().clone(),
        df: unique,
        panel: None,
        keys,
        entity: cfg.entity.clone(),
        period: cfg.period.clone(),
        derived: Vec::new(),
    })
}

fn vintage(side: &Side) -> Result<Vintage> {
    match side {
        Side::Raw(cfg) => raw_vintage(cfg),
        Side::Bundle(dir) => bundle_vintage(dir),
    }
}

fn numeric(dtype: &DataType) -> bool {
    dtype.is_primitive_numeric() || dtype.is_bool()
}

/// Compare two vintages; returns the summary and the change ledger.
/// One vintage's side of the firm-years in both: where its rows are, and whether they are
/// its own rows in its own order (read as they are, not gathered).
struct Matched<'a> {
    vintage: &'a Vintage,
    at: &'a IdxCa,
    whole: bool,
}

impl Matched<'_> {
    /// Column `c` over the firm-years in both, in the matched order.
    fn column(&self, c: &str) -> Result<Column> {
        let column = self.vintage.column(c)?;
        match self.whole {
            true => Ok(column),
            false => gather(&column, self.at),
        }
    }
}

pub fn compare(old: &Side, new: &Side, tolerance: &Tolerance) -> Result<(Comparison, DataFrame)> {
    let old = vintage(old)?;
    let new = vintage(new)?;
    let (e, p) = (old.entity.clone(), old.period.clone());
    let old_schema = old.schema.clone();
    let new_schema = new.schema.clone();
    let is_key_old = |c: &str| c == old.entity || c == old.period;
    let is_key_new = |c: &str| c == new.entity || c == new.period;
    let shared: Vec<String> = old_schema
        .iter_names()
        .map(|n| n.to_string())
        .filter(|n| !is_key_old(n) && !is_key_new(n) && new_schema.contains(n))
        .collect();
    let columns_removed: Vec<String> = old_schema
        .iter_names()
        .map(|n| n.to_string())
        .filter(|n| !is_key_old(n) && !new_schema.contains(n))
        .collect();
    let columns_added: Vec<String> = new_schema
        .iter_names()
        .map(|n| n.to_string())
        .filter(|n| !is_key_new(n) && !old_schema.contains(n))
        .collect();
    let kinds: Vec<Kind> = shared
        .iter()
        .map(|c| {
            let old = numeric(old_schema.get(c.as_str()).unwrap_or(&DataType::Null));
            let new = numeric(new_schema.get(c.as_str()).unwrap_or(&DataType::Null));
            let text = |side: &Schema| side.get(c.as_str()) == Some(&DataType::String);
            match (old, new) {
                (true, true) => Kind::Number,
                (true, false) if text(&new_schema) => Kind::Mixed,
                (false, true) if text(&old_schema) => Kind::Mixed,
                _ => Kind::Text,
            }
        })
        .collect();
    let pairs::Merged {
        pairs,
        entities_added,
        entities_removed,
    } = pairs::merged(&old.keys, &new.keys, &e, &p)?;
    let both = col("__io").is_not_null().and(col("__in").is_not_null());
    let tally = pairs
        .clone()
        .lazy()
        .select([
            both.clone().sum().cast(DataType::UInt64).alias("both"),
            col("__io")
                .is_null()
                .sum()
                .cast(DataType::UInt64)
                .alias("added"),
            col("__in")
                .is_null()
                .sum()
                .cast(DataType::UInt64)
                .alias("removed"),
        ])
        .collect()?;
    let count = |name: &str| -> Result<u64> { Ok(tally.column(name)?.u64()?.get(0).unwrap_or(0)) };
    let matched = pairs.clone().lazy().filter(both).collect()?;
    let at = |index: &str| -> Result<IdxCa> {
        Ok(matched
            .column(index)?
            .as_materialized_series()
            .idx()?
            .clone())
    };
    let (at_old, at_new) = (at("__io")?, at("__in")?);
    // Where a vintage's every row is matched, in its own order (two bundles, both sorted by
    // their keys, with no firm-year added or removed on that side), its columns are read as
    // they are, not gathered.
    let whole = |at: &IdxCa, v: &Vintage| {
        at.len() == v.df.height()
            && at.null_count() == 0
            && at
                .into_no_null_iter()
                .enumerate()
                .all(|(i, r)| r as usize == i)
    };
    let (whole_old, whole_new) = (whole(&at_old, &old), whole(&at_new, &new));
    let matched_old = Matched {
        vintage: &old,
        at: &at_old,
        whole: whole_old,
    };
    let matched_new = Matched {
        vintage: &new,
        at: &at_new,
        whole: whole_new,
    };
    let same_values = same_values(
        &columns_removed,
        &columns_added,
        &matched_old,
        &matched_new,
        tolerance,
    )?;
    let mut ledger = vec![
        row_event(&pairs, &e, &p, col("__io").is_null(), "firm-year added")?,
        row_event(&pairs, &e, &p, col("__in").is_null(), "firm-year removed")?,
    ];
    // One shared column at a time, gathered from both vintages in the matched order: memory
    // holds the keys (and a raw file whole) and two columns beside them, not a joined copy of
    // every column.
    let mut columns = Vec::with_capacity(shared.len());
    for (i, c) in shared.iter().enumerate() {
        let frame = DataFrame::new_infer_height(vec![
            matched.column(&e)?.clone(),
            matched.column(&p)?.clone(),
            matched_old.column(c)?.with_name("__o".into()),
            matched_new.column(c)?.with_name("__n".into()),
        ])?;
        let kind = kinds[i];
        let dtypes = (old_schema.get(c.as_str()), new_schema.get(c.as_str()));
        let (counted, changed) =
            cells::changes(frame, c, kind, dtypes, tolerance, (&e, &p), i as u32 + 1)?;
        columns.push(ColumnChanges {
            column: c.clone(),
            derived: old.derived.contains(c) || new.derived.contains(c),
            compared_as: kind.label(),
            cells_changed: counted.cells_changed,
            became_missing: counted.became_missing,
            became_present: counted.became_present,
            largest_change: counted.largest_change,
            case_or_spaces_only: counted.case_or_spaces_only,
        });
        ledger.push(changed);
    }

    let ledger = concat(
        ledger.into_iter().map(IntoLazy::lazy).collect::<Vec<_>>(),
        UnionArgs::default(),
    )?
    .sort([e.as_str(), p.as_str(), "__order"], Default::default())
    .drop(by_name(["__order"], true, false))
    .collect()?;
    let firm_years_added = count("added")?;
    let firm_years_removed = count("removed")?;
    let changed = firm_years_added + firm_years_removed > 0
        || !entities_added.is_empty()
        || !entities_removed.is_empty()
        || !columns_added.is_empty()
        || !columns_removed.is_empty()
        || columns.iter().any(|c| c.cells_changed > 0);
    let firm_years_in_both = count("both")?;
    let cells_checked = !shared.is_empty() && firm_years_in_both > 0;
    Ok((
        Comparison {
            old: old.summary,
            new: new.summary,
            keys: (e.clone(), p.clone()),
            tolerance: tolerance.clone(),
            firm_years_in_both,
            firm_years_added,
            firm_years_removed,
            ids_rewritten: pairs::rewritten(&entities_removed, &entities_added),
            entities_added,
            entities_removed,
            columns_added,
            columns_removed,
            same_values,
            columns,
            cells_checked,
            changed,
        },
        ledger,
    ))
}

/// The change ledger's rows for the firm-years of `pairs` where `filter` holds: added or
/// removed, as `what` says.
fn row_event(pairs: &DataFrame, e: &str, p: &str, filter: Expr, what: &str) -> Result<DataFrame> {
    let text_null = || lit(NULL).cast(DataType::String);
    Ok(pairs
        .clone()
        .lazy()
        .filter(filter)
        .select([
            col(e),
            col(p),
            lit(what).alias("change"),
            text_null().alias("column"),
            text_null().alias("old"),
            text_null().alias("new"),
            lit(NULL).cast(DataType::Float64).alias("difference"),
            lit(0u32).alias("__order"),
        ])
        .collect()?)
}
