//! panel.parquet, encoded and compressed on every core.
//!
//! The engine's one-call writer splits the frame into row groups and prepares each column's
//! pages in parallel, but the pages themselves are encoded and compressed lazily, as the file
//! writer pulls them: on one thread. Here each row group's columns are encoded and compressed
//! in parallel into finished pages, which the file writer then only lays out. The row groups,
//! the encodings, the statistics and the compression are the engine's own, so the file is the
//! one its writer makes, byte for byte (the tests below hold the two side by side). One step
//! of the engine's is left out: before writing a float column it estimates the column's
//! distinct values (a pass of hashing over every row group) to decide whether a dictionary
//! would pay, and where it would, its cast of floats to a dictionary is not supported and it
//! writes the column plain all the same (polars 0.55). Float columns are written plain
//! directly: the same bytes, without the estimate, which was a tenth of the writing's time.

use std::io::Write;

use polars::frame::chunk_df_for_writing;
use polars::io::parquet::write::{get_encodings, KeyValueMetadata};
use polars::prelude::*;
use polars_parquet::write::{
    array_to_columns, compress, CompressedPage, CompressionOptions, Encoding, StatisticsOptions,
    Version, WriteOptions,
};
use rayon::prelude::*;

use crate::progress::Progress;

/// Rows per row group, the engine's default.
const ROW_GROUP: usize = 512 * 512;

/// Write `df` as Snappy-compressed Parquet with the file-level `metadata`, showing the row
/// groups done on `progress`.
pub(super) fn write_parquet<W: Write + Send>(
    sink: W,
    df: &mut DataFrame,
    metadata: KeyValueMetadata,
    progress: &Progress,
) -> PolarsResult<()> {
    let compression = ParquetCompression::Snappy;
    let chunked = chunk_df_for_writing(df, ROW_GROUP)?;
    // Text held as codes is written as text, spelled out a row group at a time.
    let schema = crate::core::spelled_out_schema(chunked.schema());
    let arrow = schema.to_arrow(CompatLevel::newest());
    let encodings: Vec<Vec<Encoding>> = get_encodings(&arrow)
        .iter()
        .zip(arrow.iter_values())
        .map(|(encoding, field)| match field.dtype() {
            ArrowDataType::Float32 | ArrowDataType::Float64 => vec![Encoding::Plain],
            _ => encoding.clone(),
        })
        .collect();
    let options = WriteOptions {
        statistics: StatisticsOptions::default(),
        version: Version::V1,
        compression: CompressionOptions::from(compression),
        data_page_size: None,
    };
    let mut writer = ParquetWriter::new(sink)
        .with_compression(compression)
        .with_statistics(options.statistics)
        .with_key_value_metadata(Some(metadata))
        .batched(&schema)?;
    let fields = writer.parquet_schema().fields().to_vec();
    let groups = row_groups(&chunked);
    let spelling = crate::core::Spelling::of(&chunked)?;
    progress.items_of(groups.len(), "row groups");
    // Each row group's columns made into compressed pages in parallel.
    let encode = |&(offset, rows): &(usize, usize)| -> PolarsResult<Vec<Vec<CompressedPage>>> {
        let group = spelling.spell(&chunked.slice(offset as i64, rows))?;
        let batch = group
            .iter_chunks(CompatLevel::newest(), false)
            .next()
            .expect("a row group holds rows");
        Ok(batch
            .columns()
            .par_iter()
            .zip(&fields)
            .zip(&encodings)
            .map(|((array, field), encoding)| {
                array_to_columns(array, field.clone(), options, encoding)?
                    .into_iter()
                    .map(|pages| {
                        pages
                            .map(|page| Ok(compress(page?, Vec::new(), options.compression)?))
                            .collect::<PolarsResult<Vec<_>>>()
                    })
                    .collect::<PolarsResult<Vec<_>>>()
            })
            .collect::<PolarsResult<Vec<_>>>()?
            .into_iter()
            .flatten()
            .collect())
    };
    // The file writer lays out one row group while the next is encoded: the cores are not
    // left idle while pages are copied out.
    let mut ready: Option<(u64, Vec<Vec<CompressedPage>>)> = None;
    for group in &groups {
        let (pages, written) = rayon::join(
            || encode(group),
            || match ready.take() {
                Some((rows, pages)) => writer.write_row_group(rows, &pages).map(|_| true),
                None => Ok(false),
            },
        );
        if written? {
            progress.done(1);
        }
        ready = Some((group.1 as u64, pages?));
    }
    if let Some((rows, pages)) = ready {
        writer.write_row_group(rows, &pages)?;
        progress.done(1);
    }
    writer.finish()?;
    Ok(())
}

/// The row groups of a frame made by `chunk_df_for_writing` (whose columns' chunks line up),
/// as (first row, rows): one a chunk, empty chunks left out.
fn row_groups(df: &DataFrame) -> Vec<(usize, usize)> {
    let Some(first) = df.columns().first() else {
        return Vec::new();
    };
    let mut offset = 0;
    first
        .as_materialized_series()
        .chunk_lengths()
        .filter(|rows| *rows > 0)
        .map(|rows| {
            offset += rows;
            (offset - rows, rows)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `df` written by `write_parquet` and by the engine's one-call writer, with the same
    /// file-level metadata.
    fn ours_and_theirs(df: &mut DataFrame) -> (Vec<u8>, Vec<u8>) {
        let metadata = KeyValueMetadata::from_static(vec![("label".into(), "test".into())]);
        let mut ours = Vec::new();
        write_parquet(&mut ours, df, metadata.clone(), &Progress::new(true, false)).unwrap();
        let mut theirs = Vec::new();
        ParquetWriter::new(&mut theirs)
            .with_compression(ParquetCompression::Snappy)
            .with_key_value_metadata(Some(metadata))
            .finish(df)
            .unwrap();
        (ours, theirs)
    }

    /// The file is the engine's writer's own, byte for byte: several row groups (one short),
    /// floats with nulls, integers, text, a boolean, and a frame in several chunks.
    #[test]
    fn same_bytes_as_the_engine_writer() {
        let n = ROW_GROUP * 2 + 1_234;
        let x: Vec<Option<f64>> = (0..n)
            .map(|i| (i % 7 != 0).then(|| (i as f64).sin() * 1e3))
            .collect();
        let firm: Vec<String> = (0..n).map(|i| format!("F{:05}", i / 11)).collect();
        let year: Vec<i64> = (0..n).map(|i| 2000 + (i % 11) as i64).collect();
        let flag: Vec<bool> = (0..n).map(|i| i % 3 == 0).collect();
        let whole = df!("firm" => firm, "year" => year, "x" => x, "flag" => flag).unwrap();
        let mut chunked = whole.slice(0, 1_000);
        chunked.vstack_mut(&whole.slice(1_000, n)).unwrap();
        for mut df in [whole, chunked] {
            let (ours, theirs) = ours_and_theirs(&mut df);
            assert_eq!(ours.len(), theirs.len());
            assert!(ours == theirs, "the bytes differ");
        }
    }

    /// A float column of a few repeated values, whose estimate of distinct values would favour
    /// a dictionary, comes out plain and the same bytes as the engine's writer makes.
    #[test]
    fn a_float_column_of_few_values_is_the_engine_writers_bytes_too() {
        let n = 10_000;
        let dummy: Vec<Option<f64>> = (0..n)
            .map(|i| (i % 13 != 0).then_some((i % 2) as f64))
            .collect();
        let firm: Vec<String> = (0..n).map(|i| format!("F{:03}", i / 20)).collect();
        let mut df = df!("firm" => firm, "dummy" => dummy).unwrap();
        let (ours, theirs) = ours_and_theirs(&mut df);
        assert!(ours == theirs, "the bytes differ");
    }
}
