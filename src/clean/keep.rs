//! Keeping rows: the panel without the rows a step removed, each column in one chunk.
//!
//! A numeric column read from Parquet arrives in one chunk (`load::contiguous`); when nothing
//! else holds it, its kept rows are moved up within its own buffer, with no new buffer. A
//! column in many chunks (a CSV read, a joined table) is copied once, run by run of kept rows,
//! straight into one buffer (a filter would keep the chunks as they are, and joining them
//! would copy the column a second time); every other column goes through the engine's filter
//! (text too: moving its views in place would have the engine check every string again, which
//! costs more than the copy of the views).

use polars::prelude::*;
use rayon::prelude::*;

use crate::Result;

/// The rows of `df` where `keep` is true, each column in one chunk. The numeric columns (most
/// kept within their own buffers) a few at a time, in parallel, each let go once kept: the
/// panel is never held twice (a frame-wide filter holds old and new whole). The others (text
/// and the rest, always copied) one after another, so that the buffer one lets go is there
/// for the next to reuse instead of each taking fresh memory from the system.
pub fn keep_rows(df: DataFrame, keep: &BooleanChunked) -> Result<DataFrame> {
    let runs = kept_runs(keep);
    let height = runs.iter().map(|(start, end)| end - start).sum();
    let columns = df.into_columns();
    let width = columns.len();
    let (mut numeric, mut copied): (Vec<_>, Vec<_>) = columns
        .into_iter()
        .enumerate()
        .partition(|(_, c)| c.dtype().is_primitive_numeric());
    let mut kept: Vec<(usize, Column)> = Vec::with_capacity(width);
    while !numeric.is_empty() {
        let batch: Vec<(usize, Column)> = numeric
            .drain(..crate::core::BATCH.min(numeric.len()))
            .collect();
        kept.extend(
            batch
                .into_par_iter()
                .map(|(i, c)| Ok((i, keep_column(c, keep, &runs, height)?)))
                .collect::<PolarsResult<Vec<_>>>()?,
        );
    }
    for (i, c) in copied.drain(..) {
        kept.push((i, keep_column(c, keep, &runs, height)?));
    }
    kept.sort_by_key(|(i, _)| *i);
    Ok(DataFrame::new(
        height,
        kept.into_iter().map(|(_, c)| c).collect(),
    )?)
}

/// `df` down to the rows `keep` marks (every row when there is no mask), each column in one
/// chunk: the copy a step that removed rows left for later (see [`crate::clean::KeyResult`]).
pub fn settle(df: DataFrame, keep: Option<&BooleanChunked>) -> Result<DataFrame> {
    match keep {
        Some(keep) => keep_rows(df, keep),
        None => {
            // A column per thread, so that only a column a thread is held twice.
            let mut df = df;
            df.rechunk_mut_par();
            Ok(df)
        }
    }
}

/// The stretches `[start, end)` of consecutive rows where `keep` is true (a null is false).
fn kept_runs(keep: &BooleanChunked) -> Vec<(usize, usize)> {
    let mut runs = Vec::new();
    let mut start = None;
    for (i, k) in keep.iter().enumerate() {
        match (k == Some(true), start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                runs.push((s, i));
                start = None;
            }
            _ => {}
        }
    }
    if let Some(s) = start {
        runs.push((s, keep.len()));
    }
    runs
}

/// One column's kept rows in one chunk.
fn keep_column(
    c: Column,
    keep: &BooleanChunked,
    runs: &[(usize, usize)],
    height: usize,
) -> PolarsResult<Column> {
    // A column not held as values (a constant) needs no joining: the engine's filter does
    // not copy it.
    if c.as_series().is_none() {
        return Ok(c.filter(keep)?.rechunk());
    }
    let s = c.take_materialized_series();
    match s.dtype() {
        DataType::Float64 => keep_typed::<Float64Type>(s, keep, runs, height),
        DataType::Float32 => keep_typed::<Float32Type>(s, keep, runs, height),
        DataType::Int64 => keep_typed::<Int64Type>(s, keep, runs, height),
        DataType::Int32 => keep_typed::<Int32Type>(s, keep, runs, height),
        DataType::UInt64 => keep_typed::<UInt64Type>(s, keep, runs, height),
        DataType::UInt32 => keep_typed::<UInt32Type>(s, keep, runs, height),
        // Text and the rest: the engine's filter, then its chunks joined.
        _ => Ok(s.filter(keep)?.rechunk().into_column()),
    }
}

/// A numeric column's kept rows: in its own buffer when it is one chunk, else copied run by
/// run across its chunks into one.
fn keep_typed<T: PolarsNumericType>(
    s: Series,
    keep: &BooleanChunked,
    runs: &[(usize, usize)],
    height: usize,
) -> PolarsResult<Column> {
    if s.n_chunks() > 1 {
        let copied = keep_numeric(s.unpack::<T>()?, keep, runs, height)?;
        return Ok(copied.into_series().into_column());
    }
    keep_in_place::<T>(s, keep, runs, height)
}

/// A numeric column in one chunk down to its kept rows, moved up run by run within its own
/// buffer when nothing else holds it (no new buffer: the rows dropped leave room at its end),
/// else through the engine's filter. Missing values and the order flag as the filter leaves
/// them.
fn keep_in_place<T: PolarsNumericType>(
    s: Series,
    keep: &BooleanChunked,
    runs: &[(usize, usize)],
    height: usize,
) -> PolarsResult<Column> {
    let ca: ChunkedArray<T> = s.take_inner();
    let sorted = ca.is_sorted_flag();
    let validity = validity_kept(&ca, keep)?;
    let (name, mut chunk) = sole_chunk(ca);
    let Some(values) = chunk.get_mut_values() else {
        let ca = ChunkedArray::<T>::with_chunk(name, chunk);
        return Ok(ca.filter(keep)?.rechunk().into_owned().into_column());
    };
    move_up(values, runs);
    chunk.slice(0, height);
    let chunk = chunk.with_validity(validity);
    let mut ca = ChunkedArray::<T>::with_chunk(name, chunk);
    ca.set_sorted_flag(sorted);
    Ok(ca.into_series().into_column())
}

/// The name and the one array of a column in one chunk, taken out of it: its values can be
/// changed in place (`get_mut_values`) when nothing else holds them.
pub(super) fn sole_chunk<T: PolarsNumericType>(
    ca: ChunkedArray<T>,
) -> (PlSmallStr, polars_arrow::array::PrimitiveArray<T::Native>) {
    let name = ca.name().clone();
    (name, ca.downcast_into_iter().next().expect("one chunk"))
}

/// The `runs` of kept rows of `slots` moved up to its start, in order.
fn move_up<T: Copy>(slots: &mut [T], runs: &[(usize, usize)]) {
    let mut to = 0;
    for &(start, end) in runs {
        slots.copy_within(start..end, to);
        to += end - start;
    }
}

/// The validity bits of `ca`'s kept rows (none when it has no missing value), from the
/// engine's filter of its presence, a bit a row.
fn validity_kept<T: PolarsDataType>(
    ca: &ChunkedArray<T>,
    keep: &BooleanChunked,
) -> PolarsResult<Option<polars_arrow::bitmap::Bitmap>> {
    if ca.null_count() == 0 {
        return Ok(None);
    }
    let present = ca.is_not_null().filter(keep)?.rechunk().into_owned();
    let bits = present
        .downcast_iter()
        .next()
        .map(|bits| bits.values().clone());
    Ok(bits)
}

/// The kept values of a numeric column, run by run, across its chunks into one buffer; its
/// missing values (if any) from the engine's filter of the column's validity, which is a
/// bit a row.
fn keep_numeric<T: PolarsNumericType>(
    ca: &ChunkedArray<T>,
    keep: &BooleanChunked,
    runs: &[(usize, usize)],
    height: usize,
) -> PolarsResult<ChunkedArray<T>> {
    let mut values = Vec::with_capacity(height);
    let mut run = runs.iter().copied().peekable();
    let mut chunk_start = 0;
    for chunk in ca.downcast_iter() {
        let chunk_end = chunk_start + chunk.len();
        let slice = chunk.values().as_slice();
        while let Some(&(start, end)) = run.peek() {
            if start >= chunk_end {
                break;
            }
            let (from, to) = (start.max(chunk_start), end.min(chunk_end));
            values.extend_from_slice(&slice[from - chunk_start..to - chunk_start]);
            if end > chunk_end {
                // The run goes on in the next chunk.
                break;
            }
            run.next();
        }
        chunk_start = chunk_end;
    }
    let validity = validity_kept(ca, keep)?;
    Ok(ChunkedArray::from_vec_validity(
        ca.name().clone(),
        values,
        validity,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The same frame as the engine's filter gives (checked against polars' own filter),
    /// every column in one chunk: numbers with and without missing values, text, a constant,
    /// across chunk boundaries, with runs that start, end and straddle a boundary.
    #[test]
    fn same_rows_as_the_engine_filter_in_one_chunk() {
        let n = 1_000;
        let x: Vec<Option<f64>> = (0..n)
            .map(|i| (i % 7 != 0).then_some(i as f64 * 0.5))
            .collect();
        let y: Vec<i64> = (0..n as i64).map(|i| i * 3).collect();
        let z: Vec<u32> = (0..n as u32).collect();
        let t: Vec<String> = (0..n).map(|i| format!("firm {i}")).collect();
        let whole = df!("x" => x, "y" => y, "z" => z, "t" => t).unwrap();
        let mut chunked = whole.slice(0, 333);
        chunked.vstack_mut(&whole.slice(333, 333)).unwrap();
        chunked.vstack_mut(&whole.slice(666, n)).unwrap();
        assert_eq!(chunked.first_col_n_chunks(), 3);
        // And a constant, which the engine holds as one value and a length.
        let constant = Column::new_scalar("c".into(), Scalar::from(7i32), n);
        let whole = whole.hstack(std::slice::from_ref(&constant)).unwrap();
        let chunked = chunked.hstack(&[constant]).unwrap();
        for pattern in [
            Box::new(|i: usize| i % 10 != 3) as Box<dyn Fn(usize) -> bool>,
            Box::new(|i: usize| !(330..340).contains(&i) && i != 0 && i != n - 1),
            Box::new(|_| true),
            Box::new(|_| false),
        ] {
            let mask: Vec<bool> = (0..n).map(&pattern).collect();
            let keep = BooleanChunked::from_slice("keep".into(), &mask);
            let expected = whole.filter(&keep).unwrap();
            // A frame nothing else holds keeps its numeric rows in its own buffers.
            let own = df!(
                "x" => (0..n).map(|i| (i % 7 != 0).then_some(i as f64 * 0.5)).collect::<Vec<_>>(),
                "y" => (0..n as i64).map(|i| i * 3).collect::<Vec<i64>>(),
                "z" => (0..n as u32).collect::<Vec<u32>>(),
                "t" => (0..n).map(|i| format!("firm {i}")).collect::<Vec<String>>(),
                "c" => vec![7i32; n]
            )
            .unwrap();
            let before = own
                .column("y")
                .unwrap()
                .i64()
                .unwrap()
                .cont_slice()
                .unwrap()
                .as_ptr();
            let got = keep_rows(own, &keep).unwrap();
            assert!(got.equals_missing(&expected));
            if let Ok(values) = got.column("y").unwrap().i64().unwrap().cont_slice() {
                assert_eq!(values.as_ptr(), before, "moved within its own buffer");
            }
            for df in [whole.clone(), chunked.clone()] {
                let got = keep_rows(df, &keep).unwrap();
                assert!(got.equals_missing(&expected));
                for c in got.columns() {
                    assert!(c.as_materialized_series().n_chunks() <= 1);
                }
            }
        }
    }
}
