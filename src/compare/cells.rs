//! One shared column of two vintages compared cell by cell over the firm-years in both: the
//! cells changed beyond the tolerance, those that appeared or vanished, the largest change,
//! and the change ledger's rows.

use polars::prelude::*;

use crate::config::Tolerance;
use crate::Result;

/// How a shared column's cells are compared.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Kind {
    /// Numbers on both sides: within the tolerance.
    Number,
    /// Text on both sides (or another type): exactly.
    Text,
    /// Numbers on one side and text on the other (a text cell in one vintage's column turns
    /// the whole column to text when it is read): cells that read as numbers on both sides
    /// are compared as numbers, the others as text.
    Mixed,
}

impl Kind {
    pub(super) fn label(self) -> &'static str {
        match self {
            Kind::Number => "number",
            Kind::Text => "text",
            Kind::Mixed => "number and text",
        }
    }
}

/// What changed in one column: the counts of `ColumnChanges`.
pub(super) struct Counted {
    pub cells_changed: u64,
    pub became_missing: u64,
    pub became_present: u64,
    pub largest_change: Option<f64>,
    pub case_or_spaces_only: Option<u64>,
}

/// The column `c` compared: `frame` holds the keys (named `e` and `p`) and the old and new
/// vintages' cells (`__o`, `__n`, of types `dtypes`) of the firm-years in both, in one order;
/// `order` places the column's rows among the change ledger's.
pub(super) fn changes(
    frame: DataFrame,
    c: &str,
    kind: Kind,
    dtypes: (Option<&DataType>, Option<&DataType>),
    tolerance: &Tolerance,
    (e, p): (&str, &str),
    order: u32,
) -> Result<(Counted, DataFrame)> {
    // Numbers on both sides: the rows that changed found by one typed pass, and only
    // those go through the expressions below (which find every one of them changed).
    let frame = match kind {
        Kind::Number => {
            let (abs, rel) = tolerance.of(c);
            let changed = numbers_changed(frame.column("__o")?, frame.column("__n")?, abs, rel)?;
            frame.filter(&changed)?
        }
        Kind::Text | Kind::Mixed => frame,
    };
    let mut typed = typed("__o", kind, dtypes.0);
    typed.extend(self::typed("__n", kind, dtypes.1));
    let (o, n) = (col("__o"), col("__n"));
    let (on, nn) = (col("__o#"), col("__n#"));
    let beyond = |o: Expr, n: Expr| {
        let (abs, rel) = tolerance.of(c);
        (n - o.clone()).abs().gt(lit(abs) + lit(rel) * o.abs())
    };
    let values = match kind {
        Kind::Number => beyond(o.clone(), n.clone()),
        Kind::Text => o.clone().neq(n.clone()),
        Kind::Mixed => when(on.clone().is_not_null().and(nn.clone().is_not_null()))
            .then(beyond(on.clone(), nn.clone()))
            .otherwise(o.clone().neq(n.clone())),
    };
    let presence = o.clone().is_null().neq(n.clone().is_null());
    let changed = presence.or(o
        .clone()
        .is_not_null()
        .and(n.clone().is_not_null())
        .and(values)
        .fill_null(false));
    let cells = frame
        .lazy()
        .with_columns(typed)
        .with_column(changed.alias("__c"))
        .collect()?;
    let numbers = match kind {
        Kind::Number => Some((o.clone(), n.clone())),
        Kind::Mixed => Some((on, nn)),
        Kind::Text => None,
    };
    let c_ = col("__c");
    let mut aggs = vec![
        c_.clone().sum().cast(DataType::UInt64).alias("k"),
        c_.clone()
            .and(o.clone().is_not_null())
            .and(n.clone().is_null())
            .sum()
            .cast(DataType::UInt64)
            .alias("m"),
        c_.clone()
            .and(o.clone().is_null())
            .and(n.clone().is_not_null())
            .sum()
            .cast(DataType::UInt64)
            .alias("p"),
    ];
    if let Some((o, n)) = numbers.clone() {
        aggs.push(
            (n - o)
                .abs()
                .filter(c_.clone())
                .max()
                .cast(DataType::Float64)
                .alias("x"),
        );
    }
    if kind == Kind::Text {
        // Changed text that is the same but for letter case or surrounding spaces.
        let folded = |x: Expr| x.str().strip_chars(lit(NULL)).str().to_lowercase();
        aggs.push(
            c_.clone()
                .and(folded(o.clone()).eq(folded(n.clone())))
                .fill_null(false)
                .sum()
                .cast(DataType::UInt64)
                .alias("f"),
        );
    }
    let counts = cells.clone().lazy().select(aggs).collect()?;
    let get = |name: &str| -> Result<u64> { Ok(counts.column(name)?.u64()?.get(0).unwrap_or(0)) };
    let counted = Counted {
        cells_changed: get("k")?,
        became_missing: get("m")?,
        became_present: get("p")?,
        largest_change: match numbers {
            None => None,
            Some(_) => counts.column("x")?.f64()?.get(0),
        },
        case_or_spaces_only: match kind {
            Kind::Text => Some(get("f")?),
            _ => None,
        },
    };
    let difference = match numbers {
        Some((o, n)) => n - o,
        None => lit(NULL).cast(DataType::Float64),
    };
    let ledger = cells
        .lazy()
        .filter(c_)
        .select([
            col(e),
            col(p),
            lit("value changed").alias("change"),
            lit(c).alias("column"),
            o.cast(DataType::String).alias("old"),
            n.cast(DataType::String).alias("new"),
            difference.alias("difference"),
            lit(order).alias("__order"),
        ])
        .collect()?;
    Ok((counted, ledger))
}

/// Whether each row's number changed beyond the tolerance (`|new − old| > abs + rel · |old|`)
/// or appeared or vanished, as `compare`'s expressions for numbers compute it, both sides read
/// as floating-point numbers.
pub(super) fn numbers_changed(
    old: &Column,
    new: &Column,
    abs: f64,
    rel: f64,
) -> Result<BooleanChunked> {
    let (old, new) = (old.cast(&DataType::Float64)?, new.cast(&DataType::Float64)?);
    Ok(old
        .f64()?
        .iter()
        .zip(new.f64()?.iter())
        .map(|pair| match pair {
            (Some(o), Some(n)) => {
                // `>` as the engine orders floats: NaN above every number, equal to itself
                // (no vintage as read holds one; a NaN or an infinity is read as missing).
                let (d, limit) = ((n - o).abs(), abs + rel * o.abs());
                !(limit.is_nan() | (limit >= d))
            }
            (None, None) => false,
            _ => true,
        })
        .collect())
}

/// `column`'s rows at `at`, gathered in two halves at once (a gather in another order than
/// the column's reads memory at random, one thread's work), the halves one chunk each.
pub(super) fn gather(column: &Column, at: &IdxCa) -> Result<Column> {
    let half = at.len() / 2;
    let (first, second) = (at.slice(0, half), at.slice(half as i64, at.len() - half));
    let (a, b) = rayon::join(|| column.take(&first), || column.take(&second));
    let mut gathered = a?;
    gathered.append(&b?)?;
    Ok(gathered)
}

/// A side's cells of one column as compared, under the name `tag` (and `tag#`, the number a
/// text cell reads as, for a column of numbers on one side and text on the other).
fn typed(tag: &str, kind: Kind, dtype: Option<&DataType>) -> Vec<Expr> {
    let x = col(tag);
    match kind {
        Kind::Number => vec![x.cast(DataType::Float64)],
        Kind::Text => vec![x.cast(DataType::String)],
        Kind::Mixed => {
            // The text as read, and the number it reads as (none for other text).
            let number = match dtype {
                Some(DataType::String) => x
                    .clone()
                    .str()
                    .strip_chars(lit(NULL))
                    .cast(DataType::Float64),
                _ => x.clone().cast(DataType::Float64),
            };
            vec![x.cast(DataType::String), number.alias(format!("{tag}#"))]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The typed pass flags exactly the rows the expressions for numbers flag (the engine as
    /// the reference), on values worked by hand: equal, within and beyond the relative
    /// tolerance, a value appearing and vanishing, both missing, NaN on both sides (not
    /// changed: the engine holds NaN equal to itself) and infinity on both (changed: the
    /// difference, NaN, is above every number as the engine orders floats), a change from 0
    /// with no absolute tolerance, and whole numbers read as floating-point.
    #[test]
    fn the_typed_pass_flags_what_the_expressions_flag() -> Result<()> {
        let nan = f64::NAN;
        let inf = f64::INFINITY;
        let old = [
            Some(1.0),
            Some(1.0),
            Some(1.0),
            None,
            Some(2.0),
            None,
            Some(nan),
            Some(inf),
            Some(0.0),
            Some(-3.0),
        ];
        let new = [
            Some(1.0),
            Some(1.0 + 1e-10),
            Some(1.1),
            Some(4.0),
            None,
            None,
            Some(nan),
            Some(inf),
            Some(1e-300),
            Some(3.0),
        ];
        let worked = [
            false, false, true, true, true, false, false, true, true, true,
        ];
        let frame = df!("__o" => old, "__n" => new)?;
        let (abs, rel) = (0.0, 1e-9);
        let ours = numbers_changed(frame.column("__o")?, frame.column("__n")?, abs, rel)?;
        let (o, n) = (col("__o"), col("__n"));
        let engine = frame
            .lazy()
            .select([o
                .clone()
                .is_null()
                .neq(n.clone().is_null())
                .or(o
                    .clone()
                    .is_not_null()
                    .and(n.clone().is_not_null())
                    .and((n - o.clone()).abs().gt(lit(abs) + lit(rel) * o.abs()))
                    .fill_null(false))
                .alias("c")])
            .collect()?;
        let engine: Vec<bool> = engine
            .column("c")?
            .bool()?
            .iter()
            .map(Option::unwrap)
            .collect();
        let ours: Vec<bool> = ours.iter().map(Option::unwrap).collect();
        assert_eq!(ours, worked);
        assert_eq!(engine, worked);
        let ints =
            df!("__o" => [Some(5i64), Some(7), None], "__n" => [Some(5i64), Some(8), Some(1)])?;
        let flags = numbers_changed(ints.column("__o")?, ints.column("__n")?, 0.5, 0.0)?;
        assert_eq!(
            flags.iter().map(Option::unwrap).collect::<Vec<_>>(),
            [false, true, true]
        );
        Ok(())
    }
}
