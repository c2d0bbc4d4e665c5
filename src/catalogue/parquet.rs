//! Parquet through polars; provenance and column units as file key-value metadata.

use std::fs::File;
use std::path::Path;

use polars::prelude::*;

use super::{CatalogueError, Provenance, Table};

/// Key under which per-column units and UCDs are stored (JSON object name → {unit, ucd}).
pub const COLUMNS_KEY: &str = "flowsift.columns";

pub fn read_parquet(path: &Path) -> Result<Table, CatalogueError> {
    let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    let frame = ParquetReader::new(file)
        .finish()
        .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
    Ok(Table {
        frame,
        meta: Default::default(),
    })
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
