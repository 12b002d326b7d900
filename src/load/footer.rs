//! A Parquet file's own description of its columns, read from its footer before the engine
//! sees the file: two columns of one name (which the engine reports in its own words) and
//! half-precision floats (which the engine cannot hold and fails on inside its type
//! conversion, a crash rather than an error) each stop the run with one line naming the file
//! and the column.

use std::path::Path;

use polars::prelude::ArrowDataType;
use polars_parquet::read::{infer_schema, read_metadata};

use crate::config::parquet_files;
use crate::{Error, Result};

/// Check every Parquet file of `input` (a file, or a folder of them).
pub(super) fn check(input: &Path) -> Result<()> {
    let files = match input.is_dir() {
        true => parquet_files(input)?,
        false => vec![input.to_path_buf()],
    };
    files.iter().try_for_each(|f| check_file(f))
}

fn check_file(path: &Path) -> Result<()> {
    let mut file = std::fs::File::open(path).map_err(Error::io(path))?;
    // A file the engine cannot parse is left to it: its message says what is wrong.
    let Ok(metadata) = read_metadata(&mut file) else {
        return Ok(());
    };
    let mut seen = std::collections::BTreeSet::new();
    for field in metadata.schema().fields() {
        if !seen.insert(field.name()) {
            return Err(Error::DuplicateColumn {
                file: path.to_path_buf(),
                column: field.name().to_string(),
            });
        }
    }
    let Ok(schema) = infer_schema(&metadata) else {
        return Ok(());
    };
    for (name, field) in schema.iter() {
        if holds_half_floats(field.dtype()) {
            return Err(Error::Unreadable {
                file: path.to_path_buf(),
                at: format!(", column `{name}`"),
                message: "half-precision (16-bit) floating-point numbers, which panelready \
                          cannot read: write the column as 32- or 64-bit floats"
                    .into(),
            });
        }
    }
    Ok(())
}

/// Whether `dtype` is, or holds, 16-bit floats.
fn holds_half_floats(dtype: &ArrowDataType) -> bool {
    match dtype {
        ArrowDataType::Float16 => true,
        ArrowDataType::List(f)
        | ArrowDataType::LargeList(f)
        | ArrowDataType::FixedSizeList(f, _) => holds_half_floats(f.dtype()),
        ArrowDataType::Map(f, _) => holds_half_floats(f.dtype()),
        ArrowDataType::Struct(fields) => fields.iter().any(|f| holds_half_floats(f.dtype())),
        ArrowDataType::Dictionary(_, values, _) => holds_half_floats(values),
        ArrowDataType::Extension(ext) => holds_half_floats(&ext.inner),
        _ => false,
    }
}
