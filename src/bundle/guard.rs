//! The spreadsheet guard: text cells a spreadsheet would run as a formula are made inert in
//! every CSV the tool writes.

use polars::prelude::*;
use polars_arrow::array::Array;

use crate::Result;

/// The characters that make a spreadsheet read a text cell as a formula, when it starts with
/// one: all ASCII, so a value's first byte tells.
const FORMULA_STARTS: [u8; 6] = [b'=', b'+', b'-', b'@', b'\t', b'\r'];

/// Text cells that a spreadsheet would read as a formula (starting with `=`, `+`, `-`, `@`,
/// a tab or a carriage return) get a leading `'`, unless the whole cell is a number (`-5`,
/// `-1.5e3`: a spreadsheet reads it as that number and runs nothing; the corrections ledger
/// holds its old and new values as text). Numeric columns are untouched, and so is a text
/// column without such a cell: it is not copied (a pass over the values' first bytes finds
/// the columns that have one first).
pub fn guard_text(df: &DataFrame) -> Result<DataFrame> {
    let mut guards = Vec::new();
    for (name, dtype) in df.schema().iter() {
        if *dtype != DataType::String || !starts_a_formula(df.column(name)?.str()?) {
            continue;
        }
        let c = col(name.clone());
        let risky = FORMULA_STARTS
            .iter()
            .map(|b| {
                let start = char::from(*b).to_string();
                c.clone().str().starts_with(lit(start))
            })
            .reduce(|a, b| a.or(b))
            .expect("the characters are listed")
            .and(c.clone().cast(DataType::Float64).is_null())
            .fill_null(lit(false));
        guards.push(
            when(risky)
                .then(lit("'") + c.clone())
                .otherwise(c)
                .alias(name.clone()),
        );
    }
    if guards.is_empty() {
        return Ok(df.clone());
    }
    Ok(df.clone().lazy().with_columns(guards).collect()?)
}

/// Whether a value of `text` starts with one of [`FORMULA_STARTS`]. A value's first four
/// bytes are held in its 16-byte view, whether the value is held there whole or not, so no
/// value's bytes are read: the engine's test of each prefix built a column of answers for
/// each character and compared the bytes (a processor second of a 10 M panel.csv).
fn starts_a_formula(text: &StringChunked) -> bool {
    let risky = |length: u32, prefix: u32| length > 0 && FORMULA_STARTS.contains(&(prefix as u8));
    text.downcast_iter().any(|chunk| {
        let views = chunk.views().iter();
        match chunk.validity() {
            None => views.clone().any(|v| risky(v.length, v.prefix)),
            Some(valid) => views
                .zip(valid.iter())
                .any(|(v, ok)| ok && risky(v.length, v.prefix)),
        }
    })
}

/// `df` with its dates, times and decimals as text, which the CSV writer the engine is built
/// with does not write: ISO 8601 (`2001-12-31`, `2001-12-31 00:00:00.000000`) and the decimal's
/// own digits. Run after [`guard_text`]: a negative decimal is a number, not a formula.
pub fn dates_as_text(df: DataFrame) -> Result<DataFrame> {
    let spelled: Vec<Expr> = df
        .schema()
        .iter()
        .filter(|(_, dtype)| {
            matches!(
                dtype,
                DataType::Date | DataType::Datetime(..) | DataType::Time | DataType::Decimal(..)
            )
        })
        .map(|(name, _)| col(name.clone()).cast(DataType::String))
        .collect();
    if spelled.is_empty() {
        return Ok(df);
    }
    Ok(df.lazy().with_columns(spelled).collect()?)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The first-byte test against the engine's own test of each prefix (the reference), on
    /// values short enough to sit in their view and long ones, empty ones, missing ones,
    /// characters of several bytes, and a column in several chunks.
    #[test]
    fn the_first_bytes_tell_as_the_engines_prefix_test_does() {
        let starts = ["", "=", "+", "-", "@", "\t", "\r", "a", "é", "'", " =", "1"];
        let tails = ["", "x", "SUM(A1)", "a value longer than twelve bytes", "ü"];
        let mut values: Vec<Option<String>> = vec![None];
        for s in starts {
            for t in tails {
                values.push(Some(format!("{s}{t}")));
            }
        }
        let engine = |c: &Column| -> bool {
            let df = DataFrame::new(c.len(), vec![c.clone()]).unwrap();
            let x = col("x");
            let any = FORMULA_STARTS
                .iter()
                .map(|b| x.clone().str().starts_with(lit(char::from(*b).to_string())))
                .reduce(|a, b| a.or(b))
                .unwrap()
                .fill_null(lit(false))
                .any(true);
            let out = df.lazy().select([any.alias("any")]).collect().unwrap();
            out.column("any").unwrap().bool().unwrap().get(0) == Some(true)
        };
        let mut found = 0;
        for v in &values {
            let one: Vec<Option<String>> = vec![Some("plain".into()), v.clone(), None];
            let c = Column::new("x".into(), one);
            let want = engine(&c);
            found += usize::from(want);
            assert_eq!(starts_a_formula(c.str().unwrap()), want, "{v:?}");
        }
        assert_eq!(found, 6 * tails.len(), "values starting a formula");
        // Several chunks: the one value that starts a formula in the last.
        let mut c = Column::new("x".into(), ["a", "b"]);
        c.append(&Column::new("x".into(), [Some("c"), None]))
            .unwrap();
        assert!(!starts_a_formula(c.str().unwrap()));
        c.append(&Column::new("x".into(), ["=1+1"])).unwrap();
        assert!(c.n_chunks() > 1 && starts_a_formula(c.str().unwrap()));
    }
}
