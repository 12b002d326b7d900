//! The key columns read for their codes: runs of equal entity names in a sorted text column,
//! read in place, and each row's period code.

use polars::prelude::*;

/// For text in one chunk without a missing value: whether each row after the first holds the
/// same text as the row before it, the views compared whole first (equal views, equal text)
/// and the text itself only where they differ. None for other text (the caller compares the
/// values one by one).
pub fn same_as_previous(ids: &StringChunked) -> Option<impl Iterator<Item = bool> + '_> {
    if ids.chunks().len() != 1 || ids.null_count() != 0 {
        return None;
    }
    let array = ids.downcast_as_array();
    let views = array.views().as_slice();
    Some(
        views
            .windows(2)
            .enumerate()
            .map(move |(r, v)| v[1] == v[0] || array.value(r + 1) == array.value(r)),
    )
}

/// Each row's index into the ascending distinct `periods` (0 for a missing period): from a
/// table over the periods' range when it is short (years, quarters), else by binary search.
pub(super) fn period_codes(p: &Int64Chunked, periods: &[i64]) -> Vec<u32> {
    let (Some(first), Some(last)) = (periods.first(), periods.last()) else {
        return vec![0; p.len()];
    };
    match usize::try_from(last.abs_diff(*first)) {
        Ok(span) if span < 1 << 16 => {
            let mut table = vec![0u32; span + 1];
            for (code, v) in periods.iter().enumerate() {
                table[(v - first) as usize] = code as u32;
            }
            let code = |v: i64| table[(v - first) as usize];
            match p.cont_slice() {
                Ok(values) => values.iter().map(|v| code(*v)).collect(),
                Err(_) => p.iter().map(|v| v.map_or(0, code)).collect(),
            }
        }
        _ => p
            .iter()
            .map(|v| v.map_or(0, |v| periods.binary_search(&v).unwrap_or(0) as u32))
            .collect(),
    }
}
