//! Parquet through polars; provenance and column units as file key-value metadata.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::Path;

use polars::prelude::*;

use super::{CatalogueError, ColumnMeta, Provenance, Table};

/// Key under which per-column units and UCDs are stored (JSON object name → {unit, ucd});
/// distinct from every `flowsift.<provenance entry>` key (the column plan is `flowsift.columns`).
pub const COLUMNS_KEY: &str = "flowsift.column_units";

/// Read a Parquet file. Units and UCDs written by flowsift (under [`COLUMNS_KEY`]) are
/// read back for the columns present, so a flowsift output fed back in keeps them; a file
/// from elsewhere has none (Parquet itself has no unit field).
pub fn read_parquet(path: &Path) -> Result<Table, CatalogueError> {
    let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    let mut reader = ParquetReader::new(file);
    let stored = reader
        .get_metadata()
        .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?
        .key_value_metadata()
        .iter()
        .flatten()
        .find(|kv| kv.key == COLUMNS_KEY)
        .and_then(|kv| kv.value.clone());
    let stated_rows = reader
        .num_rows()
        .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
    // A damaged footer can state any row count, and the columns are allocated for it before
    // a page is read. Rows of distinct sky positions take at least a bit each, so a count
    // above eight per byte of the file is refused (an absurd count would abort the
    // process, not fail).
    let file_bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    if stated_rows as u64 > file_bytes.saturating_mul(8) {
        return Err(CatalogueError::read(
            path,
            format!(
                "the file's footer states {stated_rows} rows, more than its {file_bytes} \
                 bytes can hold; the file is damaged"
            ),
        ));
    }
    let frame = reader
        .finish()
        .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
    if frame.height() != stated_rows {
        return Err(CatalogueError::read(
            path,
            format!(
                "the file's footer states {stated_rows} rows but {} were read; the file is \
                 damaged",
                frame.height()
            ),
        ));
    }
    let mut meta: BTreeMap<String, ColumnMeta> = match stored {
        Some(text) => serde_json::from_str(&text).map_err(|e| {
            CatalogueError::read(
                path,
                format!("key-value metadata '{COLUMNS_KEY}' is not a column map: {e}"),
            )
        })?,
        None => BTreeMap::new(),
    };
    meta.retain(|name, _| frame.column(name).is_ok());
    let (frame, notes) = widen_narrow(frame).map_err(|e| CatalogueError::read(path, e))?;
    let mut table = Table::new(frame, meta);
    table.notes = notes
        .into_iter()
        .map(|n| format!("{}: {n}", path.display()))
        .collect();
    Ok(table)
}

/// Narrow integers (8 and 16 bits) become 32-bit integers and half-precision floats
/// single precision, so that every writer and the pipeline see the common types; the
/// values are unchanged. Returns what was widened, for the run's summary.
fn widen_narrow(mut frame: DataFrame) -> Result<(DataFrame, Vec<String>), String> {
    let mut widened = Vec::new();
    let names: Vec<PlSmallStr> = frame.get_column_names_owned();
    for name in names {
        let dtype = frame
            .column(&name)
            .map_err(|e| e.to_string())?
            .dtype()
            .clone();
        let to = match dtype {
            DataType::Int8 | DataType::Int16 | DataType::UInt8 | DataType::UInt16 => {
                DataType::Int32
            }
            DataType::Float16 => DataType::Float32,
            _ => continue,
        };
        let cast = frame
            .column(&name)
            .and_then(|c| c.cast(&to))
            .map_err(|e| format!("column '{name}' ({dtype}): {e}"))?;
        frame
            .replace(&name, cast)
            .map_err(|e| format!("column '{name}': {e}"))?;
        widened.push(format!("'{name}' ({dtype} → {to})"));
    }
    let notes = if widened.is_empty() {
        vec![]
    } else {
        vec![format!(
            "columns widened, values unchanged: {}.",
            widened.join(", ")
        )]
    };
    Ok((frame, notes))
}

/// Provenance entries as key-value metadata (keys prefixed `flowsift.`), plus the column
/// metadata under [`COLUMNS_KEY`].
pub fn write_parquet(file: &File, table: &Table, provenance: &Provenance) -> Result<(), String> {
    let mut kv: Vec<(String, String)> = provenance
        .entries
        .iter()
        .map(|(k, v)| (format!("flowsift.{k}"), v.clone()))
        .collect();
    kv.push((
        COLUMNS_KEY.into(),
        serde_json::to_string(&table.meta).map_err(|e| e.to_string())?,
    ));
    let mut df = table.frame.clone();
    ParquetWriter::new(file)
        .with_key_value_metadata(Some(KeyValueMetadata::from_static(kv)))
        .finish(&mut df)
        .map_err(|e| format!("cannot write Parquet: {e}"))?;
    Ok(())
}

/// Read the key-value metadata of a Parquet file (for checks and provenance readers).
pub fn read_parquet_metadata(path: &Path) -> Result<Vec<(String, String)>, CatalogueError> {
    let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    let mut reader = ParquetReader::new(file);
    let md = reader
        .get_metadata()
        .map_err(|e| CatalogueError::read(path, format!("cannot read Parquet metadata: {e}")))?;
    Ok(md
        .key_value_metadata()
        .iter()
        .flatten()
        .map(|kv| (kv.key.clone(), kv.value.clone().unwrap_or_default()))
        .collect())
}
