//! Text held as codes. A text column whose values repeat many times — a sector, a region, a
//! country — is held from the derived-variable stage on (a column a derived variable
//! reads, once they are made) as a categorical column: a 4-byte code a row and each distinct
//! value once, instead of a 16-byte view a row. At 10 million rows that is 114 MiB less a
//! column. What reads such a column after that point reads the codes (which value equals
//! which) or spells a slice of rows out again ([`spelled_out`]): the bundle's files hold the
//! text as it was read.

use polars::prelude::*;
use polars_arrow::array::{Array, PrimitiveArray, View};
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
            Ok(Some(coded(column)?))
        })
        .collect::<Result<Vec<_>>>()?;
    for column in coded.into_iter().flatten() {
        df.with_column(column)?;
    }
    Ok(())
}

/// `column` (text) as codes: each distinct value numbered where it first appears, by one pass
/// over the rows' 16-byte views (a value of up to 12 bytes is held whole in its view, so equal
/// views are equal values; a row whose view is its predecessor's, the common case in a panel
/// sorted by entity, takes its number without a lookup), the first rows of the values made
/// categorical, and that small column's codes gathered for every row. The engine's own cast
/// hashes each row's text (0.5 processor seconds more for the bench's two columns at 10 M, 5 December 2026); the values and their order of
/// first appearance are the same.
fn coded(column: &Column) -> Result<Column> {
    let text = column.str()?;
    let (numbers, firsts) = numbered(text);
    // Categories of the column's own (not the process-wide ones), let go with it.
    let categories = Categories::random(
        PlSmallStr::from_static("panelready"),
        CategoricalPhysical::U32,
    );
    let values = column
        .take(&IdxCa::from_vec(PlSmallStr::EMPTY, firsts))?
        .cast(&DataType::from_categories(categories))?;
    Ok(values.take(&numbers)?.with_name(column.name().clone()))
}

/// Each row's value numbered by first appearance (missing where the text is) and the row of
/// each number's first appearance.
fn numbered(text: &StringChunked) -> (IdxCa, Vec<IdxSize>) {
    let mut short: PlHashMap<u128, IdxSize> = PlHashMap::default();
    let mut long: PlHashMap<&str, IdxSize> = PlHashMap::default();
    let mut firsts: Vec<IdxSize> = Vec::new();
    let mut numbers: Vec<IdxSize> = Vec::with_capacity(text.len());
    let mut row = 0;
    for chunk in text.downcast_iter() {
        // A view names bytes of its own chunk's buffers: the last one seen is not carried over.
        let mut last: Option<(u128, IdxSize)> = None;
        let validity = chunk.validity();
        for (i, view) in chunk.views().iter().enumerate() {
            let at = row + i;
            if validity.is_some_and(|v| !v.get_bit(i)) {
                numbers.push(0);
                continue;
            }
            let bits = view.as_u128();
            let number = match last {
                Some((seen, number)) if seen == bits => number,
                _ => {
                    let next = firsts.len() as IdxSize;
                    let number = if view.length <= View::MAX_INLINE_SIZE {
                        *short.entry(bits).or_insert(next)
                    } else {
                        *long.entry(chunk.value(i)).or_insert(next)
                    };
                    if number == next {
                        firsts.push(at as IdxSize);
                    }
                    number
                }
            };
            last = Some((bits, number));
            numbers.push(number);
        }
        row += chunk.len();
    }
    let validity = text.rechunk_validity();
    let numbers = IdxCa::with_chunk(
        PlSmallStr::EMPTY,
        PrimitiveArray::from_vec(numbers).with_validity(validity),
    );
    (numbers, firsts)
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

/// An id of digits alone without its leading zeros (`007` as `7`, as a spreadsheet that read
/// it as a number writes it); any other name as it is.
pub fn without_zeros(name: &str) -> &str {
    match !name.is_empty() && name.bytes().all(|b| b.is_ascii_digit()) {
        true => name.trim_start_matches('0'),
        false => name,
    }
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

    /// The numbering by views against the engine's own cast of the text (each row's text
    /// hashed): short values (held in their views) and long ones (in the buffers), the same
    /// long value at two places of the buffers, missing rows, and two chunks whose views at
    /// the boundary have the same bits but name different text (the last row of one and the
    /// first of the next). The coded column spells out
    /// the same text as the engine's, with the same order of values, and each row's number is
    /// its value's first appearance (worked by hand).
    #[test]
    fn text_numbered_by_views_is_the_engines_categorical_cast() {
        let long_a = "Harbour and river works, east";
        let long_b = "Harbour and river works, west";
        let first: Vec<Option<&str>> = vec![
            Some("Mills"),
            None,
            Some("Mills"),
            Some("Docks"),
            Some(long_a),
        ];
        // Built apart from the first chunk: its first long value sits at the same offset of
        // its own buffer as the first chunk's last row does in the first chunk's.
        let second: Vec<Option<&str>> = vec![
            Some(long_b),
            Some(long_a),
            None,
            Some("Docks"),
            Some(long_b),
        ];
        let mut text = StringChunked::from_iter_options("t".into(), first.iter().copied());
        text.append(&StringChunked::from_iter_options(
            "t".into(),
            second.iter().copied(),
        ))
        .unwrap();
        let chunks: Vec<_> = text.downcast_iter().collect();
        assert_eq!(chunks.len(), 2);
        assert_eq!(
            chunks[0].views()[4].as_u128(),
            chunks[1].views()[0].as_u128(),
            "the views at the boundary have the same bits"
        );
        let (numbers, firsts) = numbered(&text);
        let numbers: Vec<Option<u32>> = numbers.iter().collect();
        let want = [
            Some(0),
            None,
            Some(0),
            Some(1),
            Some(2),
            Some(3),
            Some(2),
            None,
            Some(1),
            Some(3),
        ];
        assert_eq!(numbers, want);
        assert_eq!(firsts, [0, 3, 4, 5]);
        let column = text.into_column();
        let ours = coded(&column).unwrap();
        let categories =
            Categories::random(PlSmallStr::from_static("test"), CategoricalPhysical::U32);
        let theirs = column.cast(&DataType::from_categories(categories)).unwrap();
        let spell = |c: &Column| -> Vec<Option<String>> {
            let text = c.cast(&DataType::String).unwrap();
            let text = text.str().unwrap();
            text.iter().map(|v| v.map(String::from)).collect()
        };
        assert_eq!(spell(&ours), spell(&theirs));
        assert_eq!(ours.name(), "t");
        assert_eq!(
            codes(&ours).unwrap().unwrap().iter().collect::<Vec<_>>(),
            codes(&theirs).unwrap().unwrap().iter().collect::<Vec<_>>(),
        );
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
