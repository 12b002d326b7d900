//! Text held as codes. A text column whose values repeat many times — a sector, a region, a
//! country — is held from the derived-variable stage on (a column a derived variable
//! reads, once they are made) as a categorical column: a 4-byte code a row and each distinct
//! value once, instead of a 16-byte view a row. At 10 million rows that is 114 MiB less a
//! column. What reads such a column after that point reads the codes (which value equals
//! which) or spells a slice of rows out again ([`spelled_out`]): the bundle's files hold the
//! text as it was read.

use polars::prelude::*;
use rayon::prelude::*;

use crate::Result;

/// Rows in each of the samples (a column's first, middle and last rows) that decide whether
/// its values repeat.
pub const TEXT_SAMPLE: usize = 1 << 16;

/// A column is held as codes when each of its samples holds at most one distinct value in this
/// many rows. Each distinct value costs its entry in the engine's mapping, about 100
/// bytes, against 12 bytes saved a row: the bench's firm ids, a name every 11 rows, held as
/// codes took the 10 M `build` 0.4 s longer for no lower peak (4 December 2026), while its
/// sector and region (a few dozen values) took the peak down by 226 MiB.
const REPEATS: usize = 16;

/// Hold as codes each text column of `df` not named in `keep` whose values repeat (see
/// [`REPEATS`]); the others stay as they are. The columns are coded in parallel (each new
/// column a quarter of its text's size at most), and each replaces its text as it is done.
pub fn hold_text_as_codes(df: &mut DataFrame, keep: &[String]) -> Result<()> {
    let text: Vec<PlSmallStr> = df
        .schema()
        .iter()
        .filter(|(name, dtype)| {
            **dtype == DataType::String && !keep.iter().any(|k| k == name.as_str())
        })
        .map(|(name, _)| name.clone())
        .collect();
    let frame = &*df;
    let coded = text
        .par_iter()
        .map(|name| -> Result<Option<Column>> {
            let column = frame.column(name)?;
            if !repeats(column)? {
                return Ok(None);
            }
            // Categories of the column's own (not the process-wide ones), let go with it.
            let categories = Categories::random(
                PlSmallStr::from_static("panelready"),
                CategoricalPhysical::U32,
            );
            Ok(Some(column.cast(&DataType::from_categories(categories))?))
        })
        .collect::<Result<Vec<_>>>()?;
    for column in coded.into_iter().flatten() {
        df.with_column(column)?;
    }
    Ok(())
}

/// Where the samples that judge a column of `rows` rows start: its first [`TEXT_SAMPLE`] rows,
/// the middle ones and the last (one sample when it has no more rows than that).
pub fn sample_starts(rows: usize) -> Vec<usize> {
    let k = TEXT_SAMPLE.min(rows);
    let mut starts = vec![0, (rows - k) / 2, rows - k];
    starts.dedup();
    starts
}

/// Whether a text column's values repeat enough to be held as codes: in each of its samples
/// (see [`sample_starts`]) at most one distinct value in [`REPEATS`] rows. A column whose
/// first rows repeat and whose later rows do not (a note filled in for later firms only)
/// stays text: as codes, each of its distinct values would cost its entry in the mapping.
pub fn repeats(column: &Column) -> Result<bool> {
    if column.is_empty() {
        return Ok(false);
    }
    for start in sample_starts(column.len()) {
        if !repeats_in(&column.slice(start as i64, TEXT_SAMPLE))? {
            return Ok(false);
        }
    }
    Ok(true)
}

/// Whether the rows of `sample` hold at most one distinct value in [`REPEATS`].
pub fn repeats_in(sample: &Column) -> Result<bool> {
    Ok(!sample.is_empty() && sample.n_unique()? * REPEATS <= sample.len())
}

/// Whether `dtype` is text held as codes.
pub fn is_coded(dtype: &DataType) -> bool {
    matches!(dtype, DataType::Categorical(_, _))
}

/// `df` with its coded text columns spelled out as text again (the same frame, shared, when
/// it has none). For a frame written a slice of rows at a time, [`Spelling`] once and
/// [`Spelling::spell`] each slice.
pub fn spelled_out(df: &DataFrame) -> PolarsResult<DataFrame> {
    Spelling::of(df)?.spell(df)
}

/// The text of each coded column's values, made once for a frame whose rows are then spelled
/// out a slice at a time: an array holding each distinct value once, which a slice's codes
/// take from (each row a 16-byte view of the shared bytes, so that a long value repeated on
/// every row is not copied row by row).
pub struct Spelling {
    values: Vec<(PlSmallStr, StringChunked)>,
}

impl Spelling {
    /// The values of `df`'s coded columns.
    pub fn of(df: &DataFrame) -> PolarsResult<Spelling> {
        let values = df
            .columns()
            .iter()
            .filter(|c| is_coded(c.dtype()))
            .map(|c| {
                let array = c.dtype().cat_mapping()?.to_arrow(true);
                let values = Series::try_from((c.name().clone(), array))?;
                Ok((c.name().clone(), values.str()?.clone()))
            })
            .collect::<PolarsResult<_>>()?;
        Ok(Spelling { values })
    }

    /// `part` (rows of the frame this was made for) with its coded columns as text.
    pub fn spell(&self, part: &DataFrame) -> PolarsResult<DataFrame> {
        if self.values.is_empty() {
            return Ok(part.clone());
        }
        let columns = part
            .columns()
            .iter()
            .map(|c| {
                match (
                    self.values.iter().find(|(name, _)| name == c.name()),
                    codes(c)?,
                ) {
                    (Some((_, values)), Some(codes)) => Ok(values.take(&codes)?.into_column()),
                    _ => Ok(c.clone()),
                }
            })
            .collect::<PolarsResult<Vec<Column>>>()?;
        DataFrame::new(part.height(), columns)
    }
}

/// `schema` with coded text columns as text: the schema of [`spelled_out`]'s frames.
pub fn spelled_out_schema(schema: &Schema) -> Schema {
    schema
        .iter()
        .map(|(name, dtype)| {
            let dtype = if is_coded(dtype) {
                DataType::String
            } else {
                dtype.clone()
            };
            (name.clone(), dtype)
        })
        .collect()
}

/// The codes of a coded text column (equal codes, equal text; null where the text is), or
/// None for any other column.
pub fn codes(column: &Column) -> PolarsResult<Option<UInt32Chunked>> {
    if !is_coded(column.dtype()) {
        return Ok(None);
    }
    let physical = column.as_materialized_series().to_physical_repr();
    Ok(Some(physical.u32()?.clone()))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A repeating text column is held as codes and spelled out unchanged, nulls included; a
    /// column whose values do not repeat, and a kept one, stay text (worked by hand).
    #[test]
    fn repeating_text_is_coded_and_spelled_out_the_same() {
        // 64 rows: three distinct sectors (a null among them), 64 distinct names.
        let sector: Vec<Option<&str>> = (0..64)
            .map(|i| (i != 3).then_some(if i % 3 == 1 { "Docks" } else { "Mills" }))
            .collect();
        let names: Vec<String> = (0..64).map(|i| format!("name {i}")).collect();
        let firm: Vec<&str> = (0..64).map(|i| if i < 32 { "F1" } else { "F2" }).collect();
        let mut df = df!("firm" => firm, "sector" => sector, "name" => names).unwrap();
        let before = df.clone();
        hold_text_as_codes(&mut df, &["firm".to_string()]).unwrap();
        assert!(is_coded(df.column("sector").unwrap().dtype()));
        assert_eq!(df.column("name").unwrap().dtype(), &DataType::String);
        assert_eq!(df.column("firm").unwrap().dtype(), &DataType::String);
        let codes = codes(df.column("sector").unwrap()).unwrap().unwrap();
        let codes: Vec<Option<u32>> = codes.iter().collect();
        assert_eq!(codes[0], codes[2]);
        assert_ne!(codes[0], codes[1]);
        assert_eq!(codes[3], None);
        assert_eq!(spelled_out(&df).unwrap(), before);
        assert_eq!(spelled_out_schema(df.schema()), **before.schema());
    }

    /// A column is judged on its first, middle and last rows: one whose first 100,000 rows
    /// hold one value and whose last 100,000 are all different stays text; one value
    /// throughout is coded (worked by hand, the sample starts too).
    #[test]
    fn text_that_stops_repeating_stays_text() {
        let rows = 200_000;
        let later: Vec<String> = (0..rows)
            .map(|i| {
                if i < rows / 2 {
                    "-".to_string()
                } else {
                    format!("note {i}")
                }
            })
            .collect();
        let same: Vec<&str> = vec!["-"; rows];
        let mut df = df!("later" => later, "same" => same).unwrap();
        assert_eq!(sample_starts(rows), vec![0, 67_232, 134_464]);
        assert_eq!(sample_starts(10), vec![0]);
        hold_text_as_codes(&mut df, &[]).unwrap();
        assert_eq!(df.column("later").unwrap().dtype(), &DataType::String);
        assert!(is_coded(df.column("same").unwrap().dtype()));
    }

    /// A long value repeated on every row is spelled out as views of one copy of its bytes,
    /// not a copy a row (which took a build of a million rows with a 2,000-character value
    /// from 0.45 to 1.47 s and from 183 to 844 MiB, and would run out of memory on longer
    /// text): 64 rows of two 2,000-byte values hold 4,000 bytes of text, not 128,000.
    #[test]
    fn long_repeated_text_is_spelled_out_without_a_copy_a_row() {
        let (a, b) = ("a".repeat(2_000), "b".repeat(2_000));
        let text: Vec<&str> = (0..64)
            .map(|i| if i % 2 == 0 { a.as_str() } else { b.as_str() })
            .collect();
        let mut df = df!("note" => text).unwrap();
        let before = df.clone();
        hold_text_as_codes(&mut df, &[]).unwrap();
        assert!(is_coded(df.column("note").unwrap().dtype()));
        let spelling = Spelling::of(&df).unwrap();
        let part = spelling.spell(&df.slice(10, 40)).unwrap();
        assert_eq!(part, before.slice(10, 40));
        let bytes: usize = part
            .column("note")
            .unwrap()
            .str()
            .unwrap()
            .downcast_iter()
            .map(|array| array.total_buffer_len())
            .sum();
        assert!(bytes <= 4_000, "{bytes} bytes of text");
    }
}
