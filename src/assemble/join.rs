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
    let has = |c: &str| t.on.iter().any(|o| o == c);
    // A table on the entity, or on the entity and the period, is matched by its keys' places
    // in the sorted panel (`sorted.rs`); any other, and where that way does not apply, by the
    // engine's joins.
    let placed = match (has(k.entity), has(k.period), t.on.len()) {
        (true, false, 1) => sorted::matched(&panel, &table, k.entity, None)?,
        (true, true, 2) => sorted::matched(&panel, &table, k.entity, Some(k.period))?,
        _ => None,
    };
    let Matching {
        joined,
        unmatched_keys,
        panel_rows_unmatched,
        panel_keys,
        lonely,
    } = match placed {
        Some(m) => by_places(panel, &table, t, m)?,
        None => by_engine(panel, &table, t)?,
    };
    let lonely = lonely
        .lazy()
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
    let examples = key_texts(&unmatched_keys.head(Some(5)))?;
    let panel_rows = joined.height() as u64;
    let rows_unmatched = lonely.height() as u64;
    // The names compared: the entity's, or those of the one group column of a table on a
    // group (and the period) when it holds text (`usd` in the panel, `USD` in a rates table).
    let groups: Vec<&String> = t.on.iter().filter(|o| *o != k.period).collect();
    let alike_on = match groups[..] {
        _ if has(k.entity) => Some(k.entity),
        [g] if schema.get(g.as_str()) == Some(&DataType::String) => Some(g.as_str()),
        _ => None,
    };
    let (alike_unmatched, alike_example) = match alike_on {
        Some(c) => alike_names(&lonely, &unmatched_keys, c)?,
        None => (0, Vec::new()),
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
        alike_column: alike_on.unwrap_or_default().to_string(),
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

/// A table joined onto the panel and what the match report counts.
struct Matching {
    /// The panel with the table's columns and `__matched` (true, or missing where no row of
    /// the table matched).
    joined: DataFrame,
    /// The distinct keys of the panel rows no table row matched, sorted.
    unmatched_keys: DataFrame,
    panel_rows_unmatched: u64,
    panel_keys: u64,
    /// The table's rows that matched no panel row.
    lonely: DataFrame,
}

/// The join by the places [`sorted::matched`] found: each panel row takes its key's table row.
fn by_places(
    mut panel: DataFrame,
    table: &DataFrame,
    t: &Table,
    m: sorted::Matched,
) -> Result<Matching> {
    let unmatched_keys = panel
        .select(t.on.iter().map(String::as_str))?
        .take(&IdxCa::from_vec(PlSmallStr::EMPTY, m.unmatched_keys))?;
    let brought = table
        .select(t.brought.iter().map(String::as_str))?
        .take(&m.from)?;
    let matched: BooleanChunked = m.from.iter().map(|i| i.map(|_| true)).collect();
    for column in brought.columns() {
        panel.with_column(column.clone())?;
    }
    panel.with_column(matched.into_column().with_name("__matched".into()))?;
    Ok(Matching {
        joined: panel,
        unmatched_keys,
        panel_rows_unmatched: m.rows_unmatched,
        panel_keys: m.keys,
        lonely: table.take(&IdxCa::from_vec(PlSmallStr::EMPTY, m.lonely))?,
    })
}

/// The join by the engine: a left join on `t.on` (panel order kept), the unmatched keys, the
/// distinct keys and an anti-join for the table's rows that match nothing.
fn by_engine(panel: DataFrame, table: &DataFrame, t: &Table) -> Result<Matching> {
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
    let panel_keys = panel_keys_distinct(&joined, &t.on)?;
    let panel_on = joined.clone().lazy().select(on.clone());
    let lonely = table
        .clone()
        .lazy()
        .join(
            panel_on,
            on.clone(),
            on.clone(),
            JoinArgs::new(JoinType::Anti),
        )
        .collect()?;
    Ok(Matching {
        joined,
        unmatched_keys,
        panel_rows_unmatched: unmatched_panel.height() as u64,
        panel_keys,
        lonely,
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

/// The file's unmatched names in `column` (the entity or a group; its rows in `lonely`) that
/// are a panel name left unmatched (in `unmatched`) but for surrounding spaces, letter case or
/// leading zeros (`k1 ` in the file, `K1` in the panel; `7` and `007`): how many, and the
/// first pair, the file's name then the panel's.
fn alike_names(
    lonely: &DataFrame,
    unmatched: &DataFrame,
    column: &str,
) -> Result<(u64, Vec<String>)> {
    let fold = |name: &str| crate::core::without_zeros(&name.trim().to_lowercase()).to_string();
    let panel: std::collections::HashMap<String, &str> = unmatched
        .column(column)?
        .str()?
        .iter()
        .flatten()
        .map(|name| (fold(name), name))
        .collect();
    let mut names: Vec<&str> = lonely.column(column)?.str()?.iter().flatten().collect();
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

#[cfg(test)]
mod tests {
    use rand::{Rng, SeedableRng};

    use super::*;

    fn table(df: DataFrame, on: &[&str]) -> Table {
        Table {
            path: "table.csv".into(),
            sha256: String::new(),
            on: on.iter().map(|c| c.to_string()).collect(),
            brought: vec!["v".into(), "t".into()],
            rows: df.height() as u64,
            df,
            set_aside: DataFrame::empty(),
            missing_keys: 0,
            exact_copies: 0,
            repeated_keys: 0,
            drop_unmatched: false,
            format: crate::config::InputFormat::Csv,
            notes: Vec::new(),
        }
    }

    /// The join by places against the engine's joins (the way every table was joined before)
    /// on a panel of 150 firms, short and long names, years with gaps and some keys repeated,
    /// and tables in shuffled order with keys the panel lacks and a row without a name: the
    /// same joined panel, unmatched keys, counts and unmatched table rows, on the firm alone
    /// and on the firm and year.
    #[test]
    fn places_agree_with_the_engine() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(99);
        let mut next = || rng.random::<u64>() >> 33;
        let name = |firm: u64| match firm % 4 {
            0 => format!("firm {firm:04} with a name longer than a view"),
            _ => format!("f{firm}"),
        };
        let (mut f, mut y) = (Vec::new(), Vec::new());
        for firm in 0..150 {
            let mut year = 2000 + (next() % 4) as i64;
            for _ in 0..1 + next() % 8 {
                for _ in 0..1 + u64::from(next() % 10 == 0) {
                    f.push(name(firm));
                    y.push(year);
                }
                year += 1 + (next() % 3) as i64;
            }
        }
        let panel = df!("f" => f, "y" => y)
            .unwrap()
            .sort(
                ["f", "y"],
                SortMultipleOptions::default().with_maintain_order(true),
            )
            .unwrap();
        // Firm-years: every other panel key, some years no firm has, firms not in the panel.
        let mut keys = panel
            .clone()
            .lazy()
            .unique_stable(None, UniqueKeepStrategy::First)
            .collect()
            .unwrap();
        keys = keys
            .filter(&(0..keys.height()).map(|i| i % 2 == 0).collect())
            .unwrap();
        let extra = df!(
            "f" => [Some(name(3)), Some("no such firm".into()), None, Some(name(8))],
            "y" => [1990i64, 2001, 2002, 2003],
        )
        .unwrap();
        keys.vstack_mut(&extra).unwrap();
        let firm_years = keys
            .unique_stable(None, UniqueKeepStrategy::First, None)
            .unwrap();
        let firms = df!("f" => (0..200).step_by(3).map(name).collect::<Vec<_>>()).unwrap();
        for (mut df, on) in [(firm_years, vec!["f", "y"]), (firms, vec!["f"])] {
            let n = df.height();
            let order: Vec<IdxSize> = {
                let mut o: Vec<IdxSize> = (0..n as IdxSize).collect();
                o.sort_by_key(|i| (u64::from(*i) * 2_654_435_761) % 1_000_003);
                o
            };
            df = df.take(&IdxCa::from_vec("o".into(), order)).unwrap();
            df.with_column(Column::new(
                ROW.into(),
                (0..n as IdxSize).collect::<Vec<_>>(),
            ))
            .unwrap();
            df.with_column(Column::new(
                "v".into(),
                (0..n)
                    .map(|i| (i % 5 != 0).then_some(i as f64 * 0.5))
                    .collect::<Vec<_>>(),
            ))
            .unwrap();
            df.with_column(Column::new(
                "t".into(),
                (0..n).map(|i| format!("text {i}")).collect::<Vec<_>>(),
            ))
            .unwrap();
            let t = table(df.clone(), &on);
            let period = (on.len() == 2).then_some("y");
            let m = sorted::matched(&panel, &df, "f", period).unwrap().unwrap();
            let ours = by_places(panel.clone(), &df, &t, m).unwrap();
            let theirs = by_engine(panel.clone(), &df, &t).unwrap();
            assert!(ours.joined.equals_missing(&theirs.joined), "{on:?}: joined");
            assert!(
                ours.unmatched_keys.equals_missing(&theirs.unmatched_keys),
                "{on:?}"
            );
            assert!(ours.panel_rows_unmatched > 0 && ours.unmatched_keys.height() > 0);
            assert_eq!(
                ours.panel_rows_unmatched, theirs.panel_rows_unmatched,
                "{on:?}"
            );
            assert_eq!(ours.panel_keys, theirs.panel_keys, "{on:?}");
            let by_row = |d: &DataFrame| d.sort([ROW], Default::default()).unwrap();
            assert!(ours.lonely.height() > 0);
            assert!(
                by_row(&ours.lonely).equals_missing(&by_row(&theirs.lonely)),
                "{on:?}"
            );
        }
    }
}
