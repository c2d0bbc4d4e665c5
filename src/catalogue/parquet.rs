//! Parquet through polars, with the metadata in the places other readers look:
//!
//! * per column, Arrow field metadata `unit`, `ucd` and `description` inside the Arrow
//!   schema that the Parquet key-value entry `ARROW:schema` holds (Apache Arrow, "Parquet
//!   format: metadata", the schema stored as a base64 IPC message), which pyarrow and polars
//!   show per field;
//! * the provenance as key-value entries `flowsift.<key>`, in the Parquet key-value block and
//!   in the Arrow schema metadata;
//! * `table_meta_yaml`, the ECSV-style YAML header from which astropy's Parquet reader takes
//!   each column's `unit`, `description` and `meta` (astropy/io/misc/parquet.py,
//!   `read_table_parquet`), so that `Table.read("out.parquet")["v_pec"].unit` is km/s.
//!
//! polars 0.55's `ParquetWriter` writes the Arrow schema of the frame without field metadata;
//! it takes a caller's own `ARROW:schema` entry instead of its own when one is given, so the
//! schema is built here from the same frame (same types) with the metadata added, and
//! serialised by polars-parquet's own `schema_to_metadata_key`.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::Path;

use polars::prelude::*;

use super::{CatalogueError, ColumnMeta, Provenance, Table};

/// Key under which earlier flowsift outputs stored per-column units and UCDs (JSON object
/// name → {unit, ucd}), before they moved to the Arrow field metadata; still read, no
/// longer written. Distinct
/// from every `flowsift.<provenance entry>` key (the column plan is `flowsift.columns`).
pub const COLUMNS_KEY: &str = "flowsift.column_units";

/// The key-value entry astropy reads column units from.
pub const ASTROPY_KEY: &str = "table_meta_yaml";

/// The key-value entry holding the Arrow schema.
pub const ARROW_SCHEMA_KEY: &str = "ARROW:schema";

/// Read a Parquet file. Units, UCDs and descriptions are read back from the Arrow field
/// metadata (`unit`, `ucd`, `description`, as flowsift, pyarrow users and others write
/// them), else from astropy's [`ASTROPY_KEY`], else from an older flowsift output's
/// [`COLUMNS_KEY`], so a flowsift output fed
/// back in keeps them; a file without either has none (Parquet itself has no unit field).
pub fn read_parquet(path: &Path) -> Result<Table, CatalogueError> {
    let blocks = ParquetBlocks::open(path)?;
    blocks.read(0, blocks.rows(), None)
}

/// A Parquet file opened for reading a block of rows at a time: the footer, the column
/// metadata and the row count are read once; each [`ParquetBlocks::read`] opens the file
/// again and decodes only the row groups the block overlaps (and only the columns asked
/// for), so memory follows the block, not the file.
pub struct ParquetBlocks {
    path: std::path::PathBuf,
    metadata: FileMetadataRef,
    rows: usize,
    meta: BTreeMap<String, ColumnMeta>,
}

impl ParquetBlocks {
    pub fn open(path: &Path) -> Result<ParquetBlocks, CatalogueError> {
        let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
        let mut reader = ParquetReader::new(file);
        let metadata = reader
            .get_metadata()
            .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?
            .clone();
        let stored = metadata
            .key_value_metadata()
            .iter()
            .flatten()
            .find(|kv| kv.key == COLUMNS_KEY)
            .and_then(|kv| kv.value.clone());
        let from_astropy = metadata
            .key_value_metadata()
            .iter()
            .flatten()
            .find(|kv| kv.key == ASTROPY_KEY)
            .and_then(|kv| kv.value.as_deref())
            .and_then(super::ecsv::column_meta_from_yaml);
        let from_fields = field_metadata(&metadata).or(from_astropy);
        let rows = reader
            .num_rows()
            .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
        // A damaged footer can state any row count, and the columns are allocated for it
        // before a page is read. Rows of distinct sky positions take at least a bit each, so
        // a count above eight per byte of the file is refused (an absurd count would abort
        // the process, not fail).
        let file_bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
        if rows as u64 > file_bytes.saturating_mul(8) {
            return Err(CatalogueError::read(
                path,
                format!(
                    "the file's footer states {rows} rows, more than its {file_bytes} \
                     bytes can hold; the file is damaged"
                ),
            ));
        }
        let meta: BTreeMap<String, ColumnMeta> = match (from_fields, stored) {
            (Some(m), _) => m,
            (None, Some(text)) => serde_json::from_str(&text).map_err(|e| {
                CatalogueError::read(
                    path,
                    format!("key-value metadata '{COLUMNS_KEY}' is not a column map: {e}"),
                )
            })?,
            (None, None) => BTreeMap::new(),
        };
        Ok(ParquetBlocks {
            path: path.to_path_buf(),
            metadata,
            rows,
            meta,
        })
    }

    /// The rows the footer states.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The number of columns of the file's schema.
    pub fn columns(&self) -> usize {
        self.metadata.schema().fields().len()
    }

    /// Rows `start .. start + len` (clipped to the file), all columns or those named.
    pub fn read(
        &self,
        start: usize,
        len: usize,
        columns: Option<&[String]>,
    ) -> Result<Table, CatalogueError> {
        let path = self.path.as_path();
        let len = len.min(self.rows.saturating_sub(start));
        let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
        let mut reader = ParquetReader::new(file);
        reader.set_metadata(self.metadata.clone());
        let whole = start == 0 && len == self.rows;
        let frame = reader
            .with_slice((!whole).then_some((start, len)))
            .with_columns(columns.map(<[String]>::to_vec))
            .finish()
            .map_err(|e| CatalogueError::read(path, format!("cannot read as Parquet: {e}")))?;
        if frame.height() != len {
            return Err(CatalogueError::read(
                path,
                format!(
                    "the file's footer states {} rows but {} were read{}; the file is damaged",
                    self.rows,
                    if whole {
                        frame.height()
                    } else {
                        start + frame.height()
                    },
                    if whole { "" } else { " before its end" }
                ),
            ));
        }
        let mut meta = self.meta.clone();
        meta.retain(|name, _| frame.column(name).is_ok());
        let (frame, notes) = widen_narrow(frame).map_err(|e| CatalogueError::read(path, e))?;
        let mut table = Table::new(frame, meta);
        table.notes = notes
            .into_iter()
            .map(|n| format!("{}: {n}", path.display()))
            .collect();
        Ok(table)
    }
}

/// Narrow integers (8 and 16 bits) become 32-bit integers and half-precision floats
/// single precision, so that every writer and the pipeline see the common types; the
/// values are unchanged. Returns what was widened, for the run's summary.
pub(crate) fn widen_narrow(mut frame: DataFrame) -> Result<(DataFrame, Vec<String>), String> {
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

/// Per-column metadata from the Arrow schema's field metadata; `None` when no field has a
/// `unit`, `ucd` or `description` (or the file has no Arrow schema).
fn field_metadata(metadata: &FileMetadata) -> Option<BTreeMap<String, ColumnMeta>> {
    let schema = polars::io::parquet::read::infer_schema(metadata).ok()?;
    let mut out = BTreeMap::new();
    for field in schema.iter_values() {
        let Some(m) = field.metadata.as_ref() else {
            continue;
        };
        let get = |k: &str| {
            m.get(k)
                .map(|v| v.to_string())
                .filter(|v| !v.trim().is_empty())
        };
        let meta = ColumnMeta {
            unit: get("unit"),
            ucd: get("ucd"),
            description: get("description"),
        };
        if meta != ColumnMeta::default() {
            out.insert(field.name.to_string(), meta);
        }
    }
    (!out.is_empty()).then_some(out)
}

/// Write `table` with the metadata described in the [module documentation](self).
pub fn write_parquet(file: &File, table: &Table, provenance: &Provenance) -> Result<(), String> {
    let mut df = table.frame.clone();
    ParquetWriter::new(file)
        .with_key_value_metadata(Some(KeyValueMetadata::from_static(key_values(
            table, provenance,
        )?)))
        .finish(&mut df)
        .map_err(|e| format!("cannot write Parquet: {e}"))?;
    Ok(())
}

/// The file's key-value entries: the Arrow schema with the field metadata, the provenance
/// and astropy's YAML header (what the [module documentation](self) lists). `table` gives
/// the columns, their types and metadata; its rows do not matter.
fn key_values(table: &Table, provenance: &Provenance) -> Result<Vec<(String, String)>, String> {
    let schema = arrow_schema(table, provenance)?;
    let arrow = polars_parquet::arrow::write::schema_to_metadata_key(&schema);
    let mut kv = vec![(
        ARROW_SCHEMA_KEY.to_string(),
        arrow.value.unwrap_or_default(),
    )];
    kv.extend(schema_entries(table, provenance)?);
    Ok(kv)
}

/// The provenance as `flowsift.<key>` entries, then astropy's YAML header.
fn schema_entries(table: &Table, provenance: &Provenance) -> Result<Vec<(String, String)>, String> {
    let mut entries: Vec<(String, String)> = provenance
        .entries
        .iter()
        .map(|(k, v)| (format!("{PROVENANCE_PREFIX}{k}"), v.clone()))
        .collect();
    entries.push((
        ASTROPY_KEY.to_string(),
        super::ecsv::table_meta_yaml(table, provenance)?,
    ));
    Ok(entries)
}

/// The prefix of the provenance entries among a schema's metadata.
pub const PROVENANCE_PREFIX: &str = "flowsift.";

/// The Arrow schema of `table` (polars' newest Arrow types) with each field's `unit`, `ucd`
/// and `description`, and in the schema metadata the provenance (`flowsift.<key>`) and
/// astropy's YAML header: the schema a Parquet output stores, and the schema of a table
/// handed over in memory ([`super::arrow`]). pyarrow (and so astropy) sees the Arrow
/// schema's metadata when a file has one, the key-value block otherwise: both hold the same
/// entries.
pub fn arrow_schema(table: &Table, provenance: &Provenance) -> Result<ArrowSchema, String> {
    let mut schema = table.frame.schema().to_arrow(CompatLevel::newest());
    for field in schema.iter_values_mut() {
        let Some(m) = table.meta.get(field.name.as_str()) else {
            continue;
        };
        let pairs = [
            ("unit", &m.unit),
            ("ucd", &m.ucd),
            ("description", &m.description),
        ];
        for (k, v) in pairs {
            if let Some(v) = v.as_deref().filter(|v| !v.is_empty()) {
                std::sync::Arc::make_mut(field.metadata.get_or_insert_default())
                    .insert(k.into(), v.into());
            }
        }
    }
    for (k, v) in schema_entries(table, provenance)? {
        schema
            .metadata_mut()
            .insert(k.as_str().into(), v.as_str().into());
    }
    Ok(schema)
}

/// Rows per row group of a Parquet output written in blocks (polars' own default for a
/// whole table, 512 × 512).
pub const ROW_GROUP_ROWS: usize = 512 * 512;

/// A Parquet output written a block of rows at a time: each block becomes row groups of at
/// most [`ROW_GROUP_ROWS`] rows as it comes, and [`ParquetBlockWriter::finish`] writes the
/// footer with the metadata of the [module documentation](self), so memory follows the
/// block. Every block must have the first block's columns and types.
pub struct ParquetBlockWriter<'a> {
    writer: polars::io::parquet::write::BatchedWriter<&'a File>,
    columns: Table,
}

impl<'a> ParquetBlockWriter<'a> {
    /// A writer into `file` for blocks like `first` (its columns, types and metadata).
    pub fn new(file: &'a File, first: &Table) -> Result<ParquetBlockWriter<'a>, String> {
        let writer = ParquetWriter::new(file)
            .batched(first.frame.schema())
            .map_err(|e| format!("cannot write Parquet: {e}"))?;
        let columns = Table::new(first.frame.clear(), first.meta.clone());
        Ok(ParquetBlockWriter { writer, columns })
    }

    pub fn write(&mut self, block: &Table) -> Result<(), String> {
        if block.frame.schema() != self.columns.frame.schema() {
            return Err(
                "a block of rows has other columns or types than the first; nothing more is \
                 written"
                    .into(),
            );
        }
        let mut start = 0;
        while start < block.frame.height() {
            let mut part = block.frame.slice(start as i64, ROW_GROUP_ROWS);
            part.rechunk_mut_par();
            self.writer
                .write_batch(&part)
                .map_err(|e| format!("cannot write Parquet: {e}"))?;
            start += ROW_GROUP_ROWS;
        }
        Ok(())
    }

    /// The footer: the schema with field metadata, the provenance, astropy's header.
    pub fn finish(self, provenance: &Provenance) -> Result<(), String> {
        let kv = key_values(&self.columns, provenance)?
            .into_iter()
            .map(|(key, value)| polars_parquet::write::KeyValue {
                key,
                value: Some(value),
            })
            .collect();
        self.writer
            .get_writer()
            .lock()
            .map_err(|_| "cannot write Parquet: the writer failed earlier".to_string())?
            .end(Some(kv))
            .map_err(|e| format!("cannot write Parquet: {e}"))?;
        Ok(())
    }
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
