//! Columns of a CSV file whose first rows hold whole numbers, read whole as text and made
//! numbers here, so that a code written with leading zeros (`0100`) anywhere in the file keeps
//! the column text — the reader, which guesses each column's type from the first rows, would
//! read `0100` further down as 100, silently one code with `100`.

use polars::prelude::*;
use polars_arrow::array::{PrimitiveArray, Utf8ViewArray};
use polars_arrow::bitmap::Bitmap;
use rayon::prelude::*;

use super::CodeColumn;

/// The columns of `schema` the reader guessed to be whole numbers, but those in `keep`, with
/// the type it guessed; and `schema` with each of them as text, to read the file with.
pub(super) fn as_text_first(
    schema: &Schema,
    keep: &[&str],
) -> (Schema, Vec<(PlSmallStr, DataType)>) {
    let mut guessed = Vec::new();
    let as_read = schema
        .iter()
        .map(|(name, dtype)| {
            if dtype.is_integer() && !keep.contains(&name.as_str()) {
                guessed.push((name.clone(), dtype.clone()));
                (name.clone(), DataType::String)
            } else {
                (name.clone(), dtype.clone())
            }
        })
        .collect();
    (as_read, guessed)
}

/// How many columns of decimals a CSV read takes again as text, one at a time, before the
/// types are guessed from every row instead. Each try is a read of the file; guessing from
/// every row (a slow pass of its own, then the read) took about five reads' time on the bench
/// panel, so up to four columns this is quicker, and with more it is slower by the four reads
/// it tried (at 1 M rows with six such columns, 3.83 s against 2.87 s for the whole `audit`).
pub(super) const RETRIES: usize = 4;

/// The column of `schema` (its index) that the engine's CSV reader named in `e` as holding a
/// cell it could not parse, when the reader guessed that column to be decimals: a marker such
/// as `NA` further down than the rows the type was guessed from. Read as text, the column
/// goes to the marker pass, which reads its numbers and notes its markers — as a read that
/// guessed the types from every row (a pass over the whole file, then another read of it)
/// leaves it. None for any other error, or when the reader's words do not name a column by
/// its number as they do now (`(column number N)`).
pub(super) fn unparsable_decimals(e: &PolarsError, schema: &Schema) -> Option<usize> {
    let message = e.to_string();
    let (_, after) = message.split_once("(column number ")?;
    let number: usize = after.split_once(')')?.0.parse().ok()?;
    let index = number.checked_sub(1)?;
    schema
        .get_at_index(index)
        .is_some_and(|(_, dtype)| dtype.is_float())
        .then_some(index)
}

/// `read` called with the columns of `schema` (by index) to read as text beside what it reads
/// as text anyway, none at first; each time it fails on a cell the reader could not parse in
/// a column it guessed to be decimals ([`unparsable_decimals`]), that column is added and it
/// is called again, up to [`RETRIES`] times. Any other error, or one more such column, is
/// returned (the caller then guesses the types from every row).
pub(super) fn with_decimals_as_text<T>(
    schema: &Schema,
    mut read: impl FnMut(&[usize]) -> PolarsResult<T>,
) -> PolarsResult<T> {
    let mut as_text: Vec<usize> = Vec::new();
    loop {
        match read(&as_text) {
            Err(e) => match unparsable_decimals(&e, schema) {
                Some(i) if as_text.len() < RETRIES && !as_text.contains(&i) => as_text.push(i),
                _ => return Err(e),
            },
            done => return done,
        }
    }
}

/// What one column read as text holds.
#[derive(Debug)]
enum Held {
    /// Whole numbers (or nothing) in every cell: the numbers.
    Numbers(Int64Chunked),
    /// Whole numbers, at least one written with leading zeros: codes, with the data row and
    /// value of the first such.
    Codes(usize, String),
    /// Something else in some cell (a decimal, a marker such as `NA`, a number too wide for
    /// 64 bits): left as text for the marker pass, which reads it as the reader would.
    Other,
}

/// A whole number as the reader writes one: an optional minus sign, then digits, within 64
/// bits (surrounding spaces and a plus sign are left to the marker pass, which notes them).
fn whole(t: &str) -> Option<i64> {
    let digits = t.strip_prefix('-').unwrap_or(t);
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    t.parse().ok()
}

/// One chunk's cells as whole numbers into `out` and `present` (its rows' slots), with the
/// index in the chunk and value of its first code written with leading zeros; None at the
/// first cell that is not a whole number.
fn chunk_numbers(
    chunk: &Utf8ViewArray,
    out: &mut [i64],
    present: &mut [bool],
) -> Option<Option<(usize, String)>> {
    let mut first_code = None;
    for (i, v) in chunk.iter().enumerate() {
        if let Some(t) = v.filter(|t| !t.is_empty()) {
            out[i] = whole(t)?;
            present[i] = true;
            if first_code.is_none() && super::markers::leading_zero(t) {
                first_code = Some((i, t.to_string()));
            }
        }
    }
    Some(first_code)
}

/// What the text column `values` holds: its chunks read in parallel into one array of numbers,
/// each chunk stopping at its first cell that is not a whole number.
fn held(values: &StringChunked) -> Held {
    let n = values.len();
    let (mut out, mut present) = (vec![0i64; n], vec![false; n]);
    // Each chunk with its first row and its own part of the output.
    let mut parts = Vec::new();
    let (mut rest_out, mut rest_present, mut start) = (&mut out[..], &mut present[..], 0);
    for chunk in values.downcast_iter() {
        let (o, ro) = rest_out.split_at_mut(chunk.len());
        let (p, rp) = rest_present.split_at_mut(chunk.len());
        parts.push((chunk, start, o, p));
        (rest_out, rest_present, start) = (ro, rp, start + chunk.len());
    }
    let found: Option<Vec<Option<(usize, String)>>> = parts
        .into_par_iter()
        .map(|(chunk, start, o, p)| {
            chunk_numbers(chunk, o, p).map(|code| code.map(|(i, v)| (start + i + 1, v)))
        })
        .collect();
    let Some(found) = found else {
        return Held::Other;
    };
    if let Some((row, value)) = found.into_iter().flatten().next() {
        return Held::Codes(row, value);
    }
    let validity = (values.null_count() > 0 || present.contains(&false))
        .then(|| Bitmap::from_iter(present.iter().copied()));
    let array = PrimitiveArray::new(ArrowDataType::Int64, out.into(), validity);
    Held::Numbers(Int64Chunked::with_chunk(values.name().clone(), array))
}

/// `c`, a column of a CSV file read with [`as_text_first`]'s schema (one row a data row, in
/// file order): if it is one of the `guessed`, the whole numbers the reader guessed it to hold
/// — unless one of its cells is a code written with leading zeros, when it stays text and is
/// added to `coded` with the data row and value of the first such, or unless a cell holds
/// anything else, when it stays text for the marker pass (as a read that took every column as
/// text leaves it).
pub(super) fn settle(
    c: Column,
    guessed: &[(PlSmallStr, DataType)],
    coded: &mut Vec<CodeColumn>,
) -> PolarsResult<Column> {
    let Some((_, dtype)) = guessed.iter().find(|(name, _)| name == c.name()) else {
        return Ok(c);
    };
    Ok(match held(c.str()?) {
        Held::Numbers(numbers) => numbers.into_column().cast(dtype)?,
        Held::Codes(row, value) => {
            coded.push((c.name().to_string(), row, value));
            c
        }
        Held::Other => c,
    })
}

/// [`settle`] on each column of `df`.
pub(super) fn whole_numbers(
    df: DataFrame,
    guessed: &[(PlSmallStr, DataType)],
) -> PolarsResult<(DataFrame, Vec<CodeColumn>)> {
    let mut coded = Vec::new();
    let height = df.height();
    let columns = df
        .into_columns()
        .into_iter()
        .map(|c| settle(c, guessed, &mut coded))
        .collect::<PolarsResult<Vec<_>>>()?;
    Ok((DataFrame::new(height, columns)?, coded))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(values: &[Option<&str>]) -> StringChunked {
        StringChunked::from_iter_options("c".into(), values.iter().copied())
    }

    /// Worked by hand: the three outcomes, a code's first row counted from 1, empty cells
    /// missing, and what the reader's whole numbers do not include (a plus sign, a space, a
    /// number beyond 64 bits, a decimal) left to the marker pass.
    #[test]
    fn numbers_codes_and_the_rest() {
        let numbers = held(&text(&[Some("12"), None, Some("-7"), Some(""), Some("0")]));
        let Held::Numbers(n) = numbers else {
            panic!("{numbers:?}")
        };
        assert_eq!(
            n.iter().collect::<Vec<_>>(),
            [Some(12), None, Some(-7), None, Some(0)]
        );
        let codes = held(&text(&[Some("100"), Some("7"), Some("0100"), Some("007")]));
        assert!(
            matches!(&codes, Held::Codes(3, v) if v == "0100"),
            "{codes:?}"
        );
        for other in [
            "+5",
            " 5",
            "1.5",
            "NA",
            "99999999999999999999",
            "-",
            "0100a",
        ] {
            let held = held(&text(&[Some("1"), Some(other)]));
            assert!(matches!(held, Held::Other), "{other}: {held:?}");
        }
        // A negative number with a zero after its sign is a number, as the reader reads it.
        assert!(matches!(held(&text(&[Some("-012")])), Held::Numbers(_)));
    }

    /// Worked by hand: a column in three chunks, as the reader makes them, is read in order;
    /// a code's row counts the chunks before it, and a null in a later chunk stays missing.
    #[test]
    fn chunks_in_order() {
        let mut c = text(&[Some("1"), Some("2")]);
        c.append(&text(&[None, Some("4")])).unwrap();
        c.append(&text(&[Some("5")])).unwrap();
        assert_eq!(c.chunks().len(), 3);
        let Held::Numbers(n) = held(&c) else {
            panic!("numbers")
        };
        assert_eq!(
            n.iter().collect::<Vec<_>>(),
            [Some(1), Some(2), None, Some(4), Some(5)]
        );
        c.append(&text(&[Some("6"), Some("007"), Some("08")]))
            .unwrap();
        assert!(matches!(held(&c), Held::Codes(7, v) if v == "007"));
    }

    /// The engine's reader names the column of a cell it cannot parse by its number: a file
    /// whose `x` (the third column) is read as decimals and holds `NA` on its last row. Should
    /// a new version of the engine word its error otherwise, this fails, and the slower read
    /// that guesses the types from every row would be taken instead.
    #[test]
    fn the_reader_names_the_column_it_could_not_parse() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("late.csv");
        std::fs::write(&path, "f,y,x,note\nA,1,1.5,a\nA,2,NA,b\n").unwrap();
        let schema = Schema::from_iter([
            Field::new("f".into(), DataType::String),
            Field::new("y".into(), DataType::Int64),
            Field::new("x".into(), DataType::Float64),
            Field::new("note".into(), DataType::String),
        ]);
        let csv = crate::config::CsvOptions::default();
        let e = super::super::contiguous::read_csv(&path, &schema, &csv, "row", Ok).unwrap_err();
        assert_eq!(unparsable_decimals(&e, &schema), Some(2), "{e}");
        // A column not of decimals is not taken again as text.
        let mut ints = schema.clone();
        ints.set_dtype_at_index(2, DataType::Int64);
        let e = super::super::contiguous::read_csv(&path, &ints, &csv, "row", Ok).unwrap_err();
        assert_eq!(unparsable_decimals(&e, &ints), None, "{e}");
    }

    /// The columns read as text grow by the one each failed read names, until the read
    /// succeeds or [`RETRIES`] columns have been tried: with markers in two columns of
    /// decimals, two failed reads and a third that succeeds; with markers in more columns than
    /// that, the last failure is returned (the real reader on files worked by hand).
    #[test]
    fn decimals_are_read_as_text_one_named_column_at_a_time() {
        let dir = tempfile::tempdir().unwrap();
        let csv = crate::config::CsvOptions::default();
        let columns = RETRIES + 1;
        let names: Vec<String> = (0..columns).map(|i| format!("x{i}")).collect();
        let schema = Schema::from_iter(
            names
                .iter()
                .map(|n| Field::new(n.as_str().into(), DataType::Float64)),
        );
        for marked in [2, columns] {
            let path = dir.path().join(format!("marked_{marked}.csv"));
            let second: Vec<&str> = (0..columns)
                .map(|i| if i < marked { "NA" } else { "2.5" })
                .collect();
            let text = format!(
                "{}\n{}\n{}\n",
                names.join(","),
                vec!["1.5"; columns].join(","),
                second.join(",")
            );
            std::fs::write(&path, text).unwrap();
            let mut tried: Vec<Vec<usize>> = Vec::new();
            let read = with_decimals_as_text(&schema, |decimals| {
                tried.push(decimals.to_vec());
                let mut as_read = schema.clone();
                for i in decimals {
                    as_read.set_dtype_at_index(*i, DataType::String);
                }
                super::super::contiguous::read_csv(&path, &as_read, &csv, "row", Ok)
            });
            if marked == 2 {
                let df = read.unwrap();
                assert_eq!(df.column("x0").unwrap().dtype(), &DataType::String);
                assert_eq!(df.column("x2").unwrap().dtype(), &DataType::Float64);
                assert_eq!(tried.len(), 3);
                let mut last = tried[2].clone();
                last.sort_unstable();
                assert_eq!(last, [0, 1]);
            } else {
                assert!(read.is_err());
                assert_eq!(tried.len(), RETRIES + 1);
                assert_eq!(tried.last().unwrap().len(), RETRIES);
            }
        }
    }
}
