//! Reading an input into columns of one chunk each: a Parquet file a slice of rows at a time,
//! a CSV file whole and then a column at a time.
//!
//! The engine reads a file into one chunk per row group; the kernels read a column in place
//! only when it is one chunk, so every column was later copied whole into one buffer, while
//! the chunks it came from were let go. Here each numeric column's buffer is made once, at
//! its full length, and each slice of rows the engine reads is copied into it and let go
//! before the next is read, so that the memory of one slice serves the next. Text is gathered
//! the same way, view by view (the strings' buffers are shared); other columns keep the
//! engine's chunks and are joined at the end. A file that fits in one slice and comes with
//! every column in one chunk (one row group) is taken as the engine read it.

use std::sync::Arc;

use polars::prelude::*;
use polars_arrow::array::MutableBinaryViewArray;
use polars_arrow::bitmap::{Bitmap, MutableBitmap};
use rayon::prelude::*;

use crate::config::CsvOptions;
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

/// The CSV file at `path` read whole by the engine's parallel reader with the column types of
/// `schema` (the lazy scan's), each column then joined into one chunk a column at a time, and
/// the row number (from 1) in a first column `index`.
///
/// Through the lazy scan the file came in thousands of small chunks a column (the streaming
/// reader's batches of a few thousand rows), which a later step joined all at once: a 10 M
/// panel peaked at 3.9 GiB, against 2.3 GiB read from Parquet. The parallel reader makes a few
/// dozen chunks a column, in 3.0 s instead of 4.6 s; a column at a time, the join costs one
/// column more while the memory let go is taken back (peak 2.9 GiB).
///
/// Each column goes through `settle` before it is joined (`whole::settle`, which reads the
/// chunks of a column of whole numbers read as text into one chunk of numbers).
pub(super) fn read_csv(
    path: &std::path::Path,
    schema: &Schema,
    csv: &CsvOptions,
    index: &str,
    mut settle: impl FnMut(Column) -> PolarsResult<Column>,
) -> PolarsResult<DataFrame> {
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_schema(Some(Arc::new(schema.clone())))
        .map_parse_options(|p| {
            p.with_separator(csv.delimiter as u8)
                .with_decimal_comma(csv.decimal_comma)
        })
        .try_into_reader_with_file_path(Some(path.to_path_buf()))?
        .finish()?;
    let height = df.height();
    let mut columns = df.into_columns();
    for c in &mut columns {
        *c = settle(std::mem::take(c))?;
        if c.n_chunks() > 1 {
            *c = c.rechunk();
        }
    }
    DataFrame::new(height, columns)?.with_row_index(index.into(), Some(1))
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

    /// A CSV file of a few hundred kilobytes (which the parallel reader takes in several
    /// chunks) read by `read_csv` is the frame the lazy scan collects, with the row number
    /// first and every column in one chunk: whole numbers, decimals with missing cells, text
    /// with a quoted comma and line break, with a semicolon and decimal commas too. A decimal
    /// met in a column the schema calls whole numbers is an error (load() then reads the file
    /// again with types guessed from every row).
    #[test]
    fn a_csv_file_read_whole_is_the_lazy_scans_frame_in_one_chunk() {
        let dir = std::env::temp_dir().join(format!("panelready-csv-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        for (delimiter, decimal_comma) in [(',', false), (';', true)] {
            let mut text = format!("firm{delimiter}year{delimiter}x{delimiter}note\n");
            for i in 0..12_000 {
                let x = match i % 9 {
                    0 => String::new(),
                    _ => format!("{}.25", i).replace('.', if decimal_comma { "," } else { "." }),
                };
                let note = match i % 500 {
                    0 => format!("\"a note{delimiter} over\ntwo lines\""),
                    _ => format!("n{}", i % 3),
                };
                let firm = i / 10;
                let year = 2000 + i % 10;
                text.push_str(&format!(
                    "F{firm}{delimiter}{year}{delimiter}{x}{delimiter}{note}\n"
                ));
            }
            let path = dir.join("panel.csv");
            std::fs::write(&path, &text).unwrap();
            let csv = CsvOptions {
                delimiter,
                decimal_comma,
                ..CsvOptions::default()
            };
            let scan = LazyCsvReader::new(PlRefPath::try_from_path(&path).unwrap())
                .with_has_header(true)
                .with_separator(delimiter as u8)
                .with_decimal_comma(decimal_comma);
            let mut lazy = scan.finish().unwrap();
            let schema = lazy.collect_schema().unwrap();
            let expected = lazy.with_row_index("row", Some(1)).collect().unwrap();
            let got = read_csv(&path, &schema, &csv, "row", Ok).unwrap();
            assert!(got.equals_missing(&expected), "separator {delimiter}");
            assert_eq!(got.column("x").unwrap().null_count(), 12_000 / 9 + 1);
            for c in got.columns() {
                assert_eq!(c.n_chunks(), 1, "{} (separator {delimiter})", c.name());
            }
        }
        // `year` guessed whole from the first rows, a decimal further down.
        let mut text = String::from("firm,year\n");
        for i in 0..12_000 {
            text.push_str(&format!("F{},{}\n", i / 10, 2000 + i % 10));
        }
        text.push_str("F9999,2001.5\n");
        let path = dir.join("late.csv");
        std::fs::write(&path, &text).unwrap();
        let schema = Schema::from_iter([
            Field::new("firm".into(), DataType::String),
            Field::new("year".into(), DataType::Int64),
        ]);
        assert!(read_csv(&path, &schema, &CsvOptions::default(), "row", Ok).is_err());
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
