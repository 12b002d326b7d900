//! Runs of equal text in a sorted text column (entity names), read in place.

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
