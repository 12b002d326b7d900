//! Joining a read table onto the panel after its key steps, with its match report, and the
//! rejects ledger of the main file and every joined table in one frame.

use super::*;

/// What joining one table did to the panel.
pub struct Joined {
    /// The panel with the table's columns.
    pub panel: DataFrame,
    /// Panel rows removed because they matched nothing (`unmatched = "drop"`), ledger-shaped.
    pub dropped: Option<DataFrame>,
    /// The table's rows that went to the ledger, ledger-shaped, with `FILE`.
    pub ledger: DataFrame,
    /// The match report.
    pub line: JoinLine,
}

/// Join `t` onto `panel` (a left join on `t.on`, panel order kept).
pub fn join(panel: DataFrame, t: &Table, k: &Keys) -> Result<Joined> {
    let name = t.name();
    let schema = panel.schema().clone();
    for o in &t.on {
        if !schema.contains(o) {
            return Err(Error::MissingColumn {
                file: t.path.clone(),
                column: o.clone(),
                context: "named in `on` of its [[join]], but the panel has no such column".into(),
            });
        }
    }
    if let Some(c) = t.brought.iter().find(|c| schema.contains(c.as_str())) {
        return Err(Error::MissingColumn {
            file: t.path.clone(),
            column: c.clone(),
            context: "the panel already has this column: leave it out with `columns` or give \
                      it another name with `rename` in its [[join]]"
                .into(),
        });
    }
    // Group columns take the panel's type.
    let mut table = t.df.clone();
    for o in &t.on {
        let dtype = schema.get(o.as_str()).expect("checked above");
        table = cast_key(table, o, dtype, &t.path)?;
    }
    let on: Vec<Expr> = t.on.iter().map(|c| col(c.as_str())).collect();
    let mut right: Vec<Expr> = on.clone();
    right.extend(t.brought.iter().map(|c| col(c.as_str())));
    right.push(lit(true).alias("__matched"));
    let args = JoinArgs {
        maintain_order: MaintainOrderJoin::Left,
        ..JoinArgs::new(JoinType::Left)
    };
    let joined = panel
        .lazy()
        .join(
            table.clone().lazy().select(right),
            on.clone(),
            on.clone(),
            args,
        )
        .collect()?;
    let unmatched_panel = joined
        .clone()
        .lazy()
        .filter(col("__matched").is_null())
        .select(on.clone())
        .collect()?;
    let unmatched_keys = unmatched_panel
        .clone()
        .lazy()
        .unique(None, UniqueKeepStrategy::First)
        .sort(t.on.clone(), Default::default())
        .collect()?;
    let examples = key_texts(&unmatched_keys.head(Some(5)))?;
    let panel_rows = joined.height() as u64;
    let panel_rows_unmatched = unmatched_panel.height() as u64;
    let panel_keys = panel_keys_distinct(&joined, &t.on)?;
    // The table's rows that found no panel row.
    let panel_on = joined.clone().lazy().select(on.clone());
    let lonely = table
        .lazy()
        .join(
            panel_on,
            on.clone(),
            on.clone(),
            JoinArgs::new(JoinType::Anti),
        )
        .select({
            let mut s = vec![col(ROW)];
            s.extend(on.iter().cloned());
            s.extend([
                lit("join: no match").alias(STEP),
                lit("no panel row has this key").alias(REASON),
                lit(NULL).cast(IDX_DTYPE).alias(RELATED),
            ]);
            s
        })
        .collect()?;
    let rows_unmatched = lonely.height() as u64;
    let (alike_unmatched, alike_example) = match t.on.iter().any(|o| o == k.entity) {
        true => alike_names(&lonely, &unmatched_keys, k.entity)?,
        false => (0, Vec::new()),
    };
    let mut aside = t.set_aside.clone();
    aside.vstack_mut(&lonely)?;
    let ledger = ledger_rows(aside, &schema, k.columns, &name)?;
    let (panel, dropped) = if t.drop_unmatched {
        let (kept, removed) = clean::drop_where(
            joined,
            when(col("__matched").is_null())
                .then(lit(format!("no row of `{name}` matches its key")))
                .otherwise(lit(NULL).cast(DataType::String)),
            "join: unmatched",
            k,
        )?;
        (kept, Some(removed))
    } else {
        (joined, None)
    };
    let panel = panel.drop("__matched")?;
    let used = t.df.height() as u64 - rows_unmatched;
    let line = JoinLine {
        file: name,
        kind: kind(&t.on, k.entity, k.period).to_string(),
        on: t.on.clone(),
        columns: t.brought.clone(),
        rows: t.rows,
        rows_used: used,
        rows_unmatched,
        missing_keys: t.missing_keys,
        exact_copies: t.exact_copies,
        repeated_keys: t.repeated_keys,
        panel_rows,
        panel_rows_unmatched,
        panel_keys,
        panel_keys_unmatched: unmatched_keys.height() as u64,
        examples,
        unmatched: if t.drop_unmatched { "drop" } else { "keep" }.into(),
        alike_unmatched,
        alike_example,
    };
    Ok(Joined {
        panel,
        dropped,
        ledger,
        line,
    })
}

fn panel_keys_distinct(df: &DataFrame, on: &[String]) -> Result<u64> {
    let on: Vec<Expr> = on.iter().map(|c| col(c.as_str())).collect();
    Ok(df
        .clone()
        .lazy()
        .select(on)
        .unique(None, UniqueKeepStrategy::Any)
        .collect()?
        .height() as u64)
}

/// The file's unmatched entity names (in `lonely`) that are a panel entity left unmatched (in
/// `unmatched`) but for surrounding spaces or letter case (`k1 ` in the file, `K1` in the
/// panel): how many, and the first pair, the file's name then the panel's.
fn alike_names(
    lonely: &DataFrame,
    unmatched: &DataFrame,
    entity: &str,
) -> Result<(u64, Vec<String>)> {
    let fold = |name: &str| name.trim().to_lowercase();
    let panel: std::collections::HashMap<String, &str> = unmatched
        .column(entity)?
        .str()?
        .iter()
        .flatten()
        .map(|name| (fold(name), name))
        .collect();
    let mut names: Vec<&str> = lonely.column(entity)?.str()?.iter().flatten().collect();
    names.sort_unstable();
    names.dedup();
    let mut count = 0;
    let mut first = Vec::new();
    for name in names {
        // The same name can be unmatched on both sides in other periods: not alike, one.
        if let Some(other) = panel.get(&fold(name)).filter(|other| **other != name) {
            count += 1;
            if first.is_empty() {
                first = vec![name.to_string(), other.to_string()];
            }
        }
    }
    Ok((count, first))
}

/// Keys as text, `a / b` for two columns.
fn key_texts(df: &DataFrame) -> Result<Vec<String>> {
    let texts: Vec<Series> = df
        .columns()
        .iter()
        .map(|c| {
            c.cast(&DataType::String)
                .map(|c| c.as_materialized_series().clone())
        })
        .collect::<PolarsResult<_>>()?;
    Ok((0..df.height())
        .map(|i| {
            texts
                .iter()
                .map(|s| {
                    s.str()
                        .ok()
                        .and_then(|s| s.get(i))
                        .unwrap_or("(empty)")
                        .to_string()
                })
                .collect::<Vec<_>>()
                .join(" / ")
        })
        .collect())
}

/// A joined table's set-aside rows in the ledger's shape: `ROW`, `FILE`, `STEP`, `REASON`,
/// `RELATED`, then the main file's columns (the key columns it shares, the rest empty).
fn ledger_rows(
    aside: DataFrame,
    panel: &Schema,
    columns: &[String],
    name: &str,
) -> Result<DataFrame> {
    let have = aside.schema().clone();
    let mut select = vec![
        col(ROW),
        lit(name.to_string()).alias(FILE),
        col(STEP),
        col(REASON),
        col(RELATED),
    ];
    for c in columns {
        let dtype = panel.get(c.as_str()).cloned().unwrap_or(DataType::String);
        select.push(if have.contains(c) {
            col(c.as_str()).cast(dtype).alias(c.as_str())
        } else {
            lit(NULL).cast(dtype).alias(c.as_str())
        });
    }
    Ok(aside.lazy().select(select).collect()?)
}

/// Put the main file's ledger parts and the joined tables' in one ledger: the main file's rows
/// first (by row), then each table's (by row), with the file of each row.
pub fn ledger(main: DataFrame, main_name: &str, tables: Vec<DataFrame>) -> Result<DataFrame> {
    let mut columns: Vec<Expr> = main
        .get_column_names()
        .iter()
        .map(|c| col(c.as_str()))
        .collect();
    columns.insert(1, col(FILE));
    let mut out = main
        .lazy()
        .sort([ROW], Default::default())
        .with_column(lit(main_name.to_string()).alias(FILE))
        .select(columns.clone())
        .collect()?;
    for t in tables {
        let t = t
            .lazy()
            .sort([ROW], Default::default())
            .select(columns.clone())
            .collect()?;
        out.vstack_mut(&t)?;
    }
    Ok(out)
}
