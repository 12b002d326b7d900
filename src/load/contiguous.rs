//! Reading a Parquet input into columns of one chunk each, a slice of rows at a time.
//!
//! The engine reads a file into one chunk per row group; the kernels read a column in place
//! only when it is one chunk, so every column was later copied whole into one buffer, while
//! the chunks it came from were let go. Here each numeric column's buffer is made once, at
//! its full length, and each slice of rows the engine reads is copied into it and let go
//! before the next is read, so that the memory of one slice serves the next. Text is gathered
//! the same way, view by view (the strings' buffers are shared); other columns keep the
//! engine's chunks and are joined at the end. A file that fits in one slice and comes with
//! every column in one chunk (one row group) is taken as the engine read it.

use polars::prelude::*;
use polars_arrow::array::MutableBinaryViewArray;
use polars_arrow::bitmap::{Bitmap, MutableBitmap};
use rayon::prelude::*;

use crate::progress::Progress;

/// Rows read at a time: a row group of pyarrow's default size, four of the engine's.
const SLICE: usize = 1 << 20;

/// `lf` collected with each numeric and text column in one chunk, a slice of rows at
/// a time, and the row number (from 1) in a first column `index`. The slice goes straight to
/// the file's reader; the row number is added to each slice after it is read (asked for
/// before the slice, it made the reader count from the top for every slice).
/// The rows read so far show on `progress`, when given.
pub(super) fn collect(
    lf: LazyFrame,
    index: &str,
    progress: Option<&Progress>,
) -> PolarsResult<DataFrame> {
    collect_in_slices(lf, index, SLICE, progress)
}

/// [`collect`] with `slice` rows at a time.
fn collect_in_slices(
    lf: LazyFrame,
    index: &str,
    slice: usize,
    progress: Option<&Progress>,
) -> PolarsResult<DataFrame> {
    let counted = lf.clone().select([len().alias("rows")]).collect()?;
    let height = counted
        .column("rows")?
        .cast(&DataType::UInt64)?
        .u64()?
        .get(0)
        .unwrap_or(0) as usize;
    if height == 0 {
        return lf.with_row_index(index, Some(1)).collect();
    }
    if let Some(progress) = progress {
        progress.items_of(height, "rows");
    }
    let mut sinks: Vec<Box<dyn Sink>> = Vec::new();
    let mut read = 0;
    while read < height {
        let part = lf
            .clone()
            .slice(read as i64, slice as IdxSize)
            .collect()?
            .with_row_index(index.into(), Some((read + 1) as IdxSize))?;
        if part.height() == 0 {
            break;
        }
        if let Some(progress) = progress {
            progress.done(part.height());
        }
        // The whole file in one slice, each column already in one chunk: nothing to gather
        // (a copy would take the panel's size in fresh memory again).
        if read == 0 && part.height() == height && part.columns().iter().all(|c| c.n_chunks() == 1)
        {
            return Ok(part);
        }
        if sinks.is_empty() {
            sinks = part.columns().iter().map(|c| sink(c, height)).collect();
        }
        sinks
            .par_iter_mut()
            .zip(part.columns().par_iter())
            .try_for_each(|(sink, c)| sink.push(c))?;
        read += part.height();
    }
    let columns = sinks
        .into_iter()
        .map(|s| s.finish())
        .collect::<PolarsResult<Vec<_>>>()?;
    DataFrame::new(read, columns)
}

/// Where one column's slices go.
trait Sink: Send {
    fn push(&mut self, c: &Column) -> PolarsResult<()>;
    fn finish(self: Box<Self>) -> PolarsResult<Column>;
}

/// The sink for a column like `c` of `height` rows in all.
fn sink(c: &Column, height: usize) -> Box<dyn Sink> {
    fn numeric<T: PolarsNumericType>(c: &Column, height: usize) -> Box<dyn Sink> {
        Box::new(Numeric::<T> {
            name: c.name().clone(),
            values: Vec::with_capacity(height),
            validity: None,
        })
    }
    match c.dtype() {
        DataType::Float64 => numeric::<Float64Type>(c, height),
        DataType::Float32 => numeric::<Float32Type>(c, height),
        DataType::Int64 => numeric::<Int64Type>(c, height),
        DataType::Int32 => numeric::<Int32Type>(c, height),
        DataType::UInt64 => numeric::<UInt64Type>(c, height),
        DataType::UInt32 => numeric::<UInt32Type>(c, height),
        DataType::String => Box::new(Text {
            name: c.name().clone(),
            array: MutableBinaryViewArray::with_capacity(height),
        }),
        _ => Box::new(Chunks { parts: Vec::new() }),
    }
}

/// A numeric column: its values in one buffer of the full length, its validity bits (none
/// until the first missing value).
struct Numeric<T: PolarsNumericType> {
    name: PlSmallStr,
    values: Vec<T::Native>,
    validity: Option<MutableBitmap>,
}

impl<T: PolarsNumericType> Sink for Numeric<T> {
    fn push(&mut self, c: &Column) -> PolarsResult<()> {
        let ca: &ChunkedArray<T> = c.as_materialized_series().unpack::<T>()?;
        for chunk in ca.downcast_iter() {
            let before = self.values.len();
            self.values.extend_from_slice(chunk.values().as_slice());
            extend_validity(&mut self.validity, before, chunk.validity(), chunk.len());
        }
        Ok(())
    }

    fn finish(self: Box<Self>) -> PolarsResult<Column> {
        let Numeric {
            name,
            values,
            validity,
        } = *self;
        let ca = ChunkedArray::<T>::from_vec_validity(name, values, validity.map(Into::into));
        Ok(ca.into_series().into_column())
    }
}

/// The validity bits of `len` more rows after `before` rows, from `bits` (none: all present);
/// `validity` stays None until the first missing value.
fn extend_validity(
    validity: &mut Option<MutableBitmap>,
    before: usize,
    bits: Option<&Bitmap>,
    len: usize,
) {
    match (bits.filter(|bits| bits.unset_bits() > 0), validity) {
        (Some(bits), Some(validity)) => validity.extend_from_bitmap(bits),
        (Some(bits), validity @ None) => {
            let mut fresh = MutableBitmap::with_capacity(before + len);
            fresh.extend_constant(before, true);
            fresh.extend_from_bitmap(bits);
            *validity = Some(fresh);
        }
        (None, Some(validity)) => validity.extend_constant(len, true),
        (None, None) => {}
    }
}

/// A text column: the views of each slice appended to one growing array of the full length
/// (the strings' own buffers shared, not copied; no string checked again).
struct Text {
    name: PlSmallStr,
    array: MutableBinaryViewArray<str>,
}

impl Sink for Text {
    fn push(&mut self, c: &Column) -> PolarsResult<()> {
        for chunk in c.as_materialized_series().str()?.downcast_iter() {
            self.array.extend_from_array(chunk);
        }
        Ok(())
    }

    fn finish(self: Box<Self>) -> PolarsResult<Column> {
        let Text { name, array } = *self;
        Ok(StringChunked::with_chunk(name, array.freeze()).into_column())
    }
}

/// Any other column: the engine's chunks, joined into one at the end.
struct Chunks {
    parts: Vec<Column>,
}

impl Sink for Chunks {
    fn push(&mut self, c: &Column) -> PolarsResult<()> {
        self.parts.push(c.clone());
        Ok(())
    }

    fn finish(self: Box<Self>) -> PolarsResult<Column> {
        let mut parts = self.parts.into_iter();
        let mut whole = parts.next().expect("a column has at least one slice");
        for part in parts {
            whole.append_owned(part)?;
        }
        Ok(whole.rechunk())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The frame the engine's own collect gives (row number first, from 1), with every numeric
    /// column in one chunk: a Parquet file of several row groups read in slices that do and do
    /// not fall on their bounds, with missing values first met in a later slice, short text,
    /// text that outgrows its views in a later slice, a boolean, and a frame of one slice.
    #[test]
    fn same_frame_as_the_engine_collect_in_one_chunk() {
        let n: usize = 3_500;
        let x: Vec<Option<f64>> = (0..n)
            .map(|i| (i < 2_000 || i % 7 != 0).then_some(i as f64 / 3.0))
            .collect();
        let y: Vec<i64> = (0..n as i64).map(|i| i * 3 - 1_000).collect();
        let z: Vec<Option<i32>> = (0..n as i32).map(|i| (i % 11 != 0).then_some(i)).collect();
        let t: Vec<String> = (0..n).map(|i| format!("firm {}", i / 9)).collect();
        let b: Vec<bool> = (0..n).map(|i| i % 3 == 0).collect();
        // Short text, then from row 2,500 on values too long for their views, and missing ones.
        let l: Vec<Option<String>> = (0..n)
            .map(|i| match i {
                _ if i % 13 == 0 => None,
                0..2_500 => Some(format!("s{i}")),
                _ => Some(format!("a longer name, number {i}")),
            })
            .collect();
        let mut df = df!("x" => x, "y" => y, "z" => z, "t" => t, "b" => b, "l" => l).unwrap();
        let dir =
            std::env::temp_dir().join(format!("panelready-contiguous-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        // Row groups of 1,000 rows, and one row group for the whole file (read in one slice,
        // its columns come in one chunk each and are taken as they are).
        for group in [1_000, n] {
            let path = dir.join(format!("slices-{group}.parquet"));
            ParquetWriter::new(std::fs::File::create(&path).unwrap())
                .with_row_group_size(Some(group))
                .finish(&mut df)
                .unwrap();
            let scan = || {
                let path = PlRefPath::try_from_path(&path).unwrap();
                LazyFrame::scan_parquet(path, ScanArgsParquet::default()).unwrap()
            };
            let expected = scan().with_row_index("row", Some(1)).collect().unwrap();
            for slice in [1_000, 700, 3_499, 5_000] {
                let got = collect_in_slices(scan(), "row", slice, None).unwrap();
                assert!(got.equals_missing(&expected), "slices of {slice}");
                for c in got.columns() {
                    let s = c.as_materialized_series();
                    if s.dtype().is_primitive_numeric() || s.dtype() == &DataType::String {
                        assert_eq!(s.n_chunks(), 1, "{} in slices of {slice}", s.name());
                    }
                }
            }
        }
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
