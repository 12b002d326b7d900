//! A Parquet file's own description of its columns, read from its footer before the engine
//! sees the file: two columns of one name (which the engine reports in its own words),
//! half-precision floats (which the engine cannot hold and fails on inside its type
//! conversion, a crash rather than an error), and in a folder a file whose columns differ from
//! the first file's each stop the run with one line naming the file and the column.

use std::path::Path;

use polars::prelude::{ArrowDataType, DataType};
use polars_parquet::read::{infer_schema, read_metadata};

use crate::config::parquet_files;
use crate::{Error, Result};

/// Check every Parquet file of `input` (a file, or a folder of them); in a folder, each file
/// against the first: the same columns, of the same types (the engine's words named neither
/// the file nor what differed).
pub(super) fn check(input: &Path) -> Result<()> {
    let files = match input.is_dir() {
        true => parquet_files(input)?,
        false => vec![input.to_path_buf()],
    };
    let mut first: Option<(&Path, Vec<(String, DataType)>)> = None;
    for file in &files {
        let Some(columns) = check_file(file)? else {
            continue;
        };
        match &first {
            None => first = Some((file, columns)),
            Some((first_file, expected)) => same_columns(first_file, expected, file, &columns)?,
        }
    }
    Ok(())
}

/// `file`'s columns against those of `first_file`, the folder's first.
fn same_columns(
    first_file: &Path,
    expected: &[(String, DataType)],
    file: &Path,
    columns: &[(String, DataType)],
) -> Result<()> {
    let differs = |column: &str, message: String| Error::Unreadable {
        file: file.to_path_buf(),
        at: format!(", column `{column}`"),
        message: format!(
            "{message}; every file of a folder holds the same columns, of the same types"
        ),
    };
    let first = first_file.display();
    for (name, dtype) in columns {
        match expected.iter().find(|(n, _)| n == name) {
            None => {
                return Err(differs(
                    name,
                    format!("not in `{first}`, the folder's first file"),
                ))
            }
            Some((_, want)) if want != dtype => {
                return Err(differs(
                    name,
                    format!("holds {dtype} values where `{first}` holds {want}"),
                ))
            }
            Some(_) => {}
        }
    }
    if let Some((name, _)) = expected
        .iter()
        .find(|(n, _)| !columns.iter().any(|(c, _)| c == n))
    {
        return Err(differs(name, format!("missing, though `{first}` has it")));
    }
    Ok(())
}

/// One file's checks; its columns and their types, unless the engine is left to say what
/// is wrong with the file.
fn check_file(path: &Path) -> Result<Option<Vec<(String, DataType)>>> {
    let mut file = std::fs::File::open(path).map_err(Error::io(path))?;
    // A file the engine cannot parse is left to it: its message says what is wrong.
    let Ok(metadata) = read_metadata(&mut file) else {
        return Ok(None);
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
        return Ok(None);
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
    Ok(Some(
        schema
            .iter()
            .map(|(name, field)| (name.to_string(), DataType::from_arrow_field(field)))
            .collect(),
    ))
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
