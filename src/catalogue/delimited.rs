//! CSV and TSV through polars.

use std::fs::File;
use std::path::Path;

use polars::prelude::*;

use super::{CatalogueError, Table};

/// Rows used to infer column types on the fast path.
const INFER_ROWS: usize = 10_000;

/// Read a delimited file with a header line. Lines starting with '#' are comments. Column
/// types are inferred from the first rows; if a later entry does not fit (a stray word in a
/// number column), the file is read again with types inferred from every row, so that such
/// a column is read as text and each entry is checked by the pipeline (a per-row status,
/// not a failure).
pub fn read_delimited(path: &Path, separator: u8) -> Result<Table, CatalogueError> {
    let read = |infer: Option<usize>| {
        options(separator, infer)
            .with_has_header(true)
            .try_into_reader_with_file_path(Some(path.to_path_buf()))
            .and_then(|r| r.finish())
    };
    let frame = match read(Some(INFER_ROWS)) {
        Ok(f) => f,
        Err(_) => read(None).map_err(|e| {
            CatalogueError::read(path, format!("cannot read as delimited text: {e}"))
        })?,
    };
    Ok(Table {
        frame,
        meta: Default::default(),
    })
}

/// The parse options shared by every way of reading.
fn options(separator: u8, infer: Option<usize>) -> CsvReadOptions {
    CsvReadOptions::default()
        .with_infer_schema_length(infer)
        .map_parse_options(|p| {
            p.with_separator(separator)
                .with_comment_prefix(Some("#"))
                .with_missing_is_null(true)
                .with_null_values(Some(NullValues::AllColumns(vec![
                    "".into(),
                    "NA".into(),
                    "null".into(),
                ])))
        })
}

/// Write a delimited file with a header line; floats at full precision.
pub fn write_delimited(file: &File, table: &Table, separator: u8) -> Result<(), String> {
    let mut df = table.frame.clone();
    // Large batches: each is serialised in parallel, then written; polars' default (1024
    // rows) spends much of its time starting and joining the parallel work.
    CsvWriter::new(file)
        .with_batch_size(std::num::NonZeroUsize::new(16_384).expect("non-zero"))
        .include_header(true)
        .with_separator(separator)
        .finish(&mut df)
        .map_err(|e| format!("cannot write delimited text: {e}"))
}
