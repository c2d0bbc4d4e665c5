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
    let frame = reader
        .finish()
        .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
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
    Ok(Table { frame, meta })
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
