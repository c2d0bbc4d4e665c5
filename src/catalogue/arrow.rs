//! Tables handed over in memory as Arrow data (the edge the Python package uses, through the
//! Arrow C stream interface; Apache Arrow, "The Arrow C stream interface"): a stream is a
//! struct field, whose children are the columns and whose metadata is the schema's, and a
//! struct array per batch of rows. Columns are taken and given without copying their
//! numbers; the column metadata and the provenance travel as they do in a Parquet output
//! (field metadata `unit`, `ucd`, `description`; schema entries `flowsift.<key>`), by the
//! same code ([`super::parquet::arrow_schema`]).

use std::collections::BTreeMap;

use polars::prelude::*;
use polars_arrow::array::{new_empty_array, Array, StructArray};
use polars_arrow::datatypes::{ArrowDataType, Field as ArrowField};

use super::parquet::{arrow_schema, PROVENANCE_PREFIX};
use super::{ColumnMeta, Format, Provenance, Table};

/// A table from a stream's field (a struct of the columns) and its batches (struct arrays of
/// that type), with the provenance entries the schema metadata carries (`flowsift.<key>`).
/// Narrow integers and half floats are widened as for a Parquet input.
pub fn table_from_arrow(
    stream_field: &ArrowField,
    batches: Vec<Box<dyn Array>>,
) -> Result<(Table, Provenance), String> {
    let ArrowDataType::Struct(fields) = stream_field.dtype.to_storage() else {
        return Err(format!(
            "the stream is not a table: its type is {:?}, not a struct of columns",
            stream_field.dtype
        ));
    };
    let mut chunks: Vec<Vec<Box<dyn Array>>> = vec![Vec::new(); fields.len()];
    let mut height = 0;
    for batch in batches {
        let Some(batch) = batch.as_any().downcast_ref::<StructArray>() else {
            return Err("a batch of the stream is not a struct of columns".into());
        };
        if batch.null_count() > 0 {
            return Err("a batch of the stream has rows that are null as a whole".into());
        }
        height += batch.len();
        for (k, values) in batch.values().iter().enumerate() {
            chunks
                .get_mut(k)
                .ok_or("a batch of the stream has more columns than its schema")?
                .push(values.clone());
        }
    }
    let mut columns = Vec::with_capacity(fields.len());
    let mut meta = BTreeMap::new();
    for (field, mut arrays) in fields.iter().zip(chunks) {
        if arrays.is_empty() {
            arrays.push(new_empty_array(field.dtype.clone()));
        }
        let series = Series::try_from((field.name.clone(), arrays))
            .map_err(|e| format!("column '{}' ({:?}): {e}", field.name, field.dtype))?;
        columns.push(series.into_column());
        if let Some(m) = column_meta(field) {
            meta.insert(field.name.to_string(), m);
        }
    }
    let frame = DataFrame::new(height, columns).map_err(|e| e.to_string())?;
    let (frame, notes) = super::parquet::widen_narrow(frame)?;
    let mut table = Table::new(frame, meta);
    table.notes = notes;
    let entries = stream_field
        .metadata
        .iter()
        .flat_map(|m| m.iter())
        .filter_map(|(k, v)| {
            k.strip_prefix(PROVENANCE_PREFIX)
                .map(|k| (k.to_string(), v.to_string()))
        })
        .collect();
    Ok((table, Provenance { entries }))
}

/// A column's `unit`, `ucd` and `description` from its field metadata, if any.
fn column_meta(field: &ArrowField) -> Option<ColumnMeta> {
    let m = field.metadata.as_ref()?;
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
    (meta != ColumnMeta::default()).then_some(meta)
}

/// `table` as a stream's field and batches: the columns a Parquet output holds, the schema
/// a Parquet output stores (field metadata, provenance, astropy's header) as the struct
/// field's metadata, one struct array per chunk of the table.
pub fn table_to_arrow(
    table: &Table,
    provenance: &Provenance,
) -> Result<(ArrowField, Vec<Box<dyn Array>>), String> {
    let prepared = super::storable::prepare(Format::Parquet, table)?;
    let table = prepared.as_ref().unwrap_or(table);
    let schema = arrow_schema(table, provenance)?;
    let fields: Vec<ArrowField> = schema.iter_values().cloned().collect();
    let dtype = ArrowDataType::Struct(fields);
    let mut frame = table.frame.clone();
    frame.align_chunks_par();
    let batches = frame
        .iter_chunks(CompatLevel::newest(), false)
        .map(|batch| {
            let height = batch.height();
            StructArray::try_new(dtype.clone(), height, batch.into_arrays(), None)
                .map(|a| a.boxed())
                .map_err(|e| e.to_string())
        })
        .collect::<Result<Vec<_>, String>>()?;
    let field =
        ArrowField::new(PlSmallStr::EMPTY, dtype, false).with_metadata(schema.metadata().clone());
    Ok((field, batches))
}
