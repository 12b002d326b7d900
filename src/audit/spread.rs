//! Where values lie, beside the variation figures: each numeric variable's extremes and
//! quartiles (from the pooled pass the checks share, `Context::pooled`) and each text
//! variable's distinct values and most common one, with the tables the variation section
//! shows them in.

use polars::prelude::*;

use super::Pooled;
use crate::report::layout::{opt_level, strings, Block};
use crate::report::{Spread, TextValues, VariationLine};
use crate::Result;

/// Where each numeric variable's values lie: the table a paper's descriptive statistics
/// start from.
pub(super) fn spread_blocks(lines: &[VariationLine]) -> Vec<Block> {
    let rows: Vec<Vec<String>> = lines
        .iter()
        .filter_map(|v| {
            let s = v.spread?;
            Some(vec![
                v.variable.clone(),
                v.n.to_string(),
                opt_level(Some(s.min)),
                opt_level(Some(s.p25)),
                opt_level(Some(s.median)),
                opt_level(Some(s.p75)),
                opt_level(Some(s.max)),
            ])
        })
        .collect();
    table_with_note(
        &[
            "variable",
            "n",
            "smallest",
            "25th percentile",
            "median",
            "75th percentile",
            "largest",
        ],
        rows,
        "Over each variable's non-missing rows; percentiles by linear interpolation \
         (Hyndman-Fan type 7).",
    )
}

/// A table and the note beneath it; nothing without rows.
fn table_with_note(header: &[&str], rows: Vec<Vec<String>>, note: &str) -> Vec<Block> {
    if rows.is_empty() {
        return Vec::new();
    }
    vec![
        Block::Table(strings(header), rows),
        Block::Note(note.into()),
    ]
}

/// How each text variable held as codes spreads over its rows.
pub(super) fn text_blocks(lines: &[VariationLine]) -> Vec<Block> {
    let rows: Vec<Vec<String>> = lines
        .iter()
        .filter_map(|v| {
            let t = v.text_values.as_ref()?;
            Some(vec![
                v.variable.clone(),
                v.n.to_string(),
                t.distinct.to_string(),
                t.most_common.clone(),
                format!(
                    "{:.1}%",
                    100.0 * t.most_common_rows as f64 / v.n.max(1) as f64
                ),
                t.entities_changing.to_string(),
            ])
        })
        .collect();
    table_with_note(
        &[
            "variable",
            "n",
            "distinct values",
            "most common",
            "its share of n",
            "entities whose value changes",
        ],
        rows,
        "Text whose values repeat (held as codes), and number codes declared categorical; text \
         whose values nearly all differ, such as a name, is not counted. An entity's value changes when it holds two or more \
         different values over its periods (an industry reclassified, say), missing ones aside.",
    )
}

/// A variable's extremes and quartiles, from its pooled quantiles `q`; none without values,
/// or should one not be a finite number.
pub(super) fn spread(q: Pooled) -> Option<Spread> {
    let spread = Spread {
        min: q.min?,
        p25: q.p25?,
        median: q.median?,
        p75: q.p75?,
        max: q.max?,
    };
    [
        spread.min,
        spread.p25,
        spread.median,
        spread.p75,
        spread.max,
    ]
    .iter()
    .all(|v| v.is_finite())
    .then_some(spread)
}

/// The distinct values of a column held as `codes` and the most common one (of those tied,
/// the one met first), and the entities holding two or more different values (the rows of
/// entity i are `starts[i]..starts[i + 1]`, missing values aside), from one pass over the
/// codes; none without a value.
pub(super) fn most_common(
    codes: &UInt32Chunked,
    column: &Column,
    starts: &[usize],
) -> Result<Option<TextValues>> {
    // Per code: its rows and the first row holding it.
    let (mut rows, mut first): (Vec<u64>, Vec<usize>) = (Vec::new(), Vec::new());
    // The entity's first value, whether another followed, and the entities that changed.
    let (mut next, mut seen, mut changed, mut changing) = (1, None, false, 0u64);
    for (r, c) in codes.iter().enumerate() {
        while next < starts.len() && r >= starts[next] {
            changing += u64::from(changed);
            (seen, changed) = (None, false);
            next += 1;
        }
        let Some(c) = c else {
            continue;
        };
        match seen {
            None => seen = Some(c),
            Some(s) => changed |= s != c,
        }
        let c = c as usize;
        if c >= rows.len() {
            rows.resize(c + 1, 0);
            first.resize(c + 1, usize::MAX);
        }
        rows[c] += 1;
        first[c] = first[c].min(r);
    }
    changing += u64::from(changed);
    let best = (0..rows.len())
        .filter(|c| rows[*c] > 0)
        .max_by(|a, b| rows[*a].cmp(&rows[*b]).then(first[*b].cmp(&first[*a])));
    let Some(best) = best else {
        return Ok(None);
    };
    Ok(Some(TextValues {
        distinct: rows.iter().filter(|n| **n > 0).count() as u64,
        most_common: column
            .as_materialized_series()
            .str_value(first[best])?
            .into_owned(),
        most_common_rows: rows[best],
        entities_changing: changing,
    }))
}

/// Codes for a column of whole numbers (number codes declared categorical, an industry code):
/// equal numbers, equal codes, numbered as first met; missing where the number is. None for
/// any other column, or one whose numbers do not all fit 64-bit integers.
pub(super) fn number_codes(column: &Column) -> Result<Option<UInt32Chunked>> {
    if !column.dtype().is_integer() {
        return Ok(None);
    }
    let x = column.cast(&DataType::Int64)?;
    if x.null_count() != column.null_count() {
        return Ok(None);
    }
    let mut seen = std::collections::HashMap::new();
    let codes: UInt32Chunked = x
        .i64()?
        .iter()
        .map(|v| {
            v.map(|v| {
                let next = seen.len() as u32;
                *seen.entry(v).or_insert(next)
            })
        })
        .collect();
    Ok(Some(codes))
}
